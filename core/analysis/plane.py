"""The stability plane: two parameters x, y as axes, the rectangle divided by root counts.

Method. With every other parameter at its value, the characteristic polynomial's coefficients are
exact polynomials in (x, y). The count of right-half-plane roots can change only on the real zero
set of

* the content c(x, y) (gcd of all coefficients): the polynomial vanishes identically ("singular");
* a0(x, y), the constant term: a real root through s = 0 ("origin");
* an(x, y), the leading coefficient: a root to or from infinity ("infinity");
* Delta_{n-1}(x, y) = ±Res_u(E, O) for p(s) = E(s^2) + s O(s^2): two roots summing to zero, a pair
  on the imaginary axis where omega^2 > 0 ("crossing"); its arcs with a real pair ±a are no boundary.

When a root pair symmetric about the origin is there for every x and y (a0 or Delta_{n-1}
identically zero: a root fixed at s = 0, a factor s^2 - x), the symmetric part g = gcd(p(s), p(-s))
is split off: the boundaries are those of p / g and, for g(s) = s^m h(s^2), h(0), h's leading
coefficient and its discriminant in u. Counts then include the roots on the axis (``jw``).

These are exact (flint ``fmpq_mpoly``, factored over Q). The rectangle is cut into vertical lines
x = c at rational c (the grid's column centres). On each, every boundary factor becomes a polynomial
in y whose real roots are isolated exactly (:func:`core.analysis.stable_range.real_values`); between
consecutive roots the count is constant and is computed exactly by Routh counting at a rational
point (:func:`core.analysis.routh.routh_counts`). So every grid label and every region's count is
exact; grid points lying exactly on a boundary are labelled -1. Regions are the cells of those
columns, joined when neighbouring (same column, or overlapping on the next column) with the same
count. Extra columns go between the critical values of x (roots of the factors' leading
coefficients, discriminants and pairwise resultants in y, and their values on the lower and upper
edges), one in every gap that holds no grid column, so every cell of that decomposition, hence
every region, is sampled (``regions_complete``); when those polynomials would be too large a
region thinner than one column spacing can be missed, never mislabelled.
Arcs are drawn through the exact roots, joined in order between columns, in floating point.
On a few rational slices x = c the exact stable y-set comes from the one-parameter engine
(:func:`core.analysis.stable_range.stable_range`), and the columns' labels there are checked
against it.

>>> from core.algebra.polynomial import mpoly_context
>>> ctx = mpoly_context(["Ki", "Kp"]); s, Ki, Kp = ctx.gens()
>>> plane = stability_plane(s**3 + 3*s**2 + (2 + Kp)*s + Ki, "Kp", "Ki", {},
...                         (fmpq(0), fmpq(10)), (fmpq(0), fmpq(30)), resolution=20)
>>> [(r.rhp, r.point) for r in plane.regions]
[(0, {'Kp': '33/4', 'Ki': '1'}), (2, {'Kp': '1/4', 'Ki': '7'})]
>>> plane.boundaries["crossing"]
['3*Kp - Ki + 6']
"""
from __future__ import annotations

import math
from bisect import bisect_left, bisect_right
from collections.abc import Mapping
from dataclasses import dataclass, field
from itertools import pairwise

import numpy as np
from flint import fmpq, fmpq_mpoly, fmpq_mpoly_ctx, fmpq_poly

from core.algebra.polynomial import ParametricPolynomial, S, mpoly_text, primitive_scale, to_float, to_fmpq
from core.analysis.routh import routh_counts
from core.analysis.stable_range import (
    Boundary,
    StableRange,
    _simplest_between,
    real_values,
    stable_range,
)
from core.errors import AnalysisError

__all__ = ["KINDS", "Arc", "Plane", "PlaneSlice", "Region", "short_text", "stability_plane"]

KINDS = ("singular", "origin", "infinity", "crossing")
SLICES = 5  # exact one-parameter slices reported (at xlo + k (xhi - xlo) / 6)
CRITICAL_DEGREE = 64  # critical values of x are computed while their polynomials stay this small
OMEGA_RESIDUAL = 1e-6  # a common root of E(u) and O(u) in floating point: relative residual below this


@dataclass(frozen=True)
class Region:
    """A connected part of the rectangle with ``rhp`` roots in the right half plane and ``jw`` on
    the imaginary axis (exact at ``point``, given as exact strings), and the share of the grid
    points inside it (estimated)."""

    rhp: int
    point: dict[str, str]
    share: float
    jw: int = 0  # roots on the imaginary axis all over the region (a root identically at s = 0...)

    @property
    def stable(self) -> bool:
        return self.rhp == 0 and self.jw == 0

    def to_dict(self) -> dict:
        return {"rhp": self.rhp, "jw": self.jw, "stable": self.stable, "point": dict(self.point),
                "share": self.share}


@dataclass(frozen=True)
class Arc:
    """A boundary arc for drawing: float points (x, y) and, for crossings, omega at each point."""

    kind: str
    points: list[tuple[float, float]]
    omega: list[float] | None = None

    def to_dict(self) -> dict:
        return {"kind": self.kind, "polyline": [list(p) for p in self.points], "omega": self.omega}


@dataclass(frozen=True)
class PlaneSlice:
    """The exact stable y-set on the line x = ``x`` (the one-parameter engine's answer)."""

    x: fmpq
    range: StableRange

    def to_dict(self) -> dict:
        return {"x": str(self.x), "x_value": to_float(self.x), **self.range.to_dict()}


@dataclass
class Plane:
    """The stability plane of parameters ``x`` and ``y`` over the rectangle ``x_range`` x ``y_range``.

    ``grid[j][i]`` is the exact right-half-plane count at (x_i, y_j), the centres of a
    resolution x resolution grid (row j = y, from the bottom), -1 on a boundary (a root on the
    imaginary axis there, or the order drops), -2 in a region
    with roots on the imaginary axis throughout (never stable: a root identically at s = 0...).
    """

    x: str
    y: str
    x_range: tuple[fmpq, fmpq]
    y_range: tuple[fmpq, fmpq]
    boundaries: dict[str, list[str]]
    regions: list[Region]
    arcs: list[Arc]
    slices: list[PlaneSlice]
    xs: list[float]
    ys: list[float]
    grid: list[list[int]]
    nominal: dict[str, str] = field(default_factory=dict)
    regions_complete: bool = False

    def to_dict(self) -> dict:
        return {
            "x": self.x, "y": self.y,
            "x_range": [str(v) for v in self.x_range], "y_range": [str(v) for v in self.y_range],
            "nominal": dict(self.nominal),
            "boundaries": {k: list(v) for k, v in self.boundaries.items()},
            "regions": [r.to_dict() for r in self.regions],
            "regions_complete": self.regions_complete,
            "arcs": [a.to_dict() for a in self.arcs],
            "slices": [s.to_dict() for s in self.slices],
            "resolution": len(self.xs),
            "grid_x": self.xs, "grid_y": self.ys, "grid": self.grid,
        }


def short_text(v: fmpq) -> str:
    """A rational for a message: exact when short, else twelve digits.

    >>> short_text(fmpq(1, 3)), short_text(fmpq(10) ** 40)
    ('1/3', '1e+40')
    """
    text = str(v)
    return text if len(text) <= 30 else f"{to_float(v):.12g}"


# -- polynomials in (x, y) ------------------------------------------------------------------------
class _Bivariate:
    """An fmpq_mpoly in (x, y) kept also as fmpq_poly coefficients in x per power of y, so that its
    restriction to a line x = c is a handful of evaluations."""

    def __init__(self, poly: fmpq_mpoly):
        self.poly = poly
        by_power: dict[int, dict[int, fmpq]] = {}
        for (ex, ey), c in poly.to_dict().items():
            by_power.setdefault(ey, {})[ex] = c
        top = max(by_power, default=-1)
        self.parts = [fmpq_poly([by_power.get(j, {}).get(i, 0) for i in range(max(by_power.get(j, {0: 0})) + 1)])
                      for j in range(top + 1)]

    def at_x(self, c: fmpq) -> fmpq_poly:
        """The polynomial in y on the line x = c."""
        return fmpq_poly([part(c) for part in self.parts])

    @property
    def only_x(self) -> bool:
        return len(self.parts) <= 1


def _coefficients_in_xy(poly: fmpq_mpoly, x: str, y: str, values: Mapping[str, fmpq]) -> list[fmpq_mpoly]:
    """The coefficients (highest power of s first) as polynomials in (x, y)."""
    names = poly.context().names()
    missing = [n for n in names[1:] if n not in (x, y) and n not in values]
    if missing:
        raise AnalysisError("E404", f"parameter {', '.join(missing)} has no value; give one or make it an axis",
                            where=f"parameter {missing[0]}")
    fixed: dict[str | int, fmpq] = {n: fmpq(values[n]) for n in names[1:] if n not in (x, y)}
    if fixed:
        poly = poly.subs(fixed)
    ctx = fmpq_mpoly_ctx.get((x, y), "lex")
    ix, iy = (names.index(x) if x in names else None), (names.index(y) if y in names else None)
    by_power: dict[int, dict[tuple[int, ...], fmpq]] = {}
    for exps, c in poly.to_dict().items():
        key = (exps[ix] if ix is not None else 0, exps[iy] if iy is not None else 0)
        terms = by_power.setdefault(exps[0], {})
        terms[key] = terms.get(key, 0) + c
    degree = max(by_power, default=-1)
    coeffs = [ctx.from_dict(by_power.get(p, {})) for p in range(degree, -1, -1)]
    while len(coeffs) > 1 and coeffs[0].is_zero():
        coeffs.pop(0)
    return coeffs


def _hurwitz_delta_xy(coeffs: list[fmpq_mpoly]) -> fmpq_mpoly:
    """±Delta_{n-1}(x, y) as the resultant in u of the even and odd parts of p(s)."""
    ctx2 = coeffs[0].context()
    n = len(coeffs) - 1
    if n < 2:
        return ctx2.constant(1)
    ctx3 = fmpq_mpoly_ctx.get((S, *ctx2.names()), "lex")  # S stands for u = s^2: never a parameter name

    def part(indices):
        return ctx3.from_dict({(i, *e): c for i, k in enumerate(indices) for e, c in coeffs[k].to_dict().items()})
    even = part([n - 2 * i for i in range(n // 2 + 1)])
    odd = part([n - 1 - 2 * i for i in range((n - 1) // 2 + 1)])
    if even.is_zero() or odd.is_zero():
        return ctx2.constant(0)
    res = even.resultant(odd, S)
    return ctx2.from_dict({e[1:]: c for e, c in res.to_dict().items()})


def _boundary_factors(coeffs: list[fmpq_mpoly]) -> dict[str, list[fmpq_mpoly]]:
    """The irreducible factors over Q of each kind's boundary polynomial (kinds as in KINDS; a
    factor shared by two kinds is listed under the first)."""
    content = coeffs[0]
    for c in coeffs[1:]:
        content = content.gcd(c)
    reduced = [c / content for c in coeffs] if not content.is_zero() else coeffs
    symmetric, rest = _symmetric_split(reduced)
    sources = [("singular", content), ("origin", rest[-1]), ("infinity", rest[0]),
               ("crossing", _hurwitz_delta_xy(rest))]
    sources += _symmetric_sources(symmetric)
    seen: set[tuple] = set()
    out: dict[str, list[fmpq_mpoly]] = {k: [] for k in KINDS}
    for kind, p in sources:
        if p.is_zero():
            continue
        for f, _ in p.factor()[1]:
            f = f / f.leading_coefficient()
            f = f * primitive_scale(f)  # coprime integers, positive leading term: one form per factor
            key = tuple(sorted(f.to_dict().items()))
            if f.total_degree() > 0 and key not in seen:
                seen.add(key)
                out[kind].append(f)
    return out


def _in_s(coeffs: list[fmpq_mpoly]) -> fmpq_mpoly:
    """The coefficient list (highest power first) as one polynomial in (s, x, y)."""
    ctx3 = fmpq_mpoly_ctx.get(("s", *coeffs[0].context().names()), "lex")
    n = len(coeffs) - 1
    return ctx3.from_dict({(n - i, *e): v for i, c in enumerate(coeffs) for e, v in c.to_dict().items()})


def _coefficient_list(poly: fmpq_mpoly, ctx2: fmpq_mpoly_ctx) -> list[fmpq_mpoly]:
    by_power: dict[int, dict[tuple[int, ...], fmpq]] = {}
    for (es, *e), v in poly.to_dict().items():
        by_power.setdefault(es, {})[tuple(e)] = v
    top = max(by_power, default=0)
    return [ctx2.from_dict(by_power.get(k, {})) for k in range(top, -1, -1)]


def _symmetric_split(coeffs: list[fmpq_mpoly]) -> tuple[list[fmpq_mpoly], list[fmpq_mpoly]]:
    """(g, p / g) for g = gcd(p(s), p(-s)) over Q[x, y], as coefficient lists: g holds every root
    pair symmetric about the origin that is there for all x and y (a root identically at s = 0 or
    on the imaginary axis), and then a0 or Delta_{n-1} of p vanish identically; p / g has none."""
    ctx2 = coeffs[0].context()
    n = len(coeffs) - 1
    mirrored = [c if (n - i) % 2 == 0 else -c for i, c in enumerate(coeffs)]
    p = _in_s(coeffs)
    g = p.gcd(_in_s(mirrored))
    if g.degrees()[0] == 0:
        return [ctx2.constant(1)], coeffs
    return _coefficient_list(g, ctx2), _coefficient_list(p / g, ctx2)


def _symmetric_sources(symmetric: list[fmpq_mpoly]) -> list[tuple[str, fmpq_mpoly]]:
    """Boundaries of the symmetric part g(s) = s^m h(s^2): where a root of h reaches u = 0 (a root
    through s = 0), h's degree drops (to infinity), or two roots of h meet (a pair on the axis
    leaves it or splits into a real pair): h(0), the leading coefficient, the discriminant in u."""
    while len(symmetric) > 1 and symmetric[-1].is_zero():
        symmetric = symmetric[:-1]  # a root identically at s = 0: no boundary
    if len(symmetric) <= 1:
        return []
    m = len(symmetric) - 1
    h = symmetric[m % 2::2]  # the even powers of s, highest first: h(u) with u = s^2
    sources = [("origin", h[-1]), ("infinity", h[0])]
    if len(h) > 2:
        ctx3 = fmpq_mpoly_ctx.get((S, *h[0].context().names()), "lex")  # S stands for u
        k = len(h) - 1
        hu = ctx3.from_dict({(k - i, *e): v for i, c in enumerate(h) for e, v in c.to_dict().items()})
        disc = hu.discriminant(S)
        sources.append(("crossing", h[0].context().from_dict({e[1:]: v for e, v in disc.to_dict().items()})))
    return sources


# -- one vertical line --------------------------------------------------------------------------
@dataclass
class _Column:
    """The exact picture on the line x = c: boundary y-values inside (ylo, yhi) with their kinds,
    and the count in each open sector between them (sector i lies below root i)."""

    c: fmpq
    roots: list[Boundary]
    owners: list[int]  # for each root, the index of its boundary factor (in the plane's factor list)
    counts: list[tuple[int, int]]  # (right half plane, imaginary axis) in each sector
    points: list[fmpq]

    def sector_ends(self, ylo: float, yhi: float) -> list[tuple[float, float]]:
        ends = [ylo, *(r.value for r in self.roots), yhi]
        return list(pairwise(ends))


def _column(c: fmpq, coeffs: list[_Bivariate], factors: list[tuple[str, _Bivariate]],
            y_range: tuple[fmpq, fmpq]) -> _Column | None:
    """The column at x = c, or None when the line lies on a boundary (a factor vanishes on it)."""
    ylo, yhi = y_range
    on_line = [(kind, f.at_x(c)) for kind, f in factors]
    if any(p.is_zero() for _, p in on_line):
        return None
    product = fmpq_poly([1])
    for _, p in on_line:
        product *= p
    roots = [b for b in (_inside(b, ylo, yhi) for b in real_values(product)) if b is not None]
    owners = [next(i for i, (_, p) in enumerate(on_line) if p.degree() > 0 and p % fmpq_poly(b.factor) == 0)
              for b in roots]
    lows = [ylo, *(b.hi for b in roots)]
    highs = [*(b.lo for b in roots), yhi]
    points = [_simplest_between(lo, hi) for lo, hi in zip(lows, highs)]
    line = [f.at_x(c) for f in coeffs]
    counts = [_counts([f(t) for f in line]) for t in points]
    return _Column(c, roots, owners, counts, points)


def _label_on_boundary(line: list[fmpq_poly], t: fmpq) -> int:
    """The exact count at a point of the boundary set (coefficients ``line`` on its vertical line,
    at y = t): -1 where a root is on the imaginary axis or the order drops, which is where the
    boundary really is (a candidate such as a real pair ±a is no boundary)."""
    values = [p(t) for p in line]
    if values[0] == 0 or values[-1] == 0:  # the order drops, or a root at s = 0
        return -1
    rhp, jw = _counts(values)
    return -1 if jw else rhp


def _label(counts: tuple[int, int]) -> int:
    """A grid label: the right-half-plane count, or -2 where roots lie on the imaginary axis."""
    rhp, jw = counts
    return rhp if jw == 0 else -2


def _inside(b: Boundary, lo: fmpq, hi: fmpq) -> Boundary | None:
    """The boundary value if it lies strictly inside (lo, hi), its isolating interval narrowed
    inside too; None otherwise."""
    if b.sign_minus(lo) <= 0 or b.sign_minus(hi) >= 0:
        return None
    while not (lo < b.lo and b.hi < hi):
        b = b.bisected()
    return b


def _counts(coeffs: list[fmpq]) -> tuple[int, int]:
    """Exact (right half plane, imaginary axis) root counts at a point off the boundaries of the
    order (leading coefficient nonzero): the sign changes of a Routh first column proven nonzero
    in ball arithmetic (no root on the axis then), else full counting."""
    changes = _routh_sign_changes_by_balls(coeffs)
    if changes is not None:
        return changes, 0
    counts = routh_counts(coeffs)
    return counts.rhp, counts.jw


def _routh_sign_changes_by_balls(coeffs: list[fmpq]) -> int | None:
    """Sign changes in the first column of the plain Routh array, each entry an arb ball holding
    the exact value, or None when some ball contains 0 (a zero or too little precision). With no
    zero in the first column the count of sign changes is the number of right-half-plane roots
    (Routh 1877), so this is exact as a decision."""
    from flint import arb, arb_poly, ctx

    bits = max(max(int(c.p).bit_length(), int(c.q).bit_length()) for c in coeffs)
    with ctx.workprec(128 + 2 * bits):
        above = arb_poly([arb(c) for c in coeffs[0::2]])
        prev = arb_poly([arb(c) for c in coeffs[1::2]])
        firsts = [above[0], prev[0]]
        for _ in range(2, len(coeffs)):
            if firsts[-1].contains(0):
                return None
            new = above.right_shift(1) - prev.right_shift(1) * (above[0] / prev[0])
            firsts.append(new[0])
            above, prev = prev, new
        if any(f.contains(0) for f in firsts):
            return None
        return sum(1 for a, b in pairwise(firsts) if (a > 0) != (b > 0))


def _sectors(column: _Column, rows: list[fmpq]) -> list[int]:
    """The sector holding each row value on the column (exact); -1 where a row lies on a boundary."""
    sectors = [0] * len(rows)
    start = 0
    for i, b in enumerate(column.roots):
        first_in, past = bisect_left(rows, b.lo), bisect_right(rows, b.hi)
        below = first_in + sum(1 for r in rows[first_in:past] if b.sign_minus(r) > 0)
        sectors[start:below] = [i] * (below - start)
        start = below
        if below < past and b.sign_minus(rows[below]) == 0:
            sectors[below] = -1
            start = below + 1
    sectors[start:] = [len(column.roots)] * (len(rows) - start)
    return sectors


# -- critical values of x ---------------------------------------------------------------------------
def _critical_polynomials(flat: list[tuple[str, _Bivariate]], y_range: tuple[fmpq, fmpq]) -> list[fmpq_poly] | None:
    """Polynomials in x whose real roots hold every x where the boundary's picture over a vertical
    line can change: factors in x alone, leading coefficients in y, discriminants in y, pairwise
    resultants in y and the values on the rectangle's lower and upper edges. None when one would
    be of degree above CRITICAL_DEGREE (too costly to compute)."""
    ylo, yhi = y_range
    y = flat[0][1].poly.context().names()[1] if flat else "y"
    curves = [f for _, f in flat if not f.only_x]
    out = [f.parts[0] for _, f in flat if f.only_x]

    def degree_x(f: _Bivariate) -> int:
        return max(part.degree() for part in f.parts)
    for i, f in enumerate(curves):
        dy, dx = len(f.parts) - 1, degree_x(f)
        if (2 * dy - 1) * dx > CRITICAL_DEGREE:
            return None
        out += [f.parts[-1], _on_edge(f, ylo), _on_edge(f, yhi)]
        if dy > 1:
            out.append(_Bivariate(f.poly.discriminant(y)).parts[0])
        for g in curves[i + 1:]:
            if dy * degree_x(g) + (len(g.parts) - 1) * dx > CRITICAL_DEGREE:
                return None
            out.append(_Bivariate(f.poly.resultant(g.poly, y)).parts[0])
    return [p for p in out if not p.is_zero()]


def _on_edge(f: _Bivariate, v: fmpq) -> fmpq_poly:
    """f(x, v) as a polynomial in x."""
    out = fmpq_poly([])
    for j, part in enumerate(f.parts):
        out += part * v ** j
    return out


def _between_critical_values(flat, xs: list[fmpq], x_range: tuple[fmpq, fmpq],
                             y_range: tuple[fmpq, fmpq]) -> list[fmpq] | None:
    """A rational in every open interval between consecutive critical values of x that holds no
    grid column, so every cell of the decomposition, hence every region, has a sample column; None
    when the critical values are too costly (regions thinner than a column may then be missed)."""
    polys = _critical_polynomials(flat, y_range)
    if polys is None:
        return None
    product = fmpq_poly([1])
    for p in polys:
        product *= p
    lo, hi = x_range
    critical = [b for b in (_inside(b, lo, hi) for b in real_values(product)) if b is not None]
    lefts = [lo, *(b.hi for b in critical)]  # the open gaps, shrunk to rational ends
    rights = [*(b.lo for b in critical), hi]
    return [_simplest_between(left, right) for left, right in zip(lefts, rights)
            if not any(left < c < right for c in xs)]


# -- crossing frequency -------------------------------------------------------------------------
def _omega(coeffs: list[float]) -> float | None:
    """omega > 0 of the pair ±j omega when p (floats, highest first) has one, else None: a negative
    root u = -omega^2 of the lower-degree one of the even and odd parts E(u), O(u) where the other
    part nearly vanishes too (relative to the size of its terms)."""
    n = len(coeffs) - 1
    even = [coeffs[n - 2 * i] for i in range(n // 2, -1, -1)]  # highest power of u first
    odd = [coeffs[n - 1 - 2 * i] for i in range((n - 1) // 2, -1, -1)]
    while even and even[0] == 0:
        even.pop(0)
    while odd and odd[0] == 0:
        odd.pop(0)
    if len(even) < 2 or len(odd) < 2:
        return None
    roots_of, other = (even, odd) if len(even) <= len(odd) else (odd, even)
    best = None
    for u in np.roots(roots_of):
        if abs(u.imag) > 1e-7 * max(1.0, abs(u)) or u.real >= 0:
            continue
        value = size = 0.0
        for c in other:
            value = value * u.real + c
            size = size * -u.real + abs(c)
        residual = abs(value) / size if size else math.inf
        if best is None or residual < best[0]:
            best = (residual, math.sqrt(-u.real))
    return best[1] if best is not None and best[0] <= OMEGA_RESIDUAL else None


# -- the plane ------------------------------------------------------------------------------------
def _centres(lo: fmpq, hi: fmpq, count: int) -> list[fmpq]:
    return [lo + (hi - lo) * fmpq(2 * i + 1, 2 * count) for i in range(count)]


def stability_plane(poly: fmpq_mpoly, x: str, y: str, values: Mapping[str, fmpq],
                    x_range: tuple[fmpq, fmpq], y_range: tuple[fmpq, fmpq], resolution: int = 100) -> Plane:
    """The stability plane of ``poly`` (an fmpq_mpoly in s and parameters) in parameters ``x`` and
    ``y`` over the rectangle, every other parameter at its value in ``values``; ``values`` may hold
    x and y too (the nominal point). See the module notes for the method.

    Raises E430 for an axis equal to the other, E431 for an empty or inverted range, E404 for a
    parameter without a value, E403 for a polynomial identically zero in the plane.
    """
    if x == y:
        raise AnalysisError("E430", f"the plane needs two different parameters, got '{x}' twice", where="plane")
    for name, (lo, hi) in ((x, x_range), (y, y_range)):
        if not lo < hi:
            raise AnalysisError("E431", f"the range of {name} is empty: {short_text(lo)} is not below {short_text(hi)}",
                                where=f"plane {name}")
    coeffs = _coefficients_in_xy(poly, x, y, values)
    if not coeffs or all(c.is_zero() for c in coeffs):
        raise AnalysisError("E403", "the characteristic polynomial is identically zero", where="polynomial")
    factors = _boundary_factors(coeffs)
    flat = [(kind, _Bivariate(f)) for kind in KINDS for f in factors[kind]]
    bivariate = [_Bivariate(c) for c in coeffs]
    xs, ys = _centres(*x_range, resolution), _centres(*y_range, resolution)
    columns = [_column(c, bivariate, flat, y_range) for c in xs]
    sectors = [_sectors(col, ys) if col is not None else [-1] * len(ys) for col in columns]
    extra = _between_critical_values(flat, xs, x_range, y_range)
    samples = sorted([(c, col, secs) for c, col, secs in zip(xs, columns, sectors)] +
                     [(c, _column(c, bivariate, flat, y_range), None) for c in extra or []], key=lambda s: s[0])
    grid_columns = []
    for c, col, secs in zip(xs, columns, sectors):
        line = [f.at_x(c) for f in bivariate]
        grid_columns.append([_label(col.counts[k]) if col is not None and k >= 0 else _label_on_boundary(line, t)
                             for k, t in zip(secs, ys)])
    slices = _slices(x, y, x_range, y_range, bivariate, flat)
    floats = (to_float(y_range[0]), to_float(y_range[1]))
    return Plane(
        x=x, y=y, x_range=x_range, y_range=y_range,
        boundaries={k: [mpoly_text(f) for f in factors[k]] for k in KINDS if factors[k]},
        regions=_regions([(col, secs) for _, col, secs in samples], x, y, floats), regions_complete=extra is not None,
        arcs=_arcs([_column(x_range[0], bivariate, flat, y_range), *columns,
                    _column(x_range[1], bivariate, flat, y_range)], bivariate, flat, x_range, floats),
        slices=slices, xs=[to_float(v) for v in xs], ys=[to_float(v) for v in ys],
        grid=[list(row) for row in zip(*grid_columns)],
        nominal={n: str(values[n]) for n in (x, y) if n in values})


def plane_of_project(project, report, x: str, y: str, x_range: tuple[fmpq, fmpq] | None = None,
                     y_range: tuple[fmpq, fmpq] | None = None, resolution: int = 100,
                     where: str = "plane") -> Plane:
    """The plane of an analysed project: its characteristic polynomial, every other parameter at
    the value the report used, a missing range from the parameter table's min..max (E432 for an
    axis that is not a parameter of the project; E430/E431 as :func:`stability_plane`)."""
    ranges = []
    for name, rng in ((x, x_range), (y, y_range)):
        param = project.parameters.get(name)
        if param is None:
            raise AnalysisError("E432", f"the project has no parameter '{name[:40]}' "
                                f"(it has {', '.join(sorted(project.parameters)) or 'none'})",
                                where=f"{where} {name[:40]}")
        ranges.append(rng or (to_fmpq(param.minimum), to_fmpq(param.maximum)))  # the decimals the table shows
    assert report.reduction is not None  # a project's report always has its reduction
    return stability_plane(report.reduction.characteristic, x, y, report.values, ranges[0], ranges[1], resolution)


def _slices(x, y, x_range, y_range, bivariate, flat) -> list[PlaneSlice]:
    """The exact stable y-set on a few rational lines x = c, each checked against the column's
    exact counts there (a disagreement is a bug in one of the two engines). A line lying on a
    boundary (the order drops all along it, or a factor vanishes on it) is moved a little right."""
    lo, hi = x_range
    step = (hi - lo) / (SLICES + 1)
    out = []
    for k in range(1, SLICES + 1):
        c = lo + step * k
        column = _column(c, bivariate, flat, y_range)
        while column is None:
            c = _simplest_between(c, c + step / 4)
            column = _column(c, bivariate, flat, y_range)
        rng = stable_range(ParametricPolynomial(tuple(f.at_x(c) for f in bivariate), y))
        for t, count in zip(column.points, column.counts):
            if _stable_at(rng, t) != (count == (0, 0)):
                raise RuntimeError(f"plane: slice {x} = {c} disagrees with the stable range at {y} = {t}")
        out.append(PlaneSlice(c, rng))
    return out


def _stable_at(rng: StableRange, t: fmpq) -> bool:
    """Exact membership of a rational in the stable set."""
    return any((lo is None or lo.sign_minus(t) < 0) and (hi is None or hi.sign_minus(t) > 0)
               for lo, hi in rng.intervals)


def _regions(samples: list[tuple[_Column | None, list[int] | None]], x: str, y: str,
             y_floats: tuple[float, float]) -> list[Region]:
    """Cells of the columns (in increasing x; each with the grid rows' sectors, or None for a
    column off the grid) joined into regions of one count (union-find)."""
    columns = [col for col, _ in samples]
    cells: list[tuple[int, int]] = []  # (column index, sector index)
    index: dict[tuple[int, int], int] = {}
    for i, col in enumerate(columns):
        if col is not None:
            for k in range(len(col.counts)):
                index[(i, k)] = len(cells)
                cells.append((i, k))
    parent = list(range(len(cells)))

    def find(a: int) -> int:
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    def join(a: int, b: int) -> None:
        parent[find(a)] = find(b)

    for i, col in enumerate(columns):
        if col is None:
            continue
        for k in range(1, len(col.counts)):
            if col.counts[k] == col.counts[k - 1]:
                join(index[(i, k)], index[(i, k - 1)])
        nxt = columns[i + 1] if i + 1 < len(columns) else None
        if nxt is None:
            continue
        mine, theirs = col.sector_ends(*y_floats), nxt.sector_ends(*y_floats)
        for k, (a, b) in enumerate(mine):
            for m, (c, d) in enumerate(theirs):
                if col.counts[k] == nxt.counts[m] and max(a, c) < min(b, d):
                    join(index[(i, k)], index[(i + 1, m)])
    members: dict[int, list[int]] = {}
    for cell in range(len(cells)):
        members.setdefault(find(cell), []).append(cell)
    per_cell: dict[tuple[int, int], int] = {}
    for i, (_, secs) in enumerate(samples):
        for k in secs or []:
            per_cell[(i, k)] = per_cell.get((i, k), 0) + 1
    total = sum(len(secs) for _, secs in samples if secs is not None) or 1
    regions = []
    for group in members.values():
        i, k = _widest(group, cells, columns, y_floats)
        col = columns[i]
        assert col is not None
        share = sum(per_cell.get(cells[g], 0) for g in group) / total
        rhp, jw = col.counts[k]
        regions.append(Region(rhp, {x: str(col.c), y: str(col.points[k])}, share, jw))
    regions.sort(key=lambda r: (r.jw, r.rhp, -r.share))
    return regions


def _widest(group: list[int], cells, columns, y_floats) -> tuple[int, int]:
    """The cell of a region whose sector is widest (its exact point lies well inside)."""
    def width(cell):
        i, k = cells[cell]
        a, b = columns[i].sector_ends(*y_floats)[k]
        return b - a
    return cells[max(group, key=width)]


def _arcs(columns, bivariate, flat, x_range, y_floats) -> list[Arc]:
    """Polylines through the exact boundary points of consecutive columns (the grid's, with the
    rectangle's left and right edges), one family per boundary
    factor, joined in order while two neighbouring columns hold as many points of it; crossings
    only where the pair lies on the axis (omega^2 > 0). Vertical lines for factors in x alone."""
    arcs: list[Arc] = []
    open_arcs: dict[int, list[tuple[list, list]]] = {}
    for col in columns:
        if col is None:
            arcs += _close(open_arcs, flat)
            continue
        xf = to_float(col.c)
        here: dict[int, list[tuple[float, float | None]]] = {}
        for b, owner in zip(col.roots, col.owners):
            omega = None
            if flat[owner][0] == "crossing":
                near = (b.lo + b.hi) / 2
                omega = _omega([to_float(f.at_x(col.c)(near)) for f in bivariate])
                if omega is None:
                    continue
            here.setdefault(owner, []).append((b.value, omega))
        for owner in set(open_arcs) | set(here):
            points = here.get(owner, [])
            current = open_arcs.get(owner, [])
            if len(current) != len(points):
                arcs += _close({owner: current}, flat)
                current = [([], []) for _ in points]
            for (pts, oms), (yv, om) in zip(current, points):
                pts.append((xf, yv))
                oms.append(om)
            open_arcs[owner] = current
    arcs += _close(open_arcs, flat)
    for kind, f in flat:
        if f.only_x and not f.poly.is_zero():
            for b in _x_roots(f, x_range):
                arcs.append(Arc(kind, [(b.value, y_floats[0]), (b.value, y_floats[1])]))
    return arcs


def _close(open_arcs: dict[int, list[tuple[list, list]]], flat) -> list[Arc]:
    """The open polylines as arcs (those of two points or more), emptied."""
    out = []
    for owner, current in open_arcs.items():
        kind = flat[owner][0]
        for pts, oms in current:
            if len(pts) >= 2:
                out.append(Arc(kind, list(pts), list(oms) if kind == "crossing" else None))
    open_arcs.clear()
    return out


def _x_roots(f: _Bivariate, x_range: tuple[fmpq, fmpq]) -> list[Boundary]:
    """The real roots inside the x range of a factor in x alone."""
    lo, hi = x_range
    return [b for b in (_inside(b, lo, hi) for b in real_values(f.parts[0])) if b is not None]
