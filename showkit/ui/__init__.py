"""The terminal UI (Textual): Show, Tube and Track views over :mod:`showkit.ui.session`."""
