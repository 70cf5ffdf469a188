"""Routh array entries at a float value of the tuning parameter, fast and only where provably right.

While the slider moves, the Routh panel evaluates every entry (a rational function num/den of the
tuning parameter) from float coefficient tables in one pass, each with a rigorous bound on its
error. An entry is returned only when every value within that bound has the same display text
(:func:`~app.panels.common.number`, 6 significant figures) and the same sign, so the text and sign
shown equal those of the exact value; any other entry (a value near a rounding boundary, near zero,
or near a pole of the entry) is left to the exact evaluation.

The bound, u = 2^-53 and n the degree: the powers of v by successive products and the dot product
with the coefficients err by at most (2n + 1) u S, rounding the exact coefficients to floats by u S,
and the float v against the exact rational the panel uses (its shortest decimal, within u |v|) by
n u S, with S = sum |a_i| |v|^i (Higham, *Accuracy and Stability of Numerical Algorithms*, ch. 3
and 5, from memory); twice that is used. For y = N / D with errors e_N, e_D (e_D <= |D| / 2):
|y - N/D| <= 2 (e_N + |y| e_D) / |D|, plus the division's own rounding.

>>> from flint import fmpq_poly
>>> from core.analysis.routh import RationalFunction
>>> FloatEntries([[RationalFunction(fmpq_poly([2, -1]), fmpq_poly([3]))]]).at(0.5)   # (2 - K) / 3
[[('0.5', 1)]]
>>> FloatEntries([[RationalFunction(fmpq_poly([2, -1]))]]).at(2.0)   # zero: left to the exact path
[[None]]
"""
from __future__ import annotations

import math

import numpy as np

from app.panels.common import number
from core.analysis.routh import RationalFunction

UNIT_ROUNDOFF = 2.0 ** -53


def _table(polys, width: int) -> np.ndarray:
    """Float coefficients, column i holding the coefficient of v^i; one beyond the float range is
    infinite, so every entry using it is left to the exact evaluation."""
    table = np.zeros((len(polys), width))
    for row, p in enumerate(polys):
        for i in range(p.degree() + 1):
            table[row, i] = _float(p[i])
    return table


def _float(q) -> float:
    try:
        return float(q)
    except OverflowError:
        return math.inf if q > 0 else -math.inf


class FloatEntries:
    """The entries of Routh rows (rational functions over ``fmpq_poly`` in the tuning parameter)
    as float tables; :meth:`at` gives each entry's (text, sign), or None where only the exact
    value can say."""

    def __init__(self, rows: list[list[RationalFunction]]):
        self.shape = [len(row) for row in rows]
        entries = [e for row in rows for e in row]
        degree = max((max(e.num.degree(), e.den.degree()) for e in entries), default=0)
        self.degree = max(degree, 0)
        width = self.degree + 1
        self.num = _table([e.num for e in entries], width)
        self.den = _table([e.den for e in entries], width)
        self.abs_num, self.abs_den = np.abs(self.num), np.abs(self.den)
        self.slack = 2.0 * (3 * self.degree + 3) * UNIT_ROUNDOFF  # error per unit of S, see the module

    def at(self, value: float) -> list[list[tuple[str, int] | None]]:
        """Per entry, its display text and sign at ``value``, or None (evaluate that one exactly)."""
        v = float(value)
        powers = np.cumprod(np.concatenate(([1.0], np.full(self.degree, v))))
        magnitudes = np.abs(powers)
        with np.errstate(all="ignore"):
            n, d = self.num @ powers, self.den @ powers
            e_n, e_d = self.slack * (self.abs_num @ magnitudes), self.slack * (self.abs_den @ magnitudes)
            y = n / d
            half = 2.0 * (e_n + np.abs(y) * e_d) / np.abs(d) + 3.0 * UNIT_ROUNDOFF * np.abs(y)
            usable = np.isfinite(y) & np.isfinite(half) & (e_d <= 0.5 * np.abs(d)) & (np.abs(y) > half)
        flat: list[tuple[str, int] | None] = []
        for ok, yi, hi in zip(usable.tolist(), y.tolist(), half.tolist()):
            text = number(yi) if ok else None
            flat.append((text, 1 if yi > 0 else -1) if ok and number(yi - hi) == text == number(yi + hi) else None)
        out, start = [], 0
        for length in self.shape:
            out.append(flat[start:start + length])
            start += length
        return out
