"""One wire on the canvas: an orthogonal polyline with an arrowhead at the input it feeds."""
from __future__ import annotations

from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QBrush, QPainter, QPainterPath, QPainterPathStroker, QPen, QPolygonF
from PySide6.QtWidgets import QGraphicsItem

from ..theme import Theme, selection_glow
from .routing import Point

ARROW_LENGTH, ARROW_HALF_WIDTH = 9.0, 3.6


class WireItem(QGraphicsItem):
    """A view of wire ``key``; the scene computes its points with :func:`routing.route`."""

    def __init__(self, key: str, theme: Theme):
        super().__init__()
        self.key, self.theme = key, theme
        self.points: list[Point] = []
        self.bends: list[Point] = []
        self.preview = False  # drawn dashed while the user drags it (rubber wire)
        self.arrow = True  # no arrowhead into a branch point
        self._path = QPainterPath()
        self._hit = QPainterPath()
        self.setFlag(QGraphicsItem.GraphicsItemFlag.ItemIsSelectable)
        self.setZValue(1)
        self.setGraphicsEffect(selection_glow(theme, 14))

    def set_points(self, points: list[Point]) -> None:
        """Show this polyline (scene coordinates; the item stays at the origin)."""
        self.prepareGeometryChange()
        self.points = [(float(x), float(y)) for x, y in points]
        path = QPainterPath()
        if self.points:
            path.moveTo(*self.points[0])
            for p in self.points[1:]:
                path.lineTo(*p)
        self._path = path
        stroker = QPainterPathStroker()
        stroker.setWidth(9)
        self._hit = stroker.createStroke(path)
        self.update()

    def set_theme(self, theme: Theme) -> None:
        self.theme = theme
        self.graphicsEffect().setColor(theme.glow)
        self.update()

    def segment_at(self, pos: QPointF, tolerance: float = 5.0) -> int | None:
        """Index of the segment under ``pos`` (scene coordinates), if any."""
        for i in range(len(self.points) - 1):
            (ax, ay), (bx, by) = self.points[i], self.points[i + 1]
            if min(ax, bx) - tolerance <= pos.x() <= max(ax, bx) + tolerance and \
                    min(ay, by) - tolerance <= pos.y() <= max(ay, by) + tolerance:
                return i
        return None

    def boundingRect(self) -> QRectF:
        return self._hit.boundingRect().adjusted(-ARROW_LENGTH, -ARROW_LENGTH, ARROW_LENGTH, ARROW_LENGTH)

    def shape(self) -> QPainterPath:
        return self._hit

    def itemChange(self, change, value):
        if change == QGraphicsItem.GraphicsItemChange.ItemSelectedHasChanged:
            self.graphicsEffect().setEnabled(bool(value))
        return super().itemChange(change, value)

    def paint(self, painter: QPainter, option, widget=None) -> None:
        if len(self.points) < 2:
            return
        painter.setRenderHint(QPainter.RenderHint.Antialiasing)
        colour = self.theme.rubber_wire if self.preview else self.theme.wire
        pen = QPen(colour, 1.4, Qt.PenStyle.DashLine if self.preview else Qt.PenStyle.SolidLine)
        pen.setJoinStyle(Qt.PenJoinStyle.MiterJoin)
        (ax, ay), (bx, by) = self.points[-2], self.points[-1]
        length = max(((bx - ax) ** 2 + (by - ay) ** 2) ** 0.5, 1e-9)
        ux, uy = (bx - ax) / length, (by - ay) / length
        # stop the line where the arrowhead starts so its tip stays sharp
        trimmed = QPainterPath(self._path)
        if self.arrow and length > ARROW_LENGTH:
            trimmed = QPainterPath()
            trimmed.moveTo(*self.points[0])
            for p in self.points[1:-1]:
                trimmed.lineTo(*p)
            trimmed.lineTo(bx - ux * ARROW_LENGTH * 0.8, by - uy * ARROW_LENGTH * 0.8)
        painter.setPen(pen)
        painter.setBrush(Qt.BrushStyle.NoBrush)
        painter.drawPath(trimmed)
        if not self.arrow:
            return
        tip = QPointF(bx, by)
        base = QPointF(bx - ux * ARROW_LENGTH, by - uy * ARROW_LENGTH)
        normal = QPointF(-uy * ARROW_HALF_WIDTH, ux * ARROW_HALF_WIDTH)
        painter.setPen(Qt.PenStyle.NoPen)
        painter.setBrush(QBrush(colour))
        painter.drawPolygon(QPolygonF([tip, base + normal, base - normal]))
