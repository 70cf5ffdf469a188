"""The project's own error types and the catalogue of user-facing error codes.

Every error a user can meet is a :class:`LoopwrightError` with a stable ``code`` (listed in
:data:`CATALOGUE` and in docs/errors.md), a one-line ``message`` that says what went wrong, and a
``where`` that says where (a column of typed text, a node or wire id, a file path).

>>> err = ExpressionError("E102", "expected ')' to close '('", where="column 7")
>>> str(err)
"E102 at column 7: expected ')' to close '('"
>>> err.code in CATALOGUE
True
"""
from __future__ import annotations

import re

CATALOGUE: dict[str, str] = {
    # typed expressions (block polynomials, characteristic polynomials)
    "E101": "unexpected character in an expression",
    "E102": "expression ends early or a token is out of place",
    "E103": "text too long",
    "E104": "exponent out of range",
    "E105": "number too large",
    "E106": "degree too high",
    "E107": "not a polynomial where a polynomial is needed",
    "E108": "name not allowed",
    "E109": "expression nested too deeply",
    "E110": "division by zero",
    "E111": "the Laplace variable s run into a name that is not a declared parameter",
    "E112": "number ambiguous or malformed",
    # project files
    "E201": "file is not valid JSON",
    "E202": "not a Loopwright project file",
    "E203": "project file from a newer version",
    "E204": "required field missing",
    "E205": "field has a wrong type or value",
    "E206": "wire refers to a node that does not exist",
    "E207": "duplicate node id",
    "E208": "file cannot be read",
    "E209": "file cannot be saved",
    "E210": "file changed on disk since it was opened",
    # diagram edits
    "E301": "no such node",
    "E302": "connection not allowed",
    "E303": "id already in use",
    "E304": "parameter value invalid",
    "E305": "no such wire",
    "E306": "tolerance empty, inverted or not finite",
    "E307": "the tuning parameter cannot carry a tolerance",
    # analysis
    "E401": "input or output node not set or not found",
    "E402": "loop is ill-posed (algebraic loop with gain one)",
    "E403": "characteristic polynomial is identically zero",
    "E404": "parameter has no value",
    "E405": "analysis option invalid",
    "E406": "input does not reach the output",
    "E407": "transfer function improper: no step response",
    "E408": "a block's denominator is zero at the nominal values",
    "E409": "step response beyond the floating-point range",
    "E410": "loop order above the analysed limit",
    "E420": "tolerance empty, inverted or not finite (analysis)",
    "E421": "tolerance given for the tuning parameter",
    "E422": "tolerance given for a name that is not a parameter",
    "E430": "stability plane: the same parameter on both axes",
    "E431": "stability plane: an axis range is empty or inverted",
    "E432": "stability plane: an axis is not a parameter",
    "E440": "delay negative or not finite",
    "E441": "delay factor malformed",
    "E442": "loop of neutral or advanced type (a delayed term of full degree)",
    "E443": "delay parameter has no value",
    "E444": "delay factor where only a polynomial can stand",
    "E445": "delay loop: analysis not available as asked",
    "E446": "delay loop: certified search unresolved (a root on or too near the imaginary axis)",
    "E450": "sample period not a finite number > 0",
    "E451": "polynomial variable not s or z",
    "E452": "a polynomial in z contains s",
    "E453": "plant has no zero-order-hold equivalent (improper or zero denominator)",
    "E454": "delay not a whole number of samples in range",
    "E455": "discrete controller invalid (not causal, zero denominator, or a constant loop)",
    "E456": "decay requirement in z without a sample period",
    "E457": "option not available for a polynomial in z",
    "E458": "z in a denominator of a polynomial in z",
    "E459": "degree in z above the analysed limit",
    "E460": "frequency response: the polynomial is not affine in the tuning gain",
    "E461": "frequency response: no tuning gain named",
    "E462": "frequency response: a parameter has no value",
    "E463": "frequency response: a delay outside the tuning gain's term",
    "E464": "frequency response: loop transfer function zero, undefined or improper",
    "E465": "frequency response: a crossover could not be resolved",
    "E466": "frequency response: no wire to open the loop at",
    # command line
    "E501": "command-line arguments invalid",
}


class LoopwrightError(Exception):
    """Base of every error shown to a user: a catalogue code, a message and a place."""

    def __init__(self, code: str, message: str, where: str | None = None):
        if code not in CATALOGUE:
            raise ValueError(f"unknown error code {code!r}")
        super().__init__(message)
        self.code = code
        self.message = message
        self.where = where

    def __reduce__(self):
        """Pickled as its code, message and place (an analysis' error crosses processes)."""
        return (type(self), (self.code, self.message, self.where))

    def __str__(self) -> str:
        """One line: control and bidirectional-override characters (from hostile files) escaped."""
        place = f" at {self.where}" if self.where else ""
        return _one_line(f"{self.code}{place}: {self.message}")


# C0/C1 controls, line/paragraph separators and bidi embeddings/overrides/isolates
_UNPRINTABLE = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029\u202a-\u202e\u2066-\u2069]")


def _one_line(text: str) -> str:
    r"""Escape characters that would break a line or reorder it on a terminal.

    >>> _one_line("node P\n\x1b[31m")
    'node P\\n\\x1b[31m'
    """
    return _UNPRINTABLE.sub(lambda m: m.group().encode("unicode_escape").decode("ascii"), text)


class ExpressionError(LoopwrightError):
    """Typed text that cannot be read as an expression (codes E1xx)."""


class ProjectFileError(LoopwrightError):
    """A project file that cannot be read or written (codes E2xx)."""


class ModelError(LoopwrightError):
    """A diagram edit that would make the model invalid (codes E3xx)."""


class AnalysisError(LoopwrightError):
    """A diagram or polynomial that cannot be analysed as asked (codes E4xx)."""


class UsageError(LoopwrightError):
    """Command-line arguments that do not make sense (codes E5xx)."""


NOTICE_KINDS = {
    "left_out": "parts of the diagram on no input-output path, left out of the analysis",
    "open_port": "a junction input not connected (contributes zero)",
    "improper_block": "a block whose numerator degree exceeds its denominator's",
    "loops_truncated": "more loops than are listed",
    "ill_posed": "the loop gain tends to 1 as s grows (the order drops)",
    "not_reached": "the output does not depend on the input, or parts are not reached or not seen",
    "routh_omitted": "the Routh array is too large to write out",
    "numerically_sensitive": "floating-point roots disagree with the exact counts",
    "degenerate": "the characteristic polynomial vanishes identically at the nominal values",
    "cancellation": "a mode cancels out of the transfer function at some value of the tuning parameter",
    "hidden_mode": "a mode cancels out of the transfer function at the nominal values",
    "note": "any other note",
}


class Notice(str):
    """A warning's text with a stable ``kind`` from :data:`NOTICE_KINDS`: programs (the window, the
    report, a CI script reading ``warning_kinds``) sort notices by kind, never by their wording.

    >>> n = Notice("block G is improper: ...", "improper_block")
    >>> n.kind, n.startswith("block G"), Notice("plain").kind
    ('improper_block', True, 'note')
    """

    kind: str

    def __new__(cls, text: str, kind: str = "note"):
        if kind not in NOTICE_KINDS:
            raise ValueError(f"unknown notice kind {kind!r}")
        notice = super().__new__(cls, text)
        notice.kind = kind
        return notice

    def __reduce__(self):
        return (Notice, (str(self), self.kind))


def notice_kind(text: str) -> str:
    """The kind of a warning text (``note`` for a plain string)."""
    return getattr(text, "kind", "note")

