"""Loops with dead time: parsing, certified stability results against outside references.

References: the first-order-plus-dead-time stability limit under proportional control (the gain
where the phase reaches -180 degrees; classic process-control result, from memory), numpy / scipy
dense grids and root brackets for gain crossovers and delay margins, mpmath.findroot from many
starts for the roots themselves.
"""
from __future__ import annotations

import cmath
import itertools
import json
import math

import mpmath
import numpy as np
import pytest
from flint import fmpq
from scipy.optimize import brentq

from core.algebra.expression import parse_polynomial, parse_quasi_polynomial
from core.analysis.delay import (
    Evaluator,
    crossings,
    delay_margin,
    normal_parts,
    rhp_count,
    rightmost_roots,
    single_delay_loop,
    winding,
)
from core.analysis.delay_report import check_quasi_polynomial
from core.cli import main
from core.errors import AnalysisError, ExpressionError


# -- parsing --------------------------------------------------------------------------------------
@pytest.mark.parametrize("text, expected", [
    ("s^2 + 3*s + K*exp(-0.1*s)", "s^2 + 3*s + K*exp(-1/10*s)"),
    ("s + exp(-tau*s)", "s + exp(-tau*s)"),
    ("s + exp(-s*tau)", "s + exp(-tau*s)"),
    ("s + exp(-tau s)", "s + exp(-tau*s)"),
    ("s + 2exp(-s)", "s + 2*exp(-s)"),
    ("(s + 1)*exp(-L*s)*exp(-0.5*s) + s^2", "s^2 + (s + 1)*exp(-1/2*s)*exp(-L*s)"),
    ("s + exp(-0*s)", "s + 1"),
    ("s + exp(-3/10*s) + exp(-s*1/4)", "s + exp(-1/4*s) + exp(-3/10*s)"),
    ("s + exp(-L*s)^2*exp(-s/2)", "s + exp(-1/2*s)*exp(-L*s)^2"),
])
def test_delay_factors_are_read_in_their_one_form(text, expected):
    assert parse_quasi_polynomial(text).text() == expected
    assert parse_quasi_polynomial(expected).text() == expected  # the text reads back


@pytest.mark.parametrize("text", ["s^3 + 3s^2 + 2s + K", "(s+1)(s+2) + K/2", "1, 3, 2", "s^2 + s/T + 1",
                                  "2.5e-3 s^2 + K(s+1)"])
def test_without_exp_the_quasi_reader_reads_the_polynomial(text):
    # the existing polynomial reader is the reference: same polynomial, no delayed term
    quasi = parse_quasi_polynomial(text)
    assert not quasi.delayed
    from core.algebra.expression import to_mpoly
    from core.algebra.polynomial import mpoly_context, mpoly_text
    expr = parse_polynomial(text)
    names = sorted(str(x) for x in expr.free_symbols if str(x) != "s")
    assert mpoly_text(quasi.terms[0][1]) == mpoly_text(to_mpoly(expr, mpoly_context(names)))


@pytest.mark.parametrize("text, code, column", [
    ("s + exp(0.5*s)", "E440", 5),
    ("s + exp(s)", "E440", 5),
    ("s + exp(-s^2)", "E441", 11),
    ("s + exp(-(0.5)*s)", "E441", 10),
    ("s + exp(-K)", "E441", 11),
    ("s + exp(-K*T*s)", "E441", 12),
    ("s + exp(--s)", "E441", 10),
    ("s + exp -s", "E441", 9),
    ("s / exp(-s)", "E444", 5),
    ("s ^ exp(-s)", "E444", 5),
    ("1, exp(-s)", "E444", 4),
])
def test_anything_else_under_exp_is_a_catalogued_error_with_column(text, code, column):
    with pytest.raises(ExpressionError) as err:
        parse_quasi_polynomial(text)
    assert err.value.code == code
    assert err.value.where == f"column {column}"


def test_polynomial_fields_still_refuse_exp():
    with pytest.raises(ExpressionError) as err:
        parse_polynomial("s + exp(-s)")
    assert err.value.code == "E108"


# -- first-order plus dead time under proportional control ----------------------------------------
def fopdt_limit(T: float, L: float) -> tuple[float, float]:
    """Derived: (Ts + 1) + K e^(-Ls) = 0 at s = jω needs the loop phase -atan(ωT) - ωL = -pi, i.e.
    tan(ωL) = -ωT with ωL in (pi/2, pi), and the magnitude K / sqrt(1 + (ωT)^2) = 1 (from memory:
    the classic ultimate gain of this process). Solved with mpmath at 40 digits."""
    mpmath.mp.dps = 40
    half_pi = mpmath.pi / 2
    x = mpmath.findroot(lambda x: mpmath.tan(x) + x * T / L, (half_pi + mpmath.mpf(10) ** -30, mpmath.pi),
                        solver="anderson")  # x = ωL, bracketed: tan goes from -inf to 0 there
    assert half_pi < x < mpmath.pi
    omega = x / L
    return float(omega), float(mpmath.sqrt(1 + (omega * T) ** 2))


@pytest.mark.parametrize("T, L", [(1, 1), (2, "3/10"), ("1/2", 3), (10, "1/10")])
def test_fopdt_ultimate_gain_to_1e9(T, L):
    T, L = fmpq(T) if isinstance(T, int) else fmpq(*map(int, T.split("/"))), \
        fmpq(L) if isinstance(L, int) else fmpq(*map(int, L.split("/")))
    text = f"({T}*s + 1) + K*exp(-{L}*s)"
    report = check_quasi_polynomial(text, "K", {"K": fmpq(1, 2)})
    rng = report.stable_range.to_dict()
    omega, k_max = fopdt_limit(float(T), float(L))
    assert len(rng["intervals"]) == 1
    lo, hi = rng["intervals"][0]
    assert lo == -1.0  # s = 0 is a root at K = -1 (1 + K = 0), exact
    assert hi == pytest.approx(k_max, rel=1e-9)
    assert rng["endpoints"][1]["omega"] == pytest.approx(omega, rel=1e-9)
    assert report.nominal_stable is True


# -- delay margins and crossings against dense grids ----------------------------------------------
LOOPS = [([1, 1], [2], "1"), ([1, 3, 0], [1], "1/10"), ([1, 2, 3, 1], [fmpq(3, 2)], "1/5"),
         ([1, 4, 6, 4, 1], [1, 1], "1/2")]


def _poly_at(coeffs, w):
    return np.polyval([float(c) for c in coeffs], 1j * w)


@pytest.mark.parametrize("p0, p1, tau", LOOPS)
def test_delay_margin_against_a_dense_grid(p0, p1, tau):
    tau = fmpq(*map(int, tau.split("/"))) if "/" in tau else fmpq(int(tau))
    loop = single_delay_loop(p0, p1, tau)
    margin = delay_margin(loop.parts)
    # reference: the open loop L(jω) = P1 e^(-jωτ) / P0 on a dense grid (numpy), its gain crossovers
    # bracketed there and solved with brentq; delay margin = phase margin / crossover (common practice)
    grid = np.linspace(1e-6, 200, 400_001)
    gain = np.abs(_poly_at(p1, grid) / _poly_at(p0, grid)) - 1
    crossings_ref = [brentq(lambda w: abs(_poly_at(p1, w) / _poly_at(p0, w)) - 1, grid[i], grid[i + 1], xtol=1e-15)
                     for i in np.nonzero(np.sign(gain[:-1]) != np.sign(gain[1:]))[0]]
    assert margin.stable
    if not crossings_ref:
        assert margin.unbounded
        return
    ref = []
    for w in crossings_ref:
        loop_value = _poly_at(p1, w) * cmath.exp(-1j * w * float(tau)) / _poly_at(p0, w)
        phase_margin = (cmath.phase(loop_value) + math.pi) % (2 * math.pi)
        ref.append((phase_margin / w, w))
    best = min(ref)
    assert float(margin.value.mid()) == pytest.approx(best[0], rel=1e-9)
    assert float(margin.omega.mid()) == pytest.approx(best[1], rel=1e-9)
    found = sorted(float(c.omega.mid()) for c in crossings(loop.parts[0][1], loop.parts[1:]))
    assert found == pytest.approx(sorted(crossings_ref), rel=1e-9)


def test_delay_margin_with_two_delays_against_a_dense_grid():
    # Q = s^2 + 2s + 2 + e^(-s/2) + (7/5) s e^(-3s/2), extra delay on both delayed terms; reference as
    # above: |B(jω)/P0(jω)| = 1 bracketed on a numpy grid, brentq, phase margin / crossover
    parts = normal_parts([(fmpq(0), [fmpq(1), fmpq(2), fmpq(2)]), (fmpq(1, 2), [fmpq(1)]),
                          (fmpq(3, 2), [fmpq(7, 5), fmpq(0)])])

    def ratio(w):
        b = np.exp(-0.5j * w) + 1.4j * w * np.exp(-1.5j * w)
        return b / ((1j * w) ** 2 + 2j * w + 2)
    grid = np.linspace(1e-6, 50, 200_001)
    gain = np.abs(ratio(grid)) - 1
    ref = [brentq(lambda w: abs(ratio(w)) - 1, grid[i], grid[i + 1], xtol=1e-15)
           for i in np.nonzero(np.sign(gain[:-1]) != np.sign(gain[1:]))[0]]
    margins = [((cmath.phase(ratio(w)) + math.pi) % (2 * math.pi)) / w for w in ref]
    margin = delay_margin(parts)
    assert margin.stable and len(ref) == len(margin.crossings) == 2
    assert sorted(float(c.omega.mid()) for c in margin.crossings) == pytest.approx(sorted(ref), rel=1e-9)
    assert float(margin.value.mid()) == pytest.approx(min(margins), rel=1e-9)


# -- root counts and rightmost roots against mpmath ------------------------------------------------
def _mpmath_roots(parts, box, starts=18):
    """Distinct roots found by mpmath.findroot from a grid of starts in ``box`` (x0, x1, y0, y1)."""
    mpmath.mp.dps = 30

    def q(s):
        return sum(mpmath.polyval([mpmath.mpf(int(c.p)) / int(c.q) for c in coeffs], s) * mpmath.exp(-s * mpmath.mpf(int(tau.p)) / int(tau.q))
                   for tau, coeffs in parts)
    roots: list[complex] = []
    x0, x1, y0, y1 = box
    for x in np.linspace(x0, x1, starts):
        for y in np.linspace(y0, y1, starts):
            try:
                z = complex(mpmath.findroot(q, mpmath.mpc(x, y)))
            except (ZeroDivisionError, ValueError):
                continue
            if abs(q(z)) < 1e-12 * max(1, abs(z)) ** len(parts[0][1]) and x0 - 1 <= z.real <= x1 + 1 \
                    and not any(abs(z - r) < 1e-7 * max(1, abs(z)) for r in roots):
                roots.append(z)
    return roots


@pytest.mark.parametrize("p0, p1, tau", [([1, 1], [3], 1), ([1, 1], [10], 1), ([1, 0, 1], [fmpq(1, 2), 0], 2),
                                         ([1, 1], [2], 1)])
def test_right_half_plane_count_against_mpmath_roots(p0, p1, tau):
    loop = single_delay_loop(p0, p1, tau)
    roots = _mpmath_roots(loop.parts, (-0.5, 4.0, -12.0, 12.0))
    assert rhp_count(loop.parts) == sum(1 for z in roots if z.real > 0)


def test_two_delays_count_by_the_argument_principle_against_mpmath():
    parts = normal_parts([(fmpq(0), [fmpq(1), fmpq(2), fmpq(2)]), (fmpq(1, 2), [fmpq(3, 2)]),
                          (fmpq(3, 2), [fmpq(1), fmpq(0)])])
    roots = _mpmath_roots(parts, (-0.5, 3.0, -10.0, 10.0))
    assert rhp_count(parts) == sum(1 for z in roots if z.real > 0)


def test_sweep_and_argument_principle_agree():
    # two certified methods, one exact (D-subdivision from tau = 0), one the winding number
    for k in (1, 3, 7, 20):
        parts = single_delay_loop([1, 2, 2], [k], fmpq(3, 4)).parts
        r = 50.0
        assert rhp_count(parts) == winding(Evaluator(parts), [complex(0, -r), complex(r, -r), complex(r, r),
                                                              complex(0, r)])


@pytest.mark.parametrize("p0, p1, tau", [([1, 1], [2], 1), ([1, 3, 0], [1], fmpq(1, 10)),
                                         ([1, 2, 3, 1], [1], 1)])
def test_rightmost_roots_against_mpmath(p0, p1, tau):
    loop = single_delay_loop(p0, p1, tau)
    found = rightmost_roots(loop.parts)
    assert found.validated and len(found.roots) >= 10
    edge = found.complete_right_of
    top = max(abs(z.imag) for z in found.roots[:10]) + 1
    reference = [z for z in _mpmath_roots(loop.parts, (edge + 0.5, 1.0, -top, top), starts=24) if z.real > edge + 0.5]
    ours = [z for z in found.roots if z.real > edge + 0.5 and abs(z.imag) < top]
    assert len(reference) == len(ours)
    for z in reference:
        assert min(abs(z - w) for w in ours) < 1e-8 * max(1, abs(z))


# -- the delay as the tuning parameter --------------------------------------------------------------
def test_delay_tuned_single_crossing():
    # s + 1 + 2 e^(-s tau): |jω + 1| = 2 at ω = sqrt 3 and e^(-jωτ) = -(1 + j sqrt 3)/2 = e^(-2j pi/3),
    # so tau* = 2 pi / (3 sqrt 3) (derived here)
    report = check_quasi_polynomial("s + 1 + 2*exp(-tau*s)", "tau", {"tau": fmpq(1, 2)})
    (lo, hi), = report.stable_range.to_dict()["intervals"]
    assert lo == 0.0 and hi == pytest.approx(2 * math.pi / (3 * math.sqrt(3)), rel=1e-12)
    assert float(report.margin.value.mid()) == pytest.approx(hi - 0.5, rel=1e-9)


def test_stability_switches_against_root_counts():
    # s^2 + 0.1 s + 1 + 0.5 e^(-s tau): two crossing frequencies, so stability can come back
    report = check_quasi_polynomial("s^2 + 0.1*s + 1 + 0.5*exp(-tau*s)", "tau")
    intervals = report.stable_range.to_dict()["intervals"]
    assert len(intervals) >= 2 and intervals[0][0] == 0.0 and intervals[-1][1] is not None
    # reference: the right-half-plane roots found by mpmath at a point inside each interval and gap
    points = [(lo + hi) / 2 for lo, hi in intervals] + [(a[1] + b[0]) / 2 for a, b in itertools.pairwise(intervals)]
    for tau in points:
        q = fmpq(*float(tau).as_integer_ratio())
        parts = normal_parts([(fmpq(0), [fmpq(1), fmpq(1, 10), fmpq(1)]), (q, [fmpq(1, 2)])])
        roots = _mpmath_roots(parts, (-0.3, 1.0, -3.0, 3.0), starts=14)
        inside = any(lo < tau < hi for lo, hi in intervals)
        assert (sum(1 for z in roots if z.real > 0) == 0) == inside


# -- Padé -------------------------------------------------------------------------------------------
def test_pade_ranges_converge_to_the_certified_range():
    report = check_quasi_polynomial("(2*s + 1)*(s + 1) + K*exp(-0.5*s)", "K", {"K": 1})
    certified = report.stable_range.to_dict()["intervals"][0][1]
    errors = [abs(p.range["intervals"][0][1] - certified) for p in report.pade]
    assert errors[-1] < 1e-8 * certified
    # each order closer than the one before, until the floats of the ends cannot tell them apart
    assert all(b < a for a, b in itertools.pairwise(errors) if a > 1e-12 * certified)


def test_low_pade_order_with_a_wrong_verdict_is_flagged():
    # order 1: (s + 1)(1 + s/2) + K (1 - s/2) is Hurwitz for -1 < K < 3 (Routh, by hand), the true
    # limit is about 2.26 (the ultimate gain above), so K = 2.5 fools order 1 only among the low ones
    report = check_quasi_polynomial("s + 1 + K*exp(-s)", "K", {"K": fmpq(5, 2)})
    assert report.nominal_stable is False
    by_order = {p.order: p for p in report.pade}
    assert by_order[1].nominal_stable is True and by_order[1].agrees is False
    assert by_order[1].range["intervals"] == [[-1.0, 3.0]]
    assert by_order[8].agrees is True


# -- command line ---------------------------------------------------------------------------------
def test_command_line_json_keys(capsys):
    assert main(["--poly", "s^2 + 3*s + K*exp(-0.1*s)", "--param", "K", "--at", "K=1", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    for key in ("stable_range", "quasi_polynomial", "delay_margin", "pade_check", "crossings"):
        assert key in data
    polynomial_keys = {"intervals", "approx_intervals", "exact_intervals", "endpoints", "stable_everywhere",
                       "never_stable"}
    assert polynomial_keys <= set(data["stable_range"])
    assert set(data["stable_range"]["endpoints"][0]) == {"value", "exact", "kind", "omega", "approx"}


def test_command_line_text_section(capsys):
    assert main(["--poly", "s + 1 + K*exp(-s)", "--param", "K", "--at", "K=1"]) == 0
    out = capsys.readouterr().out
    assert "Stable range of K (certified)" in out and "Delay margin" in out and "Padé" in out


@pytest.mark.parametrize("argv, code", [
    (["--poly", "s + 1 + exp(0.5*s)"], "E440"),
    (["--poly", "s + 1 + exp(-tau*s)", "--at", "tau=-1"], "E440"),
    (["--poly", "s + 1 + exp(-s^2)"], "E441"),
    (["--poly", "s + s*exp(-s)"], "E442"),
    (["--poly", "s + s^2*exp(-s)"], "E442"),
    (["--poly", "s + 1 + exp(-tau*s)"], "E443"),
    (["--poly", "s + 1 + 1/exp(-s)"], "E444"),
    (["--poly", "s + 1 + K^2*exp(-s)", "--param", "K"], "E445"),
    (["--poly", "s + 1 + K*exp(-s)", "--param", "K", "--decay", "1"], "E445"),
    (["--poly", "K*s + 1 + exp(-s)", "--param", "K"], "E445"),
    (["--poly", "s + tau + exp(-tau*s)", "--param", "tau"], "E445"),
])
def test_bad_delay_inputs_each_have_a_code(argv, code, capsys):
    assert main(argv) == 2
    assert capsys.readouterr().err.startswith(f"loopwright-check: {code} ")


def test_zero_at_the_origin_for_every_gain_is_never_stable():
    report = check_quasi_polynomial("s^2 + K*s*exp(-s)", "K")
    assert report.stable_range.intervals == []


def test_a_negative_delay_value_is_refused_by_the_analysis():
    with pytest.raises(AnalysisError) as err:
        check_quasi_polynomial("s + 1 + exp(-tau*s)", None, {"tau": -1})
    assert err.value.code == "E440"


# -- the bench row's loop ---------------------------------------------------------------------------
def test_bench_delay_row_loop_against_pade_and_runs_once():
    # the exact engine on the order-8 Padé loop is the reference for the certified range
    from bench import delay_row
    from core.algebra.polynomial import ParametricPolynomial
    from core.analysis.delay_report import pade_polynomial
    from core.analysis.stable_range import stable_range

    certified = delay_row.timed_range()()
    a, b = delay_row.delay_loop()
    text = " + ".join(f"({c})*s^{len(a[0][1]) - 1 - i}" for i, c in enumerate(a[0][1])) + " + K*(" + \
        " + ".join(f"({c})*s^{len(b[1][1]) - 1 - i}" for i, c in enumerate(b[1][1])) + f")*exp(-{b[1][0]}*s)"
    pade = stable_range(ParametricPolynomial.from_mpoly(pade_polynomial(parse_quasi_polynomial(text), 8), "K"))
    ours = certified.to_dict()["intervals"]
    theirs = pade.to_dict()["intervals"]
    assert len(ours) == len(theirs)
    for (lo, hi), (plo, phi) in zip(ours, theirs):
        assert lo == pytest.approx(plo, rel=1e-9) and hi == pytest.approx(phi, rel=1e-7)
    assert delay_row.timed_margin()().stable


@pytest.mark.parametrize("value", [float("inf"), float("nan")])
def test_a_non_finite_delay_value_is_refused(value):
    with pytest.raises(AnalysisError) as err:
        check_quasi_polynomial("s + 1 + exp(-tau*s)", None, {"tau": value})
    assert err.value.code == "E440"


@pytest.mark.parametrize("text", ["s^2 + K*s + exp(-s)", "s*(s+1) + K*(s+0.5)*exp(-0.2*s)",
                                  "s^3 + 2*s^2 + 2*s + K*exp(-0.1*s) + 0.5*exp(-0.3*s)"])
def test_gain_anywhere_below_the_top_degree_against_pade_order_8(text):
    # reference: the exact engine on the order-8 Padé loop (its ends agree to about 1e-9 at these
    # small products of frequency and delay)
    report = check_quasi_polynomial(text, "K", {"K": 1})
    ours = report.stable_range.to_dict()["intervals"]
    pade = report.pade[-1].range["intervals"]
    assert len(ours) == len(pade)
    for pair, ref in zip(ours, pade):
        for end, ref_end in zip(pair, ref):
            assert (end is None) == (ref_end is None)
            if end is not None:
                assert end == pytest.approx(ref_end, rel=1e-7, abs=1e-12)


def test_text_closes_the_interval_only_at_a_zero_delay(capsys):
    main(["--poly", "s*(s+1) + K*(s+0.5)*exp(-0.2*s)", "--param", "K"])
    assert "Stable range of K (certified): (0, " in capsys.readouterr().out
    main(["--poly", "s + 1 + 2*exp(-tau*s)", "--param", "tau"])
    assert "Stable range of tau (certified): [0, " in capsys.readouterr().out


def test_the_headline_states_the_certified_verdict_and_the_delay_margin():
    """s + 1 + K e^(-s) at K = 2: the pair crosses at omega = sqrt(K^2 - 1) = sqrt 3 when the
    extra delay reaches (pi - atan sqrt 3)/sqrt 3 - 1 (phase condition, derived by hand)."""
    import json
    import math

    from core.cli import main as cli_main
    expected = (math.pi - math.atan(math.sqrt(3))) / math.sqrt(3) - 1
    import contextlib
    import io
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert cli_main(["check", "--poly", "s + 1 + K*exp(-s)", "--param", "K", "--at", "K=2", "--json"]) == 0
    data = json.loads(out.getvalue())
    assert data["headline"].startswith("STABLE at K = 2 (certified); delay margin ")
    assert float(data["headline"].split("margin ")[1].split()[0]) == pytest.approx(expected, rel=1e-9)
