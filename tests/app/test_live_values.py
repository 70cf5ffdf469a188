"""Slider frames: the Routh values shown while dragging (float tables with an error bound) equal the
exact values to the digits shown, and a panel tabbed out of view catches up when it is shown."""
from __future__ import annotations

import random
from itertools import pairwise
from pathlib import Path

import numpy as np
import pytest
import sympy
from flint import fmpq, fmpq_poly

from app.bridge import ModelSignals
from app.controller import AnalysisController
from app.panels import RangePanel, RouthPanel, attach
from app.panels.common import number
from app.panels.routh_panel import LIVE_TIP
from app.panels.routh_values import FloatEntries
from core.algebra.polynomial import to_fmpq
from core.analysis.pipeline import FirstColumnSigns
from core.analysis.report import check_project
from core.analysis.routh import RationalFunction
from core.io.project_file import load_project

EXAMPLES = Path(__file__).resolve().parents[2] / "resources" / "examples"
K = sympy.Symbol("K")


def sympy_value(entry: RationalFunction, value: float) -> sympy.Rational:
    """The entry at ``value`` in sympy's exact arithmetic (the float read as its shortest decimal,
    as the panel's exact path reads it)."""
    def poly(p: fmpq_poly):
        return sum(sympy.Rational(int(p[i].p), int(p[i].q)) * K**i for i in range(p.degree() + 1))
    return (poly(entry.num) / poly(entry.den)).subs(K, sympy.Rational(repr(float(value))))


def shown(q: sympy.Rational) -> tuple[str, int]:
    """Display text and sign of an exact value (reference: sympy's exact value, rounded once)."""
    return number(float(q)), int(sympy.sign(q))


def check_against_sympy(rows, values) -> tuple[int, int]:
    """Every entry the float tables vouch for matches sympy; returns (vouched, total)."""
    tables = FloatEntries(rows)
    vouched = total = 0
    for v in values:
        for row, fast_row in zip(rows, tables.at(v)):
            for entry, fast in zip(row, fast_row):
                total += 1
                if fast is not None:
                    vouched += 1
                    assert fast == shown(sympy_value(entry, v)), (v, entry.text("K"))
    return vouched, total


@pytest.mark.parametrize("name", ["line_tension_30.loop.json", "conveyor_speed.loop.json", "kiln_slow_sensor.loop.json"])
def test_live_routh_values_equal_the_exact_ones_to_the_shown_digits(name):
    report = check_project(load_project(EXAMPLES / name))
    arr = report.routh
    assert arr.parameter is not None and not arr.uses_eps
    rows = arr.rows
    ends = [e["value"] for e in report.stable_range.to_dict()["endpoints"]]
    # values across the slider's range, and right at / beside each stable-range endpoint, where
    # first-column entries pass through zero (the hardest place for floats)
    values = list(np.linspace(ends[0] / 3 if ends else 0.1, 2 * max(ends or [1.0]), 13))
    values += [e * f for e in ends for f in (1.0, 1 - 1e-9, 1 + 1e-9, 1 - 1e-14)]
    vouched, total = check_against_sympy(rows, values)
    assert vouched >= 0.8 * total  # the fast path is what a drag actually uses


def test_live_values_leave_rounding_ties_and_zeros_to_the_exact_path():
    # K - 1 at 2.2345650000000001 is within an ulp of 1.234565, a tie at 6 significant figures;
    # K - 2 at 2 is zero; (K + 1)/(K - 1) at 1 has a vanishing denominator
    rows = [[RationalFunction(fmpq_poly([-1, 1])), RationalFunction(fmpq_poly([-2, 1]))],
            [RationalFunction(fmpq_poly([1, 1]), fmpq_poly([-1, 1]))]]
    tables = FloatEntries(rows)
    tie, zero = tables.at(2.2345650000000001)[0][0], tables.at(2.0)[0][1]
    assert tie is None or tie == shown(sympy_value(rows[0][0], 2.2345650000000001))
    assert zero is None and tables.at(1.0)[1][0] is None
    assert tables.at(3.0) == [[("2", 1), ("1", 1)], [("2", 1)]]  # exact: 2, 1 and 4/2 (by hand)


def test_live_values_of_random_entries_with_cancellation():
    # entries (K - a)^3 (K + b) expanded: near K = a the terms cancel heavily; invented numbers
    rng = random.Random(7)
    rows, roots = [], []
    for _ in range(12):
        a, b = fmpq(rng.randint(1, 999), rng.randint(1, 99)), fmpq(rng.randint(1, 999), 7)
        roots.append(float(a))
        rows.append([RationalFunction(fmpq_poly([-a, 1]) ** 3 * fmpq_poly([b, 1]), fmpq_poly([rng.randint(1, 50), 1])),
                     RationalFunction(fmpq_poly([rng.randint(-10**12, 10**12) for _ in range(9)]))])
    values = list(np.linspace(0.01, 60.0, 25)) + [a * (1 + d) for a in roots[:4] for d in (1e-7, -1e-11, 0.0)]
    vouched, total = check_against_sympy(rows, values)
    assert vouched >= total // 2


def test_routh_panel_shows_live_values_during_a_drag_and_exact_ones_at_rest(qtbot):
    diagram = load_project(EXAMPLES / "line_tension_30.loop.json")
    controller = AnalysisController(diagram, ModelSignals(diagram))
    assert controller.wait_for_idle(60_000) and controller.result.ok, controller.result.message
    panel = RouthPanel()
    qtbot.addWidget(panel)
    attach(panel, controller)
    arr = controller.result.report.routh
    tuning = controller.result.tuning_range
    for value in np.linspace(tuning.minimum, tuning.maximum, 9)[1:]:
        controller.set_current_value(float(value))
        cells = [[panel.table.item(i + 1, panel._value_column(j)).text() for j in range(len(row))]
                 for i, row in enumerate(arr.rows)]
        tips = [panel.table.item(i + 1, panel._value_column(0)).toolTip() for i in range(len(arr.rows))]
        assert LIVE_TIP in tips  # shown from the float tables
        exact = panel.values  # reading them evaluates exactly
        assert cells == [[v.text for v in row] for row in exact]
        # reference: sympy's exact value of the first-column entries, rounded once for display
        assert [row[0].sign for row in exact] == [shown(sympy_value(row[0], float(value)))[1] for row in arr.rows]
    controller.set_current_value(float(tuning.minimum + 0.37 * (tuning.maximum - tuning.minimum)))
    # at rest the tooltips hold the exact rationals again
    qtbot.waitUntil(lambda: LIVE_TIP not in panel.table.item(1, panel._value_column(0)).toolTip(), timeout=3000)
    tip = panel.table.item(2, panel._value_column(0)).toolTip()
    assert sympy.Rational(tip) == sympy_value(arr.rows[1][0], controller.current_value)
    controller.dispose()


def test_a_panel_tabbed_out_of_view_catches_up_when_shown(window, analysed, qtbot):
    assert window.files.open(EXAMPLES / "conveyor_speed.loop.json", ask=False)
    analysed(window)
    step, docks = window.step_panel, window.docks
    docks["range"].raise_()
    qtbot.wait(50)
    assert step.visibleRegion().isEmpty()  # its tab is behind the stable range
    nominal = window.controller.current_value
    slider = window.pole_map.slider
    slider.setSliderDown(True)
    slider.setValue(slider.value() + 150 if slider.value() < 800 else slider.value() - 150)
    qtbot.wait(250)  # past the step panel's throttle: it would have re-simulated by now
    moved = window.controller.current_value
    assert moved != nominal and step.step.value == nominal  # not simulated while out of view
    docks["step"].raise_()
    qtbot.waitUntil(lambda: step.step.value == moved, timeout=5000)
    assert number(moved) in step.caption.text()
    slider.blockSignals(True)
    slider.setSliderDown(False)
    slider.blockSignals(False)


@pytest.mark.parametrize("name", ["line_tension_30.loop.json", "conveyor_speed.loop.json", "gantry_conditional.loop.json"])
def test_range_verdict_from_first_column_signs_counts_the_right_half_plane_roots(name, qtbot):
    diagram = load_project(EXAMPLES / name)
    report = check_project(diagram)
    tables = FirstColumnSigns.of(report.routh)
    assert tables is not None
    p = diagram.parameters[report.parameter]
    ends = [e["value"] for e in report.stable_range.to_dict()["endpoints"]]
    grid = list(np.linspace(p.minimum, p.maximum, 23))
    values = grid + [e * f for e in ends for f in (1 + 1e-9, 1 - 1e-9)]
    assert sum(tables.at(v) is not None for v in grid) >= 0.8 * len(grid)  # mostly fast
    for v in values:
        signs = tables.at(v)
        if signs is None:
            continue
        rhp = sum(a != b for a, b in pairwise(signs))
        roots = np.roots([float(c) for c in report.analysed.at(to_fmpq(v))])  # reference: numpy
        if np.min(np.abs(roots.real)) > 1e-6 * np.max(np.abs(roots)):  # clear of the axis for floats
            assert rhp == int(np.sum(roots.real > 0)), v
    # the panel's verdict reads the same with the fast path and with the exact one
    controller = AnalysisController(diagram, ModelSignals(diagram))
    assert controller.wait_for_idle(60_000) and controller.result.ok
    panel = RangePanel()
    qtbot.addWidget(panel)
    attach(panel, controller)
    for v in values[::3]:
        controller.set_current_value(float(v))
        quick = panel.verdict_html()
        controller.result.__dict__["_first_column"] = None  # force the exact path (exact root counts)
        assert quick == panel.verdict_html(), v
        del controller.result.__dict__["_first_column"]
    controller.dispose()


def test_entries_beyond_the_float_range_are_left_to_the_exact_evaluation():
    # 10^400 has no float (IEEE 754 doubles end near 1.8e308): the table must say "ask the exact
    # value" for that entry instead of raising, and keep the ordinary entry
    rows = [[RationalFunction(fmpq_poly([10**400, 1])), RationalFunction(fmpq_poly([2, -1]))]]
    values = FloatEntries(rows).at(1.0)
    assert values[0][0] is None
    assert values[0][1] is not None and values[0][1][1] == 1  # reference: 2 - 1 = 1 > 0
