"""Quasi-polynomials: characteristic functions of loops with dead time.

A quasi-polynomial is ``sum_k p_k(s) e^(-s*tau_k)``: each ``p_k`` an exact polynomial in ``s`` and
parameters (``fmpq_mpoly`` in the context of :func:`core.algebra.polynomial.mpoly_context`, the
polynomial convention of that module), each delay ``tau_k`` an exact linear form in delay
parameters (:class:`Delay`: a non-negative rational plus non-negative rational multiples of
parameter names). The delay-free term comes first, then the delayed ones in the order of their
delay's text; no two terms share a delay.

>>> from core.algebra.polynomial import mpoly_from_dict
>>> q = QuasiPolynomial.of({Delay.zero(): mpoly_from_dict(("K",), {(2, 0): 1, (1, 0): 3}),
...                         Delay.of(fmpq(1, 10)): mpoly_from_dict(("K",), {(0, 1): 1})})
>>> q.text(), q.delayed, q.parameters
('s^2 + 3*s + K*exp(-1/10*s)', True, ('K',))
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from flint import fmpq, fmpq_mpoly

from core.algebra.polynomial import mpoly_context, mpoly_text

__all__ = ["Delay", "QuasiPolynomial"]


@dataclass(frozen=True)
class Delay:
    """An exact delay ``constant + sum c_i * name_i`` (every part non-negative, names sorted)."""

    constant: fmpq
    parts: tuple[tuple[str, fmpq], ...] = ()

    @classmethod
    def zero(cls) -> Delay:
        return cls(fmpq(0))

    @classmethod
    def of(cls, value: fmpq | str) -> Delay:
        """A number or one parameter name."""
        return cls(fmpq(0), ((value, fmpq(1)),)) if isinstance(value, str) else cls(fmpq(value))

    def __add__(self, other: Delay) -> Delay:
        merged = dict(self.parts)
        for name, c in other.parts:
            merged[name] = merged.get(name, fmpq(0)) + c
        return Delay(self.constant + other.constant, tuple(sorted(merged.items())))

    def times(self, k: int) -> Delay:
        return Delay(self.constant * k, tuple((n, c * k) for n, c in self.parts if k))

    @property
    def is_zero(self) -> bool:
        return self.constant == 0 and not self.parts

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(n for n, _ in self.parts)

    def at(self, values: Mapping[str, fmpq]) -> fmpq:
        """The delay's exact value (KeyError naming a parameter without a value)."""
        total = self.constant
        for name, c in self.parts:
            total += c * values[name]
        return total

    def text(self) -> str:
        """``1/10``, ``tau``, ``2*tau + 1/2``."""
        pieces = [name if c == 1 else f"{c}*{name}" for name, c in self.parts]
        if self.constant != 0 or not pieces:
            pieces.append(str(self.constant))
        return " + ".join(pieces)


@dataclass(frozen=True)
class QuasiPolynomial:
    """``sum_k p_k(s) e^(-s*tau_k)`` as ``((Delay, fmpq_mpoly), ...)``, delay-free term first.

    Every polynomial part lives in one context (``s`` then the parameters of the polynomial parts);
    delay parameters need not appear in it.
    """

    terms: tuple[tuple[Delay, fmpq_mpoly], ...]

    @classmethod
    def of(cls, parts: Mapping[Delay, fmpq_mpoly]) -> QuasiPolynomial:
        """From ``{Delay: polynomial}``, zero parts dropped, put in the normal order."""
        names = sorted({n for p in parts.values() for n in p.context().names()[1:]})
        ctx = mpoly_context(names)
        zero = Delay.zero()
        kept = {d: _into(p, ctx) for d, p in parts.items() if not p.is_zero()}
        kept.setdefault(zero, ctx.from_dict({}))
        order = sorted(kept, key=lambda d: (not d.is_zero, d.text()))
        return cls(tuple((d, kept[d]) for d in order))

    @property
    def delayed(self) -> bool:
        """Whether any term carries a delay."""
        return any(not d.is_zero for d, _ in self.terms)

    @property
    def polynomial_parameters(self) -> tuple[str, ...]:
        return tuple(self.terms[0][1].context().names()[1:])

    @property
    def delay_parameters(self) -> tuple[str, ...]:
        return tuple(sorted({n for d, _ in self.terms for n in d.names}))

    @property
    def parameters(self) -> tuple[str, ...]:
        """Every parameter, sorted: of the polynomial parts and of the delays."""
        return tuple(sorted(set(self.polynomial_parameters) | set(self.delay_parameters)))

    def text(self) -> str:
        """Exact, parseable text: each delayed part times ``exp(-tau*s)``."""
        out = ""
        for delay, poly in self.terms:
            body = mpoly_text(poly)
            if delay.is_zero:
                piece = body
            else:
                factor = _delay_factors(delay)
                piece = factor if body == "1" else f"-{factor}" if body == "-1" else \
                    f"{body}*{factor}" if len(poly) == 1 else f"({body})*{factor}"
            if piece == "0":
                continue
            out = piece if not out else out + (f" - {piece[1:]}" if piece.startswith("-") else f" + {piece}")
        return out or "0"

    def to_dict(self) -> dict:
        """JSON-ready: the text and each term's delay and polynomial as exact text."""
        return {"text": self.text(),
                "terms": [{"delay": d.text(), "polynomial": mpoly_text(p)} for d, p in self.terms]}


def _delay_factors(delay: Delay) -> str:
    """The delay as typed factors: ``exp(-1/2*s)*exp(-L*s)^2`` (``exp(-s)`` for a delay of one)."""
    factors = []
    if delay.constant != 0:
        factors.append("exp(-s)" if delay.constant == 1 else f"exp(-{delay.constant}*s)")
    for name, k in delay.parts:
        factors.append(f"exp(-{name}*s)" + (f"^{k}" if k != 1 else ""))
    return "*".join(factors)


def _into(poly: fmpq_mpoly, ctx) -> fmpq_mpoly:
    """The same polynomial in a context with (at least) its names."""
    names = poly.context().names()
    target = ctx.names()
    terms = {}
    for exps, c in poly.to_dict().items():
        full = [0] * len(target)
        for name, e in zip(names, exps):
            full[target.index(name)] = e
        terms[tuple(full)] = c
    return ctx.from_dict(terms)
