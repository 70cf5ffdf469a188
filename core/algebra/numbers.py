"""Single typed numbers (a parameter's nominal, min or max; a requirement value), read strictly.

Accepted: an optional sign (``-`` or the minus sign U+2212), digits with at most one decimal mark
(``.``, or ``,`` as a decimal comma) and an optional exponent (``2.5e-3``). Refused with E112,
saying what is wrong: a comma followed by exactly three digits (``1,000`` could be one thousand
or one), more than one mark (``1,000.5``, ``1.000.000``), spaces or ``_`` inside (``1 000``), two
exponents, and words such as ``inf`` or ``nan``. Magnitudes above 1e300 or non-zero below 1e-300
are E105, checked before any large number is built.

>>> read_value("2,5"), read_value("\u22121e-3"), read_value("0,500")
(2.5, -0.001, 0.5)
>>> read_value("1,000", where="parameter K, nominal")
Traceback (most recent call last):
...
core.errors.ExpressionError: E112 at parameter K, nominal: '1,000' is ambiguous: a thousands separator or a decimal comma? type 1000 or 1.000
"""
from __future__ import annotations

import re
from fractions import Fraction
from typing import NoReturn

from core.errors import ExpressionError

__all__ = ["read_value"]

_VALUE = re.compile(r"([+-]?)([0-9]*)(?:([.,])([0-9]*))?(?:[eE]([+-]?)([0-9]+))?")
_MAX_EXPONENT_DIGITS = 6
_MAX_DIGITS = 400


def _refuse(code: str, message: str, where: str | None) -> NoReturn:
    raise ExpressionError(code, message, where=where)


def read_value(text: str, where: str | None = None) -> float:
    """The value of one typed number, as the nearest float (see the module docstring)."""
    shown = text.strip()
    plain = shown.replace("\u2212", "-")
    if not plain:
        _refuse("E112", "no number typed", where)
    match = _VALUE.fullmatch(plain)
    if match is None or not (match.group(2) or match.group(4)):
        _refuse("E112", f"'{shown[:30]}' is not a number{_hint(plain)}", where)
    sign, whole, mark, frac, exp_sign, exp = match.groups()
    if mark == "," and len(frac) == 3 and whole.lstrip("0"):
        _refuse("E112", f"'{shown[:30]}' is ambiguous: a thousands separator or a decimal comma? "
                f"type {whole}{frac} or {whole}.{frac}", where)
    digits = (whole + (frac or "")).lstrip("0")
    if not digits:
        return 0.0
    if len(exp or "0") > _MAX_EXPONENT_DIGITS or len(digits) > _MAX_DIGITS:
        _refuse("E105", f"'{shown[:30]}' is out of range (magnitude 1e-300 to 1e300)", where)
    power = (-int(exp) if exp_sign == "-" else int(exp or 0)) - len(frac or "")
    order = len(digits) - 1 + power
    if order > 300 or order < -300:
        _refuse("E105", f"'{shown[:30]}' is out of range (magnitude 1e-300 to 1e300)", where)
    value = Fraction(int(digits)) * Fraction(10) ** power
    return float(-value if sign == "-" else value)


def _hint(text: str) -> str:
    """Why a text that is not a number was refused, when a reason is recognisable."""
    if text.count(",") + text.count(".") > 1:
        return ": it has more than one decimal mark or separator (type 1000.5, not 1,000.5)"
    if re.search(r"[0-9][ _\u00a0\u2009\u202f'][0-9]", text):
        return ": no spaces, _ or ' inside a number (type 1000)"
    if len(re.findall(r"[eE]", text)) > 1:
        return ": it has two exponents (type 1e6, not 1e3e3)"
    return ""
