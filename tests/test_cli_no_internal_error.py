"""No command-line input reaches exit 70 (internal error): generated argument lists and project
files with hostile numbers (1e400, 1e-310, 1e1000000000, NaN, inf, huge exponents, empty text,
unicode digits) drive ``core.cli.main`` in-process. Every run ends with 0, 1 or 2, stderr holds at
most one line and never a traceback, and ``--json`` output is strict JSON (RFC 8259 has no NaN or
Infinity: the reader below refuses them).

The longer runs are marked slow (``make test-slow``).
"""
from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from core.cli import main

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = sorted((ROOT / "resources" / "examples").glob("*.loop.json"))

HOSTILE_NUMBERS = ["1e400", "-1e400", "1e-310", "1e-320", "1e1000000000", "1e-1000000000", "0e999999999",
                   "NaN", "nan", "inf", "-inf", "Infinity", "", " ", "0", "-0", "1/3", "1/0", "0/0", "1e300",
                   "-1e300", "1e-300", "1e300/1e-300", "1e-300/1e300", "2,5", "1,000", "1e3e3", "9" * 500,
                   "0." + "0" * 400 + "1", "e5", ".", "-", "+", "--", "١٢", "１２", "²", "\u22122", "1_000",
                   "0x10", "1j", "1e+", "3.5", "-7", "12", "1e12", "1e-12", "100", "0.5", "6dB", "-6db"]
POLYNOMIALS = ["s^3 + 3s^2 + 2s + K", "s^2 + K*s + 1", "s^2 + (K-3)*s + K - 3 - 1e-20", "s + 1e300*1e300",
               "s^2 + 1e300*1e300*s*K + 1", "s + 1e-300*1e-300*K", "-s^2-1", "-s^2-3s-2", "(s+1)^6 + K",
               "s^2 + K", "K", "0", "1", "s", "", "s^", "s² + 3·s + 2", "s^2 \u2212 1", "(1-K)*(s^2+2*s+1)",
               "s^2 + T*s + K", "s^4 + s^3 + K*s^2 + s + 1", "K*s^2 + s + 1", "s^2 + 2*s + 1e300*K"]
NAMES = ["K"] * 8 + ["T", "s", "", "x", "K2", "ä", "K=1"]
ORDINARY_NUMBERS = ["0.5", "2", "4", "1/3", "0.05", "10", "0.7", "2.5e-1", "6dB", "3"]
value = st.one_of(*[st.sampled_from(ORDINARY_NUMBERS)] * 4, st.sampled_from(HOSTILE_NUMBERS),
                  st.floats().map(repr), st.text(max_size=6))


POLYNOMIAL_TEXTS = st.one_of(*[st.sampled_from(POLYNOMIALS)] * 4, st.text(max_size=12))


@st.composite
def options(draw, with_param: bool = True, values=value) -> list[str]:
    """Some of the check options with hostile values, in any order."""
    out: list[str] = []
    if with_param and draw(st.booleans()):
        out += ["--param", "K"]
    if draw(st.integers(0, 2)):
        out += ["--at", f"K={draw(values)}"]
    for _ in range(draw(st.integers(0, 3))):
        kind = draw(st.sampled_from(["--param"] * with_param + ["--at"] * 3 + [
            "--decay", "--time-to-half", "--settling", "--min-damping", "--max-overshoot", "--min-gain-margin",
            "--json", "--fail-unstable", "--fail-requirements", "word"]))
        if kind == "--param":
            out += [kind, draw(st.sampled_from(NAMES))]
        elif kind == "--at":
            out += [kind, f"{draw(st.sampled_from(NAMES))}={draw(values)}"]
        elif kind.startswith("--fail") or kind == "--json":
            out.append(kind)
        elif kind == "word":
            out.append(draw(st.sampled_from(["-", "--", "--poly", "--at", "-x", "--unknown", "check", "x=1"])))
        else:
            out += [kind, draw(values)]
    return out


def run(argv: list[str]) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(argv)
    return code, out.getvalue(), err.getvalue()


def _refuse_constant(name: str):
    raise ValueError(f"{name} is not JSON")


def assert_clean(argv: list[str]) -> None:
    code, out, err = run(argv)
    event(f"exit {code}")
    assert code in (0, 1, 2), (argv, code, err)
    assert "Traceback" not in err and "internal error" not in err, (argv, err)
    assert len(err.splitlines()) <= 1, (argv, err)
    if code == 2:
        assert out == "" and err.startswith("loopwright-check: E"), (argv, err)
    elif "--json" in argv:
        json.loads(out, parse_constant=_refuse_constant)  # strict: NaN, Infinity and -Infinity refused


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(POLYNOMIAL_TEXTS, options())
def test_typed_polynomials_never_reach_an_internal_error(poly, opts):
    assert_clean(["check", "--poly", poly, *opts])


# -- project files with hostile numbers --------------------------------------------------------------
NUMBER_FIELDS = [("parameters", "nominal"), ("parameters", "min"), ("parameters", "max"),
                 ("analysis", "decay_value"), ("requirements", "min_damping"), ("requirements", "max_overshoot"),
                 ("requirements", "min_gain_margin")]
JSON_NUMBERS = ["0.5", "2", "4", "0.3", "1e400", "-1e400", "1e-310", "1e-320", "1e1000000000", "NaN", "Infinity", "-Infinity", "0", "-0",
                "1e300", "-1e300", "1e-300", "1" + "0" * 400, "0.5", "2", "12.87", "1e12", "1e-12", "100", "\"2\"",
                "null", "true", "[]"]
BLOCK_TEXTS = ["1e300", "1e-300", "1e300*1e300", "1e-300*1e-300", "K*1e300", "(s+1)^60", "s^200", "1/0", "K - 2",
               "0", "", "s", "s+1e-320", "1e400", "١", "s\u00b2 + 1", "K*(s+1)", "8"]


@st.composite
def hostile_projects(draw) -> str:
    data = json.loads(draw(st.sampled_from(EXAMPLES)).read_text(encoding="utf-8"))
    marks: dict[str, str] = {}
    for i in range(draw(st.integers(1, 4))):
        section, key = draw(st.sampled_from(NUMBER_FIELDS))
        mark = f"@@{i}@@"
        marks[mark] = draw(st.sampled_from(JSON_NUMBERS))
        if section == "parameters":
            if data.get("parameters"):
                data["parameters"][draw(st.integers(0, len(data["parameters"]) - 1))][key] = mark
        elif section == "analysis" and draw(st.booleans()):
            data["analysis"]["decay_mode"] = draw(st.sampled_from(["sigma", "half_time", "settling"]))
            data["analysis"][key] = mark
        else:
            data.setdefault(section, {})[key] = mark
    blocks = [n for n in data["nodes"] if n["kind"] == "block"]
    for _ in range(draw(st.integers(0, 2))):
        block = draw(st.sampled_from(blocks))
        block[draw(st.sampled_from(["numerator", "denominator"]))] = draw(st.sampled_from(BLOCK_TEXTS))
    text = json.dumps(data)
    for mark, number in marks.items():
        text = text.replace(f'"{mark}"', number)
    return text


def check_project_text(tmp_path_factory, text: str, opts: list[str]) -> None:
    """Write ``text`` as a project file and check it from the command line with ``opts``."""
    path = tmp_path_factory.mktemp("hostile") / "p.loop.json"
    path.write_text(text, encoding="utf-8")
    assert_clean(["check", str(path), *opts])


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(hostile_projects(), options(with_param=False))
def test_hostile_project_files_never_reach_an_internal_error(tmp_path_factory, text, opts):
    check_project_text(tmp_path_factory, text, opts)


# values the readers accept, at the edges of the accepted range: these reach the analysis
EDGE_NUMBERS = ["1e300", "-1e300", "1e-300", "-1e-300", "1e12", "1e-12", "1/3", "-1/3", "0", "2", "0.5", "0.99",
                "1e299/1e-1", "3e-300/7", "1e150", "-1e150", "119.9dB", "1e6", "6dB", "999", "1000"]
edge_value = st.sampled_from(EDGE_NUMBERS)


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.sampled_from(POLYNOMIALS), options(values=edge_value))
def test_accepted_values_at_the_edges_never_reach_an_internal_error(poly, opts):
    assert_clean(["check", "--poly", poly, *opts])


@pytest.mark.slow
@settings(max_examples=3000, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(POLYNOMIAL_TEXTS, options())
def test_typed_polynomials_never_reach_an_internal_error_long(poly, opts):
    assert_clean(["check", "--poly", poly, *opts])


@pytest.mark.slow
@settings(max_examples=1000, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(hostile_projects(), options(with_param=False))
def test_hostile_project_files_never_reach_an_internal_error_long(tmp_path_factory, text, opts):
    check_project_text(tmp_path_factory, text, opts)


@pytest.mark.parametrize("argv", [
    # the cases found by hand (issue 17 items 7 and 8, issue 14 item 7): each must end as a clear refusal
    ["check", "--poly", "s^2 + K*s + 1", "--param", "K", "--at", "K=1e1000000000"],
    ["check", "--poly", "s^2 + K*s + 1", "--param", "K", "--at", "K=1e400"],
    ["check", "--poly", "s^2 + 3s + 2", "--decay", "1e100"],
    ["check", "--poly", "s^2 + 3s + 2", "--settling", "1e-300"],
    ["check", "--poly", "s^2 + 3s + 2", "--settling", "1e-310"],
    ["check", "--poly", "s^2 + 3s + 2", "--time-to-half", "1e-320"],
    ["check", "--poly", "s^2 + 3s + 2", "--settling", "0"],
    ["check", "--poly", "s^2 + 3s + 2", "--time-to-half", "0"],
])
def test_the_reported_inputs_are_refused_with_exit_2(argv):
    code, out, err = run(argv)
    assert code == 2 and out == "" and len(err.splitlines()) == 1 and "Traceback" not in err, err
