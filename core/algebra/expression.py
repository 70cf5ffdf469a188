"""The expression language for block polynomials and characteristic polynomials.

What people type is read by a small tokenizer and a recursive-descent parser that build sympy
objects directly (``Integer``, ``Rational``, ``Symbol``, ``Add``, ``Mul``, ``Pow``); typed text is
never evaluated as code.

Grammar (``^`` and ``**`` mean the same; ``^`` is right-associative and binds tighter than a
unary sign, so ``-s^2`` is ``-(s^2)`` and ``2^3^2`` is ``2^9``)::

    input   := sum (',' sum)*                 a list is coefficients, highest power of s first
    sum     := product (('+' | '-') product)*
    product := factor (('*' | '/') factor | factor)*   a bare factor is implicit multiplication
    factor  := ('+' | '-')* atom ('^' ('+' | '-')* atom)*
    atom    := number | name | '(' sum ')'

* Numbers are exact: ``0.1`` is 1/10 and ``2.5e-3`` is 1/400.
* A name is an ASCII letter followed by letters, digits or ``_`` (``K``, ``Kp``, ``T_1``, ``wn``).
  ``s`` is the Laplace variable; every other name is a parameter. Letters run together form one
  name; a number followed by a name or ``(`` multiplies (``2s``, ``3(s+1)``), and so do a name or
  ``)`` followed by a name or ``(`` (``K s``, ``s(s+1)``, ``(s+1)(s+2)``). A number after a name
  or ``)`` (``s 2``) is an error.
* A name with ``s`` run into it (``Tis``, ``sK``, ``ss``, ``s2``; see :func:`glued_reading`) is
  E111, "did you mean Ti*s?", wherever the text is checked against declared parameters
  (:func:`read_block`, and :func:`parse_polynomial` given ``declared``), unless a parameter of
  that name is declared.
* A number run into a name starting with ``e`` (``1e3e3``, ``2e``) is E112, not a product.
* Pasted characters: superscript digits and signs are powers (``s²`` is ``s^2``, ``s¹⁰`` is
  ``s^10``); the minus sign U+2212 is ``-``; the middle dot U+00B7, the dot operator U+22C5 and
  the multiplication sign U+00D7 are ``*``; no-break and thin spaces are spaces.
* Implicit multiplication right after a division is refused as ambiguous (``1/2s`` could mean
  ``1/(2s)`` or ``s/2``): write ``1/(2 s)`` or ``s/2``.
* Reserved names (E108): ``i``, ``j``, ``I``, ``J`` (the imaginary unit has no place in a real
  polynomial), ``S`` (the Laplace variable is lower-case ``s``), ``e``, ``E`` and ``pi`` (type the
  value), function names such as ``exp`` or ``sin`` (no dead time or functions: polynomials only),
  Python keywords, names starting with ``_`` and names longer than 64 characters.
* Other non-ASCII characters are refused (E101), naming the character.

Bounds, checked before any large number or expansion is built: text up to 10,000 characters
(E103); exponents whole numbers 0..200 (E104); every number and coefficient within 1e300 in
magnitude, and a non-zero literal at least 1e-300 (E105); degree in s up to 200 and expansions of
at most 2,000 terms (E106); parentheses nested up to 100 deep (E109).

Within one typed field sympy's automatic simplification applies (``(s+1)/(s+1)`` typed in one
field is 1); :func:`block_transfer` never cancels between the numerator and denominator fields.

>>> parse_expression("2.5e-3 s^2 + K(s+1)")
K*(s + 1) + s**2/400
>>> parse_expression("1, 3, 2")
s**2 + 3*s + 2
>>> block_transfer("s+1", "s+1")
(s + 1, s + 1)
"""
from __future__ import annotations

import keyword
import math
import re
import unicodedata
from collections.abc import Collection
from dataclasses import dataclass
from functools import lru_cache

import sympy
from flint import fmpq, fmpq_mpoly, fmpq_mpoly_ctx

from core.algebra.polynomial import S, mpoly_context
from core.algebra.quasi import Delay, QuasiPolynomial
from core.errors import ExpressionError, LoopwrightError

__all__ = [
    "LAPLACE",
    "MAX_DEGREE",
    "MAX_EXPONENT",
    "MAX_MAGNITUDE",
    "MAX_NESTING",
    "MAX_TERMS",
    "MAX_TERM_BOUND",
    "MAX_TEXT",
    "BlockReading",
    "NewName",
    "TypedName",
    "block_transfer",
    "check_glued_names",
    "expression_parameters",
    "glued_reading",
    "parse_expression",
    "parse_fraction",
    "parse_polynomial",
    "parse_quasi_polynomial",
    "read_block",
    "to_mpoly",
    "typed_names",
]

LAPLACE = sympy.Symbol(S)
MAX_TEXT = 10_000
MAX_EXPONENT = 200
MAX_DEGREE = 200
MAX_MAGNITUDE = 10 ** 300
MAX_NESTING = 100
MAX_TERMS = 2_000  # terms of a result
MAX_TERM_BOUND = 50_000  # a priori bound on an expansion, checked before building it
MAX_NAME = 64
DELAY_FUNCTION = "exp"  # read as a delay factor by parse_quasi_polynomial only
_DELAY_PREFIX = "_delay"  # placeholder symbols for delay factors (typed names never start with '_')
_MAX_DIGITS = 400  # significant digits of one literal

RESERVED = {
    "i": "the imaginary unit has no place in a polynomial with real coefficients",
    "j": "the imaginary unit has no place in a polynomial with real coefficients",
    "I": "the imaginary unit has no place in a polynomial with real coefficients",
    "J": "the imaginary unit has no place in a polynomial with real coefficients",
    "S": "the Laplace variable is lower-case s",
    "e": "type the number itself (2.71828...) or, for powers of ten, 2e3",
    "E": "type the number itself (2.71828...) or, for powers of ten, 2e3",
    "pi": "type its value, e.g. 3.14159",
    **{f: "functions are not supported: blocks hold polynomials in s"
       for f in ("exp", "log", "ln", "sqrt", "sin", "cos", "tan", "asin", "acos", "atan", "sinh",
                 "cosh", "tanh", "abs")},
}

_NUMBER = re.compile(r"([0-9]+)(?:\.([0-9]*))?(?:[eE]([+-]?)([0-9]+))?|\.([0-9]+)(?:[eE]([+-]?)([0-9]+))?")
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_OPERATORS = {"+", "-", "*", "/", "^", "(", ")", ","}
_SPACE = " \t\r\n\u00a0\u2009\u202f"  # no-break, thin and narrow no-break spaces come with pasted text
# characters pasted from documents, read as their plain counterparts
_PASTED = {"\u2212": "-", "\u00b7": "*", "\u22c5": "*", "\u00d7": "*"}
_SUPERSCRIPTS = {"\u2070": "0", "\u00b9": "1", "\u00b2": "2", "\u00b3": "3", "\u2074": "4", "\u2075": "5",
                 "\u2076": "6", "\u2077": "7", "\u2078": "8", "\u2079": "9", "\u207a": "+", "\u207b": "-"}


@dataclass(frozen=True)
class _Token:
    kind: str  # "num", "name", an operator character, or "end"
    text: str
    column: int  # 1-based
    value: object = None


def _place(where: str | None, column: int | None) -> str | None:
    if column is None:
        return where
    return f"{where}, column {column}" if where else f"column {column}"


def _fail(code: str, message: str, where: str | None, column: int | None = None):
    raise ExpressionError(code, message, where=_place(where, column))


def _describe_char(ch: str) -> str:
    name = unicodedata.name(ch, "")
    shown = repr(ch) if ch.isprintable() and not unicodedata.category(ch).startswith("C") else ""
    return " ".join(p for p in (shown, f"U+{ord(ch):04X}", name and f"({name})") if p)


def _number_value(match: re.Match, where: str | None, column: int) -> sympy.Rational:
    """The exact value of a numeric literal, refusing oversized ones before building them."""
    if match.group(5) is not None:
        whole, frac, sign, exp = "", match.group(5), match.group(6), match.group(7)
    else:
        whole, frac, sign, exp = match.group(1), match.group(2) or "", match.group(3), match.group(4)
    digits = (whole + frac).lstrip("0")
    if not digits:
        return sympy.Integer(0)
    exp = (exp or "0").lstrip("0") or "0"
    if len(exp) > 6:
        _fail("E105", f"number {match.group(0)[:20]}... out of range (magnitude 1e-300 to 1e300)",
              where, column)
    trailing = len(digits) - len(digits.rstrip("0"))
    digits = digits.rstrip("0")
    if len(digits) > _MAX_DIGITS:
        _fail("E105", f"number has more than {_MAX_DIGITS} significant digits", where, column)
    power = (-int(exp) if sign == "-" else int(exp)) - len(frac) + trailing
    order = len(digits) - 1 + power  # value lies in [10^order, 10^(order+1))
    if order > 300 or order < -300:
        _fail("E105", f"number {match.group(0)[:20]} out of range (magnitude 1e-300 to 1e300)",
              where, column)
    value = sympy.Integer(int(digits) * 10 ** power) if power >= 0 else sympy.Rational(int(digits), 10 ** -power)
    _check_number(value, where, column)
    return value


def _tokenize(text: str, where: str | None, delays: bool = False) -> list[_Token]:
    tokens: list[_Token] = []
    i, n = 0, len(text)
    while i < n:
        ch, column = _PASTED.get(text[i], text[i]), i + 1
        if ch in _SPACE:
            i += 1
        elif ch in _SUPERSCRIPTS:
            i = _superscript_power(text, i, tokens, where)
        elif ch.isascii() and (ch.isdigit() or (ch == "." and i + 1 < n and text[i + 1].isascii()
                                                 and text[i + 1].isdigit())):
            m = _NUMBER.match(text, i)
            assert m is not None  # a digit or '.digit' always starts a number
            _check_number_end(text, m, where, column, delays)
            tokens.append(_Token("num", m.group(0), column, _number_value(m, where, column)))
            i = m.end()
        elif ch.isascii() and (ch.isalpha() or ch == "_"):
            m = _NAME.match(text, i)
            assert m is not None  # a letter or '_' always starts a name
            if delays and m.group(0) == DELAY_FUNCTION:
                tokens.append(_Token("exp", m.group(0), column))
                i = m.end()
                continue
            _check_name(m.group(0), where, column)
            tokens.append(_Token("name", m.group(0), column))
            i = m.end()
        elif ch == "*" and text.startswith("**", i):
            tokens.append(_Token("^", "**", column))
            i += 2
        elif ch in _OPERATORS:
            tokens.append(_Token(ch, ch, column))
            i += 1
        elif not ch.isascii() and ch.isalpha():
            _fail("E101", f"unexpected character {_describe_char(ch)}: names use plain ASCII letters "
                  "(e.g. w instead of \u03c9)", where, column)
        else:
            _fail("E101", f"unexpected character {_describe_char(ch)}", where, column)
    tokens.append(_Token("end", "", n + 1))
    return tokens


def _superscript_power(text: str, start: int, tokens: list[_Token], where: str | None) -> int:
    """Read superscript signs then digits (``²``, ``¹⁰``, ``⁻¹``) as ``^`` and its exponent."""
    tokens.append(_Token("^", text[start], start + 1))
    end = start
    while end < len(text) and _SUPERSCRIPTS.get(text[end]) in ("+", "-"):
        tokens.append(_Token(_SUPERSCRIPTS[text[end]], text[end], end + 1))
        end += 1
    first = end
    while end < len(text) and _SUPERSCRIPTS.get(text[end], "+") not in ("+", "-"):
        end += 1
    if end > first:
        digits = "".join(_SUPERSCRIPTS[c] for c in text[first:end])
        if len(digits.lstrip("0")) > 6:
            _fail("E104", f"an exponent must be a whole number from 0 to {MAX_EXPONENT}", where, first + 1)
        tokens.append(_Token("num", text[first:end], first + 1, sympy.Integer(int(digits))))
    return end


def _check_number_end(text: str, match: re.Match, where: str | None, column: int, delays: bool = False) -> None:
    """E112 for a number run into a name that starts with e (``1e3e3``, ``2e``): it reads as a
    malformed exponent, not as a product (when delays are read, ``2exp(-s)`` is a product)."""
    end = match.end()
    if end < len(text) and text[end] in "eE":
        rest = _NAME.match(text, end)
        if delays and rest is not None and rest.group(0) == DELAY_FUNCTION:
            return
        shown = text[match.start():rest.end() if rest else end + 1][:30]
        has_exponent = match.group(4) is not None or match.group(7) is not None
        problem = "it has two exponents (write 1e6, not 1e3e3)" if has_exponent else \
            "its exponent has no digits (write 2e3)"
        _fail("E112", f"'{shown}' is not a number: {problem}; for a product put * before the name",
              where, column)


def _check_name(name: str, where: str | None, column: int) -> None:
    if name.startswith("_"):
        _fail("E108", f"name '{name[:MAX_NAME]}' not allowed: names start with a letter", where, column)
    if len(name) > MAX_NAME:
        _fail("E108", f"name '{name[:20]}...' is longer than {MAX_NAME} characters", where, column)
    if name in RESERVED:
        _fail("E108", f"name '{name}' is reserved: {RESERVED[name]}", where, column)
    if keyword.iskeyword(name) or keyword.issoftkeyword(name):
        _fail("E108", f"name '{name}' is a reserved word; choose another parameter name", where, column)


def _check_number(value: sympy.Expr, where: str | None, column: int | None) -> None:
    if value.is_Rational and (abs(value.p) > MAX_MAGNITUDE or value.q > MAX_MAGNITUDE):
        _fail("E105", "number too large: numerators and denominators must stay within 1e300",
              where, column)


def _check_coefficients(expr: sympy.Expr, where: str | None, column: int | None) -> None:
    """Check the numeric coefficients at the top of ``expr`` (cheap; used after every step)."""
    parts = expr.args if expr.is_Add else (expr,)
    for part in parts:
        _check_number(part.as_coeff_Mul()[0], where, column)


class _Parser:
    def __init__(self, tokens: list[_Token], where: str | None, evaluate: bool = True,
                 delays: dict[Delay, sympy.Symbol] | None = None):
        self.tokens = tokens
        self.pos = 0
        self.where = where
        self.depth = 0
        self.evaluate = evaluate  # False keeps typed factors apart: (s-1)/(s-1) is not merged to 1
        self.delays = delays  # delay factors read so far, each as a placeholder symbol (None: refused)

    def _neg(self, expr: sympy.Expr) -> sympy.Expr:
        return -expr if self.evaluate else sympy.Mul(sympy.Integer(-1), expr, evaluate=False)

    @property
    def tok(self) -> _Token:
        return self.tokens[self.pos]

    def _advance(self) -> _Token:
        tok = self.tokens[self.pos]
        self.pos += 1
        return tok

    def _found(self, tok: _Token) -> str:
        return "the text ends" if tok.kind == "end" else f"found '{tok.text}'"

    def parse(self) -> sympy.Expr:
        start = self.tok
        entries = [(start.column, self._sum())]
        while self.tok.kind == ",":
            self._advance()
            entries.append((self.tok.column, self._sum()))
        tok = self.tok
        if tok.kind == ")":
            _fail("E102", "found ')' with no '(' to close", self.where, tok.column)
        if tok.kind != "end":  # pragma: no cover - every other token is consumed or refused above
            _fail("E102", f"expected an operator or the end of the text but {self._found(tok)}",
                  self.where, tok.column)
        if len(entries) == 1:
            return entries[0][1]
        if len(entries) > MAX_DEGREE + 1:
            _fail("E106", f"a coefficient list may have at most {MAX_DEGREE + 1} entries", self.where)
        for column, entry in entries:
            if _has_delay(entry):
                _fail("E444", "an entry of a coefficient list cannot hold a delay factor (it depends on s)",
                      self.where, column)
            if LAPLACE in entry.free_symbols:
                _fail("E107", "an entry of a coefficient list cannot contain s", self.where, column)
        top = len(entries) - 1
        result = sympy.Add(*[entry * LAPLACE ** (top - k) for k, (_, entry) in enumerate(entries)])
        _check_coefficients(result, self.where, start.column)
        return result

    def _sum(self) -> sympy.Expr:
        column = self.tok.column
        terms = [self._product()]
        while self.tok.kind in ("+", "-"):
            negate = self._advance().kind == "-"
            term = self._product()
            terms.append(self._neg(term) if negate else term)
        result = sympy.Add(*terms, evaluate=self.evaluate)
        _check_coefficients(result, self.where, column)
        return result

    def _product(self) -> sympy.Expr:
        column = self.tok.column
        factors = [self._factor()]
        after_division = False
        while True:
            tok = self.tok
            if tok.kind == "*":
                self._advance()
                factors.append(self._factor())
                after_division = False
            elif tok.kind == "/":
                self._advance()
                divisor_column = self.tok.column
                divisor = self._factor()
                if _has_delay(divisor):
                    _fail("E444", "a delay factor cannot stand in a divisor: e^(+tau*s) would predict the "
                          "future", self.where, divisor_column)
                if _is_identically_zero(divisor, self.where, divisor_column):
                    _fail("E110", "division by zero: the divisor is identically zero",
                          self.where, divisor_column)
                factors.append(sympy.Pow(divisor, -1, evaluate=self.evaluate))
                after_division = True
            elif tok.kind in ("name", "(", "exp"):
                if after_division:
                    _fail("E102", f"ambiguous: '{tok.text}' follows a division; write the divisor in "
                          "parentheses, e.g. 1/(2 s), or use '*'", self.where, tok.column)
                factors.append(self._factor())
            elif tok.kind == "num":
                _fail("E102", f"expected an operator (+ - * / ^) before '{tok.text}'", self.where, tok.column)
            else:
                break
        result = sympy.Mul(*factors, evaluate=self.evaluate) if len(factors) > 1 else factors[0]
        _check_coefficients(result, self.where, column)
        return result

    def _signs(self) -> bool:
        negative = False
        while self.tok.kind in ("+", "-"):
            negative ^= self._advance().kind == "-"
        return negative

    def _factor(self) -> sympy.Expr:
        negative = self._signs()
        chain = [(False, self.tok.column, self._atom())]
        while self.tok.kind == "^":
            self._advance()
            sign = self._signs()
            chain.append((sign, self.tok.column, self._atom()))
        value = chain[-1][2]
        for k in range(len(chain) - 1, 0, -1):  # right-associative fold
            sign, column, _ = chain[k]
            exponent = -value if sign else value  # exponents are plain integers: evaluate
            base_column, base = chain[k - 1][1], chain[k - 1][2]
            value = self._power(base, exponent, base_column, column)
        return self._neg(value) if negative else value

    def _power(self, base, exponent, base_column: int, column: int) -> sympy.Expr:
        if _has_delay(exponent):
            _fail("E444", "a delay factor cannot stand in an exponent", self.where, column)
        if exponent.free_symbols:
            names = ", ".join(sorted(str(x) for x in exponent.free_symbols))
            _fail("E104", f"an exponent must be a whole number from 0 to {MAX_EXPONENT}, "
                  f"not an expression in {names}", self.where, column)
        if not exponent.is_Integer or not 0 <= exponent <= MAX_EXPONENT:
            _fail("E104", f"an exponent must be a whole number from 0 to {MAX_EXPONENT}, not {exponent}",
                  self.where, column)
        if base.is_Rational:
            bits = max(abs(base.p), base.q).bit_length()
            if bits * int(exponent) > 1000 * 4:  # far beyond 1e300 (about 997 bits): refuse unbuilt
                _fail("E105", "number too large: numerators and denominators must stay within 1e300",
                      self.where, base_column)
        result = sympy.Pow(base, exponent, evaluate=self.evaluate)
        _check_coefficients(result, self.where, base_column)
        return result

    def _atom(self) -> sympy.Expr:
        tok = self._advance()
        if tok.kind == "num":
            return tok.value
        if tok.kind == "name":
            return LAPLACE if tok.text == S else sympy.Symbol(tok.text)
        if tok.kind == "exp":
            return self._delay_factor(tok)
        if tok.kind == "(":
            if self.depth >= MAX_NESTING:
                _fail("E109", f"parentheses nested more than {MAX_NESTING} deep", self.where, tok.column)
            self.depth += 1
            inner = self._sum()
            self.depth -= 1
            close = self.tok
            if close.kind != ")":
                _fail("E102", f"expected ')' to close '(' opened at column {tok.column} but "
                      f"{self._found(close)}", self.where, close.column)
            self._advance()
            return inner
        _fail("E102", f"expected a number, name or '(' but {self._found(tok)}", self.where, tok.column)


    def _delay_factor(self, exp_tok: _Token) -> sympy.Expr:
        """``exp(-tau*s)``, ``exp(-s*tau)``, ``exp(-0.5*s)`` or ``exp(-s)`` as its placeholder symbol."""
        if self.tok.kind != "(":
            self._malformed(self.tok)
        self._advance()
        sign = self.tok
        if sign.kind in ("+", "-"):
            self._advance()
        amount = self._delay_amount()
        if self.tok.kind != ")":
            self._malformed(self.tok)
        self._advance()
        if sign.kind != "-" and not amount.is_zero:
            shown = "s" if amount == Delay.of(fmpq(1)) else f"{amount.text()}*s"
            _fail("E440", f"exp(+{shown}) is a negative delay (a prediction): a dead time is "
                  f"written exp(-{shown})", self.where, exp_tok.column)
        assert self.delays is not None  # "exp" tokens are only made when delays are read
        if amount not in self.delays:
            self.delays[amount] = sympy.Symbol(f"{_DELAY_PREFIX}{len(self.delays)}")
        return self.delays[amount]

    def _delay_amount(self) -> Delay:
        """The delay inside exp(- ... ): a number or one parameter, times s, in either order."""
        first = self._advance()
        if first.kind == "name" and first.text == S:
            if self.tok.kind in ("*", "/"):
                divide = self._advance().kind == "/"
                tok = self._advance()
                value = self._delay_value(tok)
                if divide:
                    return self._delay_ratio(Delay.of(fmpq(1)), value, tok)
                if self.tok.kind == "/" and not value.parts:
                    self._advance()
                    tok = self._advance()
                    return self._delay_ratio(value, self._delay_value(tok), tok)
                return value
            if self.tok.kind in ("name", "num") and self.tok.text != S:
                return self._delay_value(self._advance())
            return Delay.of(fmpq(1))
        amount = self._delay_value(first)
        if first.kind == "num" and self.tok.kind == "/":
            self._advance()
            tok = self._advance()
            amount = self._delay_ratio(amount, self._delay_value(tok), tok)
        if self.tok.kind == "*":
            self._advance()
        after = self._advance()
        if not (after.kind == "name" and after.text == S):
            self._malformed(after)
        return amount

    def _delay_ratio(self, amount: Delay, divisor: Delay, tok: _Token) -> Delay:
        """A number over a number (``3/10*s``, ``s/2``)."""
        if amount.parts or divisor.parts or divisor.constant == 0:
            self._malformed(tok)
        return Delay.of(amount.constant / divisor.constant)

    def _delay_value(self, tok: _Token) -> Delay:
        if tok.kind == "num":
            value = tok.value
            assert isinstance(value, sympy.Rational)  # every number token is exact
            return Delay.of(fmpq(int(value.p), int(value.q)))
        if tok.kind == "name" and tok.text != S:
            return Delay.of(tok.text)
        self._malformed(tok)
        raise AssertionError  # pragma: no cover - _malformed raises

    def _malformed(self, tok: _Token) -> None:
        _fail("E441", f"malformed delay factor ({self._found(tok)}): write exp(-0.5*s) or exp(-tau*s), "
              "a non-negative number or one parameter times s", self.where, tok.column)


def _has_delay(expr: sympy.Expr) -> bool:
    return any(str(x).startswith(_DELAY_PREFIX) for x in expr.free_symbols)


def _degree_bounds(expr: sympy.Expr) -> tuple[dict, dict]:
    """Upper bounds on each symbol's degree in the numerator and denominator of together(expr)."""
    if expr.is_Rational:
        return {}, {}
    if expr.is_Symbol:
        return {expr: 1}, {}
    if expr.is_Mul:
        num: dict = {}
        den: dict = {}
        for arg in expr.args:
            n, d = _degree_bounds(arg)
            for x, k in n.items():
                num[x] = num.get(x, 0) + k
            for x, k in d.items():
                den[x] = den.get(x, 0) + k
        return num, den
    if expr.is_Add:
        num, den = _degree_bounds(expr.args[0])
        for arg in expr.args[1:]:
            n, d = _degree_bounds(arg)
            cross_a, cross_b = _add_degrees(num, d), _add_degrees(n, den)
            num = {x: max(cross_a.get(x, 0), cross_b.get(x, 0)) for x in cross_a.keys() | cross_b.keys()}
            den = _add_degrees(den, d)
        return num, den
    if expr.is_Pow and expr.exp.is_Integer:
        n, d = _degree_bounds(expr.base)
        k = int(expr.exp)
        if k < 0:
            n, d, k = d, n, -k
        return {x: k * v for x, v in n.items()}, {x: k * v for x, v in d.items()}
    raise ExpressionError("E107", f"not a rational expression in s and parameters: {type(expr).__name__}")


def s_degree_bound(text: str) -> int:
    """An upper bound on the degree in s of a typed expression, read without expanding it (cheap
    at any power); 0 for text that cannot be read (its error is reported by the analysis).

    >>> s_degree_bound("(s+1)^150 * (2*s + K)"), s_degree_bound("K"), s_degree_bound("s^")
    (151, 0, 0)
    """
    try:
        expr, _ = _parse(text, None, evaluate=False)
        return max(part.get(LAPLACE, 0) for part in _degree_bounds(expr))
    except LoopwrightError:
        return 0


def _add_degrees(a: dict, b: dict) -> dict:
    return {x: a.get(x, 0) + b.get(x, 0) for x in a.keys() | b.keys()}


def _check_expandable(expr: sympy.Expr, where: str | None, column: int | None = None) -> None:
    """Refuse (E106) an expression whose expansion could exceed the degree or size bounds."""
    for part in _degree_bounds(expr):
        if part.get(LAPLACE, 0) > MAX_DEGREE:
            _fail("E106", f"degree in s could reach {part[LAPLACE]} (at most {MAX_DEGREE})", where, column)
        terms = math.prod(k + 1 for k in part.values())
        if terms > MAX_TERM_BOUND:
            _fail("E106", f"expression too large: expanding it could give up to {terms} terms "
                  f"(at most {MAX_TERM_BOUND})", where, column)


def _is_identically_zero(expr: sympy.Expr, where: str | None, column: int) -> bool:
    if expr.is_number:
        return expr == 0
    _check_expandable(expr, where, column)
    return _evaluate(expr, _context_for(expr))[0].is_zero()


def _context_for(*exprs: sympy.Expr) -> fmpq_mpoly_ctx:
    return mpoly_context(str(x) for e in exprs for x in e.free_symbols)


def _evaluate(expr: sympy.Expr, ctx: fmpq_mpoly_ctx) -> tuple[fmpq_mpoly, fmpq_mpoly]:
    """(numerator, denominator) of a rational expression as flint polynomials in ``ctx``.

    Products multiply numerators and denominators; a sum puts its terms over the least common
    multiple of their denominators. Nothing is cancelled between a numerator and a denominator.
    """
    one = ctx.from_dict({(0,) * ctx.nvars(): 1})
    if expr.is_Rational:
        return one * fmpq(int(expr.p), int(expr.q)), one
    if expr.is_Symbol:
        if str(expr) not in ctx.names():
            raise ExpressionError("E107", f"not a polynomial in {', '.join(ctx.names())}: contains {expr}")
        return ctx.gens()[ctx.names().index(str(expr))], one
    if expr.is_Mul:
        num, den = one, one
        for arg in expr.args:
            n, d = _evaluate(arg, ctx)
            num, den = num * n, den * d
        return num, den
    if expr.is_Add:
        num, den = _evaluate(expr.args[0], ctx)
        for arg in expr.args[1:]:
            n, d = _evaluate(arg, ctx)
            common = den.gcd(d)
            num, den = num * (d / common) + n * (den / common), den * (d / common)
        return num, den
    if expr.is_Pow and expr.exp.is_Integer:
        n, d = _evaluate(expr.base, ctx)
        k = int(expr.exp)
        return (n ** k, d ** k) if k >= 0 else (d ** -k, n ** -k)
    raise ExpressionError("E107", f"not a rational expression in s and parameters: {type(expr).__name__}")


def _parse(text: str, where: str | None, evaluate: bool = True,
           delays: dict[Delay, sympy.Symbol] | None = None) -> tuple[sympy.Expr, list[_Token]]:
    if not isinstance(text, str):
        raise TypeError(f"expression text must be str, not {type(text).__name__}")
    if len(text) > MAX_TEXT:
        _fail("E103", f"text too long: {len(text)} characters (at most {MAX_TEXT})", where)
    tokens = _tokenize(text, where, delays is not None)
    if tokens[0].kind == "end":
        _fail("E102", "the expression is empty", where)
    try:
        expr = _Parser(tokens, where, evaluate, delays).parse()
    except RecursionError:  # pragma: no cover - MAX_NESTING keeps well below the interpreter limit
        _fail("E109", "expression nested too deeply", where)
    for number in expr.atoms(sympy.Rational):
        _check_number(number, where, None)
    for part in _degree_bounds(expr):
        if part.get(LAPLACE, 0) > MAX_DEGREE:
            _fail("E106", f"degree in s could reach {part[LAPLACE]} (at most {MAX_DEGREE})", where)
    return expr, tokens


def parse_expression(text: str, where: str | None = None) -> sympy.Expr:
    """Parse typed text into an exact sympy expression in s and parameters (fractions allowed).

    >>> parse_expression("0.1 K s^2 - 3(s+1)/(T s + 1)")
    K*s**2/10 - 3*(s + 1)/(T*s + 1)
    >>> parse_expression("(s+1", where="node P, denominator")
    Traceback (most recent call last):
    ...
    core.errors.ExpressionError: E102 at node P, denominator, column 5: expected ')' to close '(' opened at column 1 but the text ends
    """
    return _parse(text, where)[0]


def expression_parameters(text: str) -> set[str]:
    """The parameter names typed in ``text`` (not ``s``); raises ExpressionError on invalid text.

    Names are collected as typed, so ``K - K`` still reports K.

    >>> sorted(expression_parameters("Kp (1 + 1/(Ti s)) + s"))
    ['Kp', 'Ti']
    """
    _, tokens = _parse(text, None)
    return {t.text for t in tokens if t.kind == "name" and t.text != S}


def glued_reading(name: str) -> str | None:
    """How a name with the Laplace variable run into it was probably meant, or None.

    An ``s`` at the start followed by a letter, an ``s`` at the end after a letter or digit, and
    ``s`` followed only by digits (an exponent typed without ``^``) count; ``_`` separates
    deliberately, so ``T_s`` and ``s_1`` are names.

    >>> [glued_reading(n) for n in ("Tis", "sK", "ss", "Kss", "s2", "T1s", "T_s", "Ksp", "s")]
    ['Ti*s', 's*K', 's*s', 'K*s*s', 's^2', 'T1*s', None, None, None]
    """
    if re.fullmatch(r"s[0-9]+", name):
        return f"s^{int(name[1:])}"
    lead = trail = 0
    while len(name) - lead - trail > 1 and name[lead] == S and name[lead + 1].isalpha():
        lead += 1
    while len(name) - lead - trail > 1 and name[len(name) - 1 - trail] == S \
            and name[len(name) - 2 - trail].isalnum():
        trail += 1
    if not lead and not trail:
        return None
    return "*".join([S] * lead + [name[lead:len(name) - trail]] + [S] * trail)


@dataclass(frozen=True)
class TypedName:
    """A parameter name as typed: the 1-based column where it first appears."""

    name: str
    column: int


@lru_cache(maxsize=4096)
def typed_names(text: str, delays: bool = False) -> tuple[TypedName, ...]:
    """Each parameter name in ``text`` once, at its first column, in the order typed.

    Raises ExpressionError when the text cannot be tokenized.

    >>> typed_names("Kp (Ti s + 1) + Kp")
    (TypedName(name='Kp', column=1), TypedName(name='Ti', column=5))
    """
    seen: dict[str, int] = {}
    for tok in _tokenize(text, None, delays):
        if tok.kind == "name" and tok.text != S:
            seen.setdefault(tok.text, tok.column)
    return tuple(TypedName(name, column) for name, column in seen.items())


def check_glued_names(text: str, declared: Collection[str], where: str | None = None,
                      delays: bool = False) -> None:
    """E111 for the first name in ``text`` with s run into it (see :func:`glued_reading`) that is
    not one of the ``declared`` parameters: ``Tis`` is taken for ``Ti*s`` unless a parameter
    ``Tis`` exists.

    >>> check_glued_names("Kp (Tis + 1)", {"Kp"}, where="node C, numerator")
    Traceback (most recent call last):
    ...
    core.errors.ExpressionError: E111 at node C, numerator, column 5: 'Tis' runs s into a name: did you mean Ti*s? (a parameter called Tis must be declared first)
    >>> check_glued_names("Kp (Tis + 1)", {"Kp", "Tis"})
    """
    for typed in typed_names(text, delays):
        reading = glued_reading(typed.name)
        if reading is not None and typed.name not in declared:
            _fail("E111", f"'{typed.name}' runs s into a name: did you mean {reading}? "
                  f"(a parameter called {typed.name} must be declared first)", where, typed.column)


@dataclass(frozen=True)
class NewName:
    """A parameter name a block's text introduces: where it first appears."""

    name: str
    part: str  # "numerator" or "denominator"
    column: int


@dataclass(frozen=True)
class BlockReading:
    """A block's two typed fields read against the project's declared parameters."""

    numerator: sympy.Expr
    denominator: sympy.Expr
    names: frozenset[str]
    new_names: tuple[NewName, ...]  # not declared yet, numerator's first, in the order typed


def read_block(num_text: str, den_text: str, declared: Collection[str] = (), where: str | None = None) -> BlockReading:
    """:func:`block_transfer` plus the parameter rules for typed blocks: E111 for a name with s run
    into it that is not declared (:func:`check_glued_names`), and the names typed for the first
    time, with their places, so they can be flagged where they were typed.

    >>> r = read_block("Kp (Ti s + 1)", "Ti s", declared={"Kp"})
    >>> r.numerator, r.new_names
    (Kp*Ti*s + Kp, (NewName(name='Ti', part='numerator', column=5),))
    """
    num, den = block_transfer(num_text, den_text, where)
    new: dict[str, NewName] = {}
    for part, text in (("numerator", num_text), ("denominator", den_text)):
        check_glued_names(text, declared, _within(where, part))
        for typed in typed_names(text):
            if typed.name not in declared and typed.name not in new:
                new[typed.name] = NewName(typed.name, part, typed.column)
    names = frozenset(n.name for text in (num_text, den_text) for n in typed_names(text))
    return BlockReading(num, den, names, tuple(new.values()))


def _within(where: str | None, part: str) -> str:
    return f"{where}, {part}" if where else part


def _check_mpoly(poly: fmpq_mpoly, where: str | None) -> None:
    if len(poly) > MAX_TERMS:
        _fail("E106", f"expression too large: {len(poly)} terms (at most {MAX_TERMS})", where)
    if not poly.is_zero() and poly.degrees()[0] > MAX_DEGREE:
        _fail("E106", f"degree in s is {poly.degrees()[0]} (at most {MAX_DEGREE})", where)
    for c in poly.coeffs():
        if abs(int(c.p)) > MAX_MAGNITUDE or int(c.q) > MAX_MAGNITUDE:
            _fail("E105", "coefficient too large: numerators and denominators must stay within 1e300", where)


def _to_sympy(poly: fmpq_mpoly) -> sympy.Expr:
    gens = [sympy.Symbol(n) for n in poly.context().names()]
    return sympy.Add(*[sympy.Rational(int(c.p), int(c.q)) * sympy.Mul(*[g ** e for g, e in zip(gens, m) if e])
                       for m, c in poly.terms()])


def _fraction(expr: sympy.Expr, ctx: fmpq_mpoly_ctx, where: str | None) -> tuple[fmpq_mpoly, fmpq_mpoly]:
    _check_expandable(expr, where)
    num, den = _evaluate(expr, ctx)
    if den.is_zero():  # pragma: no cover - every divisor is checked while parsing
        _fail("E110", "division by zero", where)
    _check_mpoly(num, where)
    _check_mpoly(den, where)
    return num, den


def parse_fraction(text: str, where: str | None = None) -> tuple[sympy.Expr, sympy.Expr]:
    """(numerator, denominator): expanded polynomials in s and parameters, rational coefficients.

    Terms are put over the least common multiple of their denominators; numerator and denominator
    are never cancelled against each other, not even factors typed in one field: the text is parsed
    without sympy's automatic merging, so ``(s-1)/(s-1)`` keeps its denominator.

    >>> parse_fraction("1/(T s + 1) + 0.5")
    (T*s/2 + 3/2, T*s + 1)
    >>> parse_fraction("1/(s^2 - 1) + 1/(s + 1)")
    (s, s**2 - 1)
    >>> parse_fraction("(s - 1)/(s - 1)")
    (s - 1, s - 1)
    """
    expr = _parse(text, where, evaluate=False)[0]
    num, den = _fraction(expr, _context_for(expr), where)
    return _to_sympy(num), _to_sympy(den)


@lru_cache(maxsize=4096)  # the model checks every block of each analysis copy: most texts repeat
def block_transfer(num_text: str, den_text: str, where: str | None = None) -> tuple[sympy.Expr, sympy.Expr]:
    """A block's transfer function (N, D) from its two typed fields, with no cancellation between them.

    N = n_num * d_den and D = d_num * n_den (expanded), where n/d come from :func:`parse_fraction`
    of each field; a typed denominator always stays in D.

    >>> block_transfer("K/(s+2)", "s (s+1)")
    (K, s**3 + 3*s**2 + 2*s)
    >>> block_transfer("(s-1)/(s-1)", "s+2")  # a typed factor is never merged away
    (s - 1, s**2 + s - 2)
    >>> block_transfer("1", "0", where="node G")
    Traceback (most recent call last):
    ...
    core.errors.ExpressionError: E110 at node G, denominator: the denominator is identically zero
    """
    num_place, den_place = _within(where, "numerator"), _within(where, "denominator")
    exprs = []
    for part, text, place in (("numerator", num_text, num_place), ("denominator", den_text, den_place)):
        if isinstance(text, str) and len(text) <= MAX_TEXT and not text.strip():
            _fail("E102", f"{part} is empty", place)
        exprs.append(_parse(text, place, evaluate=False)[0])
    ctx = _context_for(*exprs)
    n_num, d_num = _fraction(exprs[0], ctx, num_place)
    n_den, d_den = _fraction(exprs[1], ctx, den_place)
    if n_den.is_zero():
        _fail("E110", "the denominator is identically zero", den_place)
    num, den = n_num * d_den, d_num * n_den
    _check_mpoly(num, num_place)
    _check_mpoly(den, den_place)
    return _to_sympy(num), _to_sympy(den)


def parse_polynomial(text: str, where: str | None = None, declared: Collection[str] | None = None) -> sympy.Expr:
    """Text that must be a polynomial in s (a typed characteristic polynomial), expanded.

    A numeric denominator is divided out (``s/2 + 1`` stays ``s/2 + 1``); a denominator made of
    parameters is multiplied through (``s^2 + s/T + 1`` gives ``T s^2 + s + T``, the same roots
    wherever T is non-zero); s in a denominator is E107. Given ``declared``, a name with s run
    into it that is not among them is E111 (:func:`check_glued_names`).

    >>> parse_polynomial("s^2 + s/T + 1")
    T*s**2 + T + s
    >>> parse_polynomial("1/s + 1")
    Traceback (most recent call last):
    ...
    core.errors.ExpressionError: E107: not a polynomial in s: s appears in a denominator
    """
    expr = parse_expression(text, where)
    if declared is not None:
        check_glued_names(text, declared, where)
    num, den = _fraction(expr, _context_for(expr), where)
    if den.degrees()[0] > 0:
        _fail("E107", "not a polynomial in s: s appears in a denominator", where)
    if den.is_constant():
        num = num * (1 / den.leading_coefficient())
    return _to_sympy(num)


def to_mpoly(expr: sympy.Expr, ctx: fmpq_mpoly_ctx) -> fmpq_mpoly:
    """Convert a sympy polynomial in s and parameters into the flint context ``ctx`` (names match).

    Raises E107 if ``expr`` has a symbol outside ``ctx`` or a non-constant denominator.

    >>> from core.algebra.polynomial import mpoly_context, mpoly_text
    >>> mpoly_text(to_mpoly(parse_polynomial("s^2 + K s/2 + 1"), mpoly_context(["K"])))
    's^2 + 1/2*s*K + 1'
    """
    if isinstance(expr, int):
        expr = sympy.Integer(expr)
    if not isinstance(expr, sympy.Expr):
        raise TypeError(f"to_mpoly needs a sympy expression, not {type(expr).__name__}")
    num, den = _evaluate(expr, ctx)
    if not den.is_constant():
        raise ExpressionError("E107", f"not a polynomial in {', '.join(ctx.names())}: it has a denominator")
    return num * (1 / den.leading_coefficient())


def parse_quasi_polynomial(text: str, where: str | None = None,
                           declared: Collection[str] | None = None) -> QuasiPolynomial:
    """Text that must be a quasi-polynomial: a polynomial in s and parameters whose terms may carry
    delay factors ``exp(-0.5*s)``, ``exp(-3/10*s)``, ``exp(-tau*s)`` or ``exp(-s*tau)`` (a non-negative
    number, a ratio of two, or one parameter, times s, negated; products and powers add their delays). Anything else under
    exp is E441 with its column, a positive exponent E440, a delay factor in a divisor, an exponent
    or a coefficient list E444. Without exp this reads exactly what :func:`parse_polynomial` reads.

    >>> parse_quasi_polynomial("s^2 + 3*s + K*exp(-0.1*s)").text()
    's^2 + 3*s + K*exp(-1/10*s)'
    >>> parse_quasi_polynomial("s + exp(-L s)^2 exp(-0.5 s)").text()
    's + exp(-1/2*s)*exp(-L*s)^2'
    >>> parse_quasi_polynomial("s + exp(-s^2)")
    Traceback (most recent call last):
    ...
    core.errors.ExpressionError: E441 at column 11: malformed delay factor (found '^'): write exp(-0.5*s) or exp(-tau*s), a non-negative number or one parameter times s
    """
    delays: dict[Delay, sympy.Symbol] = {}
    expr = _parse(text, where, delays=delays)[0]
    if declared is not None:
        check_glued_names(text, declared, where, delays=True)
    ctx = _context_for(expr)
    num, den = _fraction(expr, ctx, where)
    if den.degrees()[0] > 0:
        _fail("E107", "not a polynomial in s: s appears in a denominator", where)
    if den.is_constant():
        num = num * (1 / den.leading_coefficient())
    return _quasi_terms(num, {str(symbol): delay for delay, symbol in delays.items()})


def _quasi_terms(num: fmpq_mpoly, placeholders: dict[str, Delay]) -> QuasiPolynomial:
    """Group the terms of a polynomial in s, parameters and delay placeholders by their delay."""
    names = num.context().names()
    kept = [i for i, n in enumerate(names) if n not in placeholders]
    ctx = mpoly_context(names[i] for i in kept[1:])
    grouped: dict[Delay, dict[tuple[int, ...], fmpq]] = {}
    for exps, c in num.to_dict().items():
        delay = Delay.zero()
        for name, e in zip(names, exps):
            if name in placeholders and e:
                delay = delay + placeholders[name].times(e)
        mono = tuple(exps[i] for i in kept)
        part = grouped.setdefault(delay, {})
        part[mono] = part.get(mono, fmpq(0)) + c
    return QuasiPolynomial.of({d: ctx.from_dict(t) for d, t in grouped.items()})
