"""``python -m showkit`` is the same as the ``showkit`` command."""

from showkit.cli.main import main

raise SystemExit(main())
