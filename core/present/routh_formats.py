"""The Routh array as text to paste elsewhere: CSV, Markdown or LaTeX (pure, no Qt).

Each format holds one row per power of s, labelled ``s^k``, with the entries as
:meth:`core.analysis.routh.RouthArray.rows_text` writes them (short rows padded with empty cells). An
optional second block of columns holds the entries' values at one parameter value (strings made by
the caller, e.g. ``"1/3"``); special-case notes follow the table.

>>> from core.algebra.polynomial import ParametricPolynomial
>>> from core.analysis.routh import routh_array
>>> from flint import fmpq_poly
>>> arr = routh_array(ParametricPolynomial.from_coefficients([1, 3, 2, fmpq_poly([0, 1])], "K"))
>>> print(routh_csv(arr).splitlines()[3])
s^1,-1/3*K + 2,
>>> print(routh_markdown(arr).splitlines()[4])
| s^1 | `-1/3*K + 2` |  |
>>> print(latex_entry("(3*K + 2)/(K_p + 1)"))
\\frac{3\\,K + 2}{\\mathit{K\\_p} + 1}
"""
from __future__ import annotations

import csv
import io
import re
from collections.abc import Sequence

from core.analysis.routh import RouthArray
from core.present import MINUS

_TOKEN = re.compile(r"\s*(\d+/\d+|\d+|[A-Za-z_][A-Za-z0-9_]*|\^|\*|/|\(|\)|[+-]|\S)")


def _cells(array: RouthArray) -> tuple[list[list[str]], int]:
    rows = array.rows_text()
    width = max((len(r) for r in rows), default=0)
    return [r + [""] * (width - len(r)) for r in rows], width


def _padded(values: Sequence[Sequence[str]] | None, width: int, count: int) -> list[list[str]] | None:
    if values is None:
        return None
    rows = [[str(v).replace(MINUS, "-") for v in row] for row in values][:count]
    rows += [[] for _ in range(count - len(rows))]
    return [r[:width] + [""] * (width - len(r[:width])) for r in rows]


def _header(array: RouthArray, width: int, values, value_label: str) -> list[str]:
    name = array.parameter
    head = ["power"] + [f"column {j + 1}" + (f" (in {name})" if name else "") for j in range(width)]
    if values is not None:
        head += [f"column {j + 1} {value_label}".rstrip() for j in range(width)]
    return head


def _notes(array: RouthArray) -> list[str]:
    return [f"s^{array.powers[s.row]}: {s.note}" for s in array.special]


def routh_csv(array: RouthArray, values: Sequence[Sequence[str]] | None = None, value_label: str = "") -> str:
    """Header row, then ``s^k, entries...[, values...]``; a last ``note`` column when a row is special."""
    cells, width = _cells(array)
    vals = _padded(values, width, len(cells))
    notes = {s.row: s.note for s in array.special}
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(_header(array, width, vals, value_label) + (["note"] if notes else []))
    for i, (power, row) in enumerate(zip(array.powers, cells)):
        writer.writerow([f"s^{power}", *row, *(vals[i] if vals else []), *([notes.get(i, "")] if notes else [])])
    return out.getvalue()


def _md_cell(text: str) -> str:
    """A code span (entries keep their ``*`` and ``^``); a pipe is escaped for the table."""
    return f"`{text}`".replace("|", "\\|") if text else ""


def routh_markdown(array: RouthArray, values: Sequence[Sequence[str]] | None = None,
                   value_label: str = "") -> str:
    """A pipe table (one row per power) and the special-case notes as a list below it."""
    cells, width = _cells(array)
    vals = _padded(values, width, len(cells))
    head = _header(array, width, vals, value_label)
    lines = ["| " + " | ".join(head) + " |", "|" + "|".join([":--"] + [":-:"] * (len(head) - 1)) + "|"]
    for i, (power, row) in enumerate(zip(array.powers, cells)):
        body = [f"s^{power}", *(_md_cell(c) for c in row), *(_md_cell(v) for v in (vals[i] if vals else []))]
        lines.append("| " + " | ".join(body) + " |")
    notes = _notes(array)
    if notes:
        lines.append("")
        lines += [f"- {n}" for n in notes]
    return "\n".join(lines) + "\n"


def _latex_name(name: str) -> str:
    if name in ("eps", "eps_"):
        return r"\varepsilon"
    if len(name) == 1:
        return name
    return r"\mathit{" + name.replace("_", r"\_") + "}"


def _latex_tokens(tokens: list[str]) -> str:
    out = []
    for i, tok in enumerate(tokens):
        if re.fullmatch(r"\d+/\d+", tok):
            a, b = tok.split("/")
            out.append(rf"\tfrac{{{a}}}{{{b}}}")
        elif re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", tok):
            out.append(_latex_name(tok))
        elif tok == "*":
            out.append(r"\,")
        elif tok == "^" and i + 1 < len(tokens):
            out.append("^")
        elif tok in "+-" and out and out[-1] not in ("(", "^"):
            out.append(f" {tok} ")
        elif re.fullmatch(r"\d+", tok) and out and out[-1] == "^":
            out.append(f"{{{tok}}}")
        elif tok in "&%$#{}~\\":
            out.append("\\" + tok if tok in "&%$#{}" else r"\textbackslash{}")
        else:
            out.append(tok)
    return "".join(out).strip()


def _split_top(tokens: list[str]) -> tuple[list[str], list[str]] | None:
    """Split ``num/den`` at a top-level slash (a ratio of two parts, not a coefficient like 1/3)."""
    depth = 0
    for i, tok in enumerate(tokens):
        depth += (tok == "(") - (tok == ")")
        if tok == "/" and depth == 0:
            return tokens[:i], tokens[i + 1:]
    return None


def _unwrap(tokens: list[str]) -> list[str]:
    if len(tokens) >= 2 and tokens[0] == "(" and tokens[-1] == ")":
        depth = 0
        for i, tok in enumerate(tokens):
            depth += (tok == "(") - (tok == ")")
            if depth == 0 and i < len(tokens) - 1:
                return tokens
        return tokens[1:-1]
    return tokens


def latex_entry(text: str) -> str:
    """One entry (core's parseable text) as LaTeX math: ratios as ``\\frac``, products as thin spaces."""
    text = text.replace(MINUS, "-").strip()
    if not text:
        return ""
    tokens = _TOKEN.findall(text)
    parts = _split_top(tokens)
    if parts is not None:
        num, den = (_latex_tokens(_unwrap(p)) for p in parts)
        return rf"\frac{{{num}}}{{{den}}}"
    return _latex_tokens(tokens)


def routh_latex(array: RouthArray, values: Sequence[Sequence[str]] | None = None, value_label: str = "") -> str:
    """An ``array`` environment (for math mode), one ``s^{k} & ... \\\\`` row per power; notes as comments."""
    cells, width = _cells(array)
    vals = _padded(values, width, len(cells))
    spec = "r|" + "c" * width + ("|" + "c" * width if vals else "")
    lines = [f"% Routh array{f' (entries in {array.parameter})' if array.parameter else ''}"
             + (f"; right: values {value_label}" if vals and value_label else ""),
             rf"\begin{{array}}{{{spec}}}"]
    for i, (power, row) in enumerate(zip(array.powers, cells)):
        body = [f"s^{{{power}}}", *(latex_entry(c) for c in row), *(latex_entry(v) for v in (vals[i] if vals else []))]
        lines.append(" & ".join(body) + r" \\")
    lines.append(r"\end{array}")
    lines += [f"% {n}" for n in _notes(array)]
    return "\n".join(lines) + "\n"


FORMATS = {"csv": routh_csv, "markdown": routh_markdown, "latex": routh_latex}
