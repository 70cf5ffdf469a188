"""One node on the canvas: block, summing junction, branch point, input or output terminal.

A view only: :meth:`NodeItem.set_node` copies what it shows from a :class:`core.model.diagram.Node`;
gestures on it are handled by the scene, which pushes undo commands.
"""
from __future__ import annotations

import math
from dataclasses import replace

from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QBrush, QFontMetricsF, QPainter, QPainterPath, QPen, QTextDocument
from PySide6.QtWidgets import QGraphicsItem

from core.model.diagram import Node

from ..theme import Theme, label_font, math_font, selection_glow
from .formula import MINUS, formula_html, is_one
from .port_item import BRANCH_HIT_RADIUS, HIT_RADIUS, PortItem

GRID = 10.0
SUM_RADIUS = 15.0
TERMINAL_RADIUS = 5.0
BRANCH_RADIUS = 3.5
BAND = 5.0


def _round_up(value: float, step: float) -> float:
    return math.ceil(value / step - 1e-9) * step


def sum_port_angles(count: int) -> list[float]:
    """Where a summing junction's inputs sit (degrees, 180 = left, 90 = below on screen)."""
    return {2: [180, 90], 3: [180, 90, 270], 4: [180, 90, 270, 135]}[count]


class NodeItem(QGraphicsItem):
    """The drawing of one node; ``node`` is a private copy of the model node it shows."""

    def __init__(self, node: Node, theme: Theme):
        super().__init__()
        self.theme = theme
        self.node = replace(node)
        self.ports: dict[tuple[bool, int], PortItem] = {}
        self._body = QRectF()
        self._bounds = QRectF()
        self._docs: tuple[QTextDocument, QTextDocument | None] | None = None
        self._sign_spots: list[QPointF] = []
        self.setFlag(QGraphicsItem.GraphicsItemFlag.ItemIsSelectable)
        self.setAcceptHoverEvents(True)
        self.setZValue(2)
        self.setGraphicsEffect(selection_glow(theme, 18))
        self.set_node(node)

    # -- setters (called by the scene) --------------------------------------------------------
    def set_node(self, node: Node) -> None:
        """Show this model node (fields and position)."""
        self.prepareGeometryChange()
        self.node = replace(node)
        self.setPos(node.x, node.y)
        self._layout()
        self.update()

    def set_theme(self, theme: Theme) -> None:
        self.theme = theme
        self.graphicsEffect().setColor(theme.glow)
        for port in self.ports.values():
            port.theme = theme
        self.set_node(self.node)

    def input_port(self, index: int) -> PortItem | None:
        return self.ports.get((False, index))

    def output_port(self) -> PortItem | None:
        return self.ports.get((True, 0))

    def input_ports(self) -> list[PortItem]:
        return [p for (out, _), p in sorted(self.ports.items()) if not out]

    def sign_at(self, local: QPointF) -> int | None:
        """The summing-junction input whose sign is drawn at ``local`` (item coordinates), if any."""
        for i, spot in enumerate(self._sign_spots):
            if abs(local.x() - spot.x()) <= 7 and abs(local.y() - spot.y()) <= 8:
                return i
        return None

    def body_rect(self) -> QRectF:
        """The node's body in item coordinates (without title or labels)."""
        return QRectF(self._body)

    # -- layout -------------------------------------------------------------------------------
    def _mirror(self, x: float) -> float:
        return -x if self.node.flipped else x

    def _dir(self, dx: int, dy: int) -> tuple[int, int]:
        return (-dx if self.node.flipped else dx, dy)

    def _layout(self) -> None:
        n = self.node
        self._docs, self._sign_spots = None, []
        wanted: list[tuple[bool, int, QPointF, tuple[int, int] | None]] = []
        if n.kind == "block":
            num = self._doc(n.num)
            den = None if is_one(n.den) else self._doc(n.den)
            self._docs = (num, den)
            content_w = max(num.idealWidth(), den.idealWidth() if den else 0)
            content_h = num.size().height() + (den.size().height() + 8 if den else 0)
            w = max(80.0, _round_up(content_w + 28, 2 * GRID))
            h = max(40.0, _round_up(content_h + BAND + 10, 2 * GRID))
            self._body = QRectF(-w / 2, -h / 2, w, h)
            wanted = [(False, 0, QPointF(self._mirror(-w / 2), 0), self._dir(1, 0)),
                      (True, 0, QPointF(self._mirror(w / 2), 0), self._dir(1, 0))]
            title_w = QFontMetricsF(label_font(8.5)).horizontalAdvance(n.title) + 8
            self._bounds = self._body.adjusted(0, -18, 0, 0).united(QRectF(-title_w / 2, -h / 2 - 18, title_w, 18))
        elif n.kind == "sum":
            r = SUM_RADIUS
            self._body = QRectF(-r, -r, 2 * r, 2 * r)
            for i, angle in enumerate(sum_port_angles(len(n.signs))):
                a = math.radians(angle)
                px, py = round(r * math.cos(a), 6), round(r * math.sin(a), 6)
                direction = (round(-math.cos(a)), round(-math.sin(a))) if angle % 90 == 0 else (0, -1)
                wanted.append((False, i, QPointF(self._mirror(px), py), self._dir(*direction)))
                sx, sy = self._sign_offset(angle)
                self._sign_spots.append(QPointF(self._mirror(px + sx), py + sy))
            wanted.append((True, 0, QPointF(self._mirror(r), 0), self._dir(1, 0)))
            self._bounds = self._body.adjusted(-22, -22, 22, 22)
        elif n.kind == "branch":
            self._body = QRectF(-BRANCH_RADIUS * 2, -BRANCH_RADIUS * 2, BRANCH_RADIUS * 4, BRANCH_RADIUS * 4)
            wanted = [(False, 0, QPointF(0, 0), None), (True, 0, QPointF(0, 0), None)]
            r = BRANCH_HIT_RADIUS
            self._bounds = self._body.united(QRectF(-r, -r, 2 * r, 2 * r))
        else:
            r = TERMINAL_RADIUS
            self._body = QRectF(-r, -r, 2 * r, 2 * r)
            label_w = QFontMetricsF(math_font(11)).horizontalAdvance(n.title) + 10
            outward = -1 if n.kind == "input" else 1
            side = self._mirror(outward)
            label = QRectF(r + 4, -10, label_w, 20) if side > 0 else QRectF(-r - 4 - label_w, -10, label_w, 20)
            self._label_rect = label
            port_x = self._mirror(r if n.kind == "input" else -r)
            wanted = [(n.kind == "input", 0, QPointF(port_x, 0), self._dir(1, 0))]
            self._bounds = self._body.united(label).adjusted(-3, -3, 3, 3)
        self._sync_ports(wanted)

    @staticmethod
    def _sign_offset(angle: float) -> tuple[float, float]:
        """Where the sign of an input sits relative to its port: just outside, beside the wire."""
        return {180: (-9, -10), 90: (-10, 10), 270: (-10, -10), 135: (-11, 3)}[int(angle)]

    def _sync_ports(self, wanted) -> None:
        keep = {(out, i) for out, i, _, _ in wanted}
        for key in [k for k in self.ports if k not in keep]:
            port = self.ports.pop(key)
            port.setParentItem(None)
            if port.scene() is not None:
                port.scene().removeItem(port)
        for out, i, pos, direction in wanted:
            port = self.ports.get((out, i))
            if port is None:
                port = PortItem(self, self.node.id, out, i, direction)
                port.theme = self.theme
                self.ports[(out, i)] = port
            port.node_id, port.direction = self.node.id, direction
            radius = BRANCH_HIT_RADIUS if self.node.kind == "branch" and out else HIT_RADIUS
            if port.hit_radius != radius:
                port.prepareGeometryChange()
                port.hit_radius = radius
            port.setPos(pos)
            sign = None
            if self.node.kind == "sum" and not out and i < len(self.node.signs):
                sign = "+" if self.node.signs[i] == "+" else MINUS
            port.describe(self.node.title, self.node.kind, sign)
        self.setToolTip(self._tooltip())

    def _tooltip(self) -> str:
        n = self.node
        if n.kind == "block":
            return f"{n.title} ({n.role}): drag to move, edit its transfer function in the inspector"
        if n.kind == "sum":
            return "Summing junction: click a sign to flip it"
        if n.kind == "branch":
            return "Branch point: drag the dot to move it, drag from the ring (or Alt+drag) to draw a wire"
        return f"{n.title}: the loop's {'input' if n.kind == 'input' else 'output'} terminal"

    def hoverMoveEvent(self, event) -> None:
        """Over a summing junction's sign: a pointing hand and "click to flip"."""
        if self.node.kind == "sum":
            index = self.sign_at(event.pos())
            if index is None:
                self.setToolTip(self._tooltip())
                self.unsetCursor()
            else:
                sign = self.node.signs[index]
                other = MINUS if sign == "+" else "+"
                self.setToolTip(f"Sign of input {index + 1}: click to flip it to {other}")
                self.setCursor(Qt.CursorShape.PointingHandCursor)
        super().hoverMoveEvent(event)

    def hoverEnterEvent(self, event) -> None:
        scene = self.scene()
        if self.node.kind == "branch" and scene is not None and hasattr(scene, "statusHint"):
            scene.statusHint.emit("Branch point: drag from the ring to draw a wire (or Alt+drag from anywhere "
                                  "on it); drag the dot to move it")
        super().hoverEnterEvent(event)

    def _doc(self, text: str) -> QTextDocument:
        doc = QTextDocument()
        doc.setDocumentMargin(0)
        doc.setDefaultFont(math_font(10.5))
        doc.setHtml(f"<span style='color:{self.theme.text.name()}; white-space:pre'>{formula_html(text)}</span>")
        doc.setTextWidth(doc.idealWidth())
        return doc

    # -- QGraphicsItem ------------------------------------------------------------------------
    def boundingRect(self) -> QRectF:
        return self._bounds.adjusted(-2, -2, 2, 2)

    def shape(self) -> QPainterPath:
        path = QPainterPath()
        if self.node.kind == "sum":
            path.addEllipse(self._body.adjusted(-2, -2, 2, 2))
            for spot in self._sign_spots:  # the signs are clickable: part of the item
                path.addRect(QRectF(spot.x() - 7, spot.y() - 8, 14, 16))
            path.setFillRule(Qt.FillRule.WindingFill)
        elif self.node.kind == "branch":
            path.addEllipse(self._body.adjusted(-2, -2, 2, 2))
        elif self.node.kind in ("input", "output"):
            path.addRect(self._body.united(self._label_rect))
        else:
            path.addRect(self._body)
        return path

    def itemChange(self, change, value):
        if change == QGraphicsItem.GraphicsItemChange.ItemSelectedHasChanged:
            self.graphicsEffect().setEnabled(bool(value))
        return super().itemChange(change, value)

    def paint(self, painter: QPainter, option, widget=None) -> None:
        painter.setRenderHint(QPainter.RenderHint.Antialiasing)
        painter.setRenderHint(QPainter.RenderHint.TextAntialiasing)
        kind = self.node.kind
        if kind == "block":
            self._paint_block(painter)
        elif kind == "sum":
            self._paint_sum(painter)
        elif kind == "branch":
            if self.isSelected():  # show the ring a wire starts from
                ring = QPen(self.theme.rubber_wire, 1.0, Qt.PenStyle.DashLine)
                painter.setPen(ring)
                painter.setBrush(Qt.BrushStyle.NoBrush)
                painter.drawEllipse(QPointF(0, 0), BRANCH_HIT_RADIUS - 2, BRANCH_HIT_RADIUS - 2)
            painter.setPen(Qt.PenStyle.NoPen)
            painter.setBrush(QBrush(self.theme.wire))
            painter.drawEllipse(QPointF(0, 0), BRANCH_RADIUS, BRANCH_RADIUS)
        else:
            self._paint_terminal(painter)

    def _paint_block(self, painter: QPainter) -> None:
        t, body = self.theme, self._body
        outline = QPainterPath()
        outline.addRoundedRect(body, 5, 5)
        painter.setPen(Qt.PenStyle.NoPen)
        painter.setBrush(QBrush(t.block_fill))
        painter.drawPath(outline)
        painter.save()
        painter.setClipPath(outline)
        painter.fillRect(QRectF(body.left(), body.top(), body.width(), BAND), t.role_band(self.node.role))
        painter.restore()
        painter.setPen(QPen(t.outline, 1.1))
        painter.setBrush(Qt.BrushStyle.NoBrush)
        painter.drawPath(outline)
        painter.setFont(label_font(8.5))
        painter.setPen(t.muted_text)
        painter.drawText(QRectF(-200, body.top() - 18, 400, 16),
                         Qt.AlignmentFlag.AlignHCenter | Qt.AlignmentFlag.AlignBottom, self.node.title)
        num, den = self._docs
        centre_y = body.top() + BAND + (body.height() - BAND) / 2
        if den is None:
            self._draw_doc(painter, num, centre_y - num.size().height() / 2)
            return
        rule_w = max(num.idealWidth(), den.idealWidth()) + 8
        self._draw_doc(painter, num, centre_y - 4 - num.size().height())
        painter.setPen(QPen(t.text, 1.0))
        painter.drawLine(QPointF(-rule_w / 2, centre_y), QPointF(rule_w / 2, centre_y))
        self._draw_doc(painter, den, centre_y + 4)

    @staticmethod
    def _draw_doc(painter: QPainter, doc: QTextDocument, top: float) -> None:
        painter.save()
        painter.translate(-doc.idealWidth() / 2, top)
        doc.drawContents(painter)
        painter.restore()

    def _paint_sum(self, painter: QPainter) -> None:
        t = self.theme
        painter.setPen(QPen(t.outline, 1.2))
        painter.setBrush(QBrush(t.block_fill))
        painter.drawEllipse(QPointF(0, 0), SUM_RADIUS, SUM_RADIUS)
        painter.setFont(label_font(10, bold=True))
        painter.setPen(t.text)
        for sign, spot in zip(self.node.signs, self._sign_spots):
            painter.drawText(QRectF(spot.x() - 7, spot.y() - 8, 14, 16), Qt.AlignmentFlag.AlignCenter,
                             "+" if sign == "+" else MINUS)

    def _paint_terminal(self, painter: QPainter) -> None:
        t = self.theme
        painter.setPen(QPen(t.outline, 1.3))
        painter.setBrush(QBrush(t.block_fill))
        painter.drawEllipse(QPointF(0, 0), TERMINAL_RADIUS, TERMINAL_RADIUS)
        font = math_font(11)
        font.setItalic(True)
        painter.setFont(font)
        painter.setPen(t.text)
        align = Qt.AlignmentFlag.AlignVCenter | (
            Qt.AlignmentFlag.AlignLeft if self._label_rect.left() > 0 else Qt.AlignmentFlag.AlignRight)
        painter.drawText(self._label_rect, align, self.node.title)
