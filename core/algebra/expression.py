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
  name (``Ks`` is the parameter ``Ks``, not ``K*s``); a number followed by a name or ``(``
  multiplies (``2s``, ``3(s+1)``), and so do a name or ``)`` followed by a name or ``(``
  (``K s``, ``s(s+1)``, ``(s+1)(s+2)``). A number after a name or ``)`` (``s 2``) is an error.
* Implicit multiplication right after a division is refused as ambiguous (``1/2s`` could mean
  ``1/(2s)`` or ``s/2``): write ``1/(2 s)`` or ``s/2``.
* Reserved names (E108): ``i``, ``j``, ``I``, ``J`` (the imaginary unit has no place in a real
  polynomial), ``S`` (the Laplace variable is lower-case ``s``), ``e``, ``E`` and ``pi`` (type the
  value), function names such as ``exp`` or ``sin`` (no dead time or functions: polynomials only),
  Python keywords, names starting with ``_`` and names longer than 64 characters.
* Non-ASCII characters are refused (E101), naming the character.

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
from dataclasses import dataclass
from functools import lru_cache

import sympy
from flint import fmpq, fmpq_mpoly, fmpq_mpoly_ctx

from core.algebra.polynomial import S, mpoly_context
from core.errors import ExpressionError

__all__ = [
    "LAPLACE",
    "MAX_DEGREE",
    "MAX_EXPONENT",
    "MAX_MAGNITUDE",
    "MAX_NESTING",
    "MAX_TERMS",
    "MAX_TERM_BOUND",
    "MAX_TEXT",
    "block_transfer",
    "expression_parameters",
    "parse_expression",
    "parse_fraction",
    "parse_polynomial",
    "to_mpoly",
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
_SPACE = " \t\r\n"


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


def _tokenize(text: str, where: str | None) -> list[_Token]:
    tokens: list[_Token] = []
    i, n = 0, len(text)
    while i < n:
        ch, column = text[i], i + 1
        if ch in _SPACE:
            i += 1
        elif ch.isascii() and (ch.isdigit() or (ch == "." and i + 1 < n and text[i + 1].isascii()
                                                 and text[i + 1].isdigit())):
            m = _NUMBER.match(text, i)
            assert m is not None  # a digit or '.digit' always starts a number
            tokens.append(_Token("num", m.group(0), column, _number_value(m, where, column)))
            i = m.end()
        elif ch.isascii() and (ch.isalpha() or ch == "_"):
            m = _NAME.match(text, i)
            assert m is not None  # a letter or '_' always starts a name
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
    def __init__(self, tokens: list[_Token], where: str | None, evaluate: bool = True):
        self.tokens = tokens
        self.pos = 0
        self.where = where
        self.depth = 0
        self.evaluate = evaluate  # False keeps typed factors apart: (s-1)/(s-1) is not merged to 1

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
                if _is_identically_zero(divisor, self.where, divisor_column):
                    _fail("E110", "division by zero: the divisor is identically zero",
                          self.where, divisor_column)
                factors.append(sympy.Pow(divisor, -1, evaluate=self.evaluate))
                after_division = True
            elif tok.kind in ("name", "("):
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


def _parse(text: str, where: str | None, evaluate: bool = True) -> tuple[sympy.Expr, list[_Token]]:
    if not isinstance(text, str):
        raise TypeError(f"expression text must be str, not {type(text).__name__}")
    if len(text) > MAX_TEXT:
        _fail("E103", f"text too long: {len(text)} characters (at most {MAX_TEXT})", where)
    tokens = _tokenize(text, where)
    if tokens[0].kind == "end":
        _fail("E102", "the expression is empty", where)
    try:
        expr = _Parser(tokens, where, evaluate).parse()
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


def parse_polynomial(text: str, where: str | None = None) -> sympy.Expr:
    """Text that must be a polynomial in s (a typed characteristic polynomial), expanded.

    A numeric denominator is divided out (``s/2 + 1`` stays ``s/2 + 1``); a denominator made of
    parameters is multiplied through (``s^2 + s/T + 1`` gives ``T s^2 + s + T``, the same roots
    wherever T is non-zero); s in a denominator is E107.

    >>> parse_polynomial("s^2 + s/T + 1")
    T*s**2 + T + s
    >>> parse_polynomial("1/s + 1")
    Traceback (most recent call last):
    ...
    core.errors.ExpressionError: E107: not a polynomial in s: s appears in a denominator
    """
    expr = parse_expression(text, where)
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
