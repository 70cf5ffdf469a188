"""Picture writers: the diagram and the plots as PNG or SVG (no menus, no dialogs).

The diagram is drawn from the scene with a QPainter (QSvgGenerator for SVG), on the light
theme and without the selection glow; plots are drawn from their widget as shown. Every writer
takes a path and picks the format from its suffix (``.png`` or ``.svg``).
"""
from __future__ import annotations

from pathlib import Path

import pyqtgraph as pg
from PySide6.QtCore import QRectF, QSize
from PySide6.QtGui import QColor, QImage, QPainter
from PySide6.QtSvg import QSvgGenerator

from app.theme import Theme

DIAGRAM_MARGIN = 24.0
PICTURE_SUFFIXES = (".png", ".svg")
PICTURE_FILTER = "PNG picture (*.png);;SVG drawing (*.svg)"


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


__all__ = ["PICTURE_FILTER", "ExportError", "diagram_image", "diagram_rect", "plot_image", "plot_panels",
           "save_diagram", "save_plot"]
