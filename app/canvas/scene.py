"""The canvas scene: mirrors one :class:`core.model.diagram.Diagram`, nothing more.

On construction it builds one item per node and wire; afterwards each :class:`ModelSignals`
event updates only the affected items. Neither the scene nor its items edit the model: mouse, key,
menu and drop events go to the attached ``editor`` (:class:`app.document.editor.DiagramEditor`),
which pushes undo commands; without one the canvas is a read-only view.
"""
from __future__ import annotations

from dataclasses import replace

from PySide6.QtCore import QPointF, QRectF, Qt, Signal
from PySide6.QtGui import QPainter, QPen
from PySide6.QtWidgets import QGraphicsItem, QGraphicsScene

from core.model.diagram import Diagram, Wire

from ..bridge import ModelSignals
from ..theme import Theme, current_theme
from .node_item import GRID, NodeItem
from .port_item import PortItem
from .routing import route
from .wire_item import WireItem

NODE_MIME = "application/x-loopwright-node"
NODE_MIME = "application/x-loopwright-node"
DOT_SPACING = 2 * GRID
PORT_SNAP = 14.0  # how close (scene px) a dropped wire end must be to an input port


LEFT_OUT_OPACITY = 0.35  # nodes the analysis left out are drawn faded


class DiagramScene(QGraphicsScene):
    """Items for ``diagram``'s nodes and wires, kept in step with ``signals``.

    Signals: ``selectionChangedTo(list)`` with the selected node ids in model order;
    ``statusHint(str)`` for refused gestures (e.g. a connection to an input that already has a
    wire).
    """

    selectionChangedTo = Signal(list)
    statusHint = Signal(str)

    def __init__(self, diagram: Diagram, signals: ModelSignals, theme: Theme | None = None, parent=None):
        super().__init__(parent)
        self.diagram, self.signals = diagram, signals
        self.editor = None  # set by app.document.editor.DiagramEditor
        self.theme = theme or current_theme()
        self.node_items: dict[str, NodeItem] = {}
        self.wire_items: dict[str, WireItem] = {}
        self.setSceneRect(-4000, -3000, 8000, 6000)
        self.setItemIndexMethod(QGraphicsScene.ItemIndexMethod.NoIndex)
        for node_id in diagram.nodes:
            self._on_node_added(node_id)
        for wire in diagram.wires:
            self._on_wire_added(wire.key)
        signals.nodeAdded.connect(self._on_node_added)
        signals.nodeRemoved.connect(self._on_node_removed)
        signals.nodeChanged.connect(self._on_node_changed)
        signals.nodeMoved.connect(self._on_node_moved)
        signals.wireAdded.connect(self._on_wire_added)
        signals.wireRemoved.connect(self._on_wire_removed)
        signals.wireChanged.connect(self._on_wire_changed)
        self.selectionChanged.connect(self._emit_selection)

    def _emit_selection(self) -> None:
        try:
            ids = self.selected_node_ids()
        except RuntimeError:  # the scene is being destroyed and its items are already gone
            return
        self.selectionChangedTo.emit(ids)

    # -- mirroring the model ------------------------------------------------------------------
    def _on_node_added(self, node_id: str) -> None:
        item = NodeItem(self.diagram.node(node_id), self.theme)
        self.node_items[node_id] = item
        self.addItem(item)

    def _on_node_removed(self, node_id: str) -> None:
        item = self.node_items.pop(node_id, None)
        if item is not None:
            self.removeItem(item)

    def _on_node_changed(self, node_id: str) -> None:
        self.node_items[node_id].set_node(self.diagram.node(node_id))
        self.refresh_wires([node_id])

    def _on_node_moved(self, node_id: str) -> None:
        node = self.diagram.node(node_id)
        self.node_items[node_id].setPos(node.x, node.y)
        self.node_items[node_id].node = replace(node)
        self.refresh_wires([node_id])

    def _on_wire_added(self, key: str) -> None:
        item = WireItem(key, self.theme)
        self.wire_items[key] = item
        self.addItem(item)
        self._refresh_wire(self.diagram.wires[self.diagram.wire_index(key)])

    def _on_wire_removed(self, key: str) -> None:
        item = self.wire_items.pop(key, None)
        if item is not None:
            self.removeItem(item)

    def _on_wire_changed(self, key: str) -> None:
        self._refresh_wire(self.diagram.wires[self.diagram.wire_index(key)])

    def _wire_ends(self, wire: Wire) -> tuple[PortItem | None, PortItem | None]:
        source, target = self.node_items.get(wire.source), self.node_items.get(wire.target)
        return (source.output_port() if source else None,
                target.input_port(wire.port) if target else None)

    def _route(self, wire: Wire) -> list[tuple[float, float]] | None:
        out_port, in_port = self._wire_ends(wire)
        if out_port is None or in_port is None:
            return None
        a, b = out_port.scenePos(), in_port.scenePos()
        return route((a.x(), a.y()), out_port.direction, (b.x(), b.y()), in_port.direction, wire.bends)

    def _refresh_wire(self, wire: Wire) -> None:
        item = self.wire_items.get(wire.key)
        points = self._route(wire)
        if item is None or points is None:
            return
        item.bends = list(wire.bends)
        item.arrow = self.node_items[wire.target].node.kind != "branch"
        item.set_points(points)

    def refresh_wires(self, node_ids) -> None:
        """Re-route every wire touching these nodes (from the items' current positions)."""
        ids = set(node_ids)
        for wire in self.diagram.wires:
            if wire.source in ids or wire.target in ids:
                self._refresh_wire(wire)

    def set_theme(self, theme: Theme) -> None:
        """Redraw everything in another (light or dark) theme."""
        self.theme = theme
        for item in self.node_items.values():
            item.set_theme(theme)
        for item in self.wire_items.values():
            item.set_theme(theme)
        self.update()

    def check_consistency(self) -> list[str]:
        """Differences between the items and the model; empty when the scene mirrors it exactly."""
        problems = []
        d = self.diagram
        if set(self.node_items) != set(d.nodes):
            problems.append(f"node items {sorted(self.node_items)} != model nodes {sorted(d.nodes)}")
        for node_id, node in d.nodes.items():
            item = self.node_items.get(node_id)
            if item is None:
                continue
            if item.node != node:
                problems.append(f"node {node_id}: item shows {item.node}, model has {node}")
            if (item.pos().x(), item.pos().y()) != (node.x, node.y):
                problems.append(f"node {node_id}: item at {item.pos().toTuple()}, model at {(node.x, node.y)}")
            if len(item.input_ports()) != node.input_count or (item.output_port() is not None) != node.has_output:
                problems.append(f"node {node_id}: ports do not match the node's inputs/output")
        model_keys = [w.key for w in d.wires]
        if set(self.wire_items) != set(model_keys):
            problems.append(f"wire items {sorted(self.wire_items)} != model wires {sorted(model_keys)}")
        for wire in d.wires:
            item = self.wire_items.get(wire.key)
            if item is None:
                continue
            if item.bends != list(wire.bends):
                problems.append(f"wire {wire.key}: item bends {item.bends} != model {wire.bends}")
            expected = self._route(wire)
            if expected is None or [tuple(p) for p in item.points] != [tuple(map(float, p)) for p in expected]:
                problems.append(f"wire {wire.key}: drawn path does not join its ports")
        mine = set(self.node_items.values()) | set(self.wire_items.values())
        for item in self.items():
            if isinstance(item, (NodeItem, WireItem)) and item not in mine and not getattr(item, "preview", False):
                problems.append(f"stray item {getattr(item, 'key', None) or item.node.id}")
        return problems

    # -- queries ------------------------------------------------------------------------------
    def mark_left_out(self, node_ids) -> None:
        """Draw the nodes the analysis left out (on no wire path from the input to the output),
        and the wires touching them, faded, with a tooltip saying why; every other item plainly."""
        left_out = set(node_ids)
        note = "Left out of the analysis: on no wire path from the input to the output"
        for node_id, item in self.node_items.items():
            item.setOpacity(LEFT_OUT_OPACITY if node_id in left_out else 1.0)
            item.setToolTip(note if node_id in left_out else "")
        for wire in self.diagram.wires:
            item = self.wire_items.get(wire.key)
            if item is not None:
                item.setOpacity(LEFT_OUT_OPACITY if {wire.source, wire.target} & left_out else 1.0)

    def selected_node_ids(self) -> list[str]:
        """Selected nodes, in model order."""
        return [i for i, item in self.node_items.items() if item.isSelected()]

    def selected_wire_keys(self) -> list[str]:
        return [k for k, item in self.wire_items.items() if item.isSelected()]

    def all_input_ports(self) -> list[PortItem]:
        return [p for item in self.node_items.values() for p in item.input_ports()]

    def input_port_near(self, pos: QPointF) -> PortItem | None:
        """The input port closest to ``pos`` within :data:`PORT_SNAP`, or None."""
        best, best_d = None, PORT_SNAP
        for port in self.all_input_ports():
            d = (port.scenePos() - pos).manhattanLength()
            if d <= best_d:
                best, best_d = port, d
        return best

    @staticmethod
    def snap(value: float) -> float:
        """Round a coordinate to the 10 px grid."""
        return round(value / GRID) * GRID

    # -- queries for the editor -------------------------------------------------------------------
    def select_node(self, node_id: str) -> None:
        """Make this node the only selected item."""
        self.clearSelection()
        item = self.node_items.get(node_id)
        if item is not None:
            item.setSelected(True)

    def sign_at(self, pos: QPointF) -> tuple[str, int] | None:
        for item in self.items(QRectF(pos.x() - 1, pos.y() - 1, 2, 2).adjusted(-24, -24, 24, 24)):
            if isinstance(item, NodeItem) and item.node.kind == "sum":
                index = item.sign_at(item.mapFromScene(pos))
                if index is not None:
                    return item.node.id, index
        return None

    def item_at(self, pos: QPointF) -> QGraphicsItem | None:
        for item in self.items(pos):
            if isinstance(item, PortItem):
                owner = item.parentItem()
                is_branch_dot = owner.node.kind == "branch" and (item.scenePos() - pos).manhattanLength() < 5
                if item.is_output and not is_branch_dot:
                    return item
                return owner
            if isinstance(item, NodeItem) or (isinstance(item, WireItem) and not item.preview):
                return item
        return None

    # -- events: handed to the editor (app.document.editor), which makes the undo commands ----------
    def mousePressEvent(self, event) -> None:
        if event.button() == Qt.MouseButton.LeftButton and self.editor is not None \
                and self.editor.press(event.scenePos(), event.modifiers()):
            event.accept()
            return
        super().mousePressEvent(event)

    def mouseMoveEvent(self, event) -> None:
        if self.editor is not None and self.editor.move(event.scenePos()):
            event.accept()
            return
        super().mouseMoveEvent(event)

    def mouseReleaseEvent(self, event) -> None:
        if event.button() == Qt.MouseButton.LeftButton and self.editor is not None \
                and self.editor.release(event.scenePos()):
            event.accept()
            return
        super().mouseReleaseEvent(event)

    def contextMenuEvent(self, event) -> None:
        if self.editor is not None and self.editor.context_menu(event.scenePos(), event.screenPos()):
            event.accept()

    def keyPressEvent(self, event) -> None:
        if self.editor is not None and self.editor.key(event):
            event.accept()
            return
        super().keyPressEvent(event)

    def dragEnterEvent(self, event) -> None:
        if event.mimeData().hasFormat(NODE_MIME):
            event.acceptProposedAction()
        else:
            super().dragEnterEvent(event)

    def dragMoveEvent(self, event) -> None:
        if event.mimeData().hasFormat(NODE_MIME):
            event.acceptProposedAction()
        else:
            super().dragMoveEvent(event)

    def dropEvent(self, event) -> None:
        if not event.mimeData().hasFormat(NODE_MIME) or self.editor is None:
            super().dropEvent(event)
            return
        kind, _, role = bytes(event.mimeData().data(NODE_MIME)).decode("utf-8", "replace").partition(":")
        if self.editor.drop(kind, role, event.scenePos()):
            event.acceptProposedAction()

    # -- background ---------------------------------------------------------------------------
    def drawBackground(self, painter: QPainter, rect: QRectF) -> None:
        painter.fillRect(rect, self.theme.canvas)
        if painter.transform().m11() < 0.45:
            return
        pen = QPen(self.theme.grid_dot, 1.6)
        pen.setCapStyle(Qt.PenCapStyle.RoundCap)
        painter.setPen(pen)
        left = int(rect.left() // DOT_SPACING) * DOT_SPACING
        top = int(rect.top() // DOT_SPACING) * DOT_SPACING
        points = []
        y = top
        while y < rect.bottom():
            x = left
            while x < rect.right():
                points.append(QPointF(x, y))
                x += DOT_SPACING
            y += DOT_SPACING
        painter.drawPoints(points)
