"""Never lose a project, and the window survives whatever the disk, the clipboard or the analysis does.

Extends tests/app/test_files.py (which covers broken files, E210 cancel/overwrite, a missing
folder and recovery from a copy written directly) with failures injected *during* a save, the
E210 Save As answer, newer-version files, autosave driven by its own timer and a simulated crash.
Reference for every "intact" check: the bytes on disk before the failure.
"""
from __future__ import annotations

import errno
import json
import os
from pathlib import Path

import pytest
from PySide6.QtCore import QMimeData
from PySide6.QtGui import QGuiApplication

from app.document.commands import EditNodeCommand, push
from app.document.editor import CLIPBOARD_MIME
from core.io.project_file import find_recoveries, load_project, project_to_dict, save_project
from core.model.diagram import Diagram, Node


@pytest.fixture
def saved(tmp_path, make_loop) -> Path:
    path = tmp_path / "work" / "loop.loop.json"
    path.parent.mkdir()
    save_project(make_loop(), path)
    return path


def edit(window, den: str = "s+5") -> None:
    push(window.undo_stack, EditNodeCommand(window.diagram, "P", den=den))


def folder_listing(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


def fail_on(monkeypatch, name: str, error: OSError, when=lambda *args: True) -> None:
    """Make ``os.<name>`` raise ``error`` whenever ``when(*args)`` is true."""
    real = getattr(os, name)

    def failing(*args, **kwargs):
        if when(*args):
            raise error
        return real(*args, **kwargs)
    monkeypatch.setattr(os, name, failing)


@pytest.mark.parametrize("name, error, words", [
    ("replace", OSError(errno.EIO, "Input/output error"), "Input/output error"),   # between write and rename
    ("fsync", OSError(errno.ENOSPC, "No space left on device"), "the disk is full"),  # full disk
    ("open", PermissionError(errno.EACCES, "Permission denied"), "no permission"),  # read-only folder
])
def test_failed_save_keeps_everything(window, dialogs, saved, monkeypatch, tmp_path, name, error, words):
    assert window.files.open(saved)
    edit(window)
    old_bytes = saved.read_bytes()
    before = folder_listing(saved.parent)
    work = project_to_dict(window.diagram)
    failing = {"on": True}  # fsync takes a file descriptor: the disk stays "full" until switched off
    fail_on(monkeypatch, name, error, when=lambda *args: failing["on"] and (
        name == "fsync" or str(saved.parent) in str(args[-1] if name == "replace" else args[0])))
    dialogs.answers["save_failed"] = "cancel"
    assert not window.files.save()
    kind, (err,) = dialogs.asked[-1]
    assert kind == "save_failed" and err.code == "E209" and words in err.message
    assert saved.read_bytes() == old_bytes                      # the old file is intact
    assert folder_listing(saved.parent) == before               # no temp file left behind
    assert window.isWindowModified() and not window.undo_stack.isClean()
    assert project_to_dict(window.diagram) == work              # the work is still open
    elsewhere = tmp_path / "elsewhere.loop.json"
    dialogs.answers["save_path"] = str(elsewhere)
    if name == "fsync":  # a full disk is full everywhere: Save As fails too, then room is made
        dialogs.answers["save_failed"] = ["save_as", "cancel"]
        assert not window.files.save()
        assert not elsewhere.exists() and saved.read_bytes() == old_bytes and window.isWindowModified()
        failing["on"] = False
        assert window.files.save()
        assert project_to_dict(load_project(saved)) == work
        assert load_project(saved.with_name(saved.name + ".bak")).node("P").den == "s*(s+1)*(s+2)"
    else:  # Save As to another folder works and saves exactly the work
        dialogs.answers["save_failed"] = "save_as"
        assert window.files.save()
        assert project_to_dict(load_project(elsewhere)) == work
        assert window.files.path == elsewhere.absolute() and saved.read_bytes() == old_bytes
    assert not window.isWindowModified()


def test_changed_on_disk_then_save_as(window, dialogs, saved, tmp_path):
    window.files.open(saved)
    edit(window)
    other = project_to_dict(load_project(saved))
    other["name"] = "changed elsewhere"
    saved.write_text(json.dumps(other), encoding="utf-8")
    theirs = saved.read_bytes()
    dialogs.answers["changed_on_disk"] = "save_as"
    dialogs.answers["save_path"] = str(tmp_path / "mine.loop.json")
    assert window.files.save()
    assert saved.read_bytes() == theirs                          # the other program's file is kept
    assert load_project(tmp_path / "mine.loop.json").node("P").den == "s+5"
    assert dialogs.names() == ["changed_on_disk", "save_path"]


def test_file_from_a_newer_version_keeps_the_current_project(window, dialogs, saved, tmp_path):
    window.files.open(saved)
    edit(window)
    work = project_to_dict(window.diagram)
    newer = dict(project_to_dict(load_project(saved)), version=99)
    future = tmp_path / "future.loop.json"
    future.write_text(json.dumps(newer), encoding="utf-8")
    dialogs.answers["unsaved"] = "discard"
    assert not window.files.open(future)
    kind, (_title, err) = dialogs.asked[-1]
    assert kind == "error" and err.code == "E203" and "newer" in err.message and "99" in err.message
    assert project_to_dict(window.diagram) == work and window.files.path == saved.absolute()
    assert window.isWindowModified()


def test_autosave_timer_and_crash_recovery_restore_the_exact_project(qtbot, window, dialogs, make_loop):
    window.set_document(make_loop("never saved yet"))
    window.files.autosave_timer.setInterval(50)   # 30 s in real use; the same timer, driven faster
    window.files.autosave_timer.start()
    edit(window, "s^2 + 0.7 s + 3")
    push(window.undo_stack, EditNodeCommand(window.diagram, "C", label="a label with ünïcödé"))
    work = project_to_dict(window.diagram)
    qtbot.waitUntil(lambda: len(find_recoveries()) == 1, timeout=5000)
    (recovery,) = find_recoveries()
    assert recovery.project_path is None and recovery.name == "never saved yet"
    edit(window, "s^2 + 0.7 s + 4")                 # a later edit reaches the copy at the next tick
    later = project_to_dict(window.diagram)
    assert later != work
    qtbot.waitUntil(lambda: project_to_dict(load_project_from(recovery.path)) == later, timeout=5000)
    window.files.autosave_timer.stop()
    # the crash: this window never closes; a new one starts and finds the copy
    from app.window import MainWindow
    dialogs.answers["recover"] = "recover"
    second = MainWindow(dialogs=dialogs)
    qtbot.addWidget(second)
    assert second.files.offer_recoveries()
    assert project_to_dict(second.diagram) == later
    assert second.isWindowModified() and second.files.path is None
    assert second.scene.check_consistency() == []
    dialogs.answers["unsaved"] = "discard"
    second.close()


def load_project_from(path: Path) -> Diagram:
    from core.io.project_file import load_recovery
    return load_recovery(path)


def test_corrupt_recovery_file_is_skipped_not_fatal(qtbot, dialogs, state_dir):
    folder = state_dir / "recovery"
    folder.mkdir(parents=True)
    (folder / "x-123.recovery.json").write_text('{"format": "loopwright-recovery", "version": 1, "saved_at": '
                                                 + "1" + "0" * 400 + ', "project": {}}', encoding="utf-8")
    (folder / "y-456.recovery.json").write_bytes(b"[" * 100_000)
    from app.window import MainWindow
    win = MainWindow(dialogs=dialogs)
    qtbot.addWidget(win)
    assert not win.files.offer_recoveries()
    assert dialogs.names() == []
    win.close()


# -- the window survives ----------------------------------------------------------------------------
CLIPBOARDS = [
    b"[" * 100_000,                                                      # nested past the recursion limit
    b'{"nodes": [{"id": "Z", "kind": "block", "x": 1e400, "y": 0}], "wires": []}',
    (b'{"nodes": [{"id": "Z", "kind": "input"}, {"id": "Q", "kind": "output"}], '
     b'"wires": [{"source": "Z", "target": "Q", "port": 1e400}]}'),
    b'{"nodes": [{"id": "Z", "kind": "input"}], "wires": [{"source": "Z", "target": "Z", "port": "x"}]}',
    b'{"nodes": [{"id": "__import__(\'os\')", "kind": "block", "num": "exec(1)"}], "wires": []}',
    b'{"nodes": "abc", "wires": 5}',
    b"\xff\xfe not text",
    b'{"nodes": [{"id": "Z", "kind": "block", "num": "(" }], "wires": []}',
    b'{"nodes": [{"id": "Z", "kind": "sum", "signs": 12}], "wires": []}',
]


@pytest.mark.parametrize("payload", CLIPBOARDS, ids=range(len(CLIPBOARDS)))
def test_hostile_clipboard_paste_changes_nothing(window, make_loop, payload):
    window.set_document(make_loop())
    before = project_to_dict(window.diagram)
    mime = QMimeData()
    mime.setData(CLIPBOARD_MIME, payload)
    QGuiApplication.clipboard().setMimeData(mime)
    window.act_paste.trigger()
    assert project_to_dict(window.diagram) == before
    assert window.scene.check_consistency() == []


def test_analysis_bug_is_shown_not_raised(window, make_loop, analysed, monkeypatch):
    import app.controller as controller_module
    import core.analysis.pipeline as pipeline

    def broken(_diagram):
        raise ZeroDivisionError("a bug of ours")
    monkeypatch.setattr(controller_module, "ANALYSIS_IN_PROCESS", False)  # the replacement lives in this process
    monkeypatch.setattr(pipeline, "check_project", broken)
    window.set_document(make_loop())
    analysed(window)
    result = window.controller.result
    assert result.report is None and "ZeroDivisionError" in result.message
    assert "internal error" in window.verdict.text()


def test_pole_map_says_numerically_sensitive(window, analysed):
    # characteristic polynomial (s^2 + 2e-9 s + 1)^2 (s+1)^3: exactly stable, numpy puts two poles
    # in the right half plane (see tests/test_numerically_hard.py)
    d = Diagram("near the axis")
    for node in (Node("r", "input"), Node("P", "block", num="1", den="(s^2 + 0.000000002 s + 1)^2 (s+1)^3", x=150),
                 Node("y", "output", x=300)):
        d.add_node(node)
    d.connect("r", "P")
    d.connect("P", "y")
    d.set_analysis(input="r", output="y")
    window.set_document(d)
    analysed(window)
    result = window.controller.result
    assert result.report.nominal.stable and window.verdict.text().startswith("STABLE")
    assert result.float_warning and result.float_warning.startswith("numerically sensitive")
    assert window.pole_map.message.isVisibleTo(window.pole_map)
    assert "numerically sensitive" in window.pole_map.message.text()
    assert any(w.startswith("numerically sensitive") for w in result.report.warnings)
