"""Exact stable range of a tuning parameter, checked against numpy.roots and worked cases."""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from flint import fmpq, fmpq_poly
from hypothesis import given, settings
from hypothesis import strategies as st

from core.algebra.polynomial import ParametricPolynomial
from core.analysis.stable_range import decay_range, margins, stable_range
from core.errors import AnalysisError

K = fmpq_poly([0, 1])


def poly(coeffs, name="K"):
    return ParametricPolynomial.from_coefficients(coeffs, name)


def numpy_max_real(p: ParametricPolynomial, value: float) -> float:
    roots = np.roots(p.at_float(value))
    return max(r.real for r in roots)


def numpy_stable(p: ParametricPolynomial, value: float) -> bool:
    return numpy_max_real(p, value) < 0 and abs(p.at_float(value)[0]) > 1e-12


def test_third_order_loop():
    # unity feedback K/(s(s+1)(s+2)): s^3+3s^2+2s+K, stable for 0 < K < 6, crossing at ω = √2
    # (classic, from memory); numpy.roots either side of each end
    p = poly([1, 3, 2, K])
    r = stable_range(p)
    d = r.to_dict()
    assert d["exact_intervals"] == [["0", "6"]] and d["intervals"] == [[0.0, 6.0]]
    origin, crossing = d["endpoints"]
    assert origin["kind"] == "origin" and origin["omega"] is None
    assert crossing["kind"] == "crossing" and crossing["omega"] == pytest.approx(math.sqrt(2), rel=1e-12)
    assert numpy_stable(p, 5.9) and not numpy_stable(p, 6.1)
    assert numpy_stable(p, 0.1) and not numpy_stable(p, -0.1)
    roots6 = np.roots(p.at_float(6.0))
    assert min(abs(abs(x.imag) - math.sqrt(2)) + abs(x.real) for x in roots6) < 1e-9
    json.dumps(d)  # JSON-ready
    assert not d["stable_everywhere"] and not d["never_stable"]


def test_conditionally_stable_two_intervals():
    # s^3 + s^2 + (K^2 - 3K + 3) s + (K + 5): Hurwitz iff K > -5 and K^2 - 4K - 2 > 0
    # (cubic condition a1 a2 > a0 a3, from memory) -> (-5, 2-√6) ∪ (2+√6, ∞); numpy checks
    p = poly([1, 1, K * K - 3 * K + 3, K + 5])
    d = stable_range(p).to_dict()
    assert len(d["intervals"]) == 2
    (a, b), (c, e) = d["intervals"]
    assert a == -5 and b == pytest.approx(2 - math.sqrt(6), abs=1e-14)
    assert c == pytest.approx(2 + math.sqrt(6), abs=1e-14) and e is None
    assert d["exact_intervals"][0][1].startswith("root of K^2 - 4*K - 2 near -0.44948974278")
    for v, stable in [(-5.1, False), (-4.9, True), (b - 1e-6, True), (b + 1e-6, False), (2.0, False),
                      (c - 1e-6, False), (c + 1e-6, True), (1e3, True)]:
        assert numpy_stable(p, v) == stable, v
    kinds = [x["kind"] for x in d["endpoints"]]
    assert kinds == ["origin", "crossing", "crossing"]
    for x in d["endpoints"][1:]:  # numpy: a pair on the axis at ±jω there
        roots = np.roots(p.at_float(x["value"]))
        assert min(abs(r.real) + abs(abs(r.imag) - x["omega"]) for r in roots) < 1e-8


def test_isolated_marginal_value_splits_two_intervals():
    # (s+1)(s^2 + (K-1)^2 s + 1), expanded: only K = 1 puts a pair on the axis (±j);
    # numpy: stable either side, max real part 0 at K = 1
    p = poly([1, (K - 1) ** 2 + 1, (K - 1) ** 2 + 1, 1])
    d = stable_range(p).to_dict()
    assert d["exact_intervals"] == [[None, "1"], ["1", None]]
    assert d["endpoints"] == [{"value": 1.0, "exact": "1", "kind": "crossing", "omega": 1.0, "approx": "1"}]
    assert numpy_stable(p, 0.99) and numpy_stable(p, 1.01) and abs(numpy_max_real(p, 1.0)) < 1e-12


def test_time_constant_in_several_coefficients():
    # loop (T s + 1)^2 (s + 1) + 8 = T^2 s^3 + (T^2+2T) s^2 + (2T+1) s + 9: Hurwitz iff T > 0 and
    # 2(T-1)^2 > 0 (cubic condition, worked by hand); at T = 1 it is (s+3)(s^2+3) (crossing at √3);
    # at T = 0 the order drops ("infinity"). numpy checks either side.
    p = poly([K * K, K * K + 2 * K, 2 * K + 1, 9], "T")
    d = stable_range(p).to_dict()
    assert d["exact_intervals"] == [["0", "1"], ["1", None]]
    e0, e1 = d["endpoints"]
    assert e0["kind"] == "infinity" and e1["kind"] == "crossing"
    assert e1["omega"] == pytest.approx(math.sqrt(3), rel=1e-12)
    for v, stable in [(-1, False), (-0.1, False), (0.1, True), (0.9, True), (1.1, True), (50, True)]:
        assert numpy_stable(p, v) == stable, v


def test_negative_stable_values_and_margins():
    # s^3+3s^2+2s-K: the K/(s(s+1)(s+2)) loop with the sign flipped: -6 < K < 0 (from the case above)
    p = poly([1, 3, 2, -K])
    r = stable_range(p, nominal=-2)
    assert r.to_dict()["exact_intervals"] == [["-6", "0"]]
    assert numpy_stable(p, -3) and not numpy_stable(p, -6.1) and not numpy_stable(p, 0.1)
    m = r.margins
    assert m.stable and m.rise_factor is None and m.fall_factor is None  # nominal <= 0: distances only
    assert (m.rise_distance, m.fall_distance) == (2.0, 4.0)


def test_gain_margin_factors():
    # stable 0 < K < 6 at nominal K = 2: may rise ×3 (9.54 dB, 20 log10 3, common practice)
    r = stable_range(poly([1, 3, 2, K]))
    m = margins(r, 2)
    assert m.rise_factor == pytest.approx(3.0) and m.rise_db == pytest.approx(20 * math.log10(3))
    assert m.fall_factor is None  # lower end 0: no finite factor
    assert margins(r, 7).stable is False
    # stable 1 < K < 4 (shifted variant): s^3+3s^2+2s+(K-1) with K ranged... fall factor nominal/lo
    r2 = stable_range(poly([1, 3, 2, K - 1]))
    m2 = margins(r2, 2)
    assert (m2.low, m2.high) == (1.0, 7.0) and m2.fall_factor == pytest.approx(2.0)
    assert m2.fall_db == pytest.approx(20 * math.log10(2)) and m2.rise_factor == pytest.approx(3.5)


def test_singular_values_and_constant_polynomials():
    # (K-2)(s^2+3s+2): vanishes identically at K = 2, stable elsewhere (roots -1, -2 by numpy)
    d = stable_range(poly([K - 2, 3 * (K - 2), 2 * (K - 2)])).to_dict()
    assert d["exact_intervals"] == [[None, "2"], ["2", None]]
    assert d["endpoints"][0]["kind"] == "singular"
    # no parameter: just stable / unstable (numpy: roots of s^2+2s+3 have Re = -1; s^2-2s+3 has Re = 1)
    assert stable_range(ParametricPolynomial.from_coefficients([1, 2, 3])).to_dict()["stable_everywhere"]
    assert stable_range(ParametricPolynomial.from_coefficients([1, -2, 3])).to_dict()["never_stable"]
    # s^3 + K s + 1: missing s^2 term, never stable (necessary condition: all coefficients positive)
    assert stable_range(poly([1, 0, K, 1])).to_dict()["never_stable"]
    with pytest.raises(AnalysisError):
        stable_range(ParametricPolynomial.from_coefficients([0]))


def test_leading_coefficient_vanishing_inside_is_excluded():
    # K s^2 + s + 1: Hurwitz iff K > 0; at K = 0 the order drops (kind "infinity"); numpy either side
    p = poly([K, 1, 1])
    d = stable_range(p).to_dict()
    assert d["exact_intervals"] == [["0", None]] and d["endpoints"][0]["kind"] == "infinity"
    assert numpy_stable(p, 0.01) and not numpy_stable(p, -0.01)


def test_decay_range():
    # all roots left of Re s = -1/4 for s^3+3s^2+2s+K; check with numpy inside and outside
    p = poly([1, 3, 2, K])
    r = decay_range(p, fmpq(1, 4))
    (lo, hi), = r.to_dict()["intervals"]
    assert 0 < lo < hi < 6
    for v in (lo + 1e-4, (lo + hi) / 2, hi - 1e-4):
        assert numpy_max_real(p, v) < -0.25
    for v in (lo - 1e-4, hi + 1e-4):
        assert numpy_max_real(p, v) > -0.25


coef = st.lists(st.integers(-5, 5), min_size=1, max_size=3).map(fmpq_poly)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(1, 9), min_size=3, max_size=6), st.lists(st.tuples(st.integers(0, 5), coef),
                                                                       min_size=1, max_size=3))
def test_random_ranges_agree_with_numpy(base, perturb):
    # reference: numpy.roots. At each endpoint a root is on the imaginary axis or the order drops;
    # interval midpoints are stable; points just outside an endpoint that is not shared are unstable.
    coeffs = [fmpq_poly([c]) for c in base]
    for idx, extra in perturb:
        coeffs[idx % len(coeffs)] += extra * K
    if coeffs[0].is_zero():
        return
    p = poly(coeffs)
    r = stable_range(p)
    d = r.to_dict()
    for e in d["endpoints"]:
        v = e["value"]
        lead = p.at_float(v)[0]
        if e["kind"] == "infinity":
            assert abs(lead) < 1e-9 * max(1.0, abs(v)) ** 3
            continue
        if e["kind"] == "singular":
            continue
        roots = np.roots(p.at_float(v)) if abs(lead) > 1e-12 else np.roots(p.at_float(v)[1:])
        scale = max(1.0, max(abs(roots)))
        assert min(abs(x.real) for x in roots) < 1e-6 * scale
        if e["kind"] == "crossing":
            assert min(abs(x.real) + abs(abs(x.imag) - e["omega"]) for x in roots) < 1e-5 * scale
    shared = {e["value"] for e in d["endpoints"]
              if sum(e["value"] in (lo, hi) for lo, hi in d["intervals"]) == 2}
    for lo, hi in d["intervals"]:
        mid = (lo + hi) / 2 if lo is not None and hi is not None else (
            (lo if lo is not None else (hi if hi is not None else 0)) + (1 if lo is not None else -1))
        if abs(numpy_max_real(p, mid)) > 1e-6:
            assert numpy_stable(p, mid), mid
        for end, step in ((lo, -1), (hi, 1)):
            if end is None or end in shared:
                continue
            out = end + step * 1e-3 * max(1.0, abs(end))
            if r.contains(out) or abs(numpy_max_real(p, out)) < 1e-7:
                continue  # another stable interval starts right there, or numpy cannot tell
            assert not numpy_stable(p, out), out
    for lo, hi in d["intervals"]:
        assert lo is None or hi is None or lo < hi
