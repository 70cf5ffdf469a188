"""The one polynomial convention of core/, and the parametric polynomial the analysis works on.

Convention (stated here once): a polynomial in the Laplace variable ``s`` is a list of
coefficients, **highest power first, leading zeros stripped**. Every coefficient is exact: a
``flint.fmpq`` rational, or a ``flint.fmpq_poly`` in the tuning parameter. Typed decimals are exact
(``0.1`` is 1/10). Floats appear only at the edges: roots, pole paths, plots.

Diagram-wide polynomials in ``s`` and every parameter are ``flint.fmpq_mpoly`` values in the context
returned by :func:`mpoly_context` (generators ``s`` first, then parameter names sorted).

>>> p = ParametricPolynomial.from_coefficients([1, 3, 2])
>>> p.degree, p.text()
(2, 's^2 + 3*s + 2')
>>> q = ParametricPolynomial.from_mpoly(mpoly_from_dict(("K",), {(3, 0): 1, (1, 0): 2, (0, 1): 1}), "K")
>>> q.text()
's^3 + 2*s + K'
>>> [str(c) for c in q.at(fmpq(1, 2))]
['1', '0', '2', '1/2']
"""
from __future__ import annotations

import math
import numbers
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from fractions import Fraction

from flint import arb, fmpq, fmpq_mpoly, fmpq_mpoly_ctx, fmpq_poly, fmpz

S = "s"  # the Laplace variable's name, reserved in every expression

__all__ = [
    "ParametricPolynomial",
    "S",
    "binary_exponent",
    "decimal_text",
    "fmpq",
    "fmpq_poly",
    "mpoly_context",
    "mpoly_from_dict",
    "mpoly_text",
    "poly_text",
    "primitive_scale",
    "scaled_floats",
    "strip_leading_zeros",
    "to_float",
    "to_fmpq",
]


def to_fmpq(value) -> fmpq:
    """Exact rational from an int, Fraction, fmpq, sympy Rational, or a decimal given as str/float.

    Floats go through their shortest decimal text, so ``0.1`` becomes 1/10, not a binary fraction.

    >>> to_fmpq(0.1), to_fmpq("2.5e-3"), to_fmpq(Fraction(3, 4))
    (1/10, 1/400, 3/4)
    """
    if isinstance(value, fmpq):
        return value
    if isinstance(value, (int, fmpz)):
        return fmpq(int(value))
    if isinstance(value, Fraction):
        return fmpq(value.numerator, value.denominator)
    if isinstance(value, numbers.Real) and not isinstance(value, numbers.Rational):  # float, numpy float
        value = repr(float(value))
    if isinstance(value, str):
        frac = Fraction(value)
        return fmpq(frac.numerator, frac.denominator)
    if hasattr(value, "p") and hasattr(value, "q"):  # sympy Rational / Integer
        return fmpq(int(value.p), int(value.q))
    raise TypeError(f"cannot make an exact rational from {value!r}")


def to_float(q) -> float:
    """A rational as the nearest float, saturating: infinite beyond the float range, 0 below it.

    >>> to_float(fmpq(1, 3)), to_float(fmpq(10) ** 400), to_float(-fmpq(10) ** 400)
    (0.3333333333333333, inf, -inf)
    """
    try:
        return float(q)
    except OverflowError:
        return math.inf if q > 0 else -math.inf


def decimal_text(q, digits: int = 6) -> str:
    """An exact rational in ``digits`` significant figures, however large or small (``%g`` style).

    >>> decimal_text(fmpq(2, 3)), decimal_text(-fmpq(10) ** 400 / 3), decimal_text(fmpq(1, 10 ** 320))
    ('0.666667', '-3.33333e+399', '1e-320')
    """
    value = to_float(q)
    if q == 0 or (math.isfinite(value) and abs(value) >= 1e-300):
        return f"{value:.{digits}g}"
    head, _, power = arb(q).str(digits, radius=False).partition("e")
    head = head.rstrip("0").rstrip(".") if "." in head else head
    return f"{head}e{int(power):+d}"


def binary_exponent(q: fmpq) -> int:
    """About log2 |q| (within one) for a non-zero rational, without building a float."""
    return int(q.p).bit_length() - int(q.q).bit_length()


def scaled_floats(coeffs: Sequence[fmpq]) -> list[float]:
    """Floats of exact coefficients all times one power of two that brings the largest near 1.

    The roots do not change, and coefficients far beyond the float range (1e-600) still give
    them; only terms more than about 1e308 below the largest become 0.

    >>> small, large = scaled_floats([fmpq(10) ** -600, 3 * fmpq(10) ** -600])
    >>> 0.25 <= large < 4, large / small
    (True, 3.0)
    """
    nonzero = [binary_exponent(c) for c in coeffs if c != 0]
    if not nonzero:
        return [0.0 for _ in coeffs]
    scale = fmpq(2) ** (-max(nonzero) - 1)
    return [to_float(c * scale) for c in coeffs]


def _exact_float(value) -> fmpq:
    """The exact binary value of a float (no decimal rounding: the root finders' own input)."""
    num, den = float(value).as_integer_ratio()
    return fmpq(num, den)


def mpoly_context(parameters: Iterable[str]) -> fmpq_mpoly_ctx:
    """The context for polynomials in ``s`` and the given parameters (``s`` first, rest sorted)."""
    names = (S, *sorted(set(parameters) - {S}))
    return fmpq_mpoly_ctx.get(names, "lex")


def mpoly_from_dict(parameters: Sequence[str], terms: Mapping[tuple[int, ...], object]) -> fmpq_mpoly:
    """Polynomial from ``{(exp_s, exp_p1, ...): coefficient}`` with parameters in sorted order."""
    ctx = mpoly_context(parameters)
    return ctx.from_dict({exps: to_fmpq(c) for exps, c in terms.items()})


def _join_terms(terms: Sequence[tuple[str, str]]) -> str:
    """Join (sign-carrying coefficient text, monomial text) pairs as a readable sum."""
    out = ""
    for coeff, mono in terms:
        text = coeff if not mono else (mono if coeff == "1" else "-" + mono if coeff == "-1"
                                       else f"{coeff}*{mono}")
        if not out:
            out = text
        elif text.startswith("-"):
            out += " - " + text[1:]
        else:
            out += " + " + text
    return out or "0"


def _monomial(names: Sequence[str], exps: Sequence[int]) -> str:
    parts = [n if e == 1 else f"{n}^{e}" for n, e in zip(names, exps) if e]
    return "*".join(parts)


def mpoly_text(poly: fmpq_mpoly) -> str:
    """Exact, parseable text of a polynomial in ``s`` and parameters, highest power of s first.

    >>> mpoly_text(mpoly_from_dict(("K",), {(2, 0): 1, (0, 1): fmpq(-1, 2), (0, 0): 3}))
    's^2 - 1/2*K + 3'
    """
    names = poly.context().names()
    items = sorted(poly.to_dict().items(), key=lambda t: tuple(-e for e in t[0]))
    return _join_terms([(str(c), _monomial(names, e)) for e, c in items])


def primitive_scale(poly: fmpq_mpoly) -> fmpq:
    """The positive rational that makes the coefficients of ``poly`` coprime integers.

    Scaling by a positive constant changes no root and no sign, so verdicts are unchanged.

    >>> p = mpoly_from_dict((), {(2,): fmpq(1, 5), (0,): fmpq(3, 10)})
    >>> primitive_scale(p), mpoly_text(p * primitive_scale(p))
    (10, '2*s^2 + 3')
    """
    coeffs = list(poly.to_dict().values())
    den = 1
    for c in coeffs:
        den = den * int(c.q) // math.gcd(den, int(c.q))
    num = 0
    for c in coeffs:
        num = math.gcd(num, int(c.p) * (den // int(c.q)))
    return fmpq(den, num) if num else fmpq(1)


def poly_text(coeffs: Sequence, variable: str = S) -> str:
    """Text of a polynomial given highest power first; coefficients may be fmpq or fmpq_poly.

    >>> poly_text([fmpq(1), fmpq(0), fmpq(-2)])
    's^2 - 2'
    """
    n = len(coeffs) - 1
    terms = []
    for i, c in enumerate(coeffs):
        power = n - i
        mono = "" if power == 0 else variable if power == 1 else f"{variable}^{power}"
        if isinstance(c, fmpq_poly):
            if c.is_zero():
                continue
            inner = _fmpq_poly_text(c)
            terms.append((f"({inner})" if mono and c.degree() > 0 else inner, mono))
        else:
            if c == 0:
                continue
            terms.append((str(c), mono))
    return _join_terms(terms)


def _fmpq_poly_text(c: fmpq_poly, name: str = "k") -> str:
    return poly_text([c[i] for i in range(c.degree(), -1, -1)], name)


def strip_leading_zeros(coeffs: Sequence) -> list:
    """Drop zero coefficients at the high-power end (the convention's normal form)."""
    i = 0
    while i < len(coeffs) - 1 and coeffs[i] == 0:
        i += 1
    return list(coeffs[i:])


@dataclass(frozen=True)
class ParametricPolynomial:
    """A polynomial in ``s`` whose coefficients are polynomials in one tuning parameter.

    ``coeffs`` are ``fmpq_poly`` values (constants when ``parameter`` is None), highest power of
    ``s`` first. The generic degree is ``len(coeffs) - 1``; at particular parameter values the
    leading coefficient may vanish and :meth:`at` strips it.
    """

    coeffs: tuple[fmpq_poly, ...]
    parameter: str | None = None

    def __post_init__(self):
        coeffs = tuple(c if isinstance(c, fmpq_poly) else fmpq_poly([to_fmpq(c)]) for c in self.coeffs)
        i = 0
        while i < len(coeffs) - 1 and coeffs[i].is_zero():
            i += 1
        object.__setattr__(self, "coeffs", coeffs[i:] or (fmpq_poly([]),))

    @classmethod
    def from_coefficients(cls, coeffs: Sequence, parameter: str | None = None) -> ParametricPolynomial:
        """From a list (highest power first) of numbers or fmpq_poly values."""
        return cls(tuple(coeffs), parameter)

    @classmethod
    def from_mpoly(cls, poly: fmpq_mpoly, parameter: str | None = None,
                   values: Mapping[str, object] | None = None) -> ParametricPolynomial:
        """Substitute ``values`` for every parameter but ``parameter`` and collect powers of s.

        Raises KeyError naming the first parameter that has neither a value nor is the tuning one.
        """
        names = poly.context().names()
        values = values or {}
        fixed: dict[str | int, fmpq] = {n: to_fmpq(values[n]) for n in names[1:] if n != parameter and n in values}
        if fixed:
            poly = poly.subs(fixed)
        by_power: dict[int, dict[int, fmpq]] = {}
        k_index = names.index(parameter) if parameter in names else None
        for exps, c in poly.to_dict().items():
            for idx, e in enumerate(exps[1:], start=1):
                if e and idx != k_index:
                    raise KeyError(names[idx])
            k_exp = exps[k_index] if k_index is not None else 0
            by_power.setdefault(exps[0], {})
            by_power[exps[0]][k_exp] = by_power[exps[0]].get(k_exp, 0) + c
        degree = max(by_power, default=0)
        coeffs = []
        for power in range(degree, -1, -1):
            terms = by_power.get(power, {})
            top = max(terms, default=-1)
            coeffs.append(fmpq_poly([terms.get(i, 0) for i in range(top + 1)]))
        return cls(tuple(coeffs), parameter)

    @property
    def degree(self) -> int:
        """Generic degree in s (``-1`` for the zero polynomial)."""
        if len(self.coeffs) == 1 and self.coeffs[0].is_zero():
            return -1
        return len(self.coeffs) - 1

    def at(self, value=None) -> list[fmpq]:
        """Exact coefficients at a parameter value (ignored without a parameter), leading zeros stripped."""
        v = to_fmpq(value) if value is not None else fmpq(0)
        return strip_leading_zeros([c(v) for c in self.coeffs])

    def at_float(self, value: float | None = None) -> list[float]:
        """Float coefficients at a value, for roots only: evaluated exactly, then all scaled by one
        power of two (see :func:`scaled_floats`), so coefficients beyond the float range still
        give the right roots."""
        v = fmpq(0) if value is None else _exact_float(value)
        return scaled_floats([c(v) for c in self.coeffs])

    def shifted(self, sigma) -> ParametricPolynomial:
        """The polynomial in z with s = z - sigma (roots move right by sigma).

        >>> ParametricPolynomial.from_coefficients([1, 3, 2]).shifted(1).text()
        's^2 + s'
        """
        sig = to_fmpq(sigma)
        acc: list[fmpq_poly] = [fmpq_poly([])]  # Horner in (z - sigma), lowest power of z first
        for c in self.coeffs:
            nxt = [fmpq_poly([]) for _ in range(len(acc) + 1)]
            for j, a in enumerate(acc):
                nxt[j + 1] += a
                nxt[j] -= a * sig
            nxt[0] += c
            acc = nxt
        n = len(self.coeffs) - 1
        return ParametricPolynomial(tuple(reversed(acc[: n + 1])), self.parameter)

    def text(self) -> str:
        """Exact text, highest power first, the parameter by its name."""
        name = self.parameter or "k"
        n = len(self.coeffs) - 1
        terms = []
        for i, c in enumerate(self.coeffs):
            power = n - i
            mono = "" if power == 0 else S if power == 1 else f"{S}^{power}"
            if c.is_zero():
                continue
            inner = _fmpq_poly_text(c, name)
            if c.degree() > 0 and mono and len([1 for j in range(c.degree() + 1) if c[j] != 0]) > 1:
                inner = f"({inner})"
            terms.append((inner, mono))
        return _join_terms(terms)
