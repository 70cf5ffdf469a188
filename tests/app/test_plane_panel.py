"""The stability-plane panel: axes chosen as undoable analysis settings (saved in the file), the
plane drawn from the analysis' exact labels, and a click that sets both nominal values at once."""
from __future__ import annotations

import pytest
import sympy as sp
from test_controller import unity_loop

from core.errors import ModelError
from core.io.project_file import load_project, save_project
from core.model.diagram import Parameter


@pytest.fixture
def pi_path(tmp_path):
    """(Kp s + Ki) / (s (s+1) (s+3)) in unity feedback, an invented PI loop; plane axes Kp, Ki."""
    d = unity_loop(num="Kp*s + Ki", den="s*(s+1)*(s+3)")
    d.set_parameter(Parameter("Kp", 2.0, 0.0, 20.0))
    d.set_parameter(Parameter("Ki", 1.0, 0.0, 40.0))
    d.set_tuning_parameter("Kp")
    d.set_analysis(plane_x="Kp", plane_y="Ki")
    path = tmp_path / "pi.loop.json"
    save_project(d, path)
    return path


def test_plane_axes_round_trip_and_are_checked(pi_path):
    d = load_project(pi_path)
    assert (d.analysis.plane_x, d.analysis.plane_y) == ("Kp", "Ki")
    with pytest.raises(ModelError):
        d.set_analysis(plane_y="Kp")  # the same parameter twice


def test_plane_labels_agree_with_the_hurwitz_conditions(window, pi_path, analysed):
    # Reference (sympy, Hurwitz): s^3 + 4 s^2 + (3 + Kp) s + Ki is stable iff Ki > 0 and 4 (3 + Kp) > Ki.
    assert window.files.open(pi_path, ask=False)
    analysed(window)
    plane = window.controller.result.plane
    assert plane is not None, window.controller.result.plane_error
    kp, ki = sp.symbols("Kp Ki")
    stable = sp.And(ki > 0, 4 * (3 + kp) - ki > 0)
    for j in range(0, len(plane.ys), 7):
        for i in range(0, len(plane.xs), 7):
            label = plane.grid[j][i]
            if label >= 0:
                want = bool(stable.subs({kp: sp.nsimplify(plane.xs[i]), ki: sp.nsimplify(plane.ys[j])}))
                assert (label == 0) == want, (plane.xs[i], plane.ys[j], label)
    assert "Stable (shaded)" in window.plane_panel.caption.text()
    assert len(window.plane_panel.arcs) >= 1


def test_a_click_sets_both_nominal_values_in_one_undo_step(window, pi_path, analysed):
    assert window.files.open(pi_path, ask=False)
    analysed(window)
    before = window.undo_stack.count()
    window.plane_panel.set_point(5.01234, 12.3456)
    assert window.undo_stack.count() == before + 1
    assert (window.diagram.parameters["Kp"].nominal, window.diagram.parameters["Ki"].nominal) == (5.01, 12.35)
    window.undo_stack.undo()
    assert (window.diagram.parameters["Kp"].nominal, window.diagram.parameters["Ki"].nominal) == (2.0, 1.0)


def test_choosing_an_axis_is_undoable(window, pi_path, analysed):
    assert window.files.open(pi_path, ask=False)
    analysed(window)
    panel = window.plane_panel
    panel.y_axis.setCurrentIndex(panel.y_axis.findText("—"))
    panel.y_axis.activated.emit(panel.y_axis.currentIndex())
    assert window.diagram.analysis.plane_y is None
    analysed(window)
    assert window.controller.result.plane is None and "Choose two parameters" in panel.caption.text()
    window.undo_stack.undo()
    assert window.diagram.analysis.plane_y == "Ki"


def test_the_report_carries_the_plane_with_its_exact_regions(window, pi_path, analysed, tmp_path):
    from app.report_export import export_report
    assert window.files.open(pi_path, ask=False)
    analysed(window)
    html = export_report(window, tmp_path / "pi.html").read_text(encoding="utf-8")
    assert "Stability plane" in html and "Exact point inside" in html and "Kp = 43/6" in html


def test_dragging_the_marker_sets_both_values_once(window, pi_path, analysed):
    assert window.files.open(pi_path, ask=False)
    analysed(window)
    panel = window.plane_panel
    assert panel.nominal_point() == (2.0, 1.0)
    before = window.undo_stack.count()
    panel.nominal.setPos(8.0, 20.0)
    panel.nominal.sigPositionChangeFinished.emit(panel.nominal)  # what the end of a drag emits
    assert window.undo_stack.count() == before + 1
    assert (window.diagram.parameters["Kp"].nominal, window.diagram.parameters["Ki"].nominal) == (8.0, 20.0)
    panel.nominal.setPos(50.0, 20.0)  # dropped outside the rectangle: nothing changes, the marker returns
    panel.nominal.sigPositionChangeFinished.emit(panel.nominal)
    assert window.undo_stack.count() == before + 1 and panel.nominal_point() == (8.0, 20.0)


def test_hovering_a_crossing_boundary_tells_its_frequency(window, pi_path, analysed):
    # Reference (by hand): on 4 (3 + Kp) = Ki the pair sits at s = ±j sqrt(3 + Kp); at Kp = 6, ±j3.
    assert window.files.open(pi_path, ask=False)
    analysed(window)
    tip = window.plane_panel.boundary_tip(6.0, 36.0)
    assert tip.startswith("pair on the imaginary axis at s = ±j")
    omega = float(tip.split("±j")[1].split(" rad/s")[0])
    assert abs(omega - 3.0) < 0.1
    assert window.plane_panel.boundary_tip(15.0, 5.0) == ""  # far from every boundary
