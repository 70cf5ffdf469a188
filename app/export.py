"""The window's File > Export menu and Edit > Copy Routh Array As: dialogs and menu actions that
call the writers in :mod:`app.pictures` and :mod:`app.report_export`, and the Routh array as CSV,
Markdown or LaTeX on the clipboard.
"""
from __future__ import annotations

import re
from collections.abc import Callable
from pathlib import Path

from PySide6.QtCore import QObject
from PySide6.QtGui import QAction, QGuiApplication
from PySide6.QtWidgets import QFileDialog, QMenu, QMessageBox, QWidget

from app.panels.common import MINUS, number
from app.panels.routh_panel import EPS, evaluate_entry
from app.pictures import PICTURE_FILTER, ExportError, plot_panels, save_diagram, save_plot
from app.report_export import export_report
from core.algebra.polynomial import to_fmpq
from core.present.routh_formats import FORMATS

ROUTH_FORMAT_NAMES = {"csv": "CSV", "markdown": "Markdown", "latex": "LaTeX"}


# -- the Routh array as text ---------------------------------------------------------------------
def _plain(entry) -> str:
    """An evaluated Routh entry as core-style text: exact rational, function of eps, or 'undefined'."""
    if entry.sign is None:
        return "undefined"
    if EPS not in entry.text:
        return entry.exact
    text = entry.text.replace(EPS, "eps").replace("·", "*").replace(MINUS, "-")
    return re.sub(r"(\d)(?=[A-Za-z(])", r"\1*", text)


def routh_values(result, value: float | None) -> tuple[list[list[str]] | None, str]:
    """The Routh entries at the tuning parameter's ``value`` as exact text, and a label ('at K = 2').

    None without a tuning parameter (the entries are numbers already).
    """
    report = result.report if result is not None else None
    if report is None or report.routh.parameter is None or value is None:
        return None, ""
    array, exact = report.routh, to_fmpq(value)
    rows = [[_plain(evaluate_entry(e, array, exact)) for e in row] for row in array.rows]
    return rows, f"at {array.parameter} = {number(value).replace(MINUS, '-')}"


def routh_text(window, fmt: str) -> str:
    """The window's Routh array as ``text`` (as the panel copies it), ``csv``, ``markdown`` or
    ``latex`` with the values at the current value; '' without an analysis."""
    result = window.controller.result
    if result is None or result.report is None:
        return ""
    if fmt == "text":
        return window.routh_panel.text()
    values, label = routh_values(result, window.controller.current_value)
    return FORMATS[fmt](result.report.routh, values, label)


def copy_routh(window, fmt: str) -> str:
    """Put the Routh array on the clipboard in ``fmt``; returns the text."""
    text = routh_text(window, fmt)
    QGuiApplication.clipboard().setText(text)
    return text


def routh_copy_menu(window) -> QMenu:
    """A "Copy Routh Array As" menu; the same actions join the Routh table's context menu."""
    menu = QMenu("Copy Routh Array &As", window)
    for fmt in ("csv", "markdown", "latex"):
        action = QAction(f"Copy as {ROUTH_FORMAT_NAMES[fmt]}", window)
        action.triggered.connect(lambda _=False, f=fmt: copy_routh(window, f))
        window.routh_panel.table.addAction(action)
        menu.addAction(action)
    return menu


# -- the window's File > Export menu -------------------------------------------------------------
def ask_save_path(parent: QWidget, title: str, suggestion: str, filters: str) -> Path | None:
    """The save dialog; None when cancelled."""
    name, _ = QFileDialog.getSaveFileName(parent, title, suggestion, filters)
    return Path(name) if name else None


class ExportActions(QObject):
    """File > Export: report (HTML, PDF), diagram and plots (PNG, SVG); Edit > Copy Routh Array As.

    ``ask`` replaces the save dialog (tests): ``ask(parent, title, suggestion, filters) -> Path | None``.
    """

    def __init__(self, window, ask: Callable[..., Path | None] | None = None):
        super().__init__(window)
        self.window = window
        self.ask = ask or ask_save_path
        self.menu = QMenu("E&xport", window)
        self.menu.addAction("Report as &HTML…", lambda: self.export_report(".html"))
        self.menu.addAction("Report as &PDF…", lambda: self.export_report(".pdf"))
        self.menu.addSeparator()
        self.menu.addAction("&Diagram…", self.export_diagram)
        for panel in plot_panels(window):
            self.menu.addAction(f"{panel.TITLE}…", lambda p=panel: self.export_plot(p))
        self.routh_menu = routh_copy_menu(window)

    def _stem(self) -> str:
        path = self.window.files.path
        if path is not None:
            name = path.name
            return str(path.with_name(name[: -len(".loop.json")] if name.endswith(".loop.json") else path.stem))
        return self.window.diagram.name.replace("/", "-")

    def _done(self, path: Path) -> None:
        self.window.statusBar().showMessage(f"Exported {path}", 6000)

    def _failed(self, err: Exception) -> None:
        QMessageBox.warning(self.window, "Export", f"Could not export: {err}")

    def export_report(self, suffix: str) -> Path | None:
        """Ask for a file name, then write the report (HTML or PDF)."""
        filters = "HTML page (*.html)" if suffix == ".html" else "PDF document (*.pdf)"
        path = self.ask(self.window, "Export report", self._stem() + "-report" + suffix, filters)
        if path is None:
            return None
        if path.suffix.lower() != suffix:
            path = path.with_name(path.name + suffix)
        return self._run(lambda: export_report(self.window, path))

    def export_diagram(self) -> Path | None:
        """Ask for a file name, then write the diagram (PNG or SVG)."""
        path = self.ask(self.window, "Export diagram", self._stem() + "-diagram.png", PICTURE_FILTER)
        return None if path is None else self._run(lambda: save_diagram(self.window.scene, path))

    def export_plot(self, panel) -> Path | None:
        """Ask for a file name, then write one panel's plot (PNG or SVG)."""
        stem = panel.TITLE.lower().replace(" ", "-")
        path = self.ask(self.window, f"Export {panel.TITLE.lower()}", f"{self._stem()}-{stem}.png", PICTURE_FILTER)
        return None if path is None else self._run(lambda: save_plot(panel.plot, path))

    def _run(self, job: Callable[[], Path]) -> Path | None:
        try:
            path = job()
        except (ExportError, OSError) as err:
            self._failed(err)
            return None
        self._done(path)
        return path


__all__ = ["ExportActions", "copy_routh", "routh_copy_menu", "routh_text", "routh_values"]
