"""Frequency response of the loop opened at the tuning gain (core.analysis.frequency, --frequency)."""
from __future__ import annotations

import json
import math
import random

import numpy as np
import pytest
from flint import fmpq, fmpq_poly
from scipy import optimize, signal

from core.algebra.expression import parse_quasi_polynomial
from core.algebra.polynomial import ParametricPolynomial
from core.analysis.delay_report import check_quasi_polynomial
from core.analysis.frequency import NO_DELAY, LoopFunction, analyse, loop_of_quasi_polynomial, response
from core.analysis.stable_range import stable_range
from core.cli import main
from core.errors import AnalysisError

DENSE = np.logspace(-3, 3, 200001)


def _loop(num, den, gain, delay=NO_DELAY) -> LoopFunction:
    """From coefficient lists highest power first (as numpy and scipy write them)."""
    return LoopFunction(fmpq(gain), tuple(fmpq(c) for c in reversed(num)),
                        tuple(fmpq(c) for c in reversed(den)), fmpq(delay))


def _numpy_values(loop: LoopFunction, w: np.ndarray) -> np.ndarray:
    num = [float(c) for c in reversed(loop.numerator)]
    den = [float(c) for c in reversed(loop.denominator)]
    s = 1j * w
    return float(loop.gain) * np.polyval(num, s) / np.polyval(den, s) * np.exp(-s * float(loop.delay))


def _scipy_values(loop: LoopFunction, w: np.ndarray) -> np.ndarray:
    num = [float(loop.gain * c) for c in reversed(loop.numerator)]
    den = [float(c) for c in reversed(loop.denominator)]
    _, h = signal.freqresp(signal.lti(num, den), w)
    return h * np.exp(-1j * w * float(loop.delay))


def _grid_roots(f, w: np.ndarray, values: np.ndarray) -> list[float]:
    """Sign changes of values on the grid, refined by Brent's method on f."""
    flips = np.nonzero(np.sign(values[:-1]) * np.sign(values[1:]) < 0)[0]
    return [optimize.brentq(f, w[i], w[i + 1], xtol=1e-15, rtol=1e-14) for i in flips]


def _random_loop(rng: random.Random) -> tuple[list[fmpq], list[fmpq]]:
    """Stable or unstable poles (real, or a complex pair), zeros in both half planes; N of lower degree."""
    poles = [fmpq(rng.randint(-2, 40), 8) for _ in range(rng.randint(2, 5))]
    den = fmpq_poly([1])
    for p in poles:
        den *= fmpq_poly([p, 1])
    if rng.random() < 0.5:
        den *= fmpq_poly([fmpq(rng.randint(1, 30), 4), fmpq(rng.randint(1, 8), 8), 1])
    num = fmpq_poly([fmpq(rng.randint(1, 9), 3)])
    for _ in range(rng.randint(0, min(2, den.degree() - 1))):
        num *= fmpq_poly([fmpq(rng.randint(-6, 20), 4), 1])
    as_list = lambda p: [p[i] for i in range(p.degree(), -1, -1)]  # noqa: E731
    return as_list(num), as_list(den)


def _parametric(num, den) -> ParametricPolynomial:
    padded = [fmpq(0)] * (len(den) - len(num)) + list(num)
    return ParametricPolynomial.from_coefficients([fmpq_poly([d, n]) for d, n in zip(den, padded)], "K")


def _stable_nominal(poly: ParametricPolynomial):
    """A simple positive rational inside a stable interval with a positive part (None if none)."""
    for lo, hi in stable_range(poly).intervals:
        low = max(0.0, lo.value if lo is not None else 0.0)
        high = hi.value if hi is not None else max(2 * low, 1.0) + 10
        if high > low:
            for digits in range(1, 12):
                k = fmpq(round((low + high) / 2 * 10 ** digits), 10 ** digits)
                if float(k) > 0 and (lo is None or lo.sign_minus(k) < 0) and (hi is None or hi.sign_minus(k) > 0):
                    return k
    return None


# -- gain margins against the exact stable range --------------------------------------------------
@pytest.mark.parametrize("seed", range(40))
def test_gain_margins_are_the_stable_range_distance_ratios(seed):
    # source: core.analysis.stable_range (exact Hurwitz determinants, a different method); the
    # factors are the nominal's ratios to the ends of its stable interval, and a "crossing" end's
    # frequency is the phase crossover there
    num, den = _random_loop(random.Random(seed))
    poly = _parametric(num, den)
    k = _stable_nominal(poly)
    if k is None:
        pytest.skip("no stable positive gain for this random loop")
    r = stable_range(poly, nominal=k)
    a = analyse(_loop(num, den, k))
    for ours, theirs in ((a.rise_factor, r.margins.rise_factor), (a.fall_factor, r.margins.fall_factor)):
        assert (ours is None) == (theirs is None)
        if ours is not None:
            assert ours == pytest.approx(theirs, rel=1e-9)
    ends = {round(e.value, 6): e for e in r.endpoints}
    for m in a.gain_margins:
        end = ends.get(round(m.critical_gain, 6))
        if end is not None and end.kind == "crossing":
            assert m.omega == pytest.approx(end.omega, rel=1e-9)


# -- margins against scipy.signal.freqresp on a dense grid -------------------------------------------
@pytest.mark.parametrize("seed", range(12))
def test_crossovers_and_margins_match_a_dense_scipy_grid(seed):
    # source: scipy.signal.freqresp on 200001 logarithmic points, crossings refined by scipy brentq
    num, den = _random_loop(random.Random(100 + seed))
    loop = _loop(num, den, fmpq(random.Random(seed).randint(1, 40), 4))
    a = analyse(loop)
    h = _scipy_values(loop, DENSE)
    gain_w = _grid_roots(lambda w: abs(_numpy_values(loop, np.array([w]))[0]) - 1, DENSE, np.abs(h) - 1)
    inside = [w for w in a.gain_crossovers if DENSE[0] < w < DENSE[-1]]
    assert inside == pytest.approx(gain_w, rel=1e-9)
    for p in a.phase_margins:
        value = _numpy_values(loop, np.array([p.omega]))[0]
        assert p.degrees == pytest.approx(math.degrees(np.angle(-value)), abs=1e-7)
    phase_w = [w for w in _grid_roots(lambda w: _numpy_values(loop, np.array([w]))[0].imag, DENSE, h.imag)
               if _numpy_values(loop, np.array([w]))[0].real < 0]
    finite = [m for m in a.gain_margins if DENSE[0] < m.omega < DENSE[-1]]
    assert [m.omega for m in finite] == pytest.approx(phase_w, rel=1e-9)
    for m in finite:
        magnitude = abs(_numpy_values(loop, np.array([m.omega]))[0])
        assert m.factor == pytest.approx(1 / magnitude if m.direction == "rise" else magnitude, rel=1e-9)


def test_unwrapped_phase_follows_numpy_unwrap():
    # source: numpy.unwrap of numpy.angle on 20001 points (fine enough that no jump is missed)
    loop = _loop([1, -2, 5], [1, 3, 7, 5, 2, 0], 3, fmpq(1, 5))
    w = np.logspace(-2, 2, 20001)
    ours = response(loop, w)["phase"]
    theirs = np.degrees(np.unwrap(np.angle(_numpy_values(loop, w))))
    offset = ours[0] - theirs[0]
    assert offset / 360 == pytest.approx(round(offset / 360), abs=1e-9)
    assert np.max(np.abs(ours - theirs - offset)) < 1e-6


# -- a conditionally stable loop ----------------------------------------------------------------
def test_conditionally_stable_loop_lists_a_rise_and_a_fall_margin():
    # L = K (s+1)^2 / (s^3 (s+10)(s+20)): stable only for K in a bounded interval away from 0
    # (a conditionally stable loop, from memory); source: numpy.roots of D + K' N at each critical
    # gain K' times 1 -+ 1e-6: stable on the nominal side, a root in the right half plane beyond, and
    # at K' a pair on the axis at the phase crossover frequency
    num, den = np.poly([-1, -1]), np.poly([0, 0, 0, -10, -20])
    k = 1000
    a = analyse(_loop([int(c) for c in num], [round(c) for c in den], k))
    directions = sorted(m.direction for m in a.gain_margins)
    assert directions == ["fall", "rise"]
    padded = np.concatenate([np.zeros(len(den) - len(num)), num])
    for m in a.gain_margins:
        inside = 1 - 1e-6 if m.direction == "rise" else 1 + 1e-6
        for factor, stable in ((inside, True), (2 - inside, False)):
            roots = np.roots(den + m.critical_gain * factor * padded)
            assert (max(roots.real) < 0) == stable
        roots = np.roots(den + m.critical_gain * padded)
        nearest = roots[np.argmin(np.abs(roots.real))]
        assert abs(nearest.imag) == pytest.approx(m.omega, rel=1e-6)


def test_resonant_loop_lists_every_phase_margin():
    # |L| = 2/|(jw+1)(4 - w^2 + 0.1jw)| is 1/2 at w = 0 and about 4.5 at the resonance w = 2, so |L|
    # crosses 1 twice; source: numpy magnitudes at each listed crossover and the angle of -L there
    loop = _loop([2], [1, fmpq(11, 10), fmpq(41, 10), 4], 1)
    a = analyse(loop)
    assert len(a.phase_margins) == 2
    for p in a.phase_margins:
        value = _numpy_values(loop, np.array([p.omega]))[0]
        assert abs(value) == pytest.approx(1, rel=1e-12)
        assert p.degrees == pytest.approx(math.degrees(np.angle(-value)), abs=1e-9)


# -- delay margin -----------------------------------------------------------------------------
@pytest.mark.parametrize("text", ["s^3 + 3*s^2 + 2*s + K", "s^4 + 6*s^3 + 11*s^2 + 6*s + K*(s + 2)",
                                  "s^2 + 3*s + K*exp(-1/10*s)", "s^3 + 4*s^2 + 5*s + 2 + K*(3 - 3*s)*exp(-1/4*s)"])
def test_delay_margin_puts_a_root_on_the_axis_and_matches_the_crossing_count(text):
    # sources: numpy (1 + L(jw) e^(-jw dm) = 0 at the crossover that sets the delay margin dm) and,
    # with a delay, core.analysis.delay_report's certified delay margin (a different method:
    # crossings of the quasi-polynomial D + K N e^(-s (tau + d)) counted from the delay-free loop)
    at = {"K": fmpq(1)}
    a = analyse(loop_of_quasi_polynomial(parse_quasi_polynomial(text), "K", at))
    best = min(a.phase_margins, key=lambda p: p.delay)
    loop = a.loop
    value = _numpy_values(loop, np.array([best.omega]))[0] * np.exp(-1j * best.omega * a.delay_margin)
    assert abs(1 + value) < 1e-9
    if "exp" in text:
        report = check_quasi_polynomial(text, parameter="K", at=at)
        assert report.margin is not None
        assert a.delay_margin == pytest.approx(report.margin.to_dict()["value"], rel=1e-9)


def test_first_order_plus_dead_time_limit_gain():
    # L = K e^(-theta s)/(T s + 1): the phase reaches -180 degrees where atan(w T) + w theta = pi, and
    # the limit gain is sqrt(1 + (w T)^2) there (the classic result, from memory); w from scipy brentq
    t, theta = 2.0, 0.5
    w = optimize.brentq(lambda x: math.atan(x * t) + x * theta - math.pi, 1e-6, math.pi / theta, xtol=1e-15)
    limit = math.sqrt(1 + (w * t) ** 2)
    a = analyse(_loop([1], [2, 1], fmpq(1, 2), fmpq(1, 2)))
    first = min(a.gain_margins, key=lambda m: m.omega)
    assert first.omega == pytest.approx(w, rel=1e-9)
    assert first.critical_gain == pytest.approx(limit, rel=1e-9)


# -- sensitivity peak -------------------------------------------------------------------------
@pytest.mark.parametrize("seed", range(8))
def test_sensitivity_peak_bounds_a_dense_grid(seed):
    # source: numpy |1/(1 + L(jw))| on 200001 logarithmic points and at w = 0: the certified Ms is at
    # least every sample and within 1e-6 of the largest
    num, den = _random_loop(random.Random(300 + seed))
    poly = _parametric(num, den)
    k = _stable_nominal(poly)
    if k is None:
        pytest.skip("no stable positive gain for this random loop")
    loop = _loop(num, den, k)
    peak = analyse(loop).sensitivity_peak
    w = np.concatenate([[0.0], np.logspace(-4, 4, 200001)])
    grid = np.max(np.abs(1 / (1 + _numpy_values(loop, w))))
    assert peak.method == "certified"
    assert grid <= peak.bound * (1 + 1e-12)
    assert peak.value == pytest.approx(grid, rel=1e-6)


def test_sensitivity_peak_of_a_delay_loop_is_estimated_from_a_grid():
    # source: numpy on 200001 points; the estimate is refined, so at least the grid's maximum less 1e-9
    loop = _loop([1], [1, 3, 0], 2, fmpq(1, 10))
    peak = analyse(loop).sensitivity_peak
    grid = np.max(np.abs(1 / (1 + _numpy_values(loop, DENSE))))
    assert peak.method == "estimated"
    assert peak.value == pytest.approx(grid, rel=1e-6)
    assert peak.value >= grid * (1 - 1e-9)


# -- command line and bad input ---------------------------------------------------------------
def test_frequency_keys_on_the_command_line(capsys):
    # source: the closed form for s^3 + 3 s^2 + 2 s + K (from memory: the Routh array gives the
    # limit K = 3 * 2 = 6, crossing at w = sqrt(2)), at K = 2 the rise factor is 3
    assert main(["check", "--poly", "s^3 + 3s^2 + 2s + K", "--param", "K", "--at", "K=2", "--frequency",
                 "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert {"gain_margins", "phase_margins", "crossovers", "delay_margin", "sensitivity_peak"} <= set(data)
    assert data["gain_margins"]["rise_factor"] == pytest.approx(3, rel=1e-12)
    assert data["crossovers"]["phase"] == pytest.approx([math.sqrt(2)], rel=1e-12)
    assert "Ms <= 2" in data["sensitivity_peak"]["guidance"]
    assert main(["check", "--poly", "s^3 + 3s^2 + 2s + K", "--param", "K", "--at", "K=2", "--frequency"]) == 0
    assert "Frequency response" in capsys.readouterr().out


def test_delay_report_keeps_its_own_delay_margin_key(capsys):
    assert main(["check", "--poly", "s^2 + 3*s + K*exp(-0.1*s)", "--param", "K", "--at", "K=2", "--frequency",
                 "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert isinstance(data["delay_margin"], dict) and "certified" in data["delay_margin"]
    assert data["gain_margins"]["rise_factor"] > 1


@pytest.mark.parametrize("args, code", [
    (["--poly", "s^3 + K^2", "--param", "K", "--at", "K=1"], "E460"),
    (["--poly", "s^3 + s^2 + K", "--at", "K=1"], "E461"),
    (["--poly", "s^3 + s^2 + s + K", "--param", "K"], "E462"),
    (["--poly", "s^2 + 3*s + K*s^3", "--param", "K", "--at", "K=1"], "E464"),
    (["--poly", "s^2 + 3*s + K", "--param", "K", "--at", "K=0"], "E464"),
])
def test_bad_input_is_a_catalogued_error(args, code, capsys):
    assert main(["check", *args, "--frequency"]) == 2
    assert capsys.readouterr().err.startswith(f"loopwright-check: {code}")


GANTRY = "resources/examples/gantry_conditional.loop.json"


def test_project_opened_at_the_outer_feedback_wire_agrees_with_its_stable_range(capsys):
    # the gantry example is stable on two disjoint intervals of its loop gain K (L is K times a
    # fixed rational function); source: core.analysis.report.check_project's exact stable range
    # (Hurwitz determinants of the reduced characteristic polynomial), and numpy: 1 + L(jw) = 0 at
    # each critical gain's phase crossover
    from core.analysis.frequency import loop_of_project
    from core.analysis.report import check_project
    from core.io.project_file import load_project

    project = load_project(GANTRY)
    report = check_project(project)
    loop, wire = loop_of_project(project, report.values)
    assert wire == "H->e:1"
    a = analyse(loop)
    nominal = float(report.values["K"])
    ends = sorted(e.value for e in report.stable_range.endpoints if e.value > 0)
    assert sorted(nominal * m.factor for m in a.gain_margins if m.direction == "rise") == pytest.approx(ends, rel=1e-9)
    for m in a.gain_margins:
        value = _numpy_values(loop, np.array([m.omega]))[0]
        assert abs(1 + value * m.critical_gain) < 1e-8
    assert main(["check", GANTRY, "--frequency", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["opened_at"] == "the wire H->e:1" and len(data["gain_margins"]["all"]) == 3


def test_project_without_a_feedback_wire_is_a_catalogued_error():
    from core.analysis.frequency import loop_of_project
    from core.io.project_file import load_project

    project = load_project(GANTRY)
    project.disconnect("H->e:1")
    with pytest.raises(AnalysisError) as err:
        loop_of_project(project, {"K": fmpq(1, 5)})
    assert err.value.code == "E466"
    with pytest.raises(AnalysisError) as err:
        loop_of_project(load_project(GANTRY), {"K": fmpq(1, 5)}, wire_key="nowhere")
    assert err.value.code == "E466"


@pytest.mark.parametrize("text, code", [("s^2 + s*exp(-1/10*s) + K", "E463"),
                                        ("s^3 + K*exp(-1/10*s) + K*s*exp(-1/5*s)", "E463"),
                                        ("s^3 + s + K*exp(-L*s)", "E462"),
                                        ("s^3 + s^2 + 1", "E460")])
def test_loops_that_cannot_be_opened_at_the_gain(text, code):
    with pytest.raises(AnalysisError) as err:
        loop_of_quasi_polynomial(parse_quasi_polynomial(text), "K", {"K": fmpq(1)})
    assert err.value.code == code
