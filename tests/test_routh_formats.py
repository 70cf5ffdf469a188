"""Routh array as CSV, Markdown and LaTeX: each format read back gives the array's own cells.

CSV is read with the csv module, Markdown by splitting the pipe table, LaTeX by undoing its few
constructs and comparing with sympy (the entries are our own output, never user text).
"""
from __future__ import annotations

import csv
import io
import re

import pytest
import sympy as sp
from flint import fmpq, fmpq_poly
from hypothesis import given, settings
from hypothesis import strategies as st

from core.algebra.polynomial import ParametricPolynomial
from core.analysis.routh import routh_array
from core.present.routh_formats import latex_entry, routh_csv, routh_latex, routh_markdown

K = fmpq_poly([0, 1])


def _array(coeffs, parameter=None):
    return routh_array(ParametricPolynomial.from_coefficients(coeffs, parameter))


def _ints(values):
    return [fmpq(v) for v in values]


def _cubic():
    # s^3 + 3s^2 + 2s + K: the unity-feedback example, stable for 0 < K < 6 (from memory; Ogata-style)
    return _array([1, 3, 2, K], "K")


def _zero_first():
    # s^5 + 2s^4 + 2s^3 + 4s^2 + 11s + 10: zero first element in row s^3 (textbook case, from memory)
    return _array(_ints([1, 2, 2, 4, 11, 10]))


def _zero_row():
    # (s^2 + 2)(s + 1)(s + 3), expanded with sympy: roots +-j sqrt 2 make a zero row
    coeffs = sp.Poly(sp.expand((sp.Symbol("s") ** 2 + 2) * (sp.Symbol("s") + 1) * (sp.Symbol("s") + 3))).all_coeffs()
    return _array(_ints([int(c) for c in coeffs]))


def _parametric_ratio():
    # s^4 + (K + 1) s^3 + 2 s^2 + K s + 5: entries are ratios in K
    return _array([1, fmpq_poly([1, 1]), 2, K, 5], "K")


ARRAYS = [_cubic, _zero_first, _zero_row, _parametric_ratio]


def _padded(arr):
    rows = arr.rows_text()
    width = max(len(r) for r in rows)
    return [r + [""] * (width - len(r)) for r in rows], width


@pytest.mark.parametrize("make", ARRAYS)
def test_csv_reads_back_to_the_same_cells(make):
    arr = make()
    rows = list(csv.reader(io.StringIO(routh_csv(arr))))
    cells, width = _padded(arr)
    assert len(rows) == len(arr.powers) + 1
    assert [r[0] for r in rows[1:]] == [f"s^{p}" for p in arr.powers]
    assert [r[1:1 + width] for r in rows[1:]] == cells
    if arr.special:
        assert rows[0][-1] == "note"
        for s in arr.special:
            assert rows[1 + s.row][-1] == s.note


def test_csv_values_block_follows_the_entries():
    arr = _cubic()
    # values at K = 2 computed by hand from the rows: 1 2 | 3 2 | 4/3 | 2
    values = [["1", "2"], ["3", "2"], ["4/3"], ["2"]]
    rows = list(csv.reader(io.StringIO(routh_csv(arr, values, "at K = 2"))))
    assert rows[0][3:] == ["column 1 at K = 2", "column 2 at K = 2"]
    assert [r[3:] for r in rows[1:]] == [["1", "2"], ["3", "2"], ["4/3", ""], ["2", ""]]


def _md_cells(line: str) -> list[str]:
    parts = re.split(r"(?<!\\)\|", line.strip())
    assert parts[0] == "" and parts[-1] == ""
    return [p.strip().replace("\\|", "|") for p in parts[1:-1]]


@pytest.mark.parametrize("make", ARRAYS)
def test_markdown_table_shape_and_cells(make):
    arr = make()
    lines = routh_markdown(arr).splitlines()
    cells, width = _padded(arr)
    table = lines[: 2 + len(arr.powers)]
    widths = {len(_md_cells(line)) for line in table}
    assert widths == {width + 1}
    assert set(table[1]) <= set("|:-")
    for line, power, row in zip(table[2:], arr.powers, cells):
        got = _md_cells(line)
        assert got[0] == f"s^{power}"
        assert [c.strip("`") for c in got[1:]] == row
    assert lines[2 + len(arr.powers):] == ([""] + [f"- s^{arr.powers[s.row]}: {s.note}" for s in arr.special]
                                           if arr.special else [])


def _latex_rows(text: str) -> list[list[str]]:
    body = text.split("\\begin{array}", 1)[1].split("\\end{array}", 1)[0].splitlines()[1:]
    assert all(line.endswith(r" \\") for line in body)
    return [[c.strip() for c in line[:-3].split(" & ")] for line in body]


def _from_latex(text: str) -> sp.Expr:
    """Undo latex_entry's constructs (our own output only) and read it with sympy."""
    t = text.replace(r"\varepsilon", "eps").replace(r"\,", "*")
    t = re.sub(r"\\mathit\{(.*?)\}", lambda m: m.group(1).replace(r"\_", "_"), t)
    t = re.sub(r"\\t?frac\{", "((", t)
    t = t.replace("}{", ")/(").replace("}", "))").replace("^((", "**((")
    t = re.sub(r"\^\{(\d+)\)\)", r"**\1", t)
    return sp.parse_expr(t)


@pytest.mark.parametrize("make", ARRAYS)
def test_latex_has_one_row_per_power_with_the_same_entries(make):
    arr = make()
    rows = _latex_rows(routh_latex(arr))
    cells, width = _padded(arr)
    assert len(rows) == len(arr.powers)
    for row, power, entries in zip(rows, arr.powers, cells):
        assert row[0] == f"s^{{{power}}}" and len(row) == width + 1
        for got, want in zip(row[1:], entries):
            if want:
                # sympy: the LaTeX entry and core's text are the same rational function
                assert sp.simplify(_from_latex(got) - sp.parse_expr(want.replace("^", "**"))) == 0
            else:
                assert got == ""


def test_latex_escapes_names_and_keeps_notes_as_comments():
    arr = _array([1, 3, 2, K], "K_p")
    text = routh_latex(arr)
    assert r"\mathit{K\_p}" in text
    assert not re.search(r"(?<!\\)_", text.split("\\begin{array}")[1])  # every underscore escaped
    zf = routh_latex(_zero_first())
    assert r"\varepsilon" in zf and not re.search(r"\beps\b", zf.split("\\end{array}")[0])
    assert [line for line in zf.splitlines() if line.startswith("% s^")] == \
        [f"% s^{_zero_first().powers[s.row]}: {s.note}" for s in _zero_first().special]
    assert latex_entry("100%") == r"100\%"


@settings(max_examples=25, deadline=None)
@given(st.lists(st.integers(-9, 9), min_size=2, max_size=6).filter(lambda c: c[0] != 0))
def test_random_arrays_read_back(coeffs):
    arr = _array(_ints(coeffs))
    cells, width = _padded(arr)
    assert [r[1:1 + width] for r in list(csv.reader(io.StringIO(routh_csv(arr))))[1:]] == cells
    assert len(_latex_rows(routh_latex(arr))) == len(arr.powers)
