"""The whole workflow through the real window: build a loop from an empty project, analyse it,
undo/redo everything, save and reopen, move the slider, and survive garbage input.

Reference loop (from memory, the classic unity-feedback Routh example): controller K, plant
1/(s(s+1)(s+2)); closed loop s^3 + 3s^2 + 2s + K; Routh first column 1, 3, (6 - K)/3, K; stable
exactly for 0 < K < 6, where a pair of poles crosses the imaginary axis at s = ±j*sqrt(2).
"""
from __future__ import annotations

import numpy as np
from PySide6.QtCore import QPoint, QPointF, Qt

from core.io.project_file import load_project, project_to_dict


def sorted_roots(values) -> np.ndarray:
    values = np.asarray(values, dtype=complex)
    return values[np.lexsort((values.imag, values.real))]


def closed_loop_poles(K: float) -> np.ndarray:
    # reference: numpy.roots of s^3 + 3s^2 + 2s + K
    return sorted_roots(np.roots([1.0, 3.0, 2.0, K]))


def place(qtbot, window, kind: str, role: str = "") -> str:
    before = set(window.diagram.nodes)
    qtbot.mouseClick(window.palette_panel.buttons[(kind, role)], Qt.MouseButton.LeftButton)
    (new,) = set(window.diagram.nodes) - before
    return new


def move_node(window, node_id: str, x: float, y: float) -> None:
    from app.document.commands import MoveNodesCommand, push
    node = window.diagram.node(node_id)
    push(window.undo_stack, MoveNodesCommand(window.diagram, {node_id: ((node.x, node.y), (x, y))}))


def drag_wire(qtbot, window, source: str, target: str, port: int) -> None:
    """A real mouse drag on the canvas from ``source``'s output port to input ``port`` of ``target``."""
    view, scene = window.view, window.scene
    grab = scene.node_items[source].output_port().scenePos()
    if window.diagram.node(source).kind == "branch":
        grab += QPointF(4, 3)  # a branch's centre dot moves it; its rim starts a wire
    start = view.mapFromScene(grab)
    end = view.mapFromScene(scene.node_items[target].input_port(port).scenePos())
    viewport = view.viewport()
    qtbot.mousePress(viewport, Qt.MouseButton.LeftButton, pos=start)
    for t in (0.25, 0.5, 0.75, 1.0):
        step = QPoint(round(start.x() + t * (end.x() - start.x())), round(start.y() + t * (end.y() - start.y())))
        qtbot.mouseMove(viewport, pos=step)
    qtbot.mouseRelease(viewport, Qt.MouseButton.LeftButton, pos=end)


def type_and_enter(qtbot, edit, text: str) -> None:
    edit.setFocus()
    edit.selectAll()
    qtbot.keyClicks(edit, text)
    qtbot.keyClick(edit, Qt.Key.Key_Return)


def select(window, node_id: str) -> None:
    window.scene.select_node(node_id)
    assert window.inspector.node_id == node_id


def test_full_workflow(qtbot, window, dialogs, tmp_path, analysed):
    window.act_new.trigger()
    start = project_to_dict(window.diagram)
    assert window.diagram.nodes == {}

    # nodes from the palette
    r = place(qtbot, window, "input")
    e = place(qtbot, window, "sum", "2")
    c = place(qtbot, window, "block", "controller")
    p = place(qtbot, window, "block", "plant")
    b = place(qtbot, window, "branch")
    y = place(qtbot, window, "output")
    for node_id, x in ((r, -300), (e, -180), (c, -40), (p, 140), (b, 300), (y, 400)):
        move_node(window, node_id, x, 0)
    move_node(window, b, 300, 0)
    window.view.fit_all()
    qtbot.wait(20)

    # wires: real mouse drags from port to port
    drag_wire(qtbot, window, r, e, 0)
    assert [w.key for w in window.diagram.wires] == [f"{r}->{e}:0"]
    for source, target, port in ((e, c, 0), (c, p, 0), (p, b, 0), (b, y, 0), (b, e, 1)):
        drag_wire(qtbot, window, source, target, port)
    assert {w.key for w in window.diagram.wires} == {f"{r}->{e}:0", f"{e}->{c}:0", f"{c}->{p}:0", f"{p}->{b}:0",
                                                     f"{b}->{y}:0", f"{b}->{e}:1"}
    assert window.diagram.node(e).signs == "+-"
    assert (window.diagram.analysis.input, window.diagram.analysis.output) == (r, y)

    # block polynomials typed in the inspector
    select(window, p)
    type_and_enter(qtbot, window.inspector.den.edit, "s*(s+1)*(s+2)")
    select(window, c)
    type_and_enter(qtbot, window.inspector.num.edit, "K")
    assert window.diagram.node(p).den == "s*(s+1)*(s+2)" and window.diagram.node(c).num == "K"
    assert window.diagram.tuning_parameter == "K"  # the first parameter became the tuning parameter

    # K's nominal value through the parameters table; K stays the tuning choice
    table = window.parameters.table
    assert table.item(0, 0).data(Qt.ItemDataRole.UserRole) == "K"
    assert window.parameters.tune_group.button(0).isChecked()
    table.item(0, 1).setText("2")
    assert window.diagram.parameters["K"].nominal == 2.0

    analysed(window)
    report = window.controller.result.report
    assert report is not None, window.controller.result.message
    # Routh panel first column at K = 2: 1, 3, (6 - K)/3 = 4/3, K = 2
    assert [row[0].exact for row in window.routh_panel.values] == ["1", "3", "4/3", "2"]
    assert report.stable_range.to_dict()["intervals"] == [[0.0, 6.0]]
    assert "6" in window.range_panel.details_html()
    assert np.allclose(sorted_roots(window.pole_map.plotted_poles()), closed_loop_poles(2.0), atol=1e-9)
    assert window.verdict.text().startswith("STABLE")
    built = project_to_dict(window.diagram)

    # undo everything, redo everything
    while window.undo_stack.canUndo():
        window.undo_stack.undo()
    assert project_to_dict(window.diagram) == start
    while window.undo_stack.canRedo():
        window.undo_stack.redo()
    assert project_to_dict(window.diagram) == built

    # save, reopen, compare
    target = tmp_path / "workflow.loop.json"
    dialogs.answers["save_path"] = str(target)
    assert window.files.save()
    assert window.files.open(target)
    assert project_to_dict(window.diagram) == built
    assert project_to_dict(load_project(target)) == built

    # the slider moves the poles
    analysed(window)
    slider = window.pole_map.slider
    slider.setSliderDown(True)
    slider.setValue(slider.maximum() * 45 // 100)  # K = 4.5 on 0..10
    slider.setSliderDown(False)
    K = window.controller.current_value
    assert abs(K - 4.5) < 1e-9
    assert np.allclose(sorted_roots(window.pole_map.plotted_poles()), closed_loop_poles(K), atol=1e-9)
    assert not np.allclose(sorted_roots(window.pole_map.plotted_poles()), closed_loop_poles(2.0), atol=1e-3)

    # garbage in a block field: an error under the field, no exception, the model unchanged
    before = project_to_dict(window.diagram)
    select(window, p)
    type_and_enter(qtbot, window.inspector.den.edit, "s*(s+1)*(s+")
    assert window.inspector.den.error.isVisible()
    assert "column" in window.inspector.den.error.text()
    window.view.setFocus()
    qtbot.wait(10)
    assert project_to_dict(window.diagram) == before
