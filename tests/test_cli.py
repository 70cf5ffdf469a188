"""The command line: keys of the JSON contract, exit statuses, one-line errors, no code run."""
import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from core.cli import main

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
