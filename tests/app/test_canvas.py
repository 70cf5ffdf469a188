"""The canvas with real mouse and keyboard input: every gesture becomes one undo step, refused
gestures change nothing, and the scene mirrors the model after every step (reference: the model
itself, via scene.check_consistency(), and the project file serialisation project_to_dict)."""
from __future__ import annotations

from itertools import pairwise

import pytest
from conftest import sensor_feedback_loop
from PySide6.QtCore import QMimeData, QPoint, QPointF, Qt
from PySide6.QtGui import QColor, QDragEnterEvent, QDragMoveEvent, QDropEvent, QUndoStack, QWheelEvent
from PySide6.QtWidgets import QApplication

from app.bridge import ModelSignals
from app.canvas import NODE_MIME, DiagramScene, DiagramView
from app.document.editor import DiagramEditor
from app.palette import Palette
from app.theme import ROLE_COLOURS, Theme
from core.io.project_file import project_to_dict
from core.model.diagram import Diagram, Node, Parameter


def feedback_loop() -> Diagram:
    """Invented demo loop: unity-gain reference, controller, plant, sensor on a flipped feedback path."""
    return sensor_feedback_loop("canvas test", ("K*(s + 2)", "s"), "0.05s + 1", [Parameter("K", 2.0, 0.0, 20.0)])


class Canvas:
    """A diagram shown in a real view, with its undo stack and the hints the scene gave."""

    def __init__(self, qtbot, diagram: Diagram, theme: Theme | None = None):
        self.qtbot, self.diagram = qtbot, diagram
        self.stack = QUndoStack()
        self.signals = ModelSignals(diagram)
        self.scene = DiagramScene(diagram, self.signals, theme=theme or Theme.light())
        self.editor = DiagramEditor(self.scene, self.stack)
        self.view = DiagramView(self.scene)
        self.view.resize(900, 500)
        qtbot.addWidget(self.view)
        self.view.show()
        qtbot.waitExposed(self.view)
        self.view.fit_all(max_zoom=1.0)
        self.hints: list[str] = []
        self.scene.statusHint.connect(self.hints.append)

    def at(self, scene_point) -> QPoint:
        p = scene_point if isinstance(scene_point, QPointF) else QPointF(*scene_point)
        return self.view.mapFromScene(p)

    def drag(self, start, end, steps: int = 6) -> None:
        """A real left-button drag on the viewport between two scene points."""
        vp = self.view.viewport()
        a, b = self.at(start), self.at(end)
        self.qtbot.mousePress(vp, Qt.MouseButton.LeftButton, pos=a)
        for i in range(1, steps + 1):
            self.qtbot.mouseMove(vp, a + (b - a) * i / steps)
        self.qtbot.mouseRelease(vp, Qt.MouseButton.LeftButton, pos=b)

    def click(self, point, modifier=Qt.KeyboardModifier.NoModifier) -> None:
        self.qtbot.mouseClick(self.view.viewport(), Qt.MouseButton.LeftButton, modifier, self.at(point))

    def key(self, key, modifier=Qt.KeyboardModifier.NoModifier) -> None:
        self.qtbot.keyClick(self.view.viewport(), key, modifier)

    def port(self, node_id: str, output: bool, index: int = 0) -> QPointF:
        item = self.scene.node_items[node_id]
        return (item.output_port() if output else item.input_port(index)).scenePos()

    def consistent(self) -> bool:
        problems = self.scene.check_consistency()
        assert problems == []
        return True


@pytest.fixture
def canvas(qtbot):
    return Canvas(qtbot, feedback_loop())


@pytest.fixture
def open_pair(qtbot):
    d = Diagram("pair")
    d.add_node(Node("r", "input", 0, 0))
    d.add_node(Node("G", "block", 200, 60, role="plant", num="1", den="s + 1"))
    d.add_node(Node("sum", "sum", 200, 200, signs="+-"))
    return Canvas(qtbot, d)


def test_scene_builds_one_item_per_node_and_wire(canvas):
    assert set(canvas.scene.node_items) == set(canvas.diagram.nodes)
    assert len(canvas.scene.wire_items) == len(canvas.diagram.wires) == 7
    canvas.consistent()


def test_wires_are_orthogonal_and_join_their_ports(canvas):
    for wire in canvas.diagram.wires:
        points = canvas.scene.wire_items[wire.key].points
        assert points[0] == canvas.port(wire.source, True).toTuple()
        assert points[-1] == canvas.port(wire.target, False, wire.port).toTuple()
        for (ax, ay), (bx, by) in pairwise(points):
            assert ax == bx or ay == by, f"{wire.key} has a slanted segment"


def test_flipped_block_has_its_input_on_the_right(canvas):
    h = canvas.diagram.node("H")
    assert canvas.port("H", False).x() > h.x > canvas.port("H", True).x()
    assert canvas.port("C", False).x() < canvas.diagram.node("C").x < canvas.port("C", True).x()


def test_drawing_a_wire_with_a_real_mouse_drag(open_pair):
    c = open_pair
    start = c.stack.count()
    c.drag(c.port("r", True), c.port("G", False))
    assert [w.key for w in c.diagram.wires] == ["r->G:0"]
    assert c.stack.count() == start + 1
    c.consistent()
    c.drag(c.port("G", True), c.port("sum", False, 1) + QPointF(3, 2))  # near the port is enough
    assert [w.key for w in c.diagram.wires] == ["r->G:0", "G->sum:1"]
    c.consistent()
    c.stack.undo()
    c.stack.undo()
    assert c.diagram.wires == [] and c.consistent()


def test_rubber_wire_lights_up_free_input_ports_only(canvas):
    d = canvas.diagram
    d.disconnect("b->H:0")
    vp = canvas.view.viewport()
    ring = canvas.port("b", True) + QPointF(7, 0)  # the branch point's dot moves it; the ring draws wires
    canvas.qtbot.mousePress(vp, Qt.MouseButton.LeftButton, pos=canvas.at(ring))
    canvas.qtbot.mouseMove(vp, canvas.at(canvas.port("H", False)))
    assert canvas.scene.node_items["H"].input_port(0).highlight == "hover"
    assert canvas.scene.node_items["C"].input_port(0).highlight is None  # already fed by e
    canvas.qtbot.mouseRelease(vp, Qt.MouseButton.LeftButton, pos=canvas.at(canvas.port("H", False)))
    assert d.wire_into("H", 0) is not None
    assert all(p.highlight is None for p in canvas.scene.all_input_ports())


def test_refused_connection_gives_a_hint_and_changes_nothing(canvas):
    before, count = project_to_dict(canvas.diagram), canvas.stack.count()
    canvas.drag(canvas.port("C", True), canvas.port("e", False, 1))
    assert canvas.hints and "input 2 of 'e' already has a wire" in canvas.hints[-1].lower()
    canvas.drag(canvas.port("C", True), QPointF(200, 300))  # empty space
    assert "input port" in canvas.hints[-1]
    assert project_to_dict(canvas.diagram) == before and canvas.stack.count() == count
    canvas.consistent()


def test_deleting_a_node_takes_its_wires_and_undo_restores_them_in_place(canvas):
    keys = [w.key for w in canvas.diagram.wires]
    canvas.click((80, 0))
    assert canvas.scene.selected_node_ids() == ["e"]
    canvas.key(Qt.Key.Key_Delete)
    assert "e" not in canvas.diagram.nodes and len(canvas.diagram.wires) == 4
    canvas.consistent()
    canvas.stack.undo()
    assert [w.key for w in canvas.diagram.wires] == keys
    canvas.consistent()


def test_deleting_the_analysed_output_clears_it_and_undo_sets_it_back(canvas):
    canvas.scene.select_node("y")
    canvas.editor.delete_selection()
    assert canvas.diagram.analysis.output is None
    canvas.stack.undo()
    assert canvas.diagram.analysis.output == "y"


def test_moving_nodes_by_drag_is_one_snapped_undo_step(canvas):
    canvas.click((200, 0))
    canvas.click((360, 0), Qt.KeyboardModifier.ControlModifier)
    assert canvas.scene.selected_node_ids() == ["C", "P"]
    count = canvas.stack.count()
    canvas.drag((200, 0), (243, 57), steps=8)
    assert canvas.stack.count() == count + 1
    assert (canvas.diagram.node("C").x, canvas.diagram.node("C").y) == (240, 60)  # snapped to 10
    assert (canvas.diagram.node("P").x, canvas.diagram.node("P").y) == (400, 60)
    canvas.consistent()
    canvas.stack.undo()
    assert (canvas.diagram.node("C").x, canvas.diagram.node("P").x) == (200, 360)
    canvas.consistent()


def test_arrow_key_nudges_merge_into_one_step(canvas):
    canvas.click((200, 0))
    count = canvas.stack.count()
    for _ in range(3):
        canvas.key(Qt.Key.Key_Right)
    canvas.key(Qt.Key.Key_Down, Qt.KeyboardModifier.ShiftModifier)
    c = canvas.diagram.node("C")
    assert (c.x, c.y) == (230, 100)
    assert canvas.stack.count() == count + 1
    canvas.consistent()
    canvas.stack.undo()
    assert (canvas.diagram.node("C").x, canvas.diagram.node("C").y) == (200, 0)


def test_copy_and_paste_make_new_ids_and_copy_internal_wires(canvas):
    canvas.scene.select_node("C")
    canvas.scene.node_items["P"].setSelected(True)
    count = canvas.stack.count()
    canvas.key(Qt.Key.Key_C, Qt.KeyboardModifier.ControlModifier)
    canvas.key(Qt.Key.Key_V, Qt.KeyboardModifier.ControlModifier)
    assert canvas.stack.count() == count + 1
    assert {"C2", "P2"} <= set(canvas.diagram.nodes)
    assert canvas.diagram.wires[-1].key == "C2->P2:0"  # the wire between the copies, and no other
    assert sum(1 for w in canvas.diagram.wires if "C2" in (w.source, w.target)) == 1
    assert canvas.diagram.node("C2").num == "K*(s + 2)"
    assert canvas.diagram.node("C2").x == canvas.diagram.node("C").x + 30
    assert canvas.scene.selected_node_ids() == ["C2", "P2"]
    canvas.consistent()
    canvas.stack.undo()
    assert "C2" not in canvas.diagram.nodes and canvas.consistent()


def test_clicking_a_sign_flips_it(canvas):
    item = canvas.scene.node_items["e"]
    spot = item.mapToScene(item._sign_spots[1])
    canvas.click(spot)
    assert canvas.diagram.node("e").signs == "++"
    canvas.consistent()
    canvas.stack.undo()
    assert canvas.diagram.node("e").signs == "+-"


def test_key_f_flips_the_selected_block(canvas):
    canvas.click((360, 0))
    canvas.key(Qt.Key.Key_F)
    assert canvas.diagram.node("P").flipped is True
    assert canvas.port("P", False).x() > canvas.diagram.node("P").x
    canvas.consistent()


def test_dragging_a_wire_segment_adds_bends(canvas):
    wire = canvas.scene.wire_items["H->e:1"]
    runs = [(a, b) for a, b in zip(wire.points, wire.points[1:]) if a[1] == b[1]]
    (ax, ay), (bx, _) = max(runs, key=lambda r: abs(r[0][0] - r[1][0]))  # the long run under the loop
    middle = ((ax + bx) / 2, ay)
    count = canvas.stack.count()
    canvas.drag(middle, (middle[0], ay + 42))
    bends = canvas.diagram.wires[canvas.diagram.wire_index("H->e:1")].bends
    assert bends and all(y == ay + 40 for _, y in bends if y != ay)
    assert canvas.stack.count() == count + 1
    canvas.consistent()


def test_palette_places_nodes_and_first_terminals_become_analysis_ends(qtbot):
    c = Canvas(qtbot, Diagram("empty"))
    palette = Palette(c.editor)
    qtbot.addWidget(palette)
    for key in [("input", ""), ("sum", "3"), ("block", "plant"), ("block", "plant"), ("output", ""),
                ("branch", "")]:
        qtbot.mouseClick(palette.buttons[key], Qt.MouseButton.LeftButton)
    d = c.diagram
    assert list(d.nodes) == ["r", "sum", "P", "P2", "y", "b"]
    assert d.node("sum").signs == "+-+" and d.node("P").den == "s + 1"
    assert (d.analysis.input, d.analysis.output) == ("r", "y")
    rects = [c.scene.node_items[n].sceneBoundingRect() for n in d.nodes]
    assert not any(a.intersects(b) for i, a in enumerate(rects) for b in rects[i + 1:])
    assert all(n.x % 10 == 0 and n.y % 10 == 0 for n in d.nodes.values())
    assert c.stack.count() == 6
    c.stack.undo()
    c.stack.undo()  # the output and its analysis setting go in one step
    assert "y" not in d.nodes and d.analysis.output is None
    c.consistent()


@pytest.mark.filterwarnings("ignore::DeprecationWarning")  # PySide marks the QPoint drag-event constructors
def test_palette_drop_places_at_the_drop_point(qtbot):
    c = Canvas(qtbot, feedback_loop())
    mime = QMimeData()
    mime.setData(NODE_MIME, b"block:actuator")
    target = c.at((120, 200))
    vp = c.view.viewport()
    args = (Qt.DropAction.CopyAction, mime, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier)
    for event in (QDragEnterEvent(target, *args), QDragMoveEvent(target, *args), QDropEvent(QPointF(target), *args)):
        QApplication.sendEvent(vp, event)
    a = c.diagram.node("A")
    assert a.role == "actuator" and abs(a.x - 120) <= 10 and abs(a.y - 200) <= 10
    c.consistent()


def test_undo_everything_then_redo_everything(canvas):
    d, scene = canvas.diagram, canvas.scene
    start = project_to_dict(d)
    d_steps = [
        lambda: canvas.drag((200, 0), (200, -40)),
        lambda: canvas.key(Qt.Key.Key_Left),
        lambda: canvas.key(Qt.Key.Key_F),
        lambda: canvas.editor.place_node("block", "gain"),
        lambda: canvas.drag(canvas.port("G", True), QPointF(600, 300)),  # refused: nothing happens
        lambda: canvas.click(canvas.scene.node_items["e"].mapToScene(canvas.scene.node_items["e"]._sign_spots[0])),
        lambda: (scene.select_node("P"), canvas.key(Qt.Key.Key_Delete)),
        lambda: (scene.select_node("b"), canvas.editor.copy_selection(), canvas.editor.paste()),
    ]
    for step in d_steps:
        step()
        canvas.consistent()
    end = project_to_dict(d)
    assert end != start
    while canvas.stack.canUndo():
        canvas.stack.undo()
        canvas.consistent()
    assert project_to_dict(d) == start
    while canvas.stack.canRedo():
        canvas.stack.redo()
        canvas.consistent()
    assert project_to_dict(d) == end


def test_zoom_keys_and_fit(canvas):
    z = canvas.view.zoom()
    canvas.key(Qt.Key.Key_Plus)
    assert canvas.view.zoom() == pytest.approx(z * 1.2)
    canvas.key(Qt.Key.Key_Minus)
    assert canvas.view.zoom() == pytest.approx(z)
    canvas.view.fit_all()
    visible = canvas.view.mapToScene(canvas.view.viewport().rect()).boundingRect()
    for item in canvas.scene.node_items.values():
        assert visible.contains(item.sceneBoundingRect())


def test_middle_button_pans_and_ctrl_wheel_zooms(canvas):
    vp = canvas.view.viewport()
    h, v = canvas.view.horizontalScrollBar(), canvas.view.verticalScrollBar()
    before = (h.value(), v.value())
    canvas.qtbot.mousePress(vp, Qt.MouseButton.MiddleButton, pos=QPoint(400, 250))
    canvas.qtbot.mouseMove(vp, QPoint(340, 210))
    canvas.qtbot.mouseRelease(vp, Qt.MouseButton.MiddleButton, pos=QPoint(340, 210))
    assert (h.value(), v.value()) == (before[0] + 60, before[1] + 40)
    assert canvas.stack.count() == 0  # panning is not an edit
    z = canvas.view.zoom()
    wheel = QWheelEvent(QPointF(400, 250), QPointF(vp.mapToGlobal(QPoint(400, 250))), QPoint(0, 0), QPoint(0, 120),
                        Qt.MouseButton.NoButton, Qt.KeyboardModifier.ControlModifier, Qt.ScrollPhase.NoScrollPhase, False)
    QApplication.sendEvent(vp, wheel)
    assert canvas.view.zoom() == pytest.approx(z * 1.2)


def _has_colour(image, colour: QColor, tolerance: int = 12) -> bool:
    for y in range(0, image.height(), 2):
        for x in range(0, image.width(), 2):
            c = image.pixelColor(x, y)
            if abs(c.red() - colour.red()) + abs(c.green() - colour.green()) + abs(c.blue() - colour.blue()) < tolerance:
                return True
    return False


@pytest.mark.parametrize("theme", [Theme.light(), Theme.dark()], ids=["light", "dark"])
def test_rendering_shows_role_bands_on_the_theme_canvas(qtbot, tmp_path, theme):
    c = Canvas(qtbot, feedback_loop(), theme)
    image = c.view.grab().toImage()
    image.save(str(tmp_path / "canvas.png"))
    assert image.pixelColor(3, 3) == theme.canvas
    for role in ("controller", "plant", "sensor"):
        assert _has_colour(image, QColor(ROLE_COLOURS[role])), role


def test_alt_drag_from_a_branch_dot_draws_a_wire_and_a_plain_drag_moves_it(qtbot):
    d = feedback_loop()
    d.add_node(Node("b2", "branch", 460, 200))
    d.add_node(Node("G2", "block", 640, 200, role="gain"))
    c = Canvas(qtbot, d)
    dot = QPointF(460, 200)
    vp = c.view.viewport()
    a, b = c.at(dot), c.at(c.port("G2", False))
    qtbot.mousePress(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.AltModifier, a)
    for i in range(1, 7):
        qtbot.mouseMove(vp, a + (b - a) * i / 6)
    qtbot.mouseRelease(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.AltModifier, b)
    assert "b2->G2:0" in [w.key for w in d.wires]
    assert (d.node("b2").x, d.node("b2").y) == (460, 200)  # the dot did not move
    c.drag(dot, dot + QPointF(0, 40))  # without Alt the dot moves the branch point
    assert (d.node("b2").x, d.node("b2").y) == (460, 240)
    c.consistent()


def test_ports_and_signs_explain_themselves(canvas):
    p_out = canvas.scene.node_items["P"].output_port()
    assert "Output of P" in p_out.toolTip() and "drag to an input" in p_out.toolTip()
    e_in = canvas.scene.node_items["e"].input_port(1)
    assert "input 2 of e" in e_in.toolTip() and "\u2212" in e_in.toolTip()
    branch_port = canvas.scene.node_items["b"].output_port()
    assert "ring" in branch_port.toolTip()
    # hovering the branch point puts the how-to in the status bar
    canvas.qtbot.mouseMove(canvas.view.viewport(), canvas.at((300, 300)))
    canvas.qtbot.mouseMove(canvas.view.viewport(), canvas.at((460, 0)))
    assert any("drag from the ring" in h for h in canvas.hints)
    # over a sign the tooltip offers the flip
    item = canvas.scene.node_items["e"]
    spot = item.mapToScene(item._sign_spots[1])
    canvas.qtbot.mouseMove(canvas.view.viewport(), canvas.at(spot))
    assert "click to flip it to +" in item.toolTip()


def test_canvas_follows_a_switch_to_a_dark_palette(canvas):
    from app.theme import dark_palette
    app = QApplication.instance()
    before = app.palette()
    try:
        app.setPalette(dark_palette())
        QApplication.processEvents()
        assert canvas.scene.theme == Theme.dark()
        image = canvas.view.grab().toImage()
        assert image.pixelColor(3, 3) == Theme.dark().canvas
    finally:
        app.setPalette(before)
        QApplication.processEvents()
    assert canvas.scene.theme == Theme.light()


def test_a_wire_drawn_back_to_the_left_runs_under_the_forward_path(qtbot):
    d = Diagram("back wire")
    for n in [Node("e", "sum", 0, 0, signs="+-"), Node("C", "block", 150, 0, role="controller"),
              Node("P", "block", 300, 0, role="plant", num="1", den="s^3 + 2s^2 + 3s + 1")]:
        d.add_node(n)
    d.connect("e", "C", 0)
    d.connect("C", "P", 0)
    c = Canvas(qtbot, d)
    c.drag(c.port("P", True), c.port("e", False, 1))  # the feedback wire into the sum's lower input
    wire = c.scene.wire_items["P->e:1"]
    lowest = max(y for _, y in wire.points)
    for node_id in ("C", "P"):
        assert lowest > c.scene.node_items[node_id].sceneBoundingRect().bottom(), node_id
    # only the run under the blocks is below them: the wire ends at the sum's lower port
    assert wire.points[-1] == c.port("e", False, 1).toTuple()
    c.consistent()


def test_palette_clicks_in_a_row_lay_out_a_left_to_right_chain(qtbot):
    c = Canvas(qtbot, Diagram("empty"))
    palette = Palette(c.editor)
    qtbot.addWidget(palette)
    for key in [("input", ""), ("sum", "2"), ("block", "controller"), ("block", "plant"), ("output", "")]:
        qtbot.mouseClick(palette.buttons[key], Qt.MouseButton.LeftButton)
    nodes = list(c.diagram.nodes.values())
    assert len({n.y for n in nodes}) == 1  # one row
    rects = [c.scene.node_items[n.id].sceneBoundingRect() for n in nodes]
    assert all(a.right() < b.left() for a, b in pairwise(rects))  # left to right, no overlap
    c.consistent()


def test_process_ends_cleanly_after_copying_to_the_clipboard():
    # Qt frees clipboard data made in Python after Python has: without releasing it at exit the
    # process crashes on its way out (seen with the offscreen platform), which CI reads as a failure
    import subprocess
    import sys
    script = (
        "from PySide6.QtWidgets import QApplication\n"
        "from PySide6.QtGui import QUndoStack\n"
        "app = QApplication([])\n"
        "from app.bridge import ModelSignals\n"
        "from app.canvas import DiagramScene\n"
        "from app.document.editor import DiagramEditor\n"
        "import conftest\n"
        "d = conftest.sensor_feedback_loop('exit', ('1', '1'), 's + 1')\n"
        "scene = DiagramScene(d, ModelSignals(d))\n"
        "editor = DiagramEditor(scene, QUndoStack())\n"
        "scene.select_node('C')\n"
        "editor.copy_selection()\n"
        "print('copied')\n")
    import os
    from pathlib import Path
    here = Path(__file__).resolve().parent
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen",
               PYTHONPATH=os.pathsep.join([str(here.parents[1]), str(here)]))
    done = subprocess.run([sys.executable, "-c", script], env=env, capture_output=True, text=True,
                          timeout=120, check=False)
    assert done.returncode == 0 and "copied" in done.stdout, done.stderr
