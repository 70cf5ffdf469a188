"""Each mouse gesture on the canvas is one small object: press starts it, ``move`` follows the
mouse, ``release`` finishes it (pushing at most one undo command), ``cancel`` undoes its preview.

The editor (:mod:`app.document.editor`) creates them; they only read the model, change items'
looks, and push commands through the editor.
"""
from __future__ import annotations

from typing import TYPE_CHECKING

from PySide6.QtCore import QPointF

from app.canvas.port_item import PortItem
from app.canvas.routing import drag_segment, interior, route
from app.canvas.wire_item import WireItem
from app.document.commands import ConnectCommand, MoveNodesCommand, SetBendsCommand

if TYPE_CHECKING:
    from app.canvas.scene import DiagramScene
    from app.document.editor import DiagramEditor


class NewWireGesture:
    """Drag from an output port: a rubber wire follows the mouse; free input ports light up."""

    def __init__(self, editor: DiagramEditor, source: PortItem):
        self.editor, self.scene, self.source = editor, editor.scene, source
        self.rubber = WireItem("<new wire>", self.scene.theme)
        self.rubber.preview = True
        self.rubber.setZValue(10)
        self.scene.addItem(self.rubber)
        self.candidates = [p for p in self.scene.all_input_ports() if self._acceptable(p)]
        for port in self.candidates:
            port.set_highlight("candidate")
        self.target: PortItem | None = None

    def _acceptable(self, port: PortItem) -> bool:
        d = self.scene.diagram
        return port.node_id != self.source.node_id and d.wire_into(port.node_id, port.index) is None

    def move(self, pos: QPointF) -> None:
        target = self.scene.input_port_near(pos)
        if self.target is not None and self.target is not target:
            self.target.set_highlight("candidate" if self.target in self.candidates else None)
        self.target = target
        if target is not None and target in self.candidates:
            target.set_highlight("hover")
            end, in_dir = target.scenePos(), target.direction
        else:
            end, in_dir = pos, None
        start = self.source.scenePos()
        self.rubber.set_points(route((start.x(), start.y()), self.source.direction, (end.x(), end.y()), in_dir))

    def release(self, pos: QPointF) -> None:
        target = self.scene.input_port_near(pos)
        self.cancel()
        if target is None:
            self.scene.statusHint.emit("Drop the wire on a free input port to connect it.")
            return
        bends = return_path(self.scene, self.source, target)
        self.editor.try_push(ConnectCommand(self.scene.diagram, self.source.node_id, target.node_id, target.index,
                                           bends=bends))

    def cancel(self) -> None:
        for port in self.candidates:
            port.set_highlight(None)
        if self.rubber.scene() is not None:
            self.scene.removeItem(self.rubber)


CLEARANCE = 30.0  # how far a return wire runs below (or above) the nodes it passes


def return_path(scene: DiagramScene, source: PortItem, target: PortItem) -> list[tuple[float, float]]:
    """Bends for a wire that runs back against the flow (out to the right, into a port further
    left): down, under every node in between, and back, so a feedback wire never crosses the
    forward path. Above instead when the target's input faces up. Empty for any other wire."""
    s, t = source.scenePos(), target.scenePos()
    if source.direction != (1, 0) or t.x() >= s.x() - 1:
        return []
    up = target.direction == (0, 1)
    left, right = t.x() - 2 * CLEARANCE, s.x() + 2 * CLEARANCE
    y = (min(s.y(), t.y()) - CLEARANCE) if up else (max(s.y(), t.y()) + CLEARANCE)
    rects = [item.sceneBoundingRect() for item in scene.node_items.values()]
    moved = True
    while moved:
        moved = False
        for r in rects:
            if r.right() > left and r.left() < right and r.top() - CLEARANCE / 2 < y < r.bottom() + CLEARANCE / 2:
                y = (r.top() - CLEARANCE) if up else (r.bottom() + CLEARANCE)
                moved = True
    snap = scene.snap
    out_x = snap(s.x() + CLEARANCE)
    y = snap(y)
    if target.direction in ((0, 1), (0, -1)):
        return [(out_x, y), (snap(t.x()), y)]
    return [(out_x, y), (snap(t.x() - CLEARANCE), y)]


class MoveGesture:
    """Drag selected nodes: items follow the mouse (snapped); one move command on release."""

    def __init__(self, editor: DiagramEditor, grabbed: str, pos: QPointF):
        self.editor, self.scene, self.grabbed, self.press = editor, editor.scene, grabbed, QPointF(pos)
        ids = self.scene.selected_node_ids() or [grabbed]
        self.old = {i: (self.scene.diagram.node(i).x, self.scene.diagram.node(i).y) for i in ids}
        self.delta = (0.0, 0.0)

    def move(self, pos: QPointF) -> None:
        gx, gy = self.old[self.grabbed]
        d = pos - self.press
        self.delta = (self.scene.snap(gx + d.x()) - gx, self.scene.snap(gy + d.y()) - gy)
        for node_id, (x, y) in self.old.items():
            self.scene.node_items[node_id].setPos(x + self.delta[0], y + self.delta[1])
        self.scene.refresh_wires(self.old)

    def release(self, pos: QPointF) -> None:
        self.move(pos)
        if self.delta == (0.0, 0.0):
            return
        dx, dy = self.delta
        moves = {i: ((x, y), (x + dx, y + dy)) for i, (x, y) in self.old.items()}
        if not self.editor.try_push(MoveNodesCommand(self.scene.diagram, moves)):
            self.cancel()

    def cancel(self) -> None:
        for node_id, (x, y) in self.old.items():
            self.scene.node_items[node_id].setPos(x, y)
        self.scene.refresh_wires(self.old)


class BendGesture:
    """Drag one segment of a wire sideways; on release the new corners become the wire's bends."""

    def __init__(self, editor: DiagramEditor, wire: WireItem, segment: int, pos: QPointF):
        self.editor, self.scene = editor, editor.scene
        self.wire, self.segment, self.press = wire, segment, QPointF(pos)
        self.original = list(wire.points)
        (_, ay), (_, by) = self.original[segment], self.original[segment + 1]
        self.horizontal = abs(ay - by) < 1e-9
        self.points = self.original

    def move(self, pos: QPointF) -> None:
        a = self.original[self.segment]
        if self.horizontal:
            offset = self.scene.snap(a[1] + pos.y() - self.press.y()) - a[1]
        else:
            offset = self.scene.snap(a[0] + pos.x() - self.press.x()) - a[0]
        self.points = drag_segment(self.original, self.segment, offset) if offset else self.original
        self.wire.set_points(self.points)

    def release(self, pos: QPointF) -> None:
        self.move(pos)
        if self.points == self.original:
            return
        if not self.editor.try_push(SetBendsCommand(self.scene.diagram, self.wire.key, interior(self.points))):
            self.cancel()

    def cancel(self) -> None:
        self.wire.set_points(self.original)
