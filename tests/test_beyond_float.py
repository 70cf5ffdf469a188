"""Models whose numbers leave the float range (1e300 gains): exact answers, floats only where they fit.

A block denominator of 1e300 typed twice makes the loop gain 1e-600 and the range ends near 1e600.
The exact engine has no trouble; every float edge (range end values, roots, pole paths, the step
response) must saturate or rescale instead of failing, and the texts must not print -inf for an
end that is finite.
"""
from __future__ import annotations

import json
from dataclasses import replace

import numpy as np
import sympy as sp
from flint import fmpq, fmpq_poly

from core import check_project
from core.algebra.polynomial import ParametricPolynomial, scaled_floats, to_float
from core.analysis.poles import pole_paths
from core.analysis.requirements import loop_poles
from core.analysis.time_response import step_response, transfer_from_text
from core.cli import main
from core.io.project_file import project_from_dict


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
