"""The command line: keys of the JSON contract, exit statuses, one-line errors, no code run."""
import contextlib
import io
import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from core.cli import main
from core.present.report_text import SCREEN_LINE

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = sorted((ROOT / "resources" / "examples").glob("*.loop.json"))


def run_cli(*args):
    return subprocess.run([sys.executable, "-m", "core", *args], cwd=ROOT, capture_output=True, text=True, check=False,
                          timeout=120)


def test_unity_feedback_range_and_endpoints_in_json(capsys):
    # K/(s(s+1)(s+2)) in unity feedback: s^3 + 3s^2 + 2s + K, stable for 0 < K < 6, the pair
    # crossing at +-j sqrt(2) when K = 6 (classic textbook Routh example, from memory).
    assert main(["check", "--poly", "s^3 + 3s^2 + 2s + K", "--param", "K", "--at", "K=2", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    for key in ("polynomial", "parameter", "nominal", "routh", "stable_range", "decay", "hidden_modes"):
        assert key in data
    assert data["parameter"] == "K"
    assert data["stable_range"]["intervals"] == [[0.0, 6.0]]
    ends = {e["exact"]: e for e in data["stable_range"]["endpoints"]}
    assert ends["0"]["kind"] == "origin" and ends["0"]["omega"] is None
    assert ends["6"]["kind"] == "crossing"
    assert math.isclose(ends["6"]["omega"], math.sqrt(2), rel_tol=1e-9)
    # numpy reference: at K = 6 a root pair sits on the axis at +-j sqrt(2)
    roots = np.roots([1, 3, 2, 6])
    assert np.min(np.abs(roots.real)) < 1e-9
    nominal = data["nominal"]
    assert (nominal["stable"], nominal["rhp"], nominal["jw"], nominal["lhp"]) == (True, 0, 0, 3)
    ref = sorted(np.roots([1, 3, 2, 2]), key=lambda z: (z.real, z.imag))
    got = sorted((complex(re, im) for re, im in nominal["poles"]), key=lambda z: (z.real, z.imag))
    assert np.allclose(got, ref, atol=1e-9)  # numpy.roots reference
    assert data["routh"]["rows"][0] == ["1", "2"]


def test_fail_unstable_gates_on_the_nominal_verdict():
    args = ["check", "--poly", "s^3 + 3s^2 + 2s + K", "--param", "K"]
    assert main([*args, "--at", "K=10", "--fail-unstable"]) == 1   # K = 10 > 6: unstable
    assert main([*args, "--at", "K=10"]) == 0                      # analysed, whatever the verdict
    assert main([*args, "--at", "K=1", "--fail-unstable"]) == 0


@pytest.mark.parametrize("args, code", [
    (["check", "--poly", "s^2 + (3s"], "E102"),
    (["check", "--poly", "s^2 + 3$s"], "E101"),
    (["check"], "E501"),
    (["check", "--poly", "s+1", "nothing.loop.json"], "E501"),
    (["frobnicate"], "E501"),
    (["check", "--poly", "s^2 + K s + T"], "E404"),
    (["check", "--poly", "s^2 + 1", "--at", "K"], "E501"),
    (["check", "/nonexistent/x.loop.json"], "E208"),
])
def test_bad_input_exits_2_with_one_line(args, code):
    out = run_cli(*args)
    assert out.returncode == 2
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1 and code in lines[0], out.stderr
    assert "Traceback" not in out.stderr


def test_hostile_text_runs_no_code(tmp_path):
    marker = tmp_path / "pwned"
    payload = f"__import__('os').system('touch {marker}')"
    out = run_cli("check", "--poly", payload)
    assert out.returncode == 2 and not marker.exists()


def test_not_json_file_exits_2(tmp_path):
    bad = tmp_path / "bad.loop.json"
    bad.write_text("{not json", encoding="utf-8")
    out = run_cli("check", str(bad))
    assert out.returncode == 2 and "E201" in out.stderr


@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.name)
def test_every_example_checks(path, capsys):
    assert main(["check", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["transfer_function"] is not None
    assert data["polynomial"]


def test_text_report_has_table_range_and_caution(capsys):
    assert main(["check", "--poly", "s^3 + 3s^2 + 2s + K", "--param", "K", "--at", "K=2"]) == 0
    text = capsys.readouterr().out
    assert "s^3 |" in text and "Stable for K in: (0, 6)" in text and "Caution:" in text


def test_settling_time_sets_sigma_by_the_two_percent_rule(capsys):
    # 2 % settling time Ts -> sigma ~ 4 / Ts (rule of thumb, common practice)
    assert main(["check", "--poly", "s^2 + 3s + 2", "--settling", "8", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["decay"]["sigma"] == 0.5 and data["decay"]["nominal_ok"] is True


# -- values as typed, options that look like options, strict JSON ----------------------------------
def run_in_process(argv):
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(argv)
    return code, out.getvalue(), err.getvalue()


def strict_json(text):
    def refuse(name):
        raise ValueError(f"{name} is not JSON (RFC 8259)")
    return json.loads(text, parse_constant=refuse)


@pytest.mark.parametrize("argv", [["--poly", "-s^2-3s-2"], ["--poly=-s^2-3s-2"], ["--pol", "-s^2-3s-2"]])
def test_a_polynomial_starting_with_minus_is_the_polynomial(argv):
    code, out, err = run_in_process(["check", *argv, "--json"])
    assert code == 0, err
    data = strict_json(out)
    # -(s+1)(s+2): numpy.roots gives -1 and -2, both in the left half plane
    ref = sorted(np.roots([-1, -3, -2]).real)
    got = sorted(re for re, _ in data["nominal"]["poles"])
    assert np.allclose(got, ref) and data["nominal"]["stable"] is True


def test_a_dash_word_after_a_flag_is_still_refused_as_an_option():
    code, _, err = run_in_process(["check", "--json", "-s^2-1"])
    assert code == 2 and "E501" in err


def test_at_values_stay_exact():
    # s^2 + (3K - 1)s + 1 at K = 1/3 is s^2 + 1: roots +-j exactly (by hand), marginal; the
    # nearest double to 1/3 would leave a tiny negative s coefficient and call it unstable
    code, out, _ = run_in_process(["check", "--poly", "s^2 + (3K-1)*s + 1", "--param", "K", "--at", "K=1/3", "--json"])
    nominal = strict_json(out)["nominal"]
    assert code == 0 and (nominal["rhp"], nominal["jw"]) == (0, 2)


@pytest.mark.parametrize("text, code", [("1e400", "E105"), ("1e1000000000", "E105"), ("1e-310", "E105"),
                                        ("1/0", "E110"), ("nan", "E112"), ("inf", "E112"), ("1,000", "E112"),
                                        ("1e300/1e-300", "E105"), ("1/2/3", "E112")])
def test_hostile_at_values_are_refused_before_numbers_are_built(text, code):
    for target in (["--poly", "s^2 + K*s + 1", "--param", "K"], [str(EXAMPLES[0])]):
        status, out, err = run_in_process(["check", *target, "--at", f"K={text}"])
        assert status == 2 and out == "" and err.startswith(f"loopwright-check: {code} at --at K"), err


def test_zero_at_value_with_a_huge_exponent_is_zero():
    # 0e999999999 is 0: read without building 10^999999999; s^2 + K s + 1 at K = 0 is s^2 + 1 (+-j)
    code, out, _ = run_in_process(["check", "--poly", "s^2 + K*s + 1", "--param", "K", "--at", "K=0e999999999",
                                   "--json"])
    assert code == 0 and strict_json(out)["nominal"]["jw"] == 2


@pytest.mark.parametrize("option, text, code", [
    ("--settling", "0", "E501"), ("--time-to-half", "0", "E501"), ("--decay", "0", "E501"),
    ("--settling", "-1", "E501"), ("--decay", "1e100", "E501"), ("--time-to-half", "1e13", "E501"),
    ("--time-to-half", "1e-320", "E105"), ("--settling", "1e-310", "E105"), ("--decay", "nan", "E112"),
    ("--decay", "inf", "E112"), ("--settling", "", "E112"),
])
def test_requirement_values_out_of_range_are_refused(option, text, code):
    status, out, err = run_in_process(["check", "--poly", "s^2 + 3s + 2", option, text])
    assert status == 2 and out == "" and len(err.splitlines()) == 1
    assert err.startswith(f"loopwright-check: {code} at {option}"), err


def test_requirement_values_at_the_limits_are_analysed():
    # s^2 + 3s + 2 has poles -1 and -2 (by hand): a decay rate of 1e-12 is met, 1e12 is not
    for value, met in (("1e-12", True), ("1e12", False)):
        code, out, _ = run_in_process(["check", "--poly", "s^2 + 3s + 2", "--decay", value, "--json"])
        assert code == 0 and strict_json(out)["decay"]["nominal_ok"] is met


def test_json_writes_null_for_numbers_beyond_the_double_range():
    # s^2 + s + 1e300 - K is stable for K < 1e300 (positive coefficients, from memory: Routh for
    # degree 2); at K = 1e-300 the rise factor 1e300 / 1e-300 = 1e600 exceeds the largest double
    # (about 1.8e308, IEEE 754): written as null, never as Infinity
    code, out, _ = run_in_process(["check", "--poly", "s^2 + s + 1e300 - K", "--param", "K", "--at", "K=1e-300",
                                   "--json"])
    data = strict_json(out)
    assert code == 0 and data["margins"]["rise_factor"] is None and data["margins"]["high"] == 1e300


def test_json_writes_null_for_a_pole_beyond_the_double_range(tmp_path):
    # unity feedback around 1e300 * 1e300 / s: s + 1e600, one pole at -1e600 (by hand), beyond the
    # double range (IEEE 754)
    project = {"format": "loopwright-project", "version": 3, "nodes": [
        {"id": "r", "kind": "input"}, {"id": "e", "kind": "sum"},
        {"id": "G1", "kind": "block", "numerator": "1e300", "denominator": "1"},
        {"id": "G2", "kind": "block", "numerator": "1e300", "denominator": "s"},
        {"id": "b", "kind": "branch"}, {"id": "y", "kind": "output"}],
        "wires": [{"from": "r", "to": "e", "port": 0}, {"from": "e", "to": "G1"}, {"from": "G1", "to": "G2"},
                  {"from": "G2", "to": "b"}, {"from": "b", "to": "y"}, {"from": "b", "to": "e", "port": 1}],
        "analysis": {"input": "r", "output": "y"}}
    path = tmp_path / "huge.loop.json"
    path.write_text(json.dumps(project), encoding="utf-8")
    code, out, err = run_in_process(["check", str(path), "--json"])
    data = strict_json(out)
    assert code == 0, err
    assert data["nominal"]["stable"] is True and data["nominal"]["poles"] == [[None, 0.0]]


def test_fail_unstable_fails_when_no_value_is_stable():
    # s^2 + K lacks the s term: never Hurwitz (every coefficient must be positive, from memory);
    # s^3 + 3s^2 + 2s + K is stable for 0 < K < 6 (textbook Routh example, from memory)
    assert main(["check", "--poly", "s^2 + K", "--param", "K", "--fail-unstable"]) == 1
    assert main(["check", "--poly", "s^2 + K", "--param", "K"]) == 0
    assert main(["check", "--poly", "s^3 + 3s^2 + 2s + K", "--param", "K", "--fail-unstable"]) == 0


def test_a_project_without_wires_is_a_clear_error(tmp_path):
    data = json.loads(EXAMPLES[0].read_text(encoding="utf-8"))
    data["wires"] = []
    path = tmp_path / "nowires.loop.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    code, out, err = run_in_process(["check", str(path)])
    assert code == 2 and out == "" and len(err.splitlines()) == 1 and err.startswith("loopwright-check: E406")


def test_text_abbreviates_long_entries_and_json_keeps_them(capsys):
    poly = "s^4 + 1234567890123456789*s^3 + K*s^2 + 987654321987654321*s + 11111111111111111111*K"
    args = ["check", "--poly", poly, "--param", "K"]
    assert main([*args, "--json"]) == 0
    entries = [e for row in strict_json(capsys.readouterr().out)["routh"]["rows"] for e in row]
    long = [e for e in entries if len(e) > SCREEN_LINE]
    assert long, "the case must have an entry longer than a screen line"
    assert main(args) == 0
    text = capsys.readouterr().out
    table = [line for line in text.splitlines() if " | " in line]
    cells = [c for line in table for c in line.split(" | ", 1)[1].split("  ") if c.strip()]
    assert all(len(c.strip()) <= SCREEN_LINE for c in cells)
    for entry in long:
        assert any(c.strip().startswith(entry[:10]) and f"({len(entry)} chars)" in c for c in cells)


def test_the_check_command_word_may_be_left_out(capsys):
    from core.cli import main
    project = str(ROOT / "resources" / "examples" / "conveyor_speed.loop.json")
    assert main([project, "--json"]) == 0
    short = capsys.readouterr().out
    assert main(["check", project, "--json"]) == 0
    assert capsys.readouterr().out == short
