"""Loopwright desktop program (PySide6): canvas, undo commands, analysis panels and main window."""
