"""Exports: the printable show book, the flame preview video and the plots.

This layer sits between ``show`` and the ``cli``/``ui``: it imports physics,
analysis and show and holds no physics of its own.  Every state, ceiling and
flame row it draws comes from the same functions as ``showkit check`` and
``showkit ceiling`` (:mod:`showkit.show.lock`, :mod:`showkit.analysis.pressure`).
matplotlib (Agg backend) and imageio-ffmpeg are imported lazily.
"""
