"""Loopwright's computation core: pure Python, exact arithmetic, never imports Qt."""
