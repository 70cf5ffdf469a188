"""The diagram editor: turns the user's intents on the canvas into undo commands.

The scene (:mod:`app.canvas.scene`) mirrors the model and hands its mouse, key, menu and drop
events here; this object chooses the gesture (:mod:`app.document.gestures`), builds the commands
(:mod:`app.document.commands`) and pushes them. A refused edit becomes the scene's ``statusHint``
instead of a change. Palette clicks and the Edit menu call its methods directly.
"""
from __future__ import annotations

import atexit
import json
import re
from dataclasses import asdict, fields, replace

from PySide6.QtCore import QMimeData, QPointF, Qt
from PySide6.QtGui import QGuiApplication, QKeySequence, QUndoStack
from PySide6.QtWidgets import QMenu

from app.canvas.node_item import GRID, NodeItem
from app.canvas.port_item import PortItem
from app.canvas.scene import DOT_SPACING, DiagramScene
from app.canvas.wire_item import WireItem
from app.document.commands import (
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
from app.document.gestures import BendGesture, MoveGesture, NewWireGesture
from core.errors import LoopwrightError
from core.model.diagram import Node

CLIPBOARD_MIME = "application/x-loopwright-nodes"
CHAIN_GAP = 50.0  # room left for a wire between a selected node and the next one placed beside it

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


class DiagramEditor:
    """Edits ``scene.diagram`` through ``undo_stack``; attaches itself as the scene's editor."""

    def __init__(self, scene: DiagramScene, undo_stack: QUndoStack):
        self.scene, self.diagram, self.undo_stack = scene, scene.diagram, undo_stack
        self.gesture = None
        self._clipboard: str | None = None
        self._paste_count = 0
        scene.editor = self

    def try_push(self, command: ModelCommand) -> bool:
        """Push ``command``; if the model refuses it, show why as a status hint and return False."""
        try:
            push(self.undo_stack, command)
        except LoopwrightError as exc:
            self.scene.statusHint.emit(exc.message[:1].upper() + exc.message[1:] + ".")
            return False
        return True

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
        self.scene.select_node(node.id)
        item = self.scene.node_items[node.id]
        for view in self.scene.views():
            view.ensureVisible(item.sceneBoundingRect(), 40, 40)
        return node.id

    def _chain_spot(self, node: Node) -> QPointF | None:
        """Beside the one selected node, on its row, downstream (to the right, or to the left of a
        flipped node): clicking palette entries one after another lays out a chain."""
        selected = self.scene.selected_node_ids()
        if len(selected) != 1:
            return None
        anchor = self.scene.node_items[selected[0]]
        probe = NodeItem(node, self.scene.theme).boundingRect()
        bounds = anchor.sceneBoundingRect()
        if anchor.node.flipped:
            return QPointF(bounds.left() - CHAIN_GAP - probe.right(), anchor.node.y)
        return QPointF(bounds.right() + CHAIN_GAP - probe.left(), anchor.node.y)

    def _view_centre(self) -> QPointF:
        views = self.scene.views()
        if not views:
            return QPointF(0, 0)
        view = views[0]
        return view.mapToScene(view.viewport().rect().center())

    def _free_spot(self, node: Node, centre: QPointF, exact: bool) -> tuple[float, float]:
        probe = NodeItem(node, self.scene.theme)
        area = probe.boundingRect().adjusted(-10, -10, 10, 10)
        cx, cy = self.scene.snap(centre.x()), self.scene.snap(centre.y())
        if exact:
            return cx, cy
        for dx, dy in _SPIRAL:
            x, y = cx + dx, cy + dy
            nearby = self.scene.items(area.translated(x, y), Qt.ItemSelectionMode.IntersectsItemBoundingRect)
            if not any(isinstance(i, NodeItem) for i in nearby):
                return x, y
        return cx, cy

    def delete_selection(self) -> None:
        """Remove the selected nodes (with their wires) and wires: one undo step."""
        nodes = self.scene.selected_node_ids()
        touching = {w.key for w in self.diagram.wires if w.source in nodes or w.target in nodes}
        wires = [k for k in self.scene.selected_wire_keys() if k not in touching]
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
        nodes = [n for n in self.scene.selected_node_ids() if self.diagram.node(n).kind != "branch"]
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
        nodes = self.scene.selected_node_ids()
        if nodes:
            moves = {n: ((self.diagram.node(n).x, self.diagram.node(n).y),
                         (self.diagram.node(n).x + dx, self.diagram.node(n).y + dy)) for n in nodes}
            self.try_push(MoveNodesCommand(self.diagram, moves, nudge=True))

    def copy_selection(self) -> None:
        """Copy the selected nodes and the wires between them to the clipboard."""
        nodes = self.scene.selected_node_ids()
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
            self.scene.statusHint.emit("The clipboard holds nothing that can be pasted here.")
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
        self.scene.clearSelection()
        for new_id in renamed.values():
            self.scene.node_items[new_id].setSelected(True)
        return list(renamed.values())

    # -- scene events -----------------------------------------------------------------------------
    def press(self, pos: QPointF, modifiers) -> bool:
        """A left press at ``pos``: start a gesture or act at once; False when it is not ours."""
        if self.gesture is not None:
            return False
        scene = self.scene
        ctrl = bool(modifiers & (Qt.KeyboardModifier.ControlModifier | Qt.KeyboardModifier.ShiftModifier))
        sign = scene.sign_at(pos)
        item = scene.item_at(pos)
        if modifiers & Qt.KeyboardModifier.AltModifier and isinstance(item, NodeItem) \
                and item.output_port() is not None:
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
                scene.clearSelection()
                item.setSelected(True)
            if item.isSelected():
                self.gesture = MoveGesture(self, item.node.id, pos)
        elif isinstance(item, WireItem):
            if not ctrl:
                scene.clearSelection()
            item.setSelected(True)
            segment = item.segment_at(pos)
            if segment is not None:
                self.gesture = BendGesture(self, item, segment, pos)
        else:
            return False
        return True

    def move(self, pos: QPointF) -> bool:
        """The mouse moved: the running gesture follows; False without one."""
        if self.gesture is None:
            return False
        self.gesture.move(pos)
        return True

    def release(self, pos: QPointF) -> bool:
        """The left button came up: the running gesture finishes (at most one command)."""
        if self.gesture is None:
            return False
        gesture, self.gesture = self.gesture, None
        gesture.release(pos)
        return True

    def cancel_gesture(self) -> None:
        """Undo the running gesture's preview; nothing is pushed."""
        if self.gesture is not None:
            gesture, self.gesture = self.gesture, None
            gesture.cancel()

    def context_menu(self, pos: QPointF, screen_pos) -> bool:
        """The node or wire menu at ``pos``; False where there is neither."""
        item = self.scene.item_at(pos)
        if isinstance(item, PortItem):
            item = item.parentItem()
        if not isinstance(item, (NodeItem, WireItem)):
            return False
        if not item.isSelected():
            self.scene.clearSelection()
            item.setSelected(True)
        menu = QMenu()
        if isinstance(item, NodeItem) and item.node.kind != "branch":
            menu.addAction("Flip left-right (F)", self.flip_selection)
        if isinstance(item, WireItem) and item.bends:
            key = item.key
            menu.addAction("Straighten wire", lambda: self.try_push(SetBendsCommand(self.diagram, key, [])))
        menu.addAction("Delete\tDel", self.delete_selection)
        menu.exec(screen_pos)
        return True

    def key(self, event) -> bool:
        """Copy, paste, cut, delete, arrow nudges, F (flip), Escape; False for other keys."""
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
            self.scene.clearSelection()
        else:
            return False
        return True

    def drop(self, kind: str, role: str, pos: QPointF) -> bool:
        """A palette entry dropped at ``pos``: place that node there."""
        try:
            self.place_node(kind, role, pos)
        except ValueError:
            self.scene.statusHint.emit(f"Cannot place a node of kind '{kind}'.")
            return False
        return True
