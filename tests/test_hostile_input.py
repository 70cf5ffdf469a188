"""Hostile project files end to end: loader, analysis and command line never run code, never hang,
and fail only with our own errors (one line, a catalogue code, exit status 2).

References: the JSON grammar of RFC 8259 (what json.loads must refuse or accept), Python's
``pickle`` (a real pickled payload), and the catalogue in core/errors.py for the expected codes.
"""
from __future__ import annotations

import copy
import json
import os
import pickle
import subprocess
import sys
import time
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from core.analysis.report import Report, check_project
from core.cli import main as cli_main
from core.errors import CATALOGUE, LoopwrightError
from core.io.project_file import (
    CURRENT_VERSION,
    MAX_FILE_BYTES,
    dumps_project,
    load_project,
    loads_project,
    save_project,
)

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "resources" / "examples" / "conveyor_speed.loop.json"
BASE = json.loads(EXAMPLE.read_text(encoding="utf-8"))


def payloads(marker: Path) -> list[str]:
    """Text that would create ``marker`` (or worse) if anything evaluated it."""
    m = str(marker)
    return [f"__import__('os').system('touch {m}')", f"open('{m}', 'w')", f"exec(\"open('{m}','w')\")",
            f"eval(\"open('{m}','w')\")", "lambda: 0", "().__class__.__bases__[0].__subclasses__()",
            "${jndi:ldap://x}", "{{7*7}}", "<script>alert(1)</script>", "'; DROP TABLE loops; --",
            "!!python/object/apply:os.system ['touch x']", "%s%s%s%n", "../../../../etc/passwd",
            "\x00", "\u202es+1", "P\n\x1b]0;title\x07", "\ud800", "s" * 2000, "(" * 5000, "9^9^9^9"]


def field_paths() -> list[tuple]:
    """Every string-valued field of the example, plus the optional view, as key paths."""
    paths = []

    def walk(value, path):
        if isinstance(value, str):
            paths.append(path)
        elif isinstance(value, dict):
            for k, v in value.items():
                walk(v, (*path, k))
        elif isinstance(value, list):
            for i, v in enumerate(value):
                walk(v, (*path, i))
    walk(BASE, ())
    return [*paths, ("view",), ("view", "zoom")]


def with_value(data, path, value):
    out = copy.deepcopy(data)
    target = out
    for key in path[:-1]:
        if isinstance(target, dict) and key not in target:
            target[key] = {}
        target = target[key]
    target[path[-1]] = value
    return out


def assert_ours(err: BaseException) -> None:
    assert isinstance(err, LoopwrightError), f"{type(err).__name__}: {err}"
    assert err.code in CATALOGUE
    assert "\n" not in str(err) and "\x1b" not in str(err) and "\u202e" not in str(err)


def load_and_check(text) -> Report | None:
    """Load, then analyse when it loads; only our errors may come out (re-raised for the caller)."""
    try:
        diagram = loads_project(text, "hostile.loop.json")
    except LoopwrightError as err:
        assert_ours(err)
        return None
    try:
        return check_project(diagram)
    except LoopwrightError as err:
        assert_ours(err)
        return None


@pytest.mark.parametrize("path", field_paths(), ids=lambda p: ".".join(map(str, p)))
def test_payloads_in_every_string_field(path, tmp_path):
    marker = tmp_path / "MARKER"
    for text in payloads(marker):
        start = time.perf_counter()
        try:
            report = load_and_check(json.dumps(with_value(BASE, path, text)))
        except Exception as err:
            pytest.fail(f"{path} = {text[:40]!r}: {type(err).__name__}: {err}")
        assert time.perf_counter() - start < 5.0
        if report is not None:
            assert isinstance(report, Report)
        assert not marker.exists()


def test_a_loaded_payload_round_trips_as_plain_text(tmp_path):
    # a label and notes may hold any printable text: kept verbatim as data, never interpreted
    text = "__import__('os').system('x') {{7*7}} ${HOME}"
    data = with_value(with_value(BASE, ("nodes", 0, "label"), text), ("notes",), text)
    diagram = loads_project(json.dumps(data))
    assert diagram.node("r").label == text and diagram.notes == text
    save_project(diagram, tmp_path / "p.loop.json")
    assert load_project(tmp_path / "p.loop.json").node("r").label == text


HOSTILE_FILES = {
    # name: (bytes, expected code)
    "pickle": (pickle.dumps({"format": "loopwright-project", "nodes": []}), "E201"),
    "yaml_tag": (b"!!python/object/apply:os.system ['touch MARKER']\n", "E201"),
    "deep_lists": (b"[" * 100_000, "E201"),
    "deep_objects": (b'{"a":' * 100_000, "E201"),
    "deep_in_nodes": (json.dumps(with_value(BASE, ("view",), None)).replace(
        '"view": null', '"view": ' + "[" * 50_000 + "]" * 50_000).encode(), "E201"),
    "escaped_quotes": (b'"' + b'\\"' * 2_000_000, "E201"),  # took minutes before the linear depth check
    "huge_float": (json.dumps(BASE).replace('"x": 260', '"x": 1e400').encode(), "E201"),
    "huge_int": (json.dumps(BASE).replace('"x": 260', '"x": 1' + "0" * 400).encode(), "E205"),
    "too_many_digits": (json.dumps(BASE).replace('"x": 260', '"x": ' + "9" * 5000).encode(), "E201"),
    "nan": (json.dumps(BASE).replace('"nominal": 2', '"nominal": NaN').encode(), "E201"),
    "infinity": (json.dumps(BASE).replace('"max": 20', '"max": Infinity').encode(), "E201"),
    "number_as_text": (json.dumps(with_value(BASE, ("parameters", 0, "nominal"), "2")).encode(), "E205"),
    "version_as_text": (json.dumps(with_value(BASE, ("version",), "2")).encode(), "E205"),
    "newer_version": (json.dumps(with_value(BASE, ("version",), CURRENT_VERSION + 1)).encode(), "E203"),
    "duplicate_key": (b'{"format": "loopwright-project", "version": 2, "version": 1, "nodes": []}', "E201"),
    "lone_surrogate": (json.dumps(with_value(BASE, ("nodes", 0, "label"), "\ud800")).encode(), "E205"),
    "latin1": ("{\"name\": \"caf\u00e9\"}".encode("latin-1"), "E201"),
    "utf16": (json.dumps(BASE).encode("utf-16"), "E201"),
    "bom_twice": (b"\xef\xbb\xbf\xef\xbb\xbf" + json.dumps(BASE).encode(), "E201"),
    "empty": (b"", "E201"),
    "not_an_object": (b"[1, 2, 3]", "E202"),
    "other_format": (b'{"format": "something-else", "version": 2}', "E202"),
    "newline_in_id": (json.dumps(with_value(BASE, ("nodes", 0, "id"), "r\n")).encode(), "E205"),
    "control_in_id": (json.dumps(with_value(BASE, ("nodes", 0, "id"), "r\x1b[2J")).encode(), "E205"),
    "too_big": (b" " * (MAX_FILE_BYTES + 1), "E208"),
    "code_in_den": (json.dumps(with_value(BASE, ("nodes", 4, "denominator"), "__import__('os')")).encode(), "E1"),
}


@pytest.mark.parametrize("name", sorted(HOSTILE_FILES))
def test_hostile_file_raises_our_error_fast(name, tmp_path):
    raw, code = HOSTILE_FILES[name]
    path = tmp_path / f"{name}.loop.json"
    path.write_bytes(raw)
    start = time.perf_counter()
    with pytest.raises(LoopwrightError) as info:
        load_project(path)
    assert time.perf_counter() - start < 3.0
    assert_ours(info.value)
    assert info.value.code.startswith(code), str(info.value)
    assert str(path) in info.value.where


@pytest.mark.parametrize("name", sorted(HOSTILE_FILES))
def test_command_line_on_hostile_file(name, tmp_path, capsys, monkeypatch):
    raw, code = HOSTILE_FILES[name]
    path = tmp_path / f"{name}.loop.json"
    path.write_bytes(raw)
    monkeypatch.chdir(tmp_path)
    assert cli_main(["check", str(path)]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert len(err.splitlines()) == 1 and err.startswith("loopwright-check: " + code), err
    assert "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == [path.name]  # nothing created


def test_bom_is_accepted_and_means_nothing(tmp_path):
    path = tmp_path / "bom.loop.json"
    path.write_bytes(b"\xef\xbb\xbf" + EXAMPLE.read_bytes())
    assert dumps_project(load_project(path)) == dumps_project(load_project(EXAMPLE))


@pytest.mark.parametrize("name", ["deep_lists", "code_in_den", "lone_surrogate"])
def test_command_line_process_exit_status(name, tmp_path):
    marker = tmp_path / "MARKER"
    raw = HOSTILE_FILES[name][0].replace(b"touch MARKER", f"touch {marker}".encode())
    path = tmp_path / "hostile.loop.json"
    path.write_bytes(raw)
    done = subprocess.run([sys.executable, "-m", "core", "check", str(path)], check=False, cwd=ROOT, capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == 2 and done.stdout == ""
    assert len(done.stderr.splitlines()) == 1 and "Traceback" not in done.stderr, done.stderr
    assert not marker.exists()


@pytest.mark.parametrize("name", ["deep_objects", "newline_in_id"])
def test_screenshot_on_hostile_file(name, tmp_path):
    path = tmp_path / "hostile.loop.json"
    path.write_bytes(HOSTILE_FILES[name][0])
    out = tmp_path / "shot.png"
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", LOOPWRIGHT_STATE_DIR=str(tmp_path / "state"),
               XDG_CONFIG_HOME=str(tmp_path / "config"))
    done = subprocess.run([sys.executable, "-m", "app", "--screenshot", str(out), str(path)], check=False, cwd=ROOT, env=env,
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and HOSTILE_FILES[name][1] in lines[0] and "Traceback" not in done.stderr
    assert not out.exists()


# -- random documents shaped like projects ---------------------------------------------------------
def all_paths(value, path=()):
    yield path
    if isinstance(value, dict):
        for k, v in value.items():
            yield from all_paths(v, (*path, k))
    elif isinstance(value, list):
        for i, v in enumerate(value):
            yield from all_paths(v, (*path, i))


IDS = [n["id"] for n in BASE["nodes"]]
json_leaves = (st.none() | st.booleans() | st.integers(-10**30, 10**30)
               | st.floats(allow_nan=False, allow_infinity=False) | st.text(max_size=12)
               | st.sampled_from([*IDS, "K", "s", "s^2 + K s + 1", "1/0", "(s+1)^60", "+-+-", "block", "sum", "input", "output", "branch", "plant", "sigma", "settling", ""]))
json_values = st.recursive(json_leaves, lambda inner: st.lists(inner, max_size=3)
                           | st.dictionaries(st.sampled_from(["id", "kind", "x", "from", "to", "port", "name",
                                                              "num", "den", "numerator", "denominator", "inputs", "zz"]), inner, max_size=3),
                           max_leaves=6)


def retype(value):
    """The same content in another JSON type."""
    if isinstance(value, str):
        return [value]
    if isinstance(value, bool):
        return int(value)
    if isinstance(value, (int, float)):
        return str(value)
    if isinstance(value, list):
        return {str(i): v for i, v in enumerate(value)}
    if isinstance(value, dict):
        return list(value.values())
    return 0


@st.composite
def mutated_projects(draw):
    data = copy.deepcopy(draw(st.sampled_from([BASE] + [json.loads(p.read_text(encoding="utf-8")) for p in
                                                        sorted(EXAMPLE.parent.glob("*.loop.json"))[1:5]])))
    for _ in range(draw(st.integers(1, 4))):
        paths = [p for p in all_paths(data) if p]
        if not paths:
            break
        path = draw(st.sampled_from(paths))
        parent = data
        for key in path[:-1]:
            parent = parent[key]
        key = path[-1]
        op = draw(st.sampled_from(["delete", "replace", "retype", "duplicate"]))
        if op == "delete":
            del parent[key]
        elif op == "replace":
            parent[key] = draw(json_values)
        elif op == "retype":
            parent[key] = retype(parent[key])
        elif isinstance(parent, list):
            parent.append(copy.deepcopy(parent[key]))
    return data


@settings(max_examples=200, deadline=3000, suppress_health_check=[HealthCheck.too_slow])
@given(mutated_projects())
def test_mutated_projects_load_or_refuse_with_our_errors(data):
    try:
        text = json.dumps(data, ensure_ascii=False)
    except (ValueError, UnicodeEncodeError):
        return
    load_and_check(text.encode("utf-8", "surrogatepass"))
