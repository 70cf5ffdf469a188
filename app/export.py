"""Pictures and text to take out of the program: the diagram and plots as PNG or SVG, the Routh
array as CSV, Markdown or LaTeX on the clipboard, and the menu entries that offer them.

The diagram is drawn from the scene with a QPainter (QSvgGenerator for SVG), on the light
theme and without the selection glow; plots are drawn from their widget as shown. Every writer
takes a path and picks the format from its suffix (``.png`` or ``.svg``).
"""
from __future__ import annotations

import re
from collections.abc import Callable
from pathlib import Path

import pyqtgraph as pg
from PySide6.QtCore import QObject, QRectF, QSize
from PySide6.QtGui import QAction, QColor, QGuiApplication, QImage, QPainter
from PySide6.QtSvg import QSvgGenerator
from PySide6.QtWidgets import QFileDialog, QMenu, QMessageBox, QWidget

from app.panels.common import MINUS, number
from app.panels.routh_panel import EPS, evaluate_entry
from app.theme import Theme
from core.algebra.polynomial import to_fmpq
from core.present.routh_formats import FORMATS

DIAGRAM_MARGIN = 24.0
PICTURE_SUFFIXES = (".png", ".svg")
PICTURE_FILTER = "PNG picture (*.png);;SVG drawing (*.svg)"
ROUTH_FORMAT_NAMES = {"csv": "CSV", "markdown": "Markdown", "latex": "LaTeX"}


class ExportError(Exception):
    """A picture or report could not be written (the message says why, in plain words)."""


def _suffix(path: Path, allowed: tuple[str, ...]) -> str:
    suffix = path.suffix.lower()
    if suffix not in allowed:
        raise ExportError(f"{path.name}: choose a name ending in {' or '.join(allowed)}")
    return suffix


# -- the diagram ---------------------------------------------------------------------------------
def diagram_rect(scene) -> QRectF:
    """The scene area holding every node and wire and their labels, with a small margin (empty
    for no items)."""
    rect = QRectF()
    for item in list(scene.node_items.values()) + list(scene.wire_items.values()):
        rect = rect.united(item.sceneBoundingRect()).united(item.mapRectToScene(item.childrenBoundingRect()))
    return rect.adjusted(-DIAGRAM_MARGIN, -DIAGRAM_MARGIN, DIAGRAM_MARGIN, DIAGRAM_MARGIN) if not rect.isEmpty() \
        else rect


def _paint_diagram(scene, painter: QPainter, target: QRectF, source: QRectF) -> None:
    """Draw the diagram on the light theme with no selection, then put both back as they were."""
    selected = [item for item in scene.selectedItems()]
    theme = scene.theme
    blocked = scene.blockSignals(True)
    try:
        for item in selected:
            item.setSelected(False)
        if theme.is_dark:
            scene.set_theme(Theme.light())
        painter.setRenderHint(QPainter.RenderHint.Antialiasing)
        painter.setRenderHint(QPainter.RenderHint.TextAntialiasing)
        scene.render(painter, target, source)
    finally:
        if theme.is_dark:
            scene.set_theme(theme)
        for item in selected:
            item.setSelected(True)
        scene.blockSignals(blocked)


def diagram_image(scene, scale: float = 2.0) -> QImage | None:
    """The diagram as a picture, ``scale`` pixels per scene unit; None when the diagram is empty."""
    source = diagram_rect(scene)
    if source.isEmpty():
        return None
    image = QImage(max(1, round(source.width() * scale)), max(1, round(source.height() * scale)),
                   QImage.Format.Format_ARGB32)
    image.fill(QColor("white"))
    painter = QPainter(image)
    _paint_diagram(scene, painter, QRectF(image.rect()), source)
    painter.end()
    return image


def save_diagram(scene, path) -> Path:
    """Write the diagram to ``path`` (.png or .svg)."""
    path = Path(path)
    suffix = _suffix(path, PICTURE_SUFFIXES)
    source = diagram_rect(scene)
    if source.isEmpty():
        raise ExportError("the diagram is empty: nothing to export")
    if suffix == ".png":
        image = diagram_image(scene)
        if not image.save(str(path), "PNG"):
            raise ExportError(f"cannot write {path}")
        return path
    generator = QSvgGenerator()
    generator.setFileName(str(path))
    generator.setSize(QSize(round(source.width()), round(source.height())))
    generator.setViewBox(QRectF(0, 0, source.width(), source.height()))
    generator.setTitle("Block diagram")
    painter = QPainter()
    if not painter.begin(generator):
        raise ExportError(f"cannot write {path}")
    _paint_diagram(scene, painter, QRectF(0, 0, source.width(), source.height()), source)
    painter.end()
    return path


# -- plots ---------------------------------------------------------------------------------------
def plot_image(plot: pg.PlotWidget, scale: float = 2.0) -> QImage:
    """The plot as shown, drawn by pyqtgraph's image exporter at ``scale`` times its size."""
    from pyqtgraph.exporters import ImageExporter
    exporter = ImageExporter(plot.getPlotItem())
    exporter.parameters()["width"] = max(1, round(plot.width() * scale))
    exporter.parameters()["antialias"] = True
    return exporter.export(toBytes=True)


def save_plot(plot: pg.PlotWidget, path) -> Path:
    """Write a pyqtgraph plot to ``path``: PNG drawn at twice its size, SVG through QSvgGenerator."""
    path = Path(path)
    suffix = _suffix(path, PICTURE_SUFFIXES)
    if suffix == ".png":
        if not plot_image(plot).save(str(path), "PNG"):
            raise ExportError(f"cannot write {path}")
        return path
    generator = QSvgGenerator()
    generator.setFileName(str(path))
    generator.setResolution(round(plot.logicalDpiX()))
    generator.setSize(plot.size())
    generator.setViewBox(QRectF(0, 0, plot.width(), plot.height()))
    generator.setTitle(getattr(plot.parent(), "TITLE", "Plot"))
    painter = QPainter()
    if not painter.begin(generator):
        raise ExportError(f"cannot write {path}")
    plot.render(painter)
    painter.end()
    return path


def plot_panels(window) -> list:
    """The window's analysis panels that draw a pyqtgraph plot (attribute ``plot``), in dock order."""
    return [p for p in window.analysis_panels if isinstance(getattr(p, "plot", None), pg.PlotWidget)]


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
        from app.report_export import export_report
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


__all__ = ["ExportActions", "ExportError", "copy_routh", "diagram_image", "diagram_rect", "plot_image",
           "plot_panels", "routh_copy_menu", "routh_text", "routh_values", "save_diagram", "save_plot"]
