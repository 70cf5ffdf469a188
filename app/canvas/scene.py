"""The canvas scene: mirrors one :class:`core.model.diagram.Diagram` and turns gestures into undo commands.

On construction it builds one item per node and wire; afterwards each :class:`ModelSignals`
event updates only the affected items. Items never edit the model: the scene pushes commands
(:mod:`app.commands`) and refused edits become a ``statusHint`` instead of a change.
"""
from __future__ import annotations

import atexit
import json
import re
from dataclasses import asdict, fields, replace

from PySide6.QtCore import QMimeData, QPointF, QRectF, Qt, Signal
from PySide6.QtGui import QGuiApplication, QKeySequence, QPainter, QPen, QUndoStack
from PySide6.QtWidgets import QGraphicsItem, QGraphicsScene, QMenu

from core.errors import LoopwrightError
from core.model.diagram import Diagram, Node, Wire

from ..bridge import ModelSignals
from ..commands import (
    AddNodeCommand,
    ConnectCommand,
    DisconnectCommand,
    EditNodeCommand,
    Macro,
    ModelCommand,
    MoveNodesCommand,
    RemoveNodeCommand,
    SetAnalysisCommand,
    SetBendsCommand,
    push,
)
from ..theme import Theme, current_theme
from .gestures import BendGesture, MoveGesture, NewWireGesture
from .node_item import GRID, NodeItem
from .port_item import PortItem
from .routing import route
from .wire_item import WireItem

NODE_MIME = "application/x-loopwright-node"
CLIPBOARD_MIME = "application/x-loopwright-nodes"
DOT_SPACING = 2 * GRID
CHAIN_GAP = 50.0  # room left for a wire between a selected node and the next one placed beside it
PORT_SNAP = 14.0  # how close (scene px) a dropped wire end must be to an input port

# default id stem, numerator, denominator of a new block by role
BLOCK_DEFAULTS = {
    "gain": ("G", "1", "1"),
    "controller": ("C", "1", "1"),
    "actuator": ("A", "1", "0.1s + 1"),
    "plant": ("P", "1", "s + 1"),
    "sensor": ("H", "1", "1"),
    "other": ("B", "1", "1"),
}
SUM_SIGNS = {2: "+-", 3: "+-+", 4: "+-++"}
ID_STEMS = {"input": "r", "output": "y", "sum": "sum", "branch": "b"}
# offsets tried for a free spot, nearest first; to the right and below before left and above
_SPIRAL = sorted(((dx * DOT_SPACING, dy * DOT_SPACING) for dx in range(-30, 31) for dy in range(-20, 21)),
                 key=lambda p: (p[0] ** 2 + p[1] ** 2, p[0] < 0, p[1] < 0))


def _release_our_clipboard() -> None:
    """Take copied nodes off the clipboard before the interpreter ends: otherwise Qt frees the
    Python-made clipboard data after Python has, and the process crashes on its way out."""
    if QGuiApplication.instance() is not None:
        clipboard = QGuiApplication.clipboard()
        data = clipboard.mimeData()
        if data is not None and data.hasFormat(CLIPBOARD_MIME):
            clipboard.clear()


atexit.register(_release_our_clipboard)


class DiagramScene(QGraphicsScene):
    """Items for ``diagram``'s nodes and wires, kept in step with ``signals``.

    Signals: ``selectionChangedTo(list)`` with the selected node ids in model order;
    ``statusHint(str)`` for refused gestures (e.g. a connection to an input that already has a
    wire).
    """

    selectionChangedTo = Signal(list)
    statusHint = Signal(str)

    def __init__(self, diagram: Diagram, signals: ModelSignals, undo_stack: QUndoStack,
                 theme: Theme | None = None, parent=None):
        super().__init__(parent)
        self.diagram, self.signals, self.undo_stack = diagram, signals, undo_stack
        self.theme = theme or current_theme()
        self.node_items: dict[str, NodeItem] = {}
        self.wire_items: dict[str, WireItem] = {}
        self.gesture = None
        self._clipboard: str | None = None
        self._paste_count = 0
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

    # -- edits (each pushes one undo step) ----------------------------------------------------
    def try_push(self, command: ModelCommand) -> bool:
        """Push ``command``; if the model refuses it, show why as a status hint and return False."""
        try:
            push(self.undo_stack, command)
        except LoopwrightError as exc:
            self.statusHint.emit(exc.message[:1].upper() + exc.message[1:] + ".")
            return False
        return True

    def select_node(self, node_id: str) -> None:
        """Make this node the only selected item."""
        self.clearSelection()
        item = self.node_items.get(node_id)
        if item is not None:
            item.setSelected(True)

    def default_node(self, kind: str, role: str = "") -> Node:
        """A new node of this kind with a fresh id and sensible default text."""
        d = self.diagram
        if kind == "block":
            role = role if role in BLOCK_DEFAULTS else "other"
            stem, num, den = BLOCK_DEFAULTS[role]
            return Node(d.unique_id(stem), "block", role=role, num=num, den=den)
        if kind == "sum":
            count = int(role) if role.isdigit() and int(role) in SUM_SIGNS else 2
            return Node(d.unique_id("sum"), "sum", signs=SUM_SIGNS[count])
        if kind not in ID_STEMS:
            raise ValueError(f"unknown node kind {kind!r}")
        return Node(d.unique_id(ID_STEMS[kind]), kind)

    def place_node(self, kind: str, role: str = "", pos: QPointF | None = None) -> str | None:
        """Add a node (one undo step); at ``pos`` snapped, or at the next free spot near the view
        centre. The first input/output of a diagram become the analysed input/output.
        For a summing junction ``role`` is its input count ("2", "3" or "4")."""
        node = self.default_node(kind, role)
        exact = pos is not None
        centre = pos if exact else (self._chain_spot(node) or self._view_centre())
        x, y = self._free_spot(node, centre, exact)
        node.x, node.y = x, y
        commands: list[ModelCommand] = [AddNodeCommand(self.diagram, node)]
        analysis = self.diagram.analysis
        if kind == "input" and analysis.input not in self.diagram.nodes:
            commands.append(SetAnalysisCommand(self.diagram, input=node.id))
        if kind == "output" and analysis.output not in self.diagram.nodes:
            commands.append(SetAnalysisCommand(self.diagram, output=node.id))
        if not self.try_push(Macro(f"add {node.id}", commands) if len(commands) > 1 else commands[0]):
            return None
        self.select_node(node.id)
        item = self.node_items[node.id]
        for view in self.views():
            view.ensureVisible(item.sceneBoundingRect(), 40, 40)
        return node.id

    def _chain_spot(self, node: Node) -> QPointF | None:
        """Beside the one selected node, on its row, downstream (to the right, or to the left of a
        flipped node): clicking palette entries one after another lays out a chain."""
        selected = self.selected_node_ids()
        if len(selected) != 1:
            return None
        anchor = self.node_items[selected[0]]
        probe = NodeItem(node, self.theme).boundingRect()
        bounds = anchor.sceneBoundingRect()
        if anchor.node.flipped:
            return QPointF(bounds.left() - CHAIN_GAP - probe.right(), anchor.node.y)
        return QPointF(bounds.right() + CHAIN_GAP - probe.left(), anchor.node.y)

    def _view_centre(self) -> QPointF:
        views = self.views()
        if not views:
            return QPointF(0, 0)
        view = views[0]
        return view.mapToScene(view.viewport().rect().center())

    def _free_spot(self, node: Node, centre: QPointF, exact: bool) -> tuple[float, float]:
        probe = NodeItem(node, self.theme)
        area = probe.boundingRect().adjusted(-10, -10, 10, 10)
        cx, cy = self.snap(centre.x()), self.snap(centre.y())
        if exact:
            return cx, cy
        for dx, dy in _SPIRAL:
            x, y = cx + dx, cy + dy
            nearby = self.items(area.translated(x, y), Qt.ItemSelectionMode.IntersectsItemBoundingRect)
            if not any(isinstance(i, NodeItem) for i in nearby):
                return x, y
        return cx, cy

    def delete_selection(self) -> None:
        """Remove the selected nodes (with their wires) and wires: one undo step."""
        nodes = self.selected_node_ids()
        touching = {w.key for w in self.diagram.wires if w.source in nodes or w.target in nodes}
        wires = [k for k in self.selected_wire_keys() if k not in touching]
        if not nodes and not wires:
            return
        commands: list[ModelCommand] = [DisconnectCommand(self.diagram, k) for k in wires]
        a = self.diagram.analysis
        cleared = {k: None for k, v in (("input", a.input), ("output", a.output)) if v in nodes}
        if cleared:
            commands.append(SetAnalysisCommand(self.diagram, **cleared))
        commands += [RemoveNodeCommand(self.diagram, n) for n in nodes]
        self.try_push(Macro("delete selection", commands))

    def flip_selection(self) -> None:
        """Mirror the selected nodes left-right (inputs on the other side): one undo step."""
        nodes = [n for n in self.selected_node_ids() if self.diagram.node(n).kind != "branch"]
        if nodes:
            self.try_push(Macro("flip", [EditNodeCommand(self.diagram, n, flipped=not self.diagram.node(n).flipped)
                                         for n in nodes]))

    def flip_sign(self, node_id: str, index: int) -> None:
        """Change input ``index`` of a summing junction from + to - or back."""
        signs = list(self.diagram.node(node_id).signs)
        signs[index] = "-" if signs[index] == "+" else "+"
        self.try_push(EditNodeCommand(self.diagram, node_id, signs="".join(signs)))

    def nudge_selection(self, dx: float, dy: float) -> None:
        """Move the selected nodes by (dx, dy); consecutive nudges are one undo step."""
        nodes = self.selected_node_ids()
        if nodes:
            moves = {n: ((self.diagram.node(n).x, self.diagram.node(n).y),
                         (self.diagram.node(n).x + dx, self.diagram.node(n).y + dy)) for n in nodes}
            self.try_push(MoveNodesCommand(self.diagram, moves, nudge=True))

    def copy_selection(self) -> None:
        """Copy the selected nodes and the wires between them to the clipboard."""
        nodes = self.selected_node_ids()
        if not nodes:
            return
        wires = [asdict(w) for w in self.diagram.wires if w.source in nodes and w.target in nodes]
        text = json.dumps({"nodes": [asdict(self.diagram.node(n)) for n in nodes], "wires": wires})
        self._clipboard, self._paste_count = text, 0
        mime = QMimeData()
        mime.setData(CLIPBOARD_MIME, text.encode("utf-8"))
        QGuiApplication.clipboard().setMimeData(mime)

    def paste(self) -> list[str]:
        """Paste copied nodes with fresh ids and their internal wires, offset: one undo step."""
        mime = QGuiApplication.clipboard().mimeData()
        text = bytes(mime.data(CLIPBOARD_MIME)).decode("utf-8", "replace") \
            if mime is not None and mime.hasFormat(CLIPBOARD_MIME) else self._clipboard
        if not text:
            return []
        try:
            data = json.loads(text)
            allowed = {f.name for f in fields(Node)}
            nodes = [Node(**{k: v for k, v in n.items() if k in allowed}) for n in data["nodes"]]
            wires = [(w["source"], w["target"], int(w["port"]), w.get("bends") or []) for w in data["wires"]]
        except (ValueError, KeyError, TypeError, AttributeError, OverflowError, RecursionError):
            # another program's clipboard: nested too deep for json, or a port of 1e400
            self.statusHint.emit("The clipboard holds nothing that can be pasted here.")
            return []
        self._paste_count += 1
        offset = 3 * GRID * self._paste_count
        taken, renamed, commands = set(self.diagram.nodes), {}, []
        for node in nodes:
            stem = re.sub(r"\d+$", "", node.id) or node.id
            new_id, n = stem, 1
            while new_id in taken:
                n += 1
                new_id = f"{stem}{n}"
            taken.add(new_id)
            renamed[node.id] = new_id
            commands.append(AddNodeCommand(self.diagram, replace(node, id=new_id, x=node.x + offset, y=node.y + offset)))
        for source, target, port, bends in wires:
            if source in renamed and target in renamed:
                moved = [(x + offset, y + offset) for x, y in bends]
                commands.append(ConnectCommand(self.diagram, renamed[source], renamed[target], port, bends=moved))
        if not self.try_push(Macro("paste", commands)):
            return []
        self.clearSelection()
        for new_id in renamed.values():
            self.node_items[new_id].setSelected(True)
        return list(renamed.values())

    # -- mouse --------------------------------------------------------------------------------
    def _sign_hit(self, pos: QPointF) -> tuple[str, int] | None:
        for item in self.items(QRectF(pos.x() - 1, pos.y() - 1, 2, 2).adjusted(-24, -24, 24, 24)):
            if isinstance(item, NodeItem) and item.node.kind == "sum":
                index = item.sign_at(item.mapFromScene(pos))
                if index is not None:
                    return item.node.id, index
        return None

    def _item_at(self, pos: QPointF) -> QGraphicsItem | None:
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

    def mousePressEvent(self, event) -> None:
        if event.button() != Qt.MouseButton.LeftButton or self.gesture is not None:
            super().mousePressEvent(event)
            return
        pos = event.scenePos()
        ctrl = bool(event.modifiers() & (Qt.KeyboardModifier.ControlModifier | Qt.KeyboardModifier.ShiftModifier))
        sign = self._sign_hit(pos)
        item = self._item_at(pos)
        alt = bool(event.modifiers() & Qt.KeyboardModifier.AltModifier)
        if alt and isinstance(item, NodeItem) and item.output_port() is not None:
            item = item.output_port()  # Alt+drag draws a wire from anywhere on a node with an output
        if sign is not None and not isinstance(item, PortItem):
            self.flip_sign(*sign)
        elif isinstance(item, PortItem):
            self.gesture = NewWireGesture(self, item)
            self.gesture.move(pos)
        elif isinstance(item, NodeItem):
            if ctrl:
                item.setSelected(not item.isSelected())
            elif not item.isSelected():
                self.clearSelection()
                item.setSelected(True)
            if item.isSelected():
                self.gesture = MoveGesture(self, item.node.id, pos)
        elif isinstance(item, WireItem):
            if not ctrl:
                self.clearSelection()
            item.setSelected(True)
            segment = item.segment_at(pos)
            if segment is not None:
                self.gesture = BendGesture(self, item, segment, pos)
        else:
            super().mousePressEvent(event)
            return
        event.accept()

    def mouseMoveEvent(self, event) -> None:
        if self.gesture is not None:
            self.gesture.move(event.scenePos())
            event.accept()
            return
        super().mouseMoveEvent(event)

    def mouseReleaseEvent(self, event) -> None:
        if self.gesture is not None and event.button() == Qt.MouseButton.LeftButton:
            gesture, self.gesture = self.gesture, None
            gesture.release(event.scenePos())
            event.accept()
            return
        super().mouseReleaseEvent(event)

    def cancel_gesture(self) -> None:
        if self.gesture is not None:
            gesture, self.gesture = self.gesture, None
            gesture.cancel()

    def contextMenuEvent(self, event) -> None:
        item = self._item_at(event.scenePos())
        if isinstance(item, PortItem):
            item = item.parentItem()
        if not isinstance(item, (NodeItem, WireItem)):
            return
        if not item.isSelected():
            self.clearSelection()
            item.setSelected(True)
        menu = QMenu()
        if isinstance(item, NodeItem) and item.node.kind != "branch":
            menu.addAction("Flip left-right (F)", self.flip_selection)
        if isinstance(item, WireItem) and item.bends:
            key = item.key
            menu.addAction("Straighten wire", lambda: self._straighten(key))
        menu.addAction("Delete\tDel", self.delete_selection)
        menu.exec(event.screenPos())
        event.accept()

    def _straighten(self, key: str) -> None:
        self.try_push(SetBendsCommand(self.diagram, key, []))

    # -- keyboard -----------------------------------------------------------------------------
    def keyPressEvent(self, event) -> None:
        key, mods = event.key(), event.modifiers()
        step = GRID * (10 if mods & Qt.KeyboardModifier.ShiftModifier else 1)
        arrows = {Qt.Key.Key_Left: (-step, 0), Qt.Key.Key_Right: (step, 0),
                  Qt.Key.Key_Up: (0, -step), Qt.Key.Key_Down: (0, step)}
        if event.matches(QKeySequence.StandardKey.Copy):
            self.copy_selection()
        elif event.matches(QKeySequence.StandardKey.Paste):
            self.paste()
        elif event.matches(QKeySequence.StandardKey.Cut):
            self.copy_selection()
            self.delete_selection()
        elif key in (Qt.Key.Key_Delete, Qt.Key.Key_Backspace):
            self.delete_selection()
        elif key in arrows and not mods & Qt.KeyboardModifier.ControlModifier:
            self.nudge_selection(*arrows[key])
        elif key == Qt.Key.Key_F and not mods & Qt.KeyboardModifier.ControlModifier:
            self.flip_selection()
        elif key == Qt.Key.Key_Escape:
            self.cancel_gesture()
            self.clearSelection()
        else:
            super().keyPressEvent(event)
            return
        event.accept()

    # -- drops from the palette ---------------------------------------------------------------
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
        if not event.mimeData().hasFormat(NODE_MIME):
            super().dropEvent(event)
            return
        kind, _, role = bytes(event.mimeData().data(NODE_MIME)).decode("utf-8", "replace").partition(":")
        try:
            self.place_node(kind, role, event.scenePos())
        except ValueError:
            self.statusHint.emit(f"Cannot place a node of kind '{kind}'.")
            return
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
