"""Numeric roots at the edges: certified poles at one value, and vectorised pole paths.

Roots of one exact polynomial come from flint's certified complex root isolation (each root is
a ball known to contain it), so repeated and clustered roots keep their multiplicity. Pole paths
over many parameter values use batched companion-matrix eigenvalues in numpy (floats), since
they are drawn, not trusted; :func:`path_sensitivity` says where floats disagree with exact counts.

>>> [(round(p.re, 6), round(p.im, 6)) for p in certified_roots([1, 3, 2])]
[(-1.0, 0.0), (-2.0, 0.0)]
"""
from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any, cast

import numpy as np
from flint import arb, ctx, fmpq, fmpq_poly

from core.algebra.polynomial import ParametricPolynomial, binary_exponent, decimal_text, to_float, to_fmpq


@dataclass(frozen=True)
class Pole:
    """A root with its damping ratio and natural frequency (rad/s); ``multiplicity`` >= 1.

    ``re`` and ``im`` are the nearest floats (infinite, or 0, beyond the float range); ``scaled``
    = (re / 2^e, im / 2^e, e) keeps such a root's size and direction, so its damping ratio and
    texts stay right (a pole at -1e400 has damping 1 and is written ``-1e+400``).

    >>> big = Pole(-math.inf, 0.0, scaled=(-0.8, 0.0, 1330))
    >>> big.damping, big.re_text, big.natural_frequency
    (1.0, '-1.87493e+400', inf)
    """

    re: float
    im: float
    multiplicity: int = 1
    scaled: tuple[float, float, int] | None = None

    @property
    def natural_frequency(self) -> float:
        """|p| in rad/s (infinite beyond the float range)."""
        if self.scaled is None:
            return math.hypot(self.re, self.im)
        a, b, e = self.scaled
        try:
            return math.ldexp(math.hypot(a, b), e)
        except OverflowError:
            return math.inf

    @property
    def damping(self) -> float | None:
        """-Re p / |p|; None for a root at the origin."""
        a, b = (self.re, self.im) if self.scaled is None else self.scaled[:2]
        wn = math.hypot(a, b)
        return None if wn == 0 else -a / wn

    @property
    def re_text(self) -> str:
        """The real part in six significant digits, also beyond the float range."""
        return self._text(0)

    @property
    def im_text(self) -> str:
        """The imaginary part in six significant digits, also beyond the float range."""
        return self._text(1)

    @property
    def natural_frequency_text(self) -> str:
        """|p| in six significant digits, also beyond the float range."""
        if self.scaled is None:
            return f"{self.natural_frequency:.6g}"
        a, b, e = self.scaled
        return power_of_two_text(math.hypot(a, b), e)

    def _text(self, part: int) -> str:
        if self.scaled is None:
            return f"{(self.re, self.im)[part]:.6g}"
        return power_of_two_text(self.scaled[part], self.scaled[2])

    def to_dict(self) -> dict:
        """JSON-ready fields (a number beyond the float range is null there: see the texts)."""
        return {"re": self.re, "im": self.im, "multiplicity": self.multiplicity,
                "damping": self.damping, "natural_frequency": self.natural_frequency,
                "re_text": self.re_text, "im_text": self.im_text,
                "natural_frequency_text": self.natural_frequency_text}


def power_of_two_text(mantissa: float, exponent: int, digits: int = 6) -> str:
    """``mantissa * 2^exponent`` in ``digits`` significant digits, however large or small.

    >>> power_of_two_text(0.5, 2000), power_of_two_text(-0.75, -1400), power_of_two_text(0.5, 3)
    ('5.74065e+601', '-2.71061e-422', '4')
    """
    return decimal_text(fmpq(*mantissa.as_integer_ratio()) * fmpq(2) ** exponent, digits)


FIT_EXPONENT = 990  # roots of size 2^-990 .. 2^990 are kept as plain floats


def certified_roots(coeffs: Sequence) -> list[Pole]:
    """Roots of an exact polynomial (highest power first), sorted by decreasing real part.

    Each conjugate pair is listed with both members; real roots have ``im == 0.0`` exactly. Every
    part shown is known to three significant digits or more (the isolation is refined until each
    part's ball is that narrow relative to the root's size, or, for a part that may be 0, narrower
    than 2^-ROOT_BITS of it): a midpoint of a wide ball is never shown as if it were the value.
    """
    exact = [to_fmpq(c) for c in coeffs]
    poly = fmpq_poly(list(reversed(exact)))
    if poly.degree() < 1:
        return []
    poles = [_pole(root, int(mult)) for root, mult in _isolated_roots(poly)]
    poles.sort(key=lambda p: (-p.re, -p.im))
    return poles


ROOT_BITS = 4096  # the finest isolation tried (a part within 2^-4096 of the root's size reads as 0)


def _isolated_roots(poly: fmpq_poly) -> list[tuple[Any, int]]:
    prec = ctx.prec
    while True:
        with ctx.workprec(prec):
            roots = cast("list[tuple[Any, int]]", poly.complex_roots())  # stub: (ball, mult) pairs
        if prec >= ROOT_BITS or all(_parts_known(root) for root, _ in roots):
            return roots
        prec *= 4


def _parts_known(root) -> bool:
    size = abs(root)
    return all(part.rad() <= 1e-3 * abs(part.mid()) or part.rad() * 2 ** ROOT_BITS <= size.lower()
               or part == 0 for part in (root.real, root.imag))


def _pole(root, mult: int) -> Pole:
    """A Pole from a certified ball: floats when they fit, else (mantissas, shared exponent)."""
    re_mid, im_mid = root.real.mid(), root.imag.mid()
    im_mid = arb(0) if root.imag == 0 else im_mid
    exponents = [_exponent(x) for x in (re_mid, im_mid) if x != 0]
    if not exponents or -FIT_EXPONENT < max(exponents) < FIT_EXPONENT:
        return Pole(float(re_mid), float(im_mid), mult)
    e = max(exponents)
    scale = arb(2) ** (-e)
    return Pole(float(re_mid), float(im_mid), mult, (float(re_mid * scale), float(im_mid * scale), e))


def _exponent(x) -> int:
    """About log2 |x| of an exact (midpoint) ball."""
    man, exp = x.man_exp()
    return int(man).bit_length() + int(exp) if man != 0 else 0


def expand_multiplicity(poles: Sequence[Pole]) -> list[Pole]:
    """One entry per root, repeating multiple roots."""
    return [replace(p, multiplicity=1) for p in poles for _ in range(p.multiplicity)]


def dominant_pole(poles: Sequence[Pole]) -> Pole | None:
    """The slowest-decaying pole (largest real part; the upper one of a pair)."""
    return max(poles, key=lambda p: (p.re, p.im), default=None)


def pole_paths(poly: ParametricPolynomial, values: Sequence[float] | np.ndarray) -> np.ndarray:
    """Roots at each parameter value: array (len(values), degree) complex, NaN where absent.

    Vectorised: batched companion-matrix eigenvalues at every ``ANCHOR_STRIDE``-th value, and
    a batched Aberth-Ehrlich polish for the values between (see :func:`_roots_along`).
    Where the leading coefficient vanishes the order drops and the missing roots are NaN.
    Successive rows are matched greedily so each column traces one continuous path.
    """
    vals = np.asarray(values, dtype=float)
    n = poly.degree
    if n < 1 or vals.size == 0:
        return np.empty((vals.size, max(n, 0)), dtype=complex)
    scale = _common_scale(poly.coeffs)  # roots do not change; coefficients beyond floats still work
    coeff = np.stack([_eval_poly_float(c * scale, vals) for c in poly.coeffs], axis=1)  # (m, n+1)
    lead = coeff[:, 0]
    # the order drops where the leading coefficient vanishes against the size of its own terms
    # (not against the other coefficients: a loop's coefficients may span twenty decades)
    lead_poly = poly.coeffs[0] * scale
    lead_size = _eval_poly_float(fmpq_poly([abs(lead_poly[i]) for i in range(lead_poly.degree() + 1)]),
                                 np.abs(vals))
    ok = np.abs(lead) > 1e-14 * lead_size
    out = np.full((vals.size, n), np.nan + 0j)
    if np.any(ok):
        out[ok] = _roots_along(coeff[ok] / lead[ok, None])
    for i in np.flatnonzero(~ok):  # order drops: fewer roots, numpy.roots strips leading zeros
        row = np.trim_zeros(coeff[i], "f")
        if row.size > 1:
            r = np.roots(row)
            out[i, : r.size] = r
    return _match_paths(out)


EPS = np.finfo(float).eps
ANCHOR_STRIDE = 8  # eigenvalues at every 8th value; the values between are refined from them


def _companion_roots(monic: np.ndarray) -> np.ndarray:
    """Roots of each monic row (m, n+1) as eigenvalues of its companion matrix (batched)."""
    m, n = monic.shape[0], monic.shape[1] - 1
    comp = np.zeros((m, n, n))
    comp[:, 0, :] = -monic[:, 1:]
    if n > 1:
        idx = np.arange(n - 1)
        comp[:, idx + 1, idx] = 1.0
    return np.linalg.eigvals(comp)


def _roots_along(monic: np.ndarray) -> np.ndarray:
    """Roots of many monic polynomials that change smoothly from row to row.

    Companion eigenvalues at anchor rows, then for the rows between: start from the anchors'
    roots interpolated (after matching) and polish them with Newton's method; rows where it did
    not converge or two roots ran together are polished again from the same start with the
    Aberth-Ehrlich iteration, which keeps a row's roots apart. Rows that still do not converge
    (near multiple roots) fall back to companion eigenvalues, so the result is never worse than
    eigenvalues alone.
    """
    m = monic.shape[0]
    if m <= 4 * ANCHOR_STRIDE:
        return _companion_roots(monic)
    anchors = np.unique(np.r_[np.arange(0, m, ANCHOR_STRIDE), m - 1])
    out = np.empty((m, monic.shape[1] - 1), dtype=complex)
    out[anchors] = _match_paths(_companion_roots(monic[anchors]))
    between = np.setdiff1d(np.arange(m), anchors)
    right = np.searchsorted(anchors, between)
    lo, hi = anchors[right - 1], anchors[right]
    w = ((between - lo) / (hi - lo))[:, None]
    guess = (1 - w) * out[lo] + w * out[hi]
    roots, converged = _polish(monic[between], guess, coupled=False)  # Newton: cheap per step
    retry = ~(converged & _well_separated(roots))  # two roots may have run to one: redo those rows
    if retry.any():
        roots[retry], converged[retry] = _polish(monic[between[retry]], guess[retry], coupled=True)
    out[between] = roots
    redo = between[~converged]
    if redo.size:
        out[redo] = _companion_roots(monic[redo])
    return out


def _well_separated(z: np.ndarray, rel: float = 1e-6) -> np.ndarray:
    """Rows whose roots are pairwise apart by more than ``rel`` of their size (so distinct)."""
    n = z.shape[1]
    gap = np.abs(z[:, :, None] - z[:, None, :])
    gap[:, np.eye(n, dtype=bool)] = np.inf
    return np.min(gap, axis=(1, 2)) > rel * np.maximum(1.0, np.max(np.abs(z), axis=1))


def _polish(monic: np.ndarray, z: np.ndarray, coupled: bool, iterations: int = 12, tol: float = 1e-12):
    """Newton (``coupled`` False) or Aberth-Ehrlich (True, keeps a row's roots apart) on every
    row at once; returns (roots, converged per row). A row that overflows (far roots of a high
    degree) is simply not converged: its caller takes eigenvalues there instead."""
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        return _polish_rows(monic, z, coupled, iterations, tol)


def _polish_rows(monic: np.ndarray, z: np.ndarray, coupled: bool, iterations: int, tol: float):
    z = z.copy()
    n = z.shape[1]
    eye = np.eye(n, dtype=bool)
    active = np.ones(z.shape[0], dtype=bool)
    for _ in range(iterations):
        rows = np.flatnonzero(active)
        if rows.size == 0:
            break
        zr, cr = z[rows], monic[rows]
        p = np.ones_like(zr)
        dp = np.zeros_like(zr)
        bound = np.ones(zr.shape)  # sum |c_k| |z|^k: the size of p(z)'s rounding error
        az, ac = np.abs(zr), np.abs(cr)
        for k in range(1, n + 1):  # Horner for p, p' and the bound together
            dp = dp * zr + p
            p = p * zr + cr[:, k:k + 1]
            bound = bound * az + ac[:, k:k + 1]
        with np.errstate(divide="ignore", invalid="ignore"):
            step = p / dp
            if coupled:
                diff = zr[:, :, None] - zr[:, None, :]
                diff[:, eye] = np.inf
                step = step / (1 - step * np.sum(1.0 / diff, axis=2))
        step[~np.isfinite(step)] = 0.0
        # a root is done when the step is negligible or p(z) is at its rounding level already
        done = (np.abs(step) <= tol * np.maximum(1.0, az)) | (np.abs(p) <= 2 * n * EPS * bound)
        step[done] = 0.0
        z[rows] = zr - step
        small = np.all(done, axis=1)
        active[rows[small]] = False
    converged = ~active & np.all(np.isfinite(z), axis=1)
    return z, converged


def _eval_poly_float(c: fmpq_poly, vals: np.ndarray) -> np.ndarray:
    acc = np.zeros_like(vals)
    for i in range(c.degree(), -1, -1):
        acc = acc * vals + to_float(c[i])
    return acc


def _common_scale(coeffs: Sequence[fmpq_poly]) -> fmpq:
    """The power of two that brings the largest coefficient of any of ``coeffs`` near 1."""
    exponents = [binary_exponent(c[i]) for c in coeffs for i in range(c.degree() + 1) if c[i] != 0]
    return fmpq(2) ** (-max(exponents, default=0))


def _match_paths(roots: np.ndarray) -> np.ndarray:
    """Reorder each row's roots to follow the previous row's (greedy nearest neighbour).

    Matching raw row i-1 to raw row i does not depend on how row i-1 was reordered, so every
    step is matched at once: where each root's nearest neighbour in the next row is a different
    root (the usual case), that is the greedy matching; other steps run the greedy loop. The
    steps are then chained. A row with NaN (the order drops) is left in its own order.
    """
    m, n = roots.shape
    out = roots.copy()
    if m < 2 or n == 0:
        return out
    prev, cur = roots[:-1], roots[1:]
    usable = ~(np.isnan(prev).any(axis=1) | np.isnan(cur).any(axis=1))
    dist = np.abs(prev[:, :, None] - cur[:, None, :])  # (m - 1, n, n)
    step = np.argmin(dist, axis=2)  # step[i, a]: the root of row i + 1 nearest root a of row i
    one_to_one = (np.sort(step, axis=1) == np.arange(n)).all(axis=1)
    for row in np.flatnonzero(usable & ~one_to_one):
        step[row] = _greedy_match(dist[row])
    order: np.ndarray = np.arange(n)
    for i in range(1, m):
        order = step[i - 1][order] if usable[i - 1] else np.arange(n)
        out[i] = roots[i, order]
    return out


def _greedy_match(dist: np.ndarray) -> np.ndarray:
    """order[a] = b: pairs taken by increasing distance, each row and column used once."""
    n = dist.shape[0]
    order = [-1] * n
    taken = [False] * n
    left = n
    for flat in np.argsort(dist, axis=None).tolist():
        a, b = divmod(flat, n)
        if order[a] < 0 and not taken[b]:
            order[a], taken[b] = b, True
            left -= 1
            if not left:
                break
    return np.array(order)


def path_sensitivity(float_roots: np.ndarray, exact_rhp: int, exact_jw: int) -> str | None:
    """A warning when float roots at one value disagree with the exact Routh counts."""
    r = float_roots[~np.isnan(float_roots)]
    float_rhp = int(np.sum(r.real > 0))
    if exact_jw == 0 and float_rhp != exact_rhp:
        return (f"numerically sensitive: floating-point roots show {float_rhp} in the right half plane, "
                f"the exact count is {exact_rhp}; trust the exact count")
    return None

