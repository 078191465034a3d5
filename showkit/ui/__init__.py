"""The terminal UI (Textual): the Show, Tube, Track, Run and Measure views over :mod:`showkit.ui.session`."""
