"""The user's folders for showkit: cache, data and logs, worked out in one place.

- cache: ``SHOWKIT_CACHE_DIR`` when set, else the platform's user cache folder
  (``$XDG_CACHE_HOME/showkit``, by default ``~/.cache/showkit`` on Linux).  The scan
  results live in its ``scan/`` folder, the synthesized demo tracks beside them.
- data: ``SHOWKIT_DATA_DIR`` when set, else the platform's user data folder
  (``$XDG_DATA_HOME/showkit``, by default ``~/.local/share/showkit`` on Linux): the
  copied demo show, new shows, the cautions marker.
- logs: ``logs/`` inside the data folder, so the show logs follow ``SHOWKIT_DATA_DIR``
  too.

Nothing here creates a folder; the writer that needs one makes it.  The platform
folders come from platformdirs (imported only when no override is set).
"""

from __future__ import annotations

import os
from pathlib import Path

APP_NAME = "showkit"
CACHE_ENV = "SHOWKIT_CACHE_DIR"
DATA_ENV = "SHOWKIT_DATA_DIR"


def cache_dir() -> Path:
    """The user's cache folder for showkit (``SHOWKIT_CACHE_DIR`` overrides)."""
    override = os.environ.get(CACHE_ENV)
    if override:
        return Path(override)
    from platformdirs import user_cache_dir

    return Path(user_cache_dir(APP_NAME))


def data_dir() -> Path:
    """The user's data folder for showkit (``SHOWKIT_DATA_DIR`` overrides)."""
    override = os.environ.get(DATA_ENV)
    if override:
        return Path(override)
    from platformdirs import user_data_dir

    return Path(user_data_dir(APP_NAME))


def log_dir() -> Path:
    """The folder of the show logs: ``logs/`` in the data folder."""
    return data_dir() / "logs"
