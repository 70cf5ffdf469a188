"""Sampled-data loops: the bilinear map, the Jury table, the stable range in z, the zero-order hold.

Outside references: numpy.roots (unit-circle counts), scipy.signal.cont2discrete (zero-order-hold
equivalents), closed forms derived here from the Jury conditions for a second-order polynomial
(z^2 + a1 z + a0 is stable iff |a0| < 1, 1 + a1 + a0 > 0, 1 - a1 + a0 > 0: Jury 1961, from memory).
"""
from __future__ import annotations

import math
import random

import numpy as np
import pytest
from flint import fmpq, fmpq_poly

from core.algebra.polynomial import ParametricPolynomial, to_fmpq
from core.analysis.discrete import (
    bilinear,
    jury_certified,
    jury_stable,
    jury_table,
    meets_radius,
    radius_bounds,
    radius_range,
    schur_stable,
    unit_circle_counts,
    z_stable_range,
)


def random_polynomial(rng: random.Random, degree: int) -> list[fmpq]:
    """A rational polynomial (highest power first) from random rational roots and pairs, about half
    of them inside the unit circle."""
    def q() -> fmpq:
        return fmpq(rng.randint(-12, 12), 10)
    p = fmpq_poly([rng.randint(1, 5)])
    while p.degree() < degree:
        if rng.random() < 0.5:
            p *= fmpq_poly([-q(), 1])
        else:
            a, b = q(), q()
            p *= fmpq_poly([a * a + b * b, -2 * a, 1])
    return [p[i] for i in range(p.degree(), -1, -1)]


def numpy_counts(coeffs) -> tuple[int, int] | None:
    """(inside, outside) by numpy.roots; None when a root lies within 1e-3 of the circle."""
    mags = np.abs(np.roots([float(c) for c in coeffs]))
    if np.any(np.abs(mags - 1) < 1e-3):
        return None
    return int((mags < 1).sum()), int((mags > 1).sum())


def test_bilinear_maps_roots_by_w_equals_z_minus_1_over_z_plus_1():
    # z^2 - z/2 - 1/2 = (z - 1)(z + 1/2): w = 0 and w = (-1/2 - 1)/(-1/2 + 1) = -3 (the map, from memory)
    w = bilinear(ParametricPolynomial.from_coefficients([1, fmpq(-1, 2), fmpq(-1, 2)])).at()
    roots = sorted(np.roots([float(c) for c in w]).real)
    assert roots == pytest.approx([-3.0, 0.0])


def test_root_at_minus_one_drops_the_w_degree():
    # (z + 1)(z - 1/2): the root at z = -1 goes to w = infinity, the other to w = -1/3
    w = bilinear(ParametricPolynomial.from_coefficients([1, fmpq(1, 2), fmpq(-1, 2)])).at()
    assert len(w) == 2 and float(-w[1] / w[0]) == pytest.approx(-1 / 3)
    assert unit_circle_counts([1, fmpq(1, 2), fmpq(-1, 2)]).to_dict() == {"inside": 1, "on": 1, "outside": 0}


def test_unit_circle_roots_map_to_the_imaginary_w_axis():
    # z = e^(±j pi/3): z^2 - z + 1 -> w = ±j tan(pi/6) (from memory)
    w = bilinear(ParametricPolynomial.from_coefficients([1, -1, 1])).at()
    roots = np.roots([float(c) for c in w])
    assert np.allclose(roots.real, 0) and np.allclose(sorted(roots.imag), [-math.tan(math.pi / 6), math.tan(math.pi / 6)])


@pytest.mark.parametrize("seed", range(4))
def test_jury_agrees_with_the_w_plane_routh_and_numpy_counts(seed):
    rng = random.Random(seed)
    checked = 0
    for _ in range(60):
        coeffs = random_polynomial(rng, rng.randint(1, 9))
        counts = unit_circle_counts(coeffs)
        assert jury_stable(coeffs) == schur_stable(coeffs) == (counts.inside == len(coeffs) - 1)
        reference = numpy_counts(coeffs)  # numpy.roots as the outside reference
        if reference is not None:
            assert (counts.inside, counts.outside) == reference and counts.on == 0
            checked += 1
    assert checked > 20


def test_exact_on_circle_counts():
    # (z^2 + 1)(z - 1)(z + 1)^2 (z - 1/2) (z - 3): 5 on the circle, 1 inside, 1 outside
    p = fmpq_poly([1, 0, 1]) * fmpq_poly([-1, 1]) * fmpq_poly([1, 1]) ** 2 * fmpq_poly([fmpq(-1, 2), 1]) * fmpq_poly([-3, 1])
    coeffs = [p[i] for i in range(p.degree(), -1, -1)]
    assert unit_circle_counts(coeffs).to_dict() == {"inside": 1, "on": 5, "outside": 1}
    assert not jury_stable(coeffs)


def test_parametric_jury_table_agrees_with_the_w_range_at_rational_points():
    rng = random.Random(11)
    for _ in range(25):
        n = rng.randint(1, 6)
        coeffs = [fmpq_poly([fmpq(rng.randint(-6, 6), rng.randint(1, 3)), fmpq(rng.randint(-3, 3), 4)])
                  for _ in range(n + 1)]
        coeffs[0] = fmpq_poly([1])
        poly = ParametricPolynomial.from_coefficients(coeffs, "K")
        table, rng_z = jury_table(poly), z_stable_range(poly)
        for _ in range(15):
            k = fmpq(rng.randint(-80, 80), rng.randint(1, 9))
            assert table.stable_at(k) == rng_z.contains(k) == schur_stable(poly.at(k), n)


def test_ball_verdict_matches_the_exact_one_away_from_the_boundary():
    rng = random.Random(3)
    from flint import arb
    for _ in range(40):
        coeffs = random_polynomial(rng, rng.randint(1, 7))
        certified = jury_certified([arb(c) for c in coeffs])
        assert certified in (jury_stable(coeffs), None)
        if numpy_counts(coeffs) is not None:
            assert certified == jury_stable(coeffs)


def test_second_order_closed_form_range_and_kinds():
    # z^2 + (K - 1) z + 1/4: 1 + a1 + a0 = K + 1/4 > 0 and 1 - a1 + a0 = 9/4 - K > 0, |a0| < 1
    r = z_stable_range(ParametricPolynomial.from_coefficients([1, fmpq_poly([-1, 1]), fmpq(1, 4)], "K"),
                       sample_period=fmpq(1, 10))
    assert r.to_dict()["exact_intervals"] == [["-1/4", "9/4"]]
    low, high = r.endpoints
    assert (low.kind, low.angle, low.omega) == ("z_one", 0.0, 0.0)
    assert high.kind == "z_minus_one" and high.omega == pytest.approx(math.pi / 0.1)


def test_complex_pair_on_the_circle_gives_angle():
    # z^2 - z + K: |a0| < 1 limits K to 1, where z = e^(±j pi/3) (cos theta = 1/2)
    r = z_stable_range(ParametricPolynomial.from_coefficients([1, -1, fmpq_poly([0, 1])], "K"), sample_period=2)
    assert r.to_dict()["exact_intervals"] == [["0", "1"]]
    pair = r.endpoints[1]
    assert pair.kind == "unit_circle" and pair.angle == pytest.approx(math.pi / 3)
    assert pair.omega == pytest.approx(math.pi / 6)


def test_radius_requirement_is_a_scaled_circle():
    # z - K: the root K must satisfy |K| < e^(-sigma Ts); e^(-1/2) from math.exp
    poly = ParametricPolynomial.from_coefficients([1, fmpq_poly([0, -1])], "K")
    rng, ok = radius_range(poly, 5, fmpq(1, 10), nominal=fmpq(6, 10))
    [(lo, hi)] = rng.to_dict()["intervals"]
    assert lo == pytest.approx(-math.exp(-0.5), rel=1e-15) and hi == pytest.approx(math.exp(-0.5), rel=1e-15)
    assert ok is True and meets_radius(poly, 5, fmpq(1, 10), fmpq(61, 100)) is False  # e^-0.5 = 0.6065...
    low, high = radius_bounds(5, fmpq(1, 10))
    assert low < to_fmpq(math.exp(-0.5)) * (1 + fmpq(1, 10 ** 14)) and high > low
