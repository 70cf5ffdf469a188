"""Rows 3 and 5: pole paths over many parameter values, and the floating-point floor under them.

Row 3 times :func:`core.analysis.poles.pole_paths` (coefficients at every value, one batched eigenvalue
call on companion matrices, path matching) against a plain Python loop of ``numpy.roots`` over
the same coefficient rows (evaluated beforehand, so the loop is charged only for the roots).

Row 5 is a lower bound: about 10 n^3 flops per n x n eigenvalue problem (Hessenberg reduction
plus Francis QR, eigenvalues only; Golub & Van Loan, *Matrix Computations*, from memory) times
the number of values, divided by this machine's measured peak rate (2 N^3 flops of an N x N
float64 matrix product, the fastest of several runs).
"""
from __future__ import annotations

import time

import numpy as np

from bench.generators import loop_polynomial
from bench.table import Row, ms
from bench.timing import median, repeat
from core.analysis.poles import pole_paths

DEGREE = 20
VALUES = 2000
K_RANGE = (0.0, 5000.0)  # crosses the degree-20 loop's upper stability limit (about 3379)
TARGET_S = 0.050
FLOPS_PER_EIG = 10  # times n^3, from memory (see the module notes)
MATMUL_N = 1000


def workload(degree: int = DEGREE, count: int = VALUES):
    """(polynomial, values) of row 3."""
    return loop_polynomial(degree), np.linspace(*K_RANGE, count)


def roots_loop(coeff_rows: np.ndarray) -> list[np.ndarray]:
    """The plain way: one ``numpy.roots`` call per parameter value."""
    return [np.roots(row) for row in coeff_rows]


def coefficient_rows(poly, values: np.ndarray) -> np.ndarray:
    """Float coefficients (highest power first) at every value, one row per value."""
    return np.array([poly.at_float(v) for v in values])


def peak_flops(n: int = MATMUL_N, runs: int = 5) -> float:
    """Floating-point operations per second of the fastest of ``runs`` n x n float64 products."""
    rng = np.random.default_rng(0)
    a, b = rng.standard_normal((n, n)), rng.standard_normal((n, n))
    a @ b
    best = min(repeat(lambda: a @ b, repeats=runs, warmup=0))
    return 2.0 * n ** 3 / best


def eigenvalue_floor_s(degree: int, count: int, flops_per_s: float) -> float:
    """Seconds the eigenvalue work of ``count`` companion matrices needs at ``flops_per_s``.

    >>> eigenvalue_floor_s(20, 2000, 1.6e9)
    0.1
    """
    return FLOPS_PER_EIG * degree ** 3 * count / flops_per_s


def run(quick: bool) -> list[Row]:
    poly, values = workload()
    times = repeat(lambda: pole_paths(poly, values), repeats=5 if quick else 15)
    ours = median(times)
    rows_of_coeffs = coefficient_rows(poly, values)
    plain = median(repeat(lambda: roots_loop(rows_of_coeffs), repeats=3 if quick else 7))
    companions = _companions(rows_of_coeffs)
    eig_only = median(repeat(lambda: np.linalg.eigvals(companions), repeats=5 if quick else 15))
    rows = [Row("3", f"pole paths, {VALUES:,} values, degree {DEGREE}, median of {len(times)}",
                f"{ms(ours)} ({plain / ours:.1f}x faster than a numpy.roots loop: {ms(plain)})",
                f"<= {ms(TARGET_S)}", ours <= TARGET_S,
                {"median_s": ours, "times_s": times, "roots_loop_s": plain, "speedup": plain / ours}),
            Row("3", "  of which the batched numpy.linalg.eigvals call", ms(eig_only), "", None,
                {"eigvals_s": eig_only})]
    start = time.perf_counter()
    peak = peak_flops(runs=3 if quick else 7)
    floor = eigenvalue_floor_s(DEGREE, VALUES, peak)
    rows.append(Row("5", f"floor: {FLOPS_PER_EIG} n^3 flops x {VALUES:,} eigenproblems (n = {DEGREE}) "
                    f"at the measured peak {peak / 1e9:.1f} GFLOP/s ({MATMUL_N}x{MATMUL_N} matmul)",
                    f"{ms(floor)}; row 3 is {ours / floor:.0f}x the floor, its eigvals call "
                    f"{eig_only / floor:.0f}x", "", None,
                    {"peak_flops": peak, "floor_s": floor, "ratio_row3": ours / floor,
                     "ratio_eigvals": eig_only / floor, "measure_s": time.perf_counter() - start}))
    return rows


def _companions(coeffs: np.ndarray) -> np.ndarray:
    c = coeffs[:, 1:] / coeffs[:, :1]
    m, n = c.shape
    comp = np.zeros((m, n, n))
    comp[:, 0, :] = -c
    idx = np.arange(n - 1)
    comp[:, idx + 1, idx] = 1.0
    return comp
