"""Loopwright's computation core: pure Python, exact arithmetic, never imports Qt.

The public API, loaded on first use so that ``import core.algebra.polynomial`` stays light:

- :func:`check_polynomial` (text, parameter=None, at=None, decay=0.0) -> :class:`Report`
- :func:`check_project` (diagram or path) -> :class:`Report`
- :func:`load_project` (path) -> :class:`Diagram`, :func:`save_project` (diagram, path)
"""
from importlib import import_module

_EXPORTS = {
    "check_polynomial": "analysis.report", "check_project": "analysis.report", "Report": "analysis.report",
    "CAUTION": "analysis.report", "load_project": "io.project_file", "save_project": "io.project_file",
    "Diagram": "model.diagram", "Node": "model.diagram", "Wire": "model.diagram", "Parameter": "model.diagram",
    "LoopwrightError": "errors",
}

__all__ = ["CAUTION", "Diagram", "LoopwrightError", "Node", "Parameter", "Report", "Wire",
           "check_polynomial", "check_project", "load_project", "save_project"]


def __getattr__(name):
    if name in _EXPORTS:
        return getattr(import_module(f".{_EXPORTS[name]}", __name__), name)
    raise AttributeError(f"module 'core' has no attribute {name!r}")
