"""Poles at the edges: certified roots and pole paths against numpy.roots (the reference)."""
import numpy as np
from scipy.optimize import linear_sum_assignment

from core.algebra.polynomial import ParametricPolynomial, fmpq_poly
from core.analysis.poles import Pole, certified_roots, pole_paths


def matched_error(a, b):
    d = np.abs(a[:, None] - b[None, :])
    i, j = linear_sum_assignment(d)
    return d[i, j].max()


def test_certified_roots_keep_multiplicity():
    # (s+1)^3 (s^2+4): numpy smears the triple root; the certified roots keep it exact
    coeffs = np.polymul(np.poly([-1, -1, -1]), [1, 0, 4]).round().astype(int).tolist()
    poles = certified_roots(coeffs)
    assert Pole(-1.0, 0.0, 3) in poles
    assert {(p.re, p.im, p.multiplicity) for p in poles if p.im} == {(0.0, 2.0, 1), (0.0, -2.0, 1)}


def test_damping_and_natural_frequency_of_a_pair():
    # s^2 + 2 zeta wn s + wn^2 with zeta = 0.6, wn = 5 (standard second-order form, from memory)
    p = certified_roots([1, 6, 25])[0]
    assert abs(p.damping - 0.6) < 1e-12 and abs(p.natural_frequency - 5) < 1e-12


def test_paths_equal_numpy_roots_at_every_value():
    # s^4 + 6 s^3 + 11 s^2 + 6 s + K over 600 values (anchor + polish path); numpy.roots reference
    poly = ParametricPolynomial.from_coefficients([1, 6, 11, 6, fmpq_poly([0, 1])], "K")
    values = np.linspace(0.5, 40, 600)
    paths = pole_paths(poly, values)
    for v, row in zip(values, paths):
        assert matched_error(row, np.roots([1, 6, 11, 6, v])) < 1e-9


def test_paths_are_continuous_columns():
    poly = ParametricPolynomial.from_coefficients([1, 3, 2, fmpq_poly([0, 1])], "K")
    values = np.linspace(0, 20, 2000)
    paths = pole_paths(poly, values)
    jumps = np.abs(np.diff(paths, axis=0)).max()
    assert jumps < 0.1  # each column moves a little per step: one continuous branch per column


def test_order_drop_leaves_nan():
    # K s^2 + s + 1: at K = 0 only one root (-1) exists
    poly = ParametricPolynomial.from_coefficients([fmpq_poly([0, 1]), 1, 1], "K")
    paths = pole_paths(poly, [0.0, 1.0])
    assert np.isnan(paths[0]).sum() == 1 and np.allclose(paths[0][~np.isnan(paths[0])], [-1.0])


def test_paths_through_a_near_double_root_match_numpy():
    # (s^2 + 2s + 1 + K/10^8)(s + 3): a pair a hair apart near s = -1, where an uncoupled
    # Newton polish could let two roots run together; numpy.roots is the reference
    from flint import fmpq
    k = fmpq_poly([0, fmpq(1, 10**8)])
    poly = ParametricPolynomial.from_coefficients([1, 5, fmpq_poly([7]) + k, fmpq_poly([3]) + 3 * k], "K")
    values = np.linspace(0, 1, 400)
    paths = pole_paths(poly, values)
    for v, row in zip(values, paths):
        ref = np.roots([1, 5, 7 + v * 1e-8, 3 + 3 * v * 1e-8])
        assert matched_error(row, ref) < 1e-6  # the pair's own conditioning is ~1e-8 ** 0.5
        assert np.isclose(np.sum(row), np.sum(ref))
