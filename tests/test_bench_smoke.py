"""The benchmark code must not rot: its generators and one tiny repetition of each row's timed call.

No timing is asserted anywhere (speed goals are reported by ``make bench``, never tested).
"""
from __future__ import annotations

import itertools
import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np
import pytest
import sympy
from flint import fmpq

from bench import (
    baseline,
    frequency_row,
    generators,
    pole_paths_row,
    reduction_row,
    stable_range_row,
    table,
    timing,
)
from core.analysis.poles import pole_paths
from core.graph.reduction import reduce_diagram


@pytest.mark.parametrize("nodes", [8, 10, 30, 50])
def test_nested_loops_diagram_has_the_asked_node_count(nodes):
    d = generators.nested_loops_diagram(nodes)
    assert len(d.nodes) == nodes
    assert d.tuning_parameter == "K" and d.analysis.input == "r" and d.analysis.output == "y"
    assert reduce_diagram(d, "r", "y").characteristic.degrees()[0] > 0


def test_unity_feedback_loop_is_den_plus_k_num():
    # numpy.polyadd/polymul as the outside reference for D(s) + K N(s) at K = 2
    loop = generators.loop_polynomial(6)
    den = np.array([float(c) for c in (loop.at(0))])
    at_two = np.array([float(c) for c in loop.at(2)])
    num = (at_two - den) / 2
    assert loop.degree == 6
    assert np.allclose(np.polyadd(den, 2 * num), at_two)
    assert np.all(np.roots(den).real < 0)  # the generated plant is stable (K = 0)


def test_whole_report_agrees_with_the_sympy_baseline_at_degree_6():
    report = stable_range_row.whole_report(6)()
    [(lo, hi)] = report.stable_range.to_dict()["intervals"]
    # reference: sympy's reduce_inequalities on the Routh first column (bench.baseline)
    reference = baseline.baseline_stable_set(generators.unity_feedback_loop(6))

    def stable(x: float) -> bool:
        return bool(reference.subs(baseline.K, sympy.Rational(repr(x))))

    width = hi - lo
    assert stable(lo + width / 2) and stable(lo + width * 1e-6) and stable(hi - width * 1e-6)
    assert not stable(lo - width * 1e-6) and not stable(hi + width * 1e-6)


@pytest.mark.slow  # plumbing only (about 20 s): run by make test-slow
def test_baseline_runs_capped_in_a_child_process():
    times = timing.run_in_child(baseline.timed_baseline, (4, 1, 60.0), timeout_s=120)
    assert len(times) == 1 and times[0] is not None
    assert timing.time_capped(lambda: sum(range(10 ** 9)), 0.05) is None


def test_reduction_row_call_and_slope():
    red = reduction_row.characteristic_only(10)()
    assert red.characteristic.degrees()[0] == 4
    assert reduction_row.loglog_slope([1, 10, 100], [3.0, 30.0, 300.0]) == pytest.approx(1.0)


def test_pole_paths_rows_are_numpy_roots_and_follow_continuous_paths():
    poly, values = pole_paths_row.workload(degree=8, count=60)
    paths = pole_paths(poly, values)
    coeffs = pole_paths_row.coefficient_rows(poly, values)
    reference = pole_paths_row.roots_loop(coeffs)  # numpy.roots per value: the outside reference
    for row, ref in zip(paths, reference):
        assert np.allclose(np.sort_complex(row), np.sort_complex(ref), rtol=1e-7, atol=1e-9)
    # the matched paths never take a longer step than the unmatched (raw eigenvalue order) rows
    assert np.sum(np.abs(np.diff(paths, axis=0))) <= np.sum(np.abs(np.diff(np.array(reference), axis=0))) + 1e-9


def test_pole_path_matching_is_the_optimal_assignment_for_small_steps():
    # scipy.optimize.linear_sum_assignment as the reference: for small, well separated steps the
    # greedy nearest-neighbour matching equals the minimum-total-distance assignment
    from scipy.optimize import linear_sum_assignment
    rng = np.random.default_rng(7)
    roots = np.sort_complex(rng.normal(size=6) + 1j * rng.normal(size=6)) * 10
    steps = [roots + 0.01 * k * (1 + 1j) for k in range(5)]
    shuffled = np.array([rng.permutation(s) for s in steps])
    from core.analysis.poles import _match_paths
    matched = _match_paths(shuffled)
    for prev, cur in itertools.pairwise(matched):
        rows, cols = linear_sum_assignment(np.abs(prev[:, None] - cur[None, :]))
        assert np.array_equal(cols[np.argsort(rows)], np.arange(6))


def test_floor_and_peak_rate_are_positive():
    peak = pole_paths_row.peak_flops(n=64, runs=1)
    assert peak > 0
    assert pole_paths_row.eigenvalue_floor_s(20, 2000, 1.6e9) == pytest.approx(0.1)


def test_table_marks_pass_and_miss():
    rows = [table.Row("1", "a", "1 ms", "<= 2 ms", True), table.Row("1", "b", "3 ms", "<= 2 ms", False),
            table.Row("5", "c", "x")]
    text = table.format_table(rows, table.machine())
    assert "| PASS |" in text and "| MISS |" in text
    assert "cores" in text and "python-flint" in text
    assert [r.to_dict()["status"] for r in rows] == ["PASS", "MISS", None]


def test_app_rows_once(tmp_path, qapp, monkeypatch):
    monkeypatch.setenv("LOOPWRIGHT_STATE_DIR", str(tmp_path / "state"))  # restored after the test
    from app.headless import settle
    from bench import app_row
    from bench.app_session import isolate, open_window
    isolate(tmp_path)
    from core.io.project_file import save_project
    path = tmp_path / "small.loop.json"
    save_project(generators.nested_loops_diagram(10), path)
    window = open_window(path)
    assert settle(window, 60_000)
    received, painted, worker = app_row.edit_latencies(window, 1)
    assert len(received) == len(painted) == len(worker) == 1
    assert len(app_row.slider_frames(window, 3)) == 3
    window.undo_stack.setClean()
    window.close()
    run = app_row.cold_starts(path, tmp_path, 1)[0]
    assert run["painted"] > 0 and run["maxrss_kb"] > 0


def test_whole_report_call_gives_nominal_poles():
    report = stable_range_row.whole_report(8)()
    assert report.nominal is not None and len(report.nominal.poles) > 0
    assert report.values == {"K": fmpq(1)}


def test_frequency_row_response_has_the_asked_points():
    # source: numpy.polyval of the same plant at the grid's first point
    loop = frequency_row.degree_six_loop()
    curves = frequency_row.timed_response()()
    assert len(curves["omega"]) == frequency_row.POINTS
    w = curves["omega"][0]
    expected = np.polyval([float(c) for c in reversed(loop.numerator)], 1j * w) / np.polyval(
        [float(c) for c in reversed(loop.denominator)], 1j * w)
    assert abs(curves["magnitude"][0] - abs(expected)) <= 1e-12 * abs(expected)
