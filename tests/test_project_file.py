"""Project files: round trips, every malformed case, atomic saving, conflicts, recovery.

References: the JSON grammar of RFC 8259 (NaN/Infinity are not JSON numbers; from memory), the
POSIX rename guarantee that a reader sees the old or the new file (from memory), and Python's
json module as the independent reader of what we write.
"""
from __future__ import annotations

import copy
import errno
import json
import os
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from core.errors import LoopwrightError, ProjectFileError
from core.io import project_file as pf
from core.io.project_file import (
    CURRENT_VERSION,
    MIGRATIONS,
    dumps_project,
    file_fingerprint,
    load_project,
    loads_project,
    migrate_1_to_2,
    project_from_dict,
    project_to_dict,
    save_project,
)
from core.model.diagram import Diagram, Parameter

EXAMPLES = sorted((Path(__file__).resolve().parent.parent / "resources" / "examples").glob("*.loop.json"))

# The issue's exact version-1 JSON.
ISSUE_JSON = """
{"format": "loopwright-project", "version": 1, "name": "belt drive speed loop",
 "parameters": [{"name": "K", "nominal": 2.0, "min": 0.0, "max": 20.0}],
 "sweep": "K",
 "nodes": [{"id": "r", "kind": "input", "x": 0, "y": 0},
           {"id": "e", "kind": "sum", "signs": "+-", "x": 80, "y": 0},
           {"id": "C", "kind": "block", "role": "controller", "num": "K", "den": "1", "x": 160, "y": 0},
           {"id": "P", "kind": "block", "role": "plant", "num": "1", "den": "s*(s+1)*(s+2)", "x": 280, "y": 0},
           {"id": "b", "kind": "branch", "x": 380, "y": 0},
           {"id": "y", "kind": "output", "x": 460, "y": 0}],
 "wires": [{"from": "r", "to": "e", "port": 0}, {"from": "e", "to": "C"}, {"from": "C", "to": "P"},
           {"from": "P", "to": "b"}, {"from": "b", "to": "y"}, {"from": "b", "to": "e", "port": 1}],
 "analysis": {"input": "r", "output": "y", "decay": 0.0}}
"""


def issue_dict() -> dict:
    return json.loads(ISSUE_JSON)


def expect(code: str, data, *where_parts: str) -> ProjectFileError:
    with pytest.raises(ProjectFileError) as info:
        project_from_dict(data, "t.loop.json")
    assert info.value.code == code, str(info.value)
    for part in where_parts:
        assert part in (info.value.where or ""), str(info.value)
    return info.value


# -- reading -----------------------------------------------------------------------------------
def test_issue_json_loads_as_written():
    d = loads_project(ISSUE_JSON, "issue.loop.json")
    assert list(d.nodes) == ["r", "e", "C", "P", "b", "y"]
    assert [w.key for w in d.wires] == ["r->e:0", "e->C:0", "C->P:0", "P->b:0", "b->y:0", "b->e:1"]
    assert d.parameters["K"] == Parameter("K", 2.0, 0.0, 20.0)
    assert (d.tuning_parameter, d.analysis.input, d.analysis.output) == ("K", "r", "y")
    assert (d.analysis.decay_mode, d.analysis.decay_value) == ("sigma", 0.0)
    assert d.node("P").den == "s*(s+1)*(s+2)" and d.node("e").signs == "+-"


def test_version_1_decay_migrates_to_mode_and_value():
    data = issue_dict()
    data["analysis"]["decay"] = 0.7
    d = project_from_dict(data)
    assert (d.analysis.decay_mode, d.analysis.decay_value) == ("sigma", 0.7)
    out = project_to_dict(d)
    assert out["version"] == CURRENT_VERSION and "decay" not in out["analysis"]
    assert out["analysis"]["decay_value"] == 0.7


def test_version_1_with_explicit_mode_keeps_it():
    data = issue_dict()
    data["analysis"].update(decay_mode="half_time", decay_value=3.0)
    d = project_from_dict(data)
    assert (d.analysis.decay_mode, d.analysis.decay_value) == ("half_time", 3.0)


def test_migration_table_is_chained_to_current_version():
    version, data = 1, {"version": 1, "analysis": {"decay": 1}}
    while version < CURRENT_VERSION:
        data = MIGRATIONS[version](data, "t.loop.json")
        assert data["version"] == version + 1
        version = data["version"]


def test_missing_parameter_is_left_missing():
    # Documented choice: a block parameter absent from "parameters" is not invented.
    data = issue_dict()
    data["parameters"], data["sweep"] = [], None
    d = project_from_dict(data)
    assert d.parameters == {} and d.parameter_names_in_blocks() == {"K"}


def test_optional_fields_survive():
    data = issue_dict()
    data["nodes"][3].update(label="belt", flipped=True)
    data["wires"][5]["bends"] = [[380, 120], [80, 120]]
    data.update(notes="hello", view={"zoom": 1.5, "splitter": [300, 600], "dark": False})
    d = project_from_dict(data)
    assert (d.node("P").label, d.node("P").flipped) == ("belt", True)
    assert d.wires[5].bends == [(380.0, 120.0), (80.0, 120.0)]
    assert d.notes == "hello" and d.view == {"zoom": 1.5, "splitter": [300, 600], "dark": False}


def test_view_that_is_not_plain_is_dropped():
    data = issue_dict()
    data["view"] = {"a": {"b": {"c": {"d": {"e": 1}}}}}
    assert project_from_dict(data).view == {}


# -- round trips ---------------------------------------------------------------------------------
@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.name)
def test_every_example_round_trips(path, tmp_path):
    first = load_project(path)
    save_project(first, tmp_path / path.name)
    second = load_project(tmp_path / path.name)
    assert project_to_dict(second) == project_to_dict(first)
    # Python's json module reads what we wrote, and the file is already in the current version.
    assert json.loads((tmp_path / path.name).read_text("utf-8"))["version"] == CURRENT_VERSION
    assert path.read_text("utf-8") == dumps_project(first), "shipped examples are in canonical form"


def test_examples_cover_the_brief():
    names = {p.name for p in EXAMPLES}
    assert {"conveyor_speed.loop.json", "gimbal_rate_loop.loop.json", "kiln_slow_sensor.loop.json",
            "levitation_rig.loop.json", "line_tension_30.loop.json"} <= names
    assert len(names) >= 7
    for p in EXAMPLES:
        assert load_project(p).notes, p.name


def test_round_trip_keeps_odd_numbers_exactly():
    d = loads_project(ISSUE_JSON, "x")
    d.move_node("C", 160.125, -3e-7)
    d.set_parameter(Parameter("K", 0.1, -1e-3, 1e12))
    again = loads_project(dumps_project(d), "x")
    assert (again.node("C").x, again.node("C").y) == (160.125, -3e-7)
    assert again.parameters["K"] == Parameter("K", 0.1, -1e-3, 1e12)


# -- malformed files -------------------------------------------------------------------------------
def test_not_json():
    with pytest.raises(ProjectFileError) as info:
        loads_project('{"format": "loopwright-project", "version": 1,', "t")
    assert info.value.code == "E201" and "line 1" in info.value.message


@pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity", "1e999"])
def test_non_finite_numbers_rejected(literal):
    # RFC 8259: NaN and Infinity are not JSON numbers; 1e999 overflows to inf in Python's float.
    text = ISSUE_JSON.replace('"nominal": 2.0', f'"nominal": {literal}')
    with pytest.raises(ProjectFileError) as info:
        loads_project(text, "t")
    assert info.value.code == "E201"


def test_nan_given_as_python_value_is_a_wrong_value():
    data = issue_dict()
    data["nodes"][1]["x"] = float("nan")
    expect("E205", data, "node e")


def test_duplicate_key_rejected():
    with pytest.raises(ProjectFileError) as info:
        loads_project('{"format": "loopwright-project", "format": "x", "version": 1, "nodes": []}', "t")
    assert info.value.code == "E201" and "twice" in info.value.message


def test_not_utf8():
    raw = ISSUE_JSON.replace("belt drive", "belt dr\u00efve").encode("latin-1")
    with pytest.raises(ProjectFileError) as info:
        loads_project(raw, "t")
    assert info.value.code == "E201" and "UTF-8" in info.value.message


def test_utf8_with_byte_order_mark_is_read():
    d = loads_project(b"\xef\xbb\xbf" + ISSUE_JSON.encode("utf-8"), "t")
    assert d.name == "belt drive speed loop"


def test_too_deep():
    with pytest.raises(ProjectFileError) as info:
        loads_project("[" * 100000 + "]" * 100000, "t")
    assert info.value.code == "E201"


def test_huge_file(tmp_path):
    path = tmp_path / "big.loop.json"
    path.write_bytes(b" " * (pf.MAX_FILE_BYTES + 1))
    with pytest.raises(ProjectFileError) as info:
        load_project(path)
    assert info.value.code == "E208" and str(path) in info.value.where


def test_directory_and_missing_paths(tmp_path):
    for path in (tmp_path, tmp_path / "nothing.loop.json"):
        with pytest.raises(ProjectFileError) as info:
            load_project(path)
        assert info.value.code == "E208" and info.value.where == str(path)


def test_unreadable_file(tmp_path, monkeypatch):
    path = tmp_path / "x.loop.json"
    path.write_text(ISSUE_JSON)
    real_open = open

    def refusing_open(file, mode="r", *a, **k):
        if Path(file) == path:
            raise PermissionError(errno.EACCES, "Permission denied", str(file))
        return real_open(file, mode, *a, **k)

    monkeypatch.setattr("builtins.open", refusing_open)
    with pytest.raises(ProjectFileError) as info:
        load_project(path)
    assert info.value.code == "E208" and "permission" in info.value.message


@pytest.mark.parametrize("data", [[], "text", 3, None])
def test_top_level_not_an_object(data):
    expect("E202", data)


def test_wrong_format_string():
    data = issue_dict()
    data["format"] = "some-other-tool"
    expect("E202", data)


def test_newer_version():
    data = issue_dict()
    data["version"] = CURRENT_VERSION + 5
    err = expect("E203", data)
    assert err.message == (f"made by a newer Loopwright (version {CURRENT_VERSION + 5}); "
                           f"this one reads up to {CURRENT_VERSION}")


@pytest.mark.parametrize("version", ["1", 1.0, True, 0, -1])
def test_bad_version(version):
    data = issue_dict()
    data["version"] = version
    expect("E205", data)


def test_missing_version_and_nodes():
    data = issue_dict()
    del data["version"]
    expect("E204", data)
    data = issue_dict()
    del data["nodes"]
    expect("E204", data)


def test_missing_id():
    data = issue_dict()
    del data["nodes"][3]["id"]
    expect("E204", data, "node 4")


def test_missing_kind():
    data = issue_dict()
    del data["nodes"][3]["kind"]
    expect("E204", data, "node P")


def test_duplicate_id():
    data = issue_dict()
    data["nodes"][4]["id"] = "P"
    expect("E207", data, "node P")


def test_duplicate_parameter():
    data = issue_dict()
    data["parameters"].append(dict(data["parameters"][0]))
    expect("E207", data, "parameter K")


def test_wire_to_unknown_node():
    data = issue_dict()
    data["wires"][2]["to"] = "Q"
    err = expect("E206", data, "wire C->Q")
    assert "'Q'" in err.message


def test_analysis_names_unknown_node():
    data = issue_dict()
    data["analysis"]["output"] = "z"
    expect("E206", data, "analysis")


def test_bad_kind():
    data = issue_dict()
    data["nodes"][4]["kind"] = "junction"
    expect("E205", data, "node b")


@pytest.mark.parametrize("signs", ["+", "+-+-+", "+x", ""])
def test_bad_signs(signs):
    data = issue_dict()
    data["nodes"][1]["signs"] = signs
    expect("E205", data, "node e")


@pytest.mark.parametrize("port, code", [(2, "E205"), (-1, "E205"), (True, "E205"), ("1", "E205"), (1.0, "E205")])
def test_bad_port(port, code):
    data = issue_dict()
    data["wires"][5]["port"] = port
    expect(code, data, "wire b->e")


def test_port_already_wired():
    data = issue_dict()
    data["wires"][5]["port"] = 0
    expect("E205", data, "wire b->e:0")


@pytest.mark.parametrize("node_index, field, value", [
    (1, "x", "80"), (1, "y", True), (1, "y", None), (2, "num", 2), (2, "den", ["1"]), (2, "role", "boss"),
    (3, "flipped", "yes"), (3, "label", 5), (4, "signs", "+-"), (0, "colour", "red"),
])
def test_wrong_types_name_the_node(node_index, field, value):
    data = issue_dict()
    data["nodes"][node_index][field] = value
    node_id = data["nodes"][node_index]["id"]
    expect("E205", data, f"node {node_id}")


@pytest.mark.parametrize("mutate", [
    lambda d: d.__setitem__("name", 5),
    lambda d: d.__setitem__("nodes", {}),
    lambda d: d.__setitem__("wires", "r->e"),
    lambda d: d["parameters"][0].__setitem__("nominal", "2"),
    lambda d: d["parameters"][0].__setitem__("min", 30.0),
    lambda d: d["parameters"][0].__setitem__("name", "s"),
    lambda d: d.__setitem__("sweep", "L"),
    lambda d: d.__setitem__("sweep", 3),
    lambda d: d["analysis"].__setitem__("decay", -1),
    lambda d: d["analysis"].__setitem__("decay_mode", "fast"),
    lambda d: d["analysis"].__setitem__("input", 1),
    lambda d: d.__setitem__("analysis", []),
    lambda d: d["wires"][0].__setitem__("bends", [[1, 2, 3]]),
    lambda d: d["wires"][0].__setitem__("bends", [["1", 2]]),
    lambda d: d.__setitem__("extra", 1),
])
def test_other_wrong_fields(mutate):
    data = issue_dict()
    mutate(data)
    expect("E205", data, "t.loop.json")


def test_bad_polynomial_keeps_parser_code_and_names_place():
    # Documented choice: the parser's E1xx code is kept, the place names file, node and field.
    data = issue_dict()
    data["nodes"][3]["den"] = "s*(s+1"
    err = expect("E102", data, "t.loop.json", "node P", "denominator", "column")
    assert isinstance(err.__cause__, LoopwrightError)


def test_too_many_nodes():
    data = issue_dict()
    data["nodes"] = [{"id": f"n{i}", "kind": "branch"} for i in range(pf.MAX_NODES + 1)]
    data["wires"] = []
    expect("E205", data)


# -- saving --------------------------------------------------------------------------------------------
def saved_example(tmp_path) -> tuple[Diagram, Path]:
    d = loads_project(ISSUE_JSON, "x")
    path = tmp_path / "belt.loop.json"
    save_project(d, path)
    return d, path


def leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


def test_save_writes_backup_of_previous_file(tmp_path):
    d, path = saved_example(tmp_path)
    before = path.read_bytes()
    d.rename("changed")
    save_project(d, path)
    assert (tmp_path / "belt.loop.json.bak").read_bytes() == before
    assert load_project(path).name == "changed"
    assert leftovers(tmp_path) == []


def test_save_keeps_file_permissions(tmp_path):
    d, path = saved_example(tmp_path)
    os.chmod(path, 0o640)
    save_project(d, path)
    assert path.stat().st_mode & 0o777 == 0o640


def test_crash_between_write_and_rename_leaves_old_file(tmp_path, monkeypatch):
    d, path = saved_example(tmp_path)
    before = path.read_bytes()
    d.rename("never written")
    real_replace = os.replace

    def crash(src, dst):
        if Path(dst) == path:
            raise OSError(errno.EIO, "Input/output error")
        return real_replace(src, dst)

    monkeypatch.setattr(os, "replace", crash)
    with pytest.raises(ProjectFileError) as info:
        save_project(d, path)
    assert info.value.code == "E209" and info.value.where == str(path) and "Save As" in info.value.message
    assert path.read_bytes() == before
    assert leftovers(tmp_path) == []


def test_read_only_folder(tmp_path, monkeypatch):
    # Tests may run as root, where chmod does not stop writing: simulate the refusal instead.
    d, path = saved_example(tmp_path)
    before = path.read_bytes()
    real_open = os.open

    def refusing(file, flags, *a, **k):
        if str(file).endswith(".tmp"):
            raise PermissionError(errno.EACCES, "Permission denied", str(file))
        return real_open(file, flags, *a, **k)

    monkeypatch.setattr(os, "open", refusing)
    with pytest.raises(ProjectFileError) as info:
        save_project(d, path)
    assert info.value.code == "E209" and "permission" in info.value.message
    assert "Save As" in info.value.message
    assert path.read_bytes() == before and leftovers(tmp_path) == []


def test_disk_full(tmp_path, monkeypatch):
    d, path = saved_example(tmp_path)
    before = path.read_bytes()

    def full(fd, data):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(os, "write", full)
    with pytest.raises(ProjectFileError) as info:
        save_project(d, path)
    assert info.value.code == "E209" and "disk is full" in info.value.message
    assert path.read_bytes() == before and leftovers(tmp_path) == []


def test_save_to_folder_or_missing_folder(tmp_path):
    d = Diagram()
    for target in (tmp_path, tmp_path / "no" / "such.loop.json"):
        with pytest.raises(ProjectFileError) as info:
            save_project(d, target)
        assert info.value.code == "E209"


def test_changed_on_disk_is_refused_then_forced(tmp_path):
    d, path = saved_example(tmp_path)
    seen = file_fingerprint(path)
    assert save_project(d, path, expected_fingerprint=seen) == file_fingerprint(path)
    seen = file_fingerprint(path)
    path.write_text(path.read_text().replace("belt drive", "someone else's"))
    with pytest.raises(ProjectFileError) as info:
        save_project(d, path, expected_fingerprint=seen)
    assert info.value.code == "E210" and "someone else's" in path.read_text()
    save_project(d, path, expected_fingerprint=seen, force=True)
    assert load_project(path).name == "belt drive speed loop"


def test_removed_on_disk_is_a_conflict(tmp_path):
    d, path = saved_example(tmp_path)
    seen = file_fingerprint(path)
    path.unlink()
    with pytest.raises(ProjectFileError) as info:
        save_project(d, path, expected_fingerprint=seen)
    assert info.value.code == "E210"


def test_fingerprint_is_content_based(tmp_path):
    _, path = saved_example(tmp_path)
    first = file_fingerprint(path)
    os.utime(path, ns=(first.mtime_ns + 10**9, first.mtime_ns + 10**9))
    second = file_fingerprint(path)
    assert second.mtime_ns != first.mtime_ns and first.same_content(second)
    import hashlib
    assert first.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()  # hashlib as reference


# -- recovery ------------------------------------------------------------------------------------------
def test_recovery_write_find_load_discard(tmp_path, monkeypatch):
    monkeypatch.setenv("LOOPWRIGHT_STATE_DIR", str(tmp_path / "state"))
    owner = pf.new_recovery_owner()
    d = loads_project(ISSUE_JSON, "x")
    project = tmp_path / "belt.loop.json"
    target = pf.write_recovery(d, project, owner)
    untitled = pf.write_recovery(Diagram("scratch"), None, owner)
    assert target == pf.recovery_path(project, owner) and target.parent == tmp_path / "state" / "recovery"
    assert target != untitled
    found = {r.path: r for r in pf.find_recoveries()}
    assert found[target].project_path == project.absolute() and found[target].name == d.name
    assert found[untitled].project_path is None and found[untitled].owner == owner
    assert project_to_dict(pf.load_recovery(target)) == project_to_dict(d)
    (target.parent / "junk.recovery.json").write_text("{not json")
    assert len(pf.find_recoveries()) == 2
    assert pf.discard_recovery(target, owner)
    assert not pf.discard_recovery(target, owner)  # already gone: fine
    assert [r.path for r in pf.find_recoveries()] == [untitled]
    with pytest.raises(ProjectFileError):
        pf.discard_recovery(project)


def test_recovery_directory_defaults(monkeypatch, tmp_path):
    monkeypatch.delenv("LOOPWRIGHT_STATE_DIR", raising=False)
    monkeypatch.setenv("XDG_STATE_HOME", str(tmp_path))
    assert pf.recovery_directory() == tmp_path / "loopwright" / "recovery"


# -- property: no other exception escapes ---------------------------------------------------------------
json_values = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats(allow_nan=True) | st.text(max_size=12),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=8), inner, max_size=4),
    max_leaves=25)

field_names = st.sampled_from(["id", "kind", "x", "y", "label", "flipped", "role", "num", "den", "signs",
                               "numerator", "denominator", "inputs", "polarity", "tuning_parameter",
                               "from", "to", "port", "bends", "name", "nominal", "min", "max", "input",
                               "output", "decay", "decay_mode", "decay_value"])


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(json_values)
def test_random_values_raise_only_project_errors(value):
    try:
        project_from_dict(value)
    except LoopwrightError:
        pass


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.integers(0, 5), st.sampled_from(["nodes", "wires", "parameters", "analysis", "top"]),
       field_names, json_values)
def test_random_field_edits_raise_only_project_errors(index, section, field, value):
    data = copy.deepcopy(issue_dict())
    if section == "top":
        data[field] = value
    elif section == "analysis":
        data["analysis"][field] = value
    else:
        items = data[section]
        items[index % len(items)][field] = value
    try:
        project_from_dict(data)
    except LoopwrightError as exc:
        assert exc.code.startswith(("E1", "E2")), str(exc)


# -- version 3: tuning_parameter, numerator/denominator, one polarity entry per junction input ----
def version_3_dict() -> dict:
    return project_to_dict(project_from_dict(issue_dict()))


def test_version_2_file_reads_as_version_3_with_the_same_model():
    v2 = migrate_1_to_2(issue_dict(), "t.loop.json")
    v3 = version_3_dict()
    assert v3["tuning_parameter"] == "K" and "sweep" not in v3
    assert v3["nodes"][1]["inputs"] == [{"polarity": "add"}, {"polarity": "subtract"}]
    assert v3["nodes"][3]["denominator"] == "s*(s+1)*(s+2)" and "den" not in v3["nodes"][3]
    assert project_to_dict(project_from_dict(v2)) == v3
    assert project_from_dict(v3).node("e").signs == "+-"


@pytest.mark.parametrize("inputs", [[{"polarity": "add"}], [{"polarity": "plus"}, {"polarity": "add"}],
                                    [{"polarity": "add"}, {"polarity": 1}], [{"polarity": "add"}, "subtract"],
                                    [{"polarity": "add", "side": "top"}, {"polarity": "add"}], "+-", []])
def test_bad_junction_inputs_name_the_node(inputs):
    data = version_3_dict()
    data["nodes"][1]["inputs"] = inputs
    expect("E205", data, "node e")


@pytest.mark.parametrize("old, new", [("num", "numerator"), ("den", "denominator"), ("signs", "inputs")])
def test_old_field_name_in_a_version_3_file_says_the_new_one(old, new):
    data = version_3_dict()
    node = data["nodes"][1 if old == "signs" else 3]
    node[old] = node.pop(new) if old != "signs" else "+-"
    node.pop(new, None)
    error = expect("E205", data, "node")
    assert f"'{new}'" in error.message


def test_junction_input_without_polarity_is_a_missing_field():
    data = version_3_dict()
    data["nodes"][1]["inputs"] = [{"polarity": "add"}, {}]
    expect("E204", data, "node e, input 2")


def test_old_tuning_key_in_a_version_3_file_says_the_new_one():
    data = version_3_dict()
    data["sweep"] = data.pop("tuning_parameter")
    assert "'tuning_parameter'" in expect("E205", data).message
