"""Requirement verdicts and the joint range, checked against core's exact ranges, numpy roots and
textbook results."""
from __future__ import annotations

import math

import numpy as np
import pytest

from core.algebra.polynomial import to_fmpq
from core.analysis.report import check_polynomial
from core.analysis.requirements import (
    Requirements,
    evaluate,
    gain_margin_intervals,
    joint_range,
    min_damping,
)
from core.analysis.stable_range import decay_range
from core.analysis.time_response import step_response, transfer_from_text
from core.errors import ModelError

CUBIC = "s^3 + 3s^2 + 2s + K"  # stable for 0 < K < 6 (Routh; from memory, the classic example)


def cubic(decay: float = 0.0, nominal: float = 2.0):
    return check_polynomial(CUBIC, parameter="K", at={"K": nominal}, decay=decay)


def cubic_transfer():
    return transfer_from_text("K", CUBIC, parameter="K")


def ends(intervals):
    return [(None if a is None else a.value, None if b is None else b.value) for a, b in intervals]


def test_decay_part_equals_cores_decay_range():
    report = cubic(decay=0.2)
    joint = joint_range(Requirements(), report)
    expected = decay_range(report.analysed, to_fmpq(0.2)).to_dict()
    assert ends(joint.parts["decay"]) == [tuple(iv) for iv in expected["intervals"]]
    assert [[a.exact, b.exact] for a, b in joint.parts["decay"]] == expected["exact_intervals"]
    assert joint.exact


@pytest.mark.parametrize("gm", [1.5, 2.0, 4.0, 5.0])
def test_gain_margin_range_is_exact(gm):
    # Stable for 0 < K < 6, so a rise factor 6/K >= GM holds exactly for 0 < K <= 6/GM.
    joint = joint_range(Requirements(min_gain_margin=gm), cubic())
    assert joint.exact
    (lo, hi), = joint.intervals
    assert lo.exact == "0" and hi.value == pytest.approx(6 / gm, rel=1e-15)
    assert hi.exact == str(to_fmpq(6) / to_fmpq(gm))


def test_gain_margin_in_db_is_the_same_factor():
    # 20 log10(2) dB is a factor of 2 (definition of the decibel).
    joint = joint_range(Requirements(min_gain_margin=20 * math.log10(2), gain_margin_unit="db"), cubic())
    assert joint.intervals[0][1].value == pytest.approx(3.0, rel=1e-12)


def test_gain_margin_verdict_uses_the_rise_factor():
    report = cubic()
    req = Requirements(min_gain_margin=2.5)
    ok, = evaluate(req, report, None, 2.0)       # 6 / 2 = 3 >= 2.5
    bad, = evaluate(req, report, None, 2.5)      # 6 / 2.5 = 2.4 < 2.5
    assert ok.passed and ok.actual == pytest.approx(3.0) and ok.margin == pytest.approx(0.5)
    assert bad.passed is False and bad.actual == pytest.approx(2.4)
    unstable, = evaluate(req, report, None, 7.0)
    assert unstable.passed is False and unstable.actual is None


def test_damping_range_checked_with_numpy_roots():
    zeta = 0.5
    joint = joint_range(Requirements(min_damping=zeta), cubic(), span=(0.0, 10.0))
    assert not joint.exact
    (lo, hi), = joint.intervals
    assert lo.exact == "0"  # the stable range's exact end
    edge = hi.value

    def smallest_damping(k):  # from numpy roots, independently of core
        r = np.roots([1, 3, 2, k])
        return min(-p.real / abs(p) for p in r)
    for k in (0.05, edge * 0.5, edge * (1 - 1e-4)):
        assert smallest_damping(k) >= zeta
    for k in (edge * (1 + 1e-4), 2.0, 5.0):
        assert smallest_damping(k) < zeta


def test_overshoot_range_checked_with_scipy_steps():
    limit = 20.0
    joint = joint_range(Requirements(max_overshoot=limit), cubic(), cubic_transfer(), (0.0, 10.0))
    (_lo, hi), = joint.intervals
    tr = cubic_transfer()
    inside = step_response(tr, hi.value * (1 - 1e-3)).metrics.overshoot
    outside = step_response(tr, hi.value * (1 + 1e-3)).metrics.overshoot
    assert inside <= limit < outside


def test_joint_range_agrees_with_independent_checks():
    # Each grid point is in the joint range iff, independently of core: numpy roots all have
    # Re < -0.2 (decay), damping >= 0.4, 6/K >= 2 (rise factor to the Routh limit 6, from memory),
    # and the scipy step overshoot is <= 10 %. Points within 1e-3 of a boundary are skipped.
    from scipy import signal
    req = Requirements(min_damping=0.4, max_overshoot=10, min_gain_margin=2)
    joint = joint_range(req, cubic(decay=0.2), cubic_transfer(), (0.0, 10.0))
    assert set(joint.parts) == {"stable", "decay", "gain margin", "damping", "overshoot"}
    edges = [b.value for iv in joint.intervals for b in iv if b is not None]
    for k in np.linspace(0.05, 9.95, 34):
        if any(abs(k - e) < 1e-3 for e in edges):
            continue
        poles = np.roots([1, 3, 2, k])
        ok = max(poles.real) < -0.2 and min(-poles.real / abs(poles)) >= 0.4 and 6 / k >= 2
        if ok:
            t = np.linspace(0, 60, 30001)
            _, y = signal.step(([k], [1, 3, 2, k]), T=t)
            ok = (y.max() - 1) * 100 <= 10
        assert joint.contains(k) == ok, k


def test_verdicts_at_one_value():
    report = cubic(decay=0.2)
    req = Requirements(min_damping=0.4, max_overshoot=10)
    step = step_response(cubic_transfer(), 2.0)
    decay, damping, over = evaluate(req, report, step, 2.0)
    poles = np.roots([1, 3, 2, 2])
    assert decay.passed is True and decay.exact
    assert decay.actual == pytest.approx(min(-poles.real))
    assert damping.actual == pytest.approx(min_damping(poles)) and damping.passed is False
    assert over.actual == pytest.approx(step.metrics.overshoot) and over.passed is False
    assert over.margin == pytest.approx(10 - step.metrics.overshoot)


def test_settling_mode_decay_verdict_in_seconds():
    # Decay given as a 2 % settling time Ts: sigma = 4 / Ts (common practice); verdict in seconds.
    report = check_polynomial(CUBIC, parameter="K", at={"K": 1}, decay=20.0, decay_mode="settling")
    verdict, = evaluate(Requirements(), report, None, 1.0)
    sigma = min(-np.roots([1, 3, 2, 1]).real)
    assert verdict.unit == "s" and verdict.required == pytest.approx(20.0)
    assert verdict.actual == pytest.approx(4 / sigma)
    assert verdict.passed == (4 / sigma <= 20.0)


def test_gain_margin_intervals_with_an_irrational_end():
    # s^3 + s^2 + (K+1) s + K^2: Routh needs K + 1 > K^2, so the upper end is the golden ratio
    # (1 + sqrt 5)/2 (worked by hand from the third-order Routh condition a2 a1 > a0).
    report = check_polynomial("s^3 + s^2 + (K+1)*s + K^2", parameter="K", at={"K": 1})
    golden = (1 + math.sqrt(5)) / 2
    assert report.stable_range.intervals[-1][1].value == pytest.approx(golden)
    (a, b), = gain_margin_intervals(report.stable_range, 2, "K")  # (-0.618, 0) has no positive part
    assert a.exact == "0" and b.value == pytest.approx(golden / 2)
    assert b.exact.startswith("(root of") and b.exact.endswith(") / 2")


def test_invalid_requirements_are_refused():
    with pytest.raises(ModelError):
        Requirements(min_damping=1.5).check()
    with pytest.raises(ModelError):
        Requirements(max_overshoot=-1).check()
    with pytest.raises(ModelError):
        Requirements(min_gain_margin=0.5).check()
    Requirements(min_gain_margin=6, gain_margin_unit="db").check()
    assert Requirements(min_damping=0.5).to_dict() == {"min_damping": 0.5}


def test_no_tuning_parameter_gives_no_range():
    report = check_polynomial("s^2 + 2s + 2")
    assert joint_range(Requirements(min_damping=0.5), report) is None
    damping, = evaluate(Requirements(min_damping=0.5), report, None, None)
    assert damping.actual == pytest.approx(math.sqrt(0.5)) and damping.passed  # poles -1 ± j


def test_requirements_round_trip_through_the_project_file():
    from core.errors import ProjectFileError
    from core.io.project_file import dumps_project, loads_project, project_to_dict
    from core.model.diagram import Diagram, Node
    d = Diagram("requirements round trip")
    d.add_node(Node("r", "input"))
    assert "requirements" not in project_to_dict(d)  # optional: left out when none is set
    req = Requirements(min_damping=0.45, max_overshoot=12.5, min_gain_margin=6, gain_margin_unit="db")
    d.set_requirements(req)
    assert loads_project(dumps_project(d)).requirements == req
    bad = dumps_project(d).replace('"min_damping": 0.45', '"min_damping": 1.5')
    with pytest.raises(ProjectFileError) as err:
        loads_project(bad, "bad.loop.json")
    assert err.value.code == "E205" and "requirements" in err.value.where
