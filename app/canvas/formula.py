"""Typed polynomial text as display HTML: real superscripts, italic names, proper minus signs.

Display only: the text is split into tokens and re-written, never evaluated. Text the display
does not understand is shown escaped, as typed.

>>> formula_html("s^2+2*s+K_p")
'<i>s</i><sup>2</sup> + 2<i>s</i> + <i>K</i><sub>p</sub>'
>>> formula_html("-0.5s**3")
'\u22120.5<i>s</i><sup>3</sup>'
>>> formula_html("1e-300*s^2 + 2.5E3")
'10<sup>\u2212300</sup>\u2009<i>s</i><sup>2</sup> + 2.5·10<sup>3</sup>'
"""
from __future__ import annotations

import html
import re

from core.present import MINUS

_NUMBER = r"(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_TOKEN = re.compile(rf"\s*(\*\*|{_NUMBER}|[A-Za-z_][A-Za-z0-9_]*|.)")
THIN = "\u2009"


def _name_html(name: str) -> str:
    base, _, sub = name.partition("_")
    out = f"<i>{html.escape(base)}</i>" if base else ""
    return out + (f"<sub>{html.escape(sub)}</sub>" if sub else "")


def _tokens(text: str) -> list[str]:
    return [m.group(1) for m in _TOKEN.finditer(text) if m.group(1).strip()]


def _render(tokens: list[str], i: int, stop: str | None) -> tuple[str, int]:
    """HTML for tokens from ``i`` up to the closing ``stop`` token (or the end)."""
    out: list[str] = []
    operand_before = False
    while i < len(tokens):
        t = tokens[i]
        if t == stop:
            return "".join(out), i + 1
        if t in ("^", "**"):
            exponent, i = _exponent(tokens, i + 1)
            out.append(f"<sup>{exponent}</sup>")
            continue
        if t in "+-" and len(t) == 1:
            symbol = "+" if t == "+" else MINUS
            out.append(f" {symbol} " if operand_before else symbol)
            operand_before = False
        elif t == "*":
            nxt = tokens[i + 1] if i + 1 < len(tokens) else ""
            prev_number = bool(out) and re.fullmatch(r"[\d.]+", tokens[i - 1] or "") is not None
            out.append("" if prev_number and (nxt[:1].isalpha() or nxt == "(") else THIN)
        elif t == "/":
            out.append("/")
            operand_before = False
        elif t == "(":
            inner, i = _render(tokens, i + 1, ")")
            out.append(f"({inner})")
            operand_before = True
            continue
        elif t[0].isalpha() or t[0] == "_":
            out.append(_name_html(t))
            operand_before = True
        else:
            out.append(_number_html(t))
            operand_before = True
        i += 1
    return "".join(out), i


def _number_html(token: str) -> str:
    """``2.5e-3`` as 2.5·10<sup>−3</sup> (``1e-300`` as 10<sup>−300</sup>): an exponent is never
    drawn as if it were a subtraction."""
    mantissa, e, power = token.replace("E", "e").partition("e")
    if not e:
        return html.escape(token)
    power = power.lstrip("+").replace("-", MINUS)
    ten = f"10<sup>{html.escape(power)}</sup>"
    return ten if re.fullmatch(r"1(\.0*)?", mantissa) else f"{html.escape(mantissa)}·{ten}"


def _exponent(tokens: list[str], i: int) -> tuple[str, int]:
    if i >= len(tokens):
        return "", i
    if tokens[i] == "(":
        return _render(tokens, i + 1, ")")
    if tokens[i] == "-" and i + 1 < len(tokens):
        inner, j = _exponent(tokens, i + 1)
        return MINUS + inner, j
    t = tokens[i]
    return (_name_html(t) if t[0].isalpha() else html.escape(t)), i + 1


def formula_html(text: str) -> str:
    """Display HTML for a typed polynomial (see module doc)."""
    return _render(_tokens(text), 0, None)[0]


def is_one(text: str) -> bool:
    """Whether the typed text is just the number one (a denominator that needs no fraction)."""
    return re.fullmatch(r"\s*\(?\s*1(\.0*)?\s*\)?\s*", text or "") is not None
