"""The analysis panels against outside references (numpy roots, a hand-written Routh array, sympy)."""
from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from fractions import Fraction

import numpy as np
import pytest
import sympy
from PySide6.QtCore import Qt
from PySide6.QtGui import QGuiApplication, QUndoStack
from test_controller import unity_loop

from app.bridge import ModelSignals
from app.controller import AnalysisController
from app.document.editing import commit_nominals
from app.panels import PoleMap, PolynomialPanel, RangePanel, RouthPanel, attach
from app.panels.polynomial_panel import factored
from core.algebra.polynomial import ParametricPolynomial
from core.model.diagram import Diagram, Node, Parameter
from core.present.report_text import routh_table


def third_order(K: float) -> list[float]:
    """s(s+1)(s+2) + K, the unity-feedback loop K/(s(s+1)(s+2)) (from memory, textbook example)."""
    return [1.0, 3.0, 2.0, K]


@pytest.fixture
def loop(qtbot):
    """The third-order loop analysed, with all four panels attached to its controller."""
    d = unity_loop(nominal=2.0)
    signals = ModelSignals(d)
    ctl = AnalysisController(d, signals)
    commit_nominals(ctl, d, QUndoStack())
    panels = {"poly": PolynomialPanel(), "routh": RouthPanel(), "range": RangePanel(), "map": PoleMap()}
    for p in panels.values():
        qtbot.addWidget(p)
        attach(p, ctl)
    assert ctl.wait_for_idle(10000)
    assert ctl.result.ok, ctl.result.message
    return d, ctl, panels


def sorted_roots(z) -> np.ndarray:
    z = np.asarray(z, dtype=complex)
    return z[np.lexsort((np.round(z.imag, 9), np.round(z.real, 9)))]


def test_stable_interval_is_zero_to_six(loop):
    _, ctl, panels = loop
    line = panels["range"].line.data
    assert line.stable == [(0.0, 6.0)]
    # reference: numpy roots just inside and just outside the upper end
    assert np.all(np.roots(third_order(5.9)).real < 0)
    assert np.any(np.roots(third_order(6.1)).real > 0)
    assert np.any(np.roots(third_order(-0.1)).real > 0)
    rng = panels["range"]
    ctl.set_current_value(5.9)
    assert "STABLE" in rng.verdict.text() and "UNSTABLE" not in rng.verdict.text()
    ctl.set_current_value(6.1)
    assert "UNSTABLE" in rng.verdict.text() and "2 poles in the right half plane" in rng.verdict.text()
    # at K = 6 the pair crosses at s = ±j sqrt(2) (s^3+3s^2+2s+6 = (s+3)(s^2+2), from memory)
    assert "±j1.41421" in rng.details.text()


def test_pole_map_draws_numpy_roots_and_follows_the_slider(loop, qtbot):
    _, ctl, panels = loop
    pole_map = panels["map"]
    assert np.allclose(sorted_roots(pole_map.plotted_poles()), sorted_roots(np.roots(third_order(2.0))))
    # drag the slider: live value, poles at the new value (reference: numpy.roots)
    pole_map.slider.setSliderDown(True)
    pole_map.slider.setValue(450)  # 0..10 over 1000 steps -> K = 4.5
    assert ctl.current_value == pytest.approx(4.5)
    assert np.allclose(sorted_roots(pole_map.plotted_poles()), sorted_roots(np.roots(third_order(4.5))))
    pole_map.slider.setSliderDown(False)  # release commits the value as the nominal
    assert ctl.wait_for_idle(10000)
    assert loop[0].parameters["K"].nominal == pytest.approx(4.5)
    assert np.allclose(sorted_roots(pole_map.plotted_poles()), sorted_roots(np.roots(third_order(4.5))))


def test_pole_map_paths_are_numpy_roots(loop):
    _, ctl, panels = loop
    result = ctl.result
    for i in (0, 123, 399):  # a few samples of the precomputed paths
        want = sorted_roots(np.roots(third_order(result.path_values[i])))
        assert np.allclose(sorted_roots(result.paths[i]), want, atol=1e-7)
    x, _ = panels["map"].paths.getData()
    assert np.isfinite(x).sum() == result.paths.size


def routh_at(coeffs: list[Fraction]) -> list[list[Fraction]]:
    """Textbook Routh array (Routh 1877, as in Ogata ch. 5) without special cases; from memory."""
    n = len(coeffs) - 1
    width = n // 2 + 1
    rows = [coeffs[0::2], coeffs[1::2]]
    rows = [r + [Fraction(0)] * (width - len(r)) for r in rows]
    for _ in range(n - 1):
        up, cur = rows[-2], rows[-1]
        rows.append([(cur[0] * up[j + 1] - up[0] * cur[j + 1]) / cur[0] for j in range(width - 1)] + [Fraction(0)])
    return rows


def test_routh_values_at_current_value(loop):
    _, ctl, panels = loop
    ctl.set_current_value(4.5)
    want = routh_at([Fraction(1), Fraction(3), Fraction(2), Fraction(9, 2)])
    got = panels["routh"].values
    for row_got, row_want in zip(got, want):
        for entry, ref in zip(row_got, row_want):
            assert Fraction(entry.exact) == ref
    # the symbolic s^1 entry, -K/3 + 2 (from memory), read by sympy and evaluated at 4.5
    K = sympy.Symbol("K")
    assert sympy.Rational(got[2][0].exact) == (2 - K / 3).subs(K, sympy.Rational(9, 2))
    # above K = 6 the s^1 entry turns negative: two sign changes, two right-half-plane poles
    ctl.set_current_value(7.0)
    assert panels["routh"].sign_changes() == 2
    assert np.sum(np.roots(third_order(7.0)).real > 0) == 2  # reference: numpy


def test_routh_copy_as_text(loop, qtbot):
    _, ctl, panels = loop
    panels["routh"].copy_as_text()
    assert QGuiApplication.clipboard().text() == "\n".join(routh_table(ctl.result.report))


def test_routh_special_row_is_annotated(qtbot):
    d = unity_loop(den="s^4 + s^3 + 2s^2 + 2s")  # s^4+s^3+2s^2+2s+K: zero first element in row s^2
    ctl = AnalysisController(d, ModelSignals(d))
    panel = RouthPanel()
    qtbot.addWidget(panel)
    attach(panel, ctl)
    assert ctl.wait_for_idle(10000) and ctl.result.ok
    assert ctl.result.report.routh.special
    assert "ε" in panel.notes.text()
    labels = [panel.table.verticalHeaderItem(r).text() for r in range(panel.table.rowCount())]
    assert "s² *" in labels


def test_routh_panel_says_why_a_huge_array_is_not_shown(qtbot):
    d = unity_loop(den="(s+1)^80")  # (s+1)^80 + K: symbolic entries beyond the display cap
    ctl = AnalysisController(d, ModelSignals(d))
    panel = RouthPanel()
    qtbot.addWidget(panel)
    attach(panel, ctl)
    assert ctl.wait_for_idle(60000) and ctl.result.ok, ctl.result.message
    assert ctl.result.report.routh.omitted
    assert panel.message.text() == f"Routh array not shown: {ctl.result.report.routh.omitted}"
    assert not panel.message.isHidden() and panel.table.rowCount() == 0


def test_factored_form_agrees_with_sympy():
    # (s + 1)(s^2 + K s + 2), expanded: s^3 + (K+1) s^2 + (K+2) s + 2
    from flint import fmpq_poly
    poly = ParametricPolynomial.from_coefficients([1, fmpq_poly([1, 1]), fmpq_poly([2, 1]), 2], "K")
    s, K = sympy.symbols("s K")
    _, sym = sympy.factor_list(s**3 + (K + 1) * s**2 + (K + 2) * s + 2)  # reference: sympy
    assert len(sym) == 2
    assert factored(poly) in ("(s + 1) (s^2 + s*K + 2)", "(s^2 + s*K + 2) (s + 1)")
    assert factored(ParametricPolynomial.from_coefficients([1, 3, 2, fmpq_poly([0, 1])], "K")) is None


def test_hidden_mode_is_named(qtbot):
    # C = K (s+1)/s cancels the plant pole at -1 of G = 1/((s+1)(s+2)); the mode at -1 stays in the loop
    d = Diagram(name="cancel")
    for node in (Node("r", "input"), Node("e", "sum", signs="+-"),
                 Node("C", "block", role="controller", num="K (s+1)", den="s"),
                 Node("G", "block", role="plant", num="1", den="(s+1)(s+2)"), Node("b", "branch"),
                 Node("y", "output")):
        d.add_node(node)
    for src, dst, port in (("r", "e", 0), ("e", "C", 0), ("C", "G", 0), ("G", "b", 0), ("b", "y", 0),
                           ("b", "e", 1)):
        d.connect(src, dst, port)
    d.set_parameter(Parameter("K", 1.0, 0.0, 10.0))
    d.set_tuning_parameter("K")
    d.set_analysis(input="r", output="y")
    ctl = AnalysisController(d, ModelSignals(d))
    panel = PolynomialPanel()
    qtbot.addWidget(panel)
    attach(panel, ctl)
    assert ctl.wait_for_idle(10000) and ctl.result.ok, ctl.result.message
    text = panel.view.toPlainText()
    assert "Hidden modes" in text and "s = −1 sits in G" in text
    # characteristic polynomial s(s+1)(s+2) + K(s+1) = (s+1)(s^2 + 2s + K): numpy finds -1 among its roots
    assert np.any(np.isclose(np.roots([1, 3, 2 + 1, 1]), -1))


def test_panels_clear_on_error_result(loop, qtbot):
    d, ctl, panels = loop
    d.set_parameter(Parameter("T", 1.0, 0.0, 2.0))
    d.set_tuning_parameter("T")  # in no block: E405
    assert ctl.wait_for_idle(10000)
    assert ctl.result.error is not None
    assert panels["poly"].view.toPlainText() == ""
    assert panels["routh"].table.rowCount() == 0
    assert panels["map"].plotted_poles().size == 0
    assert not panels["map"].slider.isEnabled()


@pytest.fixture
def fifth_order(qtbot):
    """A fifth-order loop with long symbolic Routh entries: K(s + 1)/s * 8/(s + 8) * 3/((s + 0.6)(s + 5))
    with a 25/(s + 25) sensor (invented demo numbers), K tuned over 0..20."""
    d = Diagram(name="fifth order")
    for node in (Node("r", "input"), Node("e", "sum", signs="+-"),
                 Node("C", "block", role="controller", num="K (s+1)", den="s"),
                 Node("A", "block", role="actuator", num="8", den="s+8"),
                 Node("P", "block", role="plant", num="3", den="(s+0.6)(s+5)"), Node("b", "branch"),
                 Node("H", "block", role="sensor", num="25", den="s+25"), Node("y", "output")):
        d.add_node(node)
    for src, dst, port in (("r", "e", 0), ("e", "C", 0), ("C", "A", 0), ("A", "P", 0), ("P", "b", 0),
                           ("b", "y", 0), ("b", "H", 0), ("H", "e", 1)):
        d.connect(src, dst, port)
    d.set_parameter(Parameter("K", 2.0, 0.0, 20.0))
    d.set_tuning_parameter("K")
    d.set_analysis(input="r", output="y")
    ctl = AnalysisController(d, ModelSignals(d))
    assert ctl.wait_for_idle(20000) and ctl.result.ok, ctl.result.message
    return ctl


def test_routh_first_column_value_and_sign_fit_a_narrow_panel(fifth_order, qtbot):
    ctl = fifth_order
    panel = RouthPanel()
    qtbot.addWidget(panel)
    panel.resize(420, 420)
    panel.show()
    attach(panel, ctl)
    table = panel.table
    arr = ctl.result.report.routh
    assert max(len(t) for row in arr.rows_text() for t in row) > 40  # long entries: the case to handle
    # the first column, its value and its sign are the leftmost columns and are not scrolled away
    right = table.columnViewportPosition(panel._sign_column()) + table.columnWidth(panel._sign_column())
    assert panel._sign_column() == 2 and right <= table.viewport().width()
    # a long entry keeps its full text in the tooltip, and the cell is wider than nothing
    long_row = max(range(len(arr.rows)), key=lambda i: len(arr.rows_text()[i][0]))
    item = table.item(long_row + 1, 0)
    assert item.toolTip() and item.toolTip() == item.text()
    # values of the first column at K = 2 agree with numpy: all positive, the loop is stable there
    # (reference: numpy.roots of the characteristic polynomial at K = 2)
    assert all(v.sign == 1 for v in [row[0] for row in panel.values])
    coeffs = ctl.result.coefficients_at(2.0)
    assert np.all(np.roots(coeffs).real < 0)


def test_range_panel_shows_decimals_first_and_copies_exact_values(fifth_order, qtbot):
    ctl = fifth_order
    panel = RangePanel()
    qtbot.addWidget(panel)
    panel.resize(360, 400)
    attach(panel, ctl)
    rng = ctl.result.report.stable_range.to_dict()
    upper = rng["endpoints"][-1]
    assert upper["exact"].startswith("root of")  # an algebraic endpoint
    text = panel.details.text()
    assert f"K ≈ {upper['value']:.10g}" in text  # the decimal leads
    assert " near " not in text  # the exact form is shown without repeating the decimal
    panel.copy_exact()
    copied = QGuiApplication.clipboard().text()
    assert upper["exact"].replace("-", "\u2212") in copied  # the full exact text is copyable
    # reference: numpy; just below the upper end all roots are in the left half plane, just above not
    assert np.all(np.roots(ctl.result.coefficients_at(upper["value"] * 0.999)).real < 0)
    assert np.any(np.roots(ctl.result.coefficients_at(upper["value"] * 1.001)).real > 0)
    assert panel.details.minimumSizeHint().width() <= 360


def test_pole_map_caption_wraps_within_the_panel(loop, qtbot):
    _, _, panels = loop
    pole_map = panels["map"]
    pole_map.resize(300, 400)
    pole_map.show()
    caption = pole_map.caption
    assert caption.wordWrap() and "slowest pole" in caption.text()
    lines = caption.fontMetrics().boundingRect(0, 0, caption.width(), 1000, int(Qt.TextFlag.TextWordWrap),
                                               caption.text()).height()
    assert lines <= caption.height()  # fits in its two fixed lines


def test_panels_follow_a_switch_to_the_dark_palette(loop, qtbot):
    from PySide6.QtWidgets import QApplication

    from app.panels.common import colour
    from app.theme import dark_palette
    _, _, panels = loop
    app = QApplication.instance()
    before = app.palette()
    try:
        app.setPalette(dark_palette())
        QApplication.processEvents()
        routh = panels["routh"]
        assert routh.table.item(1, 0).background().color() == colour("tint")  # the dark tint now
        assert colour("tint").lightness() < 128
        assert panels["map"].plot.backgroundBrush().color().lightness() < 128
        assert colour("stable").name() in panels["range"].verdict.text()
    finally:
        app.setPalette(before)
        QApplication.processEvents()


def test_routh_sign_summary_stays_in_view_and_names_the_changes(loop, qtbot):
    # Reference (by hand, Routh): s^3 + 3s^2 + 2s + K at K = 8 has first column 1, 3, -2/3, 8:
    # two sign changes, s^2 -> s^1 and s^1 -> s^0 (two roots in the right half plane, numpy agrees).
    _d, ctl, panels = loop
    routh = panels["routh"]
    assert routh.summary.text() == "First column: no sign change"  # K = 2
    ctl.set_current_value(8.0)
    qtbot.waitUntil(lambda: "2 sign changes" in routh.summary.text(), timeout=5000)
    assert routh.summary.text() == "First column: 2 sign changes (s² → s¹, s¹ → s⁰)"
    assert sum(r.real > 0 for r in np.roots(third_order(8.0))) == 2


def test_pole_map_marks_where_the_pair_crosses_the_axis(loop):
    # Reference (by hand, Routh): s^3 + 3s^2 + 2s + K loses stability at K = 6 with s = ±j sqrt(2).
    _d, _ctl, panels = loop
    (omega, text), = panels["map"].plotted_crossings()
    assert abs(omega - 2 ** 0.5) < 1e-9 and text == "K = 6"


def test_pole_map_arrows_point_the_way_the_parameter_increases(loop, qtbot):
    # Reference: numpy roots of s^3 + 3s^2 + 2s + K at two nearby values of K; each arrow's screen
    # direction must match how the nearest root moves from the first to the second.
    _d, _ctl, panels = loop
    pole_map = panels["map"]
    pole_map.resize(500, 500)
    pole_map.show()
    qtbot.waitUntil(lambda: bool(pole_map.plotted_arrows()), timeout=5000)
    values = pole_map._result.path_values
    for point, angle in pole_map.plotted_arrows():
        column = np.argmin(np.abs(pole_map._result.paths - point).min(axis=0))
        row = int(np.nanargmin(np.abs(pole_map._result.paths[:, column] - point)))
        k0, k1 = values[row], values[min(row + 1, len(values) - 1)]
        before, after = sorted_roots(np.roots(third_order(k0))), sorted_roots(np.roots(third_order(k1)))
        start = before[np.argmin(np.abs(before - point))]
        moved = after[np.argmin(np.abs(after - start))] - start
        screen = complex(-np.cos(np.radians(angle)), np.sin(np.radians(angle)))  # y up, as in the data
        assert moved.real * screen.real >= 0 and moved.imag * screen.imag >= -1e-12, (point, angle, moved)


def test_pole_map_zooms_to_the_dominant_poles_and_names_the_far_ones(qtbot):
    # K / ((s+500)(s+2)(s+3)): at K = 1 the poles are near -500, -3 and -2 (numpy reference below);
    # the view keeps the slow pair and the crossing, the pole near -500 is pinned to the edge and named.
    d = unity_loop(num="K", den="(s+500)*(s+2)*(s+3)", nominal=1.0)
    ctl = AnalysisController(d, ModelSignals(d))
    pole_map = PoleMap()
    qtbot.addWidget(pole_map)
    attach(pole_map, ctl)
    assert ctl.wait_for_idle(20000) and ctl.result.ok
    far = min(np.roots([1, 505, 2506, 3001]).real)  # (s+500)(s+2)(s+3) + 1, expanded by hand
    (x0, _x1), _ = pole_map._home
    assert far < x0 < -3
    assert "1 pole (" in pole_map.caption.text() and "outside the view" in pole_map.caption.text()
    assert np.allclose(sorted_roots(pole_map.plotted_poles()), sorted_roots(np.roots([1, 505, 2506, 3001])))
