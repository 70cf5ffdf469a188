"""Models whose numbers leave the float range (1e300 gains): exact answers, floats only where they fit.

A block denominator of 1e300 typed twice makes the loop gain 1e-600 and the range ends near 1e600.
The exact engine has no trouble; every float edge (range end values, roots, pole paths, the step
response) must saturate or rescale instead of failing, and the texts must not print -inf for an
end that is finite.
"""
from __future__ import annotations

import json
import math
from dataclasses import replace

import mpmath as mp
import numpy as np
import pytest
import sympy as sp
from flint import fmpq, fmpq_poly
from hypothesis import given, settings
from hypothesis import strategies as st

from core import check_polynomial, check_project
from core.algebra.polynomial import ParametricPolynomial, decimal_text, scaled_floats, to_float
from core.analysis.poles import pole_paths
from core.analysis.requirements import loop_poles
from core.analysis.time_response import step_response, transfer_from_text
from core.cli import main
from core.io.project_file import project_from_dict
from core.present.report_json import json_text
from core.present.report_text import report_text


def _tiny_gain_project() -> dict:
    """A speed loop whose controller and drive blocks each carry a denominator of 1e300."""
    block = {"kind": "block", "x": 0, "y": 0}
    return {
        "format": "loopwright-project", "version": 3, "name": "tiny gain",
        "parameters": [{"name": "K", "nominal": 0.5, "min": 0, "max": 20}], "tuning_parameter": "K",
        "nodes": [
            {"id": "r", "kind": "input", "x": 0, "y": 0},
            {"id": "e", "kind": "sum", "inputs": [{"polarity": "add"}, {"polarity": "subtract"}], "x": 0, "y": 0},
            {**block, "id": "C", "numerator": "K*(s+1)", "denominator": "1e300"},
            {**block, "id": "A", "numerator": "8", "denominator": "1e300"},
            {**block, "id": "P", "numerator": "3", "denominator": "(s+0.6)*(s+5)"},
            {"id": "b", "kind": "branch", "x": 0, "y": 0},
            {"id": "y", "kind": "output", "x": 0, "y": 0},
            {**block, "id": "H", "numerator": "25", "denominator": "s+25"},
        ],
        "wires": [{"from": a, "to": b, "port": p} for a, b, p in
                  [("r", "e", 0), ("e", "C", 0), ("C", "A", 0), ("A", "P", 0), ("P", "b", 0),
                   ("b", "y", 0), ("b", "H", 0), ("H", "e", 1)]],
        "analysis": {"input": "r", "output": "y"},
    }


def test_range_end_beyond_floats_is_exact_and_printed_finite(tmp_path, capsys):
    # Reference (sympy, and by hand): the loop's constant coefficient 1e600*0.6*5*25 + 600*K
    # vanishes at K = -1.25e599; the cubic's other Hurwitz conditions hold for every K above it.
    k, s = sp.symbols("K s")
    char = sp.expand(sp.Integer(10) ** 600 * (s + sp.Rational(3, 5)) * (s + 5) * (s + 25)
                     + 600 * k * (s + 1))
    end = sp.solve(char.subs(s, 0), k)[0]
    report = check_project(project_from_dict(_tiny_gain_project()))
    rng = report.stable_range.to_dict()
    assert sp.Rational(rng["exact_intervals"][0][0]) == end
    assert rng["exact_intervals"][0][1] is None
    assert rng["approx_intervals"][0][0].startswith("-1.25") and rng["approx_intervals"][0][0].endswith("e+599")
    path = tmp_path / "tiny.loop.json"
    path.write_text(json.dumps(_tiny_gain_project()))
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "Stable for K in: (-1.25" in out and "(-inf" not in out
    assert main(["check", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)  # strict JSON: the infinite float end is null
    assert data["stable_range"]["endpoints"][0]["value"] is None
    assert data["margins"]["low_text"] == rng["approx_intervals"][0][0]


def test_roots_and_paths_of_coefficients_beyond_floats_match_sympy():
    # Reference: sympy nroots of s^3 + 6s^2 + 11s + 6 + K at K = 2; here every coefficient times 1e-600.
    tiny = fmpq(1, 10 ** 600)
    poly = ParametricPolynomial.from_coefficients([tiny, 6 * tiny, 11 * tiny, fmpq_poly([6 * tiny, tiny])], "K")
    want = _sorted(complex(r) for r in sp.Poly([1, 6, 11, 8], sp.Symbol("s")).nroots())
    assert np.allclose(_sorted(np.roots(poly.at_float(2.0))), want)
    paths = pole_paths(poly, [0.0, 2.0])
    assert np.all(np.isfinite(paths))
    assert np.allclose(_sorted(paths[1]), want)


def _sorted(roots) -> list[complex]:
    return sorted(roots, key=lambda z: (round(z.real, 9), z.imag))


def test_step_and_poles_of_the_tiny_gain_loop_run():
    report = check_project(project_from_dict(_tiny_gain_project()))
    poles = loop_poles(report, 0.5)
    # Reference (by hand): with a loop gain of 1e-600 the poles are the open-loop ones, -0.6, -5, -25.
    assert np.allclose(sorted(poles.real), [-25, -5, -0.6])


def test_step_response_keeps_the_gain_of_tiny_coefficients():
    # Reference (final value theorem, by hand): 1e-600 / (1e-600 s + 2e-600) settles at 1/2
    # (the numbers are built inside the polynomials: typed text stops at 1e300).
    tiny = fmpq(1, 10 ** 600)
    transfer = transfer_from_text("1", "s + 2")
    transfer = replace(transfer, num=_times(transfer.num, tiny), den=_times(transfer.den, tiny),
                       characteristic=_times(transfer.characteristic, tiny))
    step = step_response(transfer)
    assert step.metrics.final_value == 0.5
    assert abs(step.y[-1] - 0.5) < 1e-3


def _times(poly: ParametricPolynomial, factor: fmpq) -> ParametricPolynomial:
    return ParametricPolynomial.from_coefficients([c * factor for c in poly.coeffs], poly.parameter)


def test_scaled_floats_and_saturation():
    assert to_float(fmpq(10) ** 400) == float("inf") and to_float(-fmpq(10) ** 400) == float("-inf")
    assert to_float(fmpq(1, 10 ** 400)) == 0.0
    # roots unchanged by the common power of two (numpy reference on the unscaled floats)
    coeffs = [fmpq(2), fmpq(-3), fmpq(1)]
    assert np.allclose(sorted(np.roots(scaled_floats(coeffs))), sorted(np.roots([2.0, -3.0, 1.0])))


# -- poles and Routh entries beyond the float range ---------------------------------------------------
def test_a_pole_near_minus_1e400_is_written_from_the_exact_value(capsys):
    # Reference (mpmath, 60 digits): the roots of 1e-300 s^2 + 1e100 s + 1.
    mp.mp.dps = 60
    roots = sorted(mp.polyroots([mp.mpf("1e-300"), mp.mpf("1e100"), 1], maxsteps=200, extraprec=2000), key=abs)
    assert main(["check", "--poly", "1e-300*s^2 + 1e100*s + 1"]) == 0
    out = capsys.readouterr().out
    assert "inf" not in out and "nan" not in out
    big = mp.nstr(roots[1], 6)  # '-1.0e+400'
    assert float(mp.mpf(big) / mp.mpf("1e400")) == -1.0
    assert "-1e+400 + j0   damping 1, natural frequency 1e+400 rad/s" in out
    assert main(["check", "--poly", "1e-300*s^2 + 1e100*s + 1", "--json"]) == 0
    poles = json.loads(capsys.readouterr().out)["nominal"]["poles"]
    far = min(poles, key=lambda p: p[0] if p[0] is not None else -math.inf)
    assert far == [None, 0.0]  # beyond floats: null in the numeric pair


def test_pole_json_texts_and_damping_of_a_far_pole():
    report = check_polynomial("1e-300*s^2 + 1e100*s + 1")
    far = next(p for p in report.nominal.poles if p.re == -math.inf)
    # Reference (by hand): a real negative pole has damping 1; its size is |a1/a2| = 1e400 (mpmath above)
    assert far.damping == 1.0 and far.to_dict()["re_text"] == "-1e+400"
    assert far.to_dict()["natural_frequency_text"] == "1e+400"


def test_a_complex_pair_real_part_is_refined_not_a_wide_ball_midpoint():
    # Reference (mpmath, 400 digits): s^3 + 1e-300 s^2 + 1e200 s + 1e100 has a pair with real part
    # +5e-101 (unstable, as the exact Routh count says) and imaginary part +-1e100.
    mp.mp.dps = 400
    pair = [r for r in mp.polyroots([1, mp.mpf("1e-300"), mp.mpf("1e200"), mp.mpf("1e100")],
                                    maxsteps=400, extraprec=4000) if abs(mp.im(r)) > 1]
    mp.mp.dps = 15
    report = check_polynomial("s^3 + 1e-300*s^2 + 1e200*s + 1e100")
    assert report.nominal.rhp == 2
    upper = next(p for p in report.nominal.poles if p.im > 0)
    assert upper.re == pytest.approx(float(mp.re(pair[0])), rel=1e-6) and upper.re > 0


def test_routh_entries_beyond_floats_print_without_inf(capsys):
    # Reference (by hand, sympy integers): the analysed polynomial is the typed one times 1e300,
    # 1e300 s^3 + s^2 + 1e500 s + 1e400; row s^1 starts with (1 * 1e500 - 1e300 * 1e400) / 1.
    report = check_polynomial("s^3 + 1e-300*s^2 + 1e200*s + 1e100")
    first = report.routh.rows[2][0].constant()
    assert sp.Rational(str(first)) == sp.Integer(10) ** 500 - sp.Integer(10) ** 700
    assert decimal_text(first) == "-1e+700"
    assert main(["check", "--poly", "s^3 + 1e-300*s^2 + 1e200*s + 1e100"]) == 0
    out = capsys.readouterr().out
    assert "inf" not in out and "nan" not in out


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.sampled_from([-1, 1]), st.integers(-300, 300)), min_size=2, max_size=6))
def test_coefficients_near_the_limits_never_give_inf_nan_or_an_error(terms):
    # Property: any polynomial whose coefficients are +-10^k, |k| <= 300 (the typed-number limits):
    # the text and JSON reports contain no inf or nan, and nothing raises.
    poly = " + ".join(f"{'-' if sign < 0 else ''}1e{k}*s^{i}" for i, (sign, k) in enumerate(reversed(terms)))
    report = check_polynomial(poly.replace("+ -", "- "))
    text = report_text(report, None)
    assert "inf" not in text.replace("+inf", "").replace("-inf", "") and "nan" not in text
    json.loads(json_text(report.to_dict()))


def test_range_ends_beyond_the_float_range_are_written_from_their_exact_value():
    """A hostile project's parameter near 1e400 once reached exit 70 while its range end was written
    (a float infinity turned into a rational). Reference: the end 1e400 * 3/7 (by hand) and the
    irrational sqrt(2) * 1e400 (mpmath at 30 digits)."""
    import mpmath
    from flint import fmpz_poly

    from core.analysis.stable_range import Boundary, real_values
    rational = Boundary.of_rational(fmpz_poly([0, 1]), fmpq(3, 7) * fmpq(10) ** 400)
    assert rational.approx_text(6) == "4.28571e+399" and rational.approx == "4.28571428571e+399"
    mpmath.mp.dps = 30
    (negative, positive) = real_values(fmpq_poly([-2 * 10 ** 800, 0, 1]))
    expected = mpmath.nstr(mpmath.sqrt(2) * mpmath.mpf(10) ** 400, 6)
    assert positive.approx_text(6) == expected and negative.approx_text(6) == "-" + expected
