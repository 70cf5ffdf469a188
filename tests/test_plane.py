"""The stability plane (core/analysis/plane.py) and ``--plane`` on the command line, against
sympy's Hurwitz determinants (exact), numpy.roots (outside a band around the boundaries) and the
textbook Routh-Hurwitz conditions.

Scenario (invented for these tests): a PI controller Kp + Ki/s on the third-order plant
6 / ((s + 1)(s + 2)(s + 4)) in unity feedback, characteristic polynomial
s (s + 1)(s + 2)(s + 4) + 6 (Kp s + Ki) = s^4 + 7 s^3 + 14 s^2 + (8 + 6 Kp) s + 6 Ki.
"""
from __future__ import annotations

import json
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
import sympy
from flint import fmpq

from core.algebra.polynomial import mpoly_context
from core.analysis.plane import stability_plane
from core.cli import main
from core.errors import AnalysisError

EXAMPLES = Path(__file__).resolve().parents[1] / "resources" / "examples"
PI_TEXT = "s^4 + 7s^3 + 14s^2 + (8 + 6 Kp) s + 6 Ki"
BAND = 1e-4  # numpy counts are compared only where every root is this far from the axis (relative)


def pi_polynomial():
    s, Ki, Kp = mpoly_context(["Ki", "Kp"]).gens()
    return s**4 + 7 * s**3 + 14 * s**2 + (8 + 6 * Kp) * s + 6 * Ki


def centres(lo, hi, count):
    """The grid's points, exactly (the centres of count equal cells)."""
    lo, hi = Fraction(lo), Fraction(hi)
    return [lo + (hi - lo) * Fraction(2 * i + 1, 2 * count) for i in range(count)]


def sympy_hurwitz_conditions(coeffs):
    """The Hurwitz determinants Delta_1..Delta_n of a polynomial (highest power first, leading
    coefficient positive) as sympy expressions; stable iff all are positive (Hurwitz 1895; Gantmacher,
    The Theory of Matrices, from memory)."""
    n = len(coeffs) - 1

    def a(k):
        return coeffs[k] if 0 <= k <= n else 0
    matrix = sympy.Matrix(n, n, lambda i, j: a(2 * (j + 1) - (i + 1)))
    return [sympy.expand(matrix[:k, :k].det()) for k in range(1, n + 1)]


def exact_evaluator(expr, names):
    """expr as a function of Fractions (sympy's polynomial terms, evaluated exactly)."""
    terms = sympy.Poly(expr, *names).as_dict()
    coeff = {e: Fraction(int(sympy.fraction(c)[0]), int(sympy.fraction(c)[1])) for e, c in terms.items()}
    return lambda *vals: sum(c * np.prod([v ** k for v, k in zip(vals, e)], dtype=object) for e, c in coeff.items())


def numpy_rhp(coeffs):
    """Right-half-plane count by numpy.roots, or None when a root is within the band of the axis."""
    roots = np.roots([float(c) for c in coeffs])
    scale = max(1.0, float(np.max(np.abs(roots)))) if len(roots) else 1.0
    if len(roots) and np.min(np.abs(roots.real)) < BAND * scale:
        return None
    return int(np.sum(roots.real > 0))


KP, KI = sympy.symbols("Kp Ki")
PI_COEFFS = [1, 7, 14, 8 + 6 * KP, 6 * KI]


@pytest.fixture(scope="module")
def pi_plane():
    return stability_plane(pi_polynomial(), "Kp", "Ki", {}, (fmpq(-2), fmpq(10)), (fmpq(-1), fmpq(12)),
                           resolution=40)


def test_pi_labels_match_sympy_hurwitz_conditions_everywhere(pi_plane):
    conditions = [exact_evaluator(d, (KP, KI)) for d in sympy_hurwitz_conditions(PI_COEFFS)]
    xs, ys = centres(-2, 10, 40), centres(-1, 12, 40)
    stable_seen = 0
    for j, y in enumerate(ys):
        for i, x in enumerate(xs):
            values = [f(x, y) for f in conditions]
            label = pi_plane.grid[j][i]
            if any(v == 0 for v in values):  # exactly on a Hurwitz boundary (sympy reference)
                continue
            stable = all(v > 0 for v in values)  # Routh-Hurwitz (Hurwitz 1895), via sympy
            assert (label == 0) == stable, (x, y, label)
            stable_seen += stable
    assert 0 < stable_seen < 40 * 40


def test_pi_labels_match_numpy_roots_outside_a_band(pi_plane):
    xs, ys = centres(-2, 10, 40), centres(-1, 12, 40)
    compared = 0
    for j, y in enumerate(ys):
        for i, x in enumerate(xs):
            expected = numpy_rhp([1, 7, 14, 8 + 6 * x, 6 * y])  # numpy.roots reference
            if expected is None:
                continue
            assert pi_plane.grid[j][i] == expected, (x, y)
            compared += 1
    assert compared > 0.9 * 40 * 40
    assert {label for row in pi_plane.grid for label in row} >= {0, 1, 2}


def test_pi_regions_have_exact_points_with_the_right_count(pi_plane):
    conditions = [exact_evaluator(d, (KP, KI)) for d in sympy_hurwitz_conditions(PI_COEFFS)]
    counts = set()
    for region in pi_plane.regions:
        x, y = Fraction(region.point["Kp"]), Fraction(region.point["Ki"])
        assert -2 < x < 10 and -1 < y < 12
        assert all(f(x, y) > 0 for f in conditions) == (region.rhp == 0)  # sympy Hurwitz reference
        assert numpy_rhp([1, 7, 14, 8 + 6 * x, 6 * y]) in (None, region.rhp)  # numpy.roots reference
        counts.add(region.rhp)
    assert {0, 1, 2} <= counts
    assert sum(r.share for r in pi_plane.regions) == pytest.approx(1.0, abs=0.1)


def test_pi_slices_equal_sympy_inequalities(pi_plane):
    for piece in pi_plane.slices:
        kp = sympy.Rational(str(piece.x))
        conditions = [d.subs(KP, kp) > 0 for d in sympy_hurwitz_conditions(PI_COEFFS)]
        expected = sympy.reduce_inequalities(conditions, KI).as_set()  # sympy reference
        got = sympy.Union(*[sympy.Interval.open(-sympy.oo if lo is None else lo.value,
                                                sympy.oo if hi is None else hi.value)
                            for lo, hi in piece.range.intervals])
        for probe in np.linspace(-5, 30, 141):
            if min((abs(float(b) - probe) for b in expected.boundary), default=1) > 1e-9:
                assert expected.contains(sympy.Float(probe)) == got.contains(sympy.Float(probe)), (kp, probe)


def test_pi_boundaries_are_the_textbook_polynomials(pi_plane):
    # a0 = 6 Ki (through s = 0) and Delta_3 for s^4 + a1 s^3 + a2 s^2 + a3 s + a4:
    # a1 a2 a3 - a3^2 - a1^2 a4 (Routh-Hurwitz, from memory), here in Kp and Ki
    delta3 = sympy.expand(7 * 14 * (8 + 6 * KP) - (8 + 6 * KP) ** 2 - 49 * 6 * KI)
    crossing = [sympy.sympify(t.replace("^", "**"), locals={"Kp": KP, "Ki": KI})
                for t in pi_plane.boundaries["crossing"]]
    assert sympy.simplify(sympy.Mul(*crossing) / delta3).is_number
    assert pi_plane.boundaries["origin"] == ["Ki"]


def test_pi_crossing_arcs_carry_numpy_frequencies(pi_plane):
    crossing = [a for a in pi_plane.arcs if a.kind == "crossing"]
    assert crossing
    for arc in crossing:
        for (x, y), omega in zip(arc.points, arc.omega):
            roots = np.roots([1, 7, 14, 8 + 6 * x, 6 * y])  # numpy.roots reference
            assert np.min(np.abs(roots - 1j * omega)) < 1e-6 * max(1.0, omega)


@pytest.mark.parametrize("resolution", [7, 23])
def test_nonlinear_entry_against_sympy_and_numpy(resolution):
    """Both parameters in one coefficient (a b), a square (a^2): s^3 + a b s^2 + (a^2 + 1) s + b."""
    s, a, b = mpoly_context(["a", "b"]).gens()
    plane = stability_plane(s**3 + a * b * s**2 + (a**2 + 1) * s + b, "a", "b", {},
                            (fmpq(-2), fmpq(2)), (fmpq(-1), fmpq(3)), resolution)
    A, B = sympy.symbols("a b")
    conditions = [exact_evaluator(d, (A, B)) for d in sympy_hurwitz_conditions([1, A * B, A**2 + 1, B])]
    for j, y in enumerate(centres(-1, 3, resolution)):
        for i, x in enumerate(centres(-2, 2, resolution)):
            values = [f(x, y) for f in conditions]
            if all(v != 0 for v in values):
                assert (plane.grid[j][i] == 0) == all(v > 0 for v in values)  # sympy Hurwitz reference
            expected = numpy_rhp([1, x * y, x * x + 1, y])  # numpy.roots reference
            if expected is not None:
                assert plane.grid[j][i] == expected, (x, y)


def test_time_constant_on_the_highest_power():
    """T s^4 + (3T + 1) s^3 + (2T + 3) s^2 + 2 s + K: the order drops at T = 0 (root to infinity)."""
    s, K, T = mpoly_context(["K", "T"]).gens()
    plane = stability_plane(T * s**4 + (3 * T + 1) * s**3 + (2 * T + 3) * s**2 + 2 * s + K, "T", "K", {},
                            (fmpq(-1, 2), fmpq(2)), (fmpq(-1), fmpq(5)), 30)
    assert "T" in plane.boundaries["infinity"]
    assert any(a.kind == "infinity" for a in plane.arcs)  # the vertical line T = 0
    for j, k in enumerate(centres(-1, 5, 30)):
        for i, t in enumerate(centres(Fraction(-1, 2), 2, 30)):
            expected = numpy_rhp([t, 3 * t + 1, 2 * t + 3, 2, k])  # numpy.roots reference
            if expected is not None:
                assert plane.grid[j][i] == expected, (t, k)


def test_other_parameters_sit_at_their_values():
    s, K, T, g = mpoly_context(["K", "T", "g"]).gens()
    poly = s**3 + g * s**2 + T * s + K
    plane = stability_plane(poly, "T", "K", {"g": fmpq(2)}, (fmpq(0), fmpq(4)), (fmpq(0), fmpq(9)), 12)
    for j, k in enumerate(centres(0, 9, 12)):
        for i, t in enumerate(centres(0, 4, 12)):
            # s^3 + a2 s^2 + a1 s + a0 stable iff all positive and a2 a1 > a0 (Routh, textbook)
            if 2 * t != k:
                assert (plane.grid[j][i] == 0) == (2 * t > k)
    with pytest.raises(AnalysisError) as err:
        stability_plane(poly, "T", "K", {}, (fmpq(0), fmpq(4)), (fmpq(0), fmpq(9)), 4)
    assert err.value.code == "E404"


# -- errors ----------------------------------------------------------------------------------------
@pytest.mark.parametrize(("x_range", "code"), [((fmpq(1), fmpq(1)), "E431"), ((fmpq(2), fmpq(1)), "E431")])
def test_engine_refuses_empty_ranges(x_range, code):
    with pytest.raises(AnalysisError) as err:
        stability_plane(pi_polynomial(), "Kp", "Ki", {}, x_range, (fmpq(0), fmpq(1)))
    assert err.value.code == code


def test_engine_refuses_one_axis_twice():
    with pytest.raises(AnalysisError) as err:
        stability_plane(pi_polynomial(), "Kp", "Kp", {"Ki": fmpq(1)}, (fmpq(0), fmpq(1)), (fmpq(0), fmpq(1)))
    assert err.value.code == "E430"


@pytest.mark.parametrize(("plane", "code"), [
    ("Kp=0..10,Kp=0..3", "E430"),
    ("Kp=3..1,Ki=0..3", "E431"),
    ("Kp=0..10,Ki=2..2", "E431"),
    ("Kp=0..10,Kd=0..3", "E432"),
    ("Kp=0..10", "E501"),
    ("Kp=0..10;Ki=0..1", "E501"),
    ("Kp=0-10,Ki=0..1", "E501"),
    ("Kp,Ki", "E501"),  # ranges are required with --poly
    ("Kp=a..10,Ki=0..1", "E112"),
    ("", "E501"),
])
def test_command_line_errors(plane, code, capsys):
    assert main(["check", "--poly", PI_TEXT, "--plane", plane]) == 2
    err = capsys.readouterr().err
    assert f": {code}" in err and "Traceback" not in err and len(err.strip().splitlines()) == 1


def test_command_line_project_axis_not_a_parameter(capsys):
    path = str(EXAMPLES / "gimbal_rate_loop.loop.json")
    assert main(["check", path, "--plane", "Ka,Kq"]) == 2
    assert ": E432" in capsys.readouterr().err


# -- the command line's report -----------------------------------------------------------------------
def test_command_line_json_for_a_polynomial(capsys):
    assert main(["check", "--poly", PI_TEXT, "--plane", "Kp=-2..10,Ki=-1..12", "--at", "Kp=1",
                 "--at", "Ki=1", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    plane = data["plane"]
    conditions = [exact_evaluator(d, (KP, KI)) for d in sympy_hurwitz_conditions(PI_COEFFS)]
    for region in plane["regions"]:
        x, y = Fraction(region["point"]["Kp"]), Fraction(region["point"]["Ki"])
        assert all(f(x, y) > 0 for f in conditions) == (region["rhp"] == 0)  # sympy Hurwitz reference
    assert {a["kind"] for a in plane["arcs"]} <= {"origin", "infinity", "crossing", "singular"}
    assert all(len(a["polyline"]) >= 2 and all(len(p) == 2 for p in a["polyline"]) for a in plane["arcs"])
    assert plane["slices"] and all({"x", "intervals", "exact_intervals"} <= set(s) for s in plane["slices"])
    assert plane["nominal"] == {"Kp": "1", "Ki": "1"}
    assert data["nominal"]["stable"] is True  # the main report is unchanged by --plane


def test_command_line_text_and_project_ranges_from_the_table(capsys):
    path = str(EXAMPLES / "gimbal_rate_loop.loop.json")
    assert main(["check", path, "--plane", "Ka,Kr", "--json"]) == 0
    plane = json.loads(capsys.readouterr().out)["plane"]
    project = json.loads((EXAMPLES / "gimbal_rate_loop.loop.json").read_text(encoding="utf-8"))
    table = {p["name"]: p for p in project["parameters"]}
    for axis, key in (("Ka", "x_range"), ("Kr", "y_range")):
        lo, hi = (Fraction(v) for v in plane[key])
        assert (lo, hi) == (Fraction(str(table[axis]["min"])), Fraction(str(table[axis]["max"])))  # the file's table
    assert main(["check", path, "--plane", "Ka=0..20,Kr=0.05..1"]) == 0
    text = capsys.readouterr().out
    assert "Stability plane: Ka from 0 to 20, Kr from 1/20 to 1" in text
    assert text.index("Stability plane") < text.index("Caution:")


def test_bench_row_input_is_the_pi_loop():
    # numpy.polymul/polyadd as the outside reference for s D(s) + (Kp s + Ki) N(s) at Kp = 2, Ki = 3
    from bench import generators, plane_row

    loop = generators.loop_polynomial(5)
    den = np.array([float(c) for c in loop.at(0)])
    num = np.array([float(c) for c in loop.at(1)]) - den
    num = np.trim_zeros(num, "f")
    expected = np.polyadd(np.polymul([1, 0], den), np.polymul([2, 3], num))
    s_poly = plane_row.pi_loop().subs({"Kp": fmpq(2), "Ki": fmpq(3)})
    got = [float(s_poly.to_dict().get((k, 0, 0), 0)) for k in range(6, -1, -1)]
    assert np.allclose(got, expected)
    small = stability_plane(plane_row.pi_loop(), "Kp", "Ki", {}, *plane_row.RANGES, resolution=6)
    (xlo, xhi), (ylo, yhi) = (tuple(Fraction(str(v)) for v in r) for r in plane_row.RANGES)
    for j, ki in enumerate(centres(ylo, yhi, 6)):
        for i, kp in enumerate(centres(xlo, xhi, 6)):
            coeffs = np.polyadd(np.polymul([1, 0], den), np.polymul([float(kp), float(ki)], num))
            assert numpy_rhp(coeffs) in (None, small.grid[j][i])  # numpy.roots reference


def test_slices_avoid_lines_where_the_order_drops():
    """Kp s + Ki: one root -Ki/Kp, in the left half plane iff Ki/Kp > 0 (elementary); at Kp = 0
    the order drops all along the line, so no slice is put there."""
    s, Ki, Kp = mpoly_context(["Ki", "Kp"]).gens()
    plane = stability_plane(Kp * s + Ki, "Kp", "Ki", {}, (fmpq(-1), fmpq(1)), (fmpq(-1), fmpq(1)), 10)
    assert len(plane.slices) == 5
    for piece in plane.slices:
        kp = Fraction(str(piece.x))
        assert kp != 0
        expected = [[0.0, None]] if kp > 0 else [[None, 0.0]]
        assert piece.range.to_dict()["intervals"] == expected
    assert sorted(r.rhp for r in plane.regions) == [0, 0, 1, 1]  # four quadrants


def test_a_region_thinner_than_the_grid_is_still_found():
    """s^2 + s + (x - 1/2)^2 + y^2 - 1/10^4: one root in the right half plane exactly inside the
    disc of radius 1/100 about (1/2, 0) (the constant term negative: Descartes' rule of signs),
    far thinner than the 4 x 4 grid's columns."""
    s, x, y = mpoly_context(["x", "y"]).gens()
    plane = stability_plane(s**2 + s + (x - fmpq(1, 2))**2 + y**2 - fmpq(1, 10**4), "x", "y", {},
                            (fmpq(0), fmpq(1)), (fmpq(-1), fmpq(1)), 4)
    assert plane.regions_complete
    assert all(label == 0 for row in plane.grid for label in row)  # the grid misses the disc
    inside = [r for r in plane.regions if r.rhp == 1]
    assert len(inside) == 1
    px, py = Fraction(inside[0].point["x"]), Fraction(inside[0].point["y"])
    assert (px - Fraction(1, 2)) ** 2 + py ** 2 < Fraction(1, 10**4)
    constant = float((px - Fraction(1, 2)) ** 2 + py ** 2 - Fraction(1, 10**4))
    assert int(np.sum(np.roots([1, 1, constant]).real > 0)) == 1  # numpy.roots reference


def test_pi_arcs_lie_on_their_boundaries(pi_plane):
    # origin arcs on a0 = 6 Ki = 0; crossing arcs on Delta_3 = a1 a2 a3 - a3^2 - a1^2 a4 = 0
    # (Routh-Hurwitz for degree 4, from memory)
    for arc in pi_plane.arcs:
        for kp, ki in arc.points:
            a3, a4 = 8 + 6 * kp, 6 * ki
            if arc.kind == "origin":
                assert abs(ki) < 1e-12
            else:
                assert arc.kind == "crossing"
                delta3 = 98 * a3 - a3 ** 2 - 49 * a4
                assert abs(delta3) < 1e-9 * (98 * abs(a3) + a3 ** 2 + 49 * abs(a4))
    assert {a.kind for a in pi_plane.arcs} == {"origin", "crossing"}


@pytest.mark.parametrize("case", ["integrator", "symmetric pair"])
def test_roots_identically_on_the_axis_or_symmetric(case):
    """s (s^2 + x s + y): a root at s = 0 for every x, y, so never stable; (s^2 - x)(s + y): a
    pair ±sqrt(x), real for x > 0 (one in the right half plane), on the axis for x < 0."""
    s, x, y = mpoly_context(["x", "y"]).gens()
    poly = s * (s**2 + x * s + y) if case == "integrator" else (s**2 - x) * (s + y)
    plane = stability_plane(poly, "x", "y", {}, (fmpq(-1), fmpq(1)), (fmpq(-1), fmpq(1)), 8)
    assert not any(r.stable for r in plane.regions)
    assert all(label != 0 for row in plane.grid for label in row)
    for region in plane.regions:
        px, py = float(Fraction(region.point["x"])), float(Fraction(region.point["y"]))
        coeffs = [1, px, py, 0] if case == "integrator" else [1, py, -px, -px * py]
        roots = np.roots(coeffs)  # numpy.roots reference
        assert int(np.sum(np.abs(roots.real) < 1e-9)) == region.jw
        assert int(np.sum(roots.real > 1e-9)) == region.rhp
    if case == "symmetric pair":
        assert {(r.rhp, r.jw) for r in plane.regions} == {(1, 0), (2, 0), (0, 2), (1, 2)}


def test_random_polynomials_against_numpy():
    """Random coefficients built from 1, x, y, x y, x^2, y^2 (some with a factor s or s^2 - x):
    every grid label equals numpy.roots' right-half-plane count where no root is near the axis."""
    import random

    rnd = random.Random(20261203)
    s, x, y = mpoly_context(["x", "y"]).gens()
    monomials = [1, x, y, x * y, x**2, y**2]
    xs, ys = centres(-2, 2, 7), centres(-2, 3, 7)
    compared = 0
    for _ in range(15):
        n = rnd.randint(1, 4)
        poly = sum((sum(rnd.randint(-3, 3) * m for m in rnd.sample(monomials, 2)) + rnd.randint(-2, 4)) * s**k
                   for k in range(n + 1)) * rnd.choice([1, 1, s, s**2 - x])
        if poly.is_zero():
            continue
        plane = stability_plane(poly, "x", "y", {}, (fmpq(-2), fmpq(2)), (fmpq(-2), fmpq(3)), 7)
        degree = poly.degrees()[0]
        for j, yv in enumerate(ys):
            for i, xv in enumerate(xs):
                at = poly.subs({"x": fmpq(xv.numerator, xv.denominator), "y": fmpq(yv.numerator, yv.denominator)})
                coeffs = [float(at.to_dict().get((k, 0, 0), 0)) for k in range(degree, -1, -1)]
                if coeffs[0] == 0:
                    continue  # the order drops here
                expected = numpy_rhp(coeffs)  # numpy.roots reference
                if expected is not None:
                    assert plane.grid[j][i] == expected, (str(poly), xv, yv)
                    compared += 1
    assert compared > 200


def test_parameters_named_like_internal_variables():
    # s^3 + u s^2 + s + v: stable iff u > 0, v > 0 and u * 1 > v (Routh, third order, textbook)
    s, u, v = mpoly_context(["u", "v"]).gens()
    plane = stability_plane(s**3 + u * s**2 + s + v, "u", "v", {}, (fmpq(-1), fmpq(4)), (fmpq(-1), fmpq(3)), 10)
    for j, vv in enumerate(centres(-1, 3, 10)):
        for i, uu in enumerate(centres(-1, 4, 10)):
            if uu != vv:
                assert (plane.grid[j][i] == 0) == (uu > 0 and vv > 0 and uu > vv)


def test_command_line_overlong_plane_text(capsys):
    assert main(["check", "--poly", PI_TEXT, "--plane", "Kp=0..1," + "Ki" * 300 + "=0..1"]) == 2
    assert ": E501" in capsys.readouterr().err
