"""A node's input or output port: where wires attach. A view only; it never edits the model."""
from __future__ import annotations

from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QBrush, QColor, QPainter, QPen
from PySide6.QtWidgets import QGraphicsItem

PORT_RADIUS = 4.0
HIT_RADIUS = 7.0
BRANCH_HIT_RADIUS = 10.0  # a branch point's dot moves it; the ring around it starts a wire


class PortItem(QGraphicsItem):
    """Port ``index`` (inputs) or the output (``is_output``) of node ``node_id``.

    ``direction`` is the way a wire travels through the port (out of an output, into an input),
    or None for a branch point's ports, which wires may leave in any direction.
    """

    def __init__(self, parent: QGraphicsItem, node_id: str, is_output: bool, index: int,
                 direction: tuple[int, int] | None):
        super().__init__(parent)
        self.node_id, self.is_output, self.index, self.direction = node_id, is_output, index, direction
        self.highlight: str | None = None  # None, "candidate" (a valid target) or "hover"
        self.theme = None
        self.setZValue(5)
        self.setAcceptHoverEvents(True)
        self._hovered = False
        self.hit_radius = HIT_RADIUS
        self.hint = ""  # status-bar words on hover (outputs); the owner sets them with the tooltip

    def describe(self, owner_title: str, owner_kind: str, sign: str | None = None) -> None:
        """Set the tooltip and hover hint for a port of a node titled ``owner_title``."""
        if owner_kind == "branch":
            text = ("Branch point: drag from the ring to draw a wire (or Alt+drag from anywhere on it); "
                    "drag the dot to move it")
        elif self.is_output:
            text = f"Output of {owner_title}: drag to an input to draw a wire"
        else:
            what = f"input {self.index + 1}" if owner_kind == "sum" else "input"
            signed = f" (sign {sign}, click the sign to flip it)" if sign else ""
            text = f"The {what} of {owner_title}{signed}: drop a wire here"
        self.hint = text
        self.setToolTip(text)

    def boundingRect(self) -> QRectF:
        r = self.hit_radius + 2
        return QRectF(-r, -r, 2 * r, 2 * r)

    def shape(self):
        from PySide6.QtGui import QPainterPath
        path = QPainterPath()
        path.addEllipse(QPointF(0, 0), self.hit_radius, self.hit_radius)
        return path

    def set_highlight(self, state: str | None) -> None:
        if state != self.highlight:
            self.highlight = state
            self.update()

    def hoverEnterEvent(self, event) -> None:
        self._hovered = True
        self.update()
        scene = self.scene()
        if self.is_output and scene is not None and hasattr(scene, "statusHint"):
            scene.statusHint.emit(self.hint)

    def hoverLeaveEvent(self, event) -> None:
        self._hovered = False
        self.update()

    def paint(self, painter: QPainter, option, widget=None) -> None:
        theme = self.theme
        if theme is None:
            return
        painter.setRenderHint(QPainter.RenderHint.Antialiasing)
        if self.highlight == "hover":
            fill = QColor(theme.port_ok)
            fill.setAlpha(70)
            painter.setPen(QPen(theme.port_hover, 1.8))
            painter.setBrush(QBrush(fill))
            painter.drawEllipse(QPointF(0, 0), PORT_RADIUS + 2.5, PORT_RADIUS + 2.5)
        elif self.highlight == "candidate":
            painter.setPen(QPen(theme.port_ok, 1.4))
            painter.setBrush(Qt.BrushStyle.NoBrush)
            painter.drawEllipse(QPointF(0, 0), PORT_RADIUS + 1, PORT_RADIUS + 1)
        elif self._hovered and self.is_output:
            painter.setPen(QPen(theme.rubber_wire, 1.4))
            painter.setBrush(QBrush(theme.block_fill) if self.hit_radius <= HIT_RADIUS else Qt.BrushStyle.NoBrush)
            ring = PORT_RADIUS if self.hit_radius <= HIT_RADIUS else self.hit_radius - 2
            painter.drawEllipse(QPointF(0, 0), ring, ring)

    def key(self) -> tuple[str, bool, int]:
        """(node id, is output, index): identifies the port across rebuilds."""
        return self.node_id, self.is_output, self.index
