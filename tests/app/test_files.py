"""Files through the main window: open errors, unsaved-changes questions, saving, recovery, recent files."""
from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from PySide6.QtGui import QUndoStack

from app.document.commands import EditNodeCommand, RenameCommand, push
from app.files import MAX_RECENT, RecentFiles
from core.io.project_file import (
    find_recoveries,
    load_project,
    new_recovery_owner,
    project_to_dict,
    recovery_path,
    save_project,
    write_recovery,
)


@pytest.fixture
def saved(tmp_path, make_loop) -> Path:
    path = tmp_path / "loop.loop.json"
    save_project(make_loop(), path)
    return path


def edit(window, den: str = "s+5") -> None:
    push(window.undo_stack, EditNodeCommand(window.diagram, "P", den=den))


def test_broken_file_shows_error_and_keeps_project(window, dialogs, saved, tmp_path):
    assert window.files.open(saved)
    edit(window)
    before = project_to_dict(window.diagram)
    broken = tmp_path / "broken.loop.json"
    broken.write_text('{"format": "loopwright-project", "version": 2, "nodes": [', encoding="utf-8")
    dialogs.answers["unsaved"] = "discard"
    assert not window.files.open(broken)
    kind, (_title, err) = dialogs.asked[-1]
    assert kind == "error" and err.code == "E201" and str(broken) in err.where
    assert project_to_dict(window.diagram) == before
    assert window.files.path == saved.absolute()
    assert not window.undo_stack.isClean()  # the unsaved edit is still there


def test_missing_file_is_reported(window, dialogs, tmp_path):
    assert not window.files.open(tmp_path / "nowhere.loop.json")
    assert dialogs.asked[-1][0] == "error" and dialogs.asked[-1][1][1].code == "E208"


def test_opening_over_unsaved_work_asks_first(window, dialogs, saved, make_loop, tmp_path):
    other = tmp_path / "other.loop.json"
    save_project(make_loop("other loop"), other)
    window.files.open(saved)
    edit(window)
    dialogs.answers["unsaved"] = "cancel"
    assert not window.files.open(other)
    assert window.diagram.node("P").den == "s+5" and dialogs.names() == ["unsaved"]
    dialogs.answers["unsaved"] = "save"
    assert window.files.open(other)
    assert window.diagram.name == "other loop"
    assert load_project(saved).node("P").den == "s+5"  # saved before leaving


def test_close_with_unsaved_work(window, dialogs, saved):
    window.files.open(saved)
    edit(window)
    assert window.isWindowModified()
    dialogs.answers["unsaved"] = "cancel"
    window.close()
    assert window.isVisible()
    dialogs.answers["unsaved"] = "discard"
    window.close()
    assert not window.isVisible()
    assert load_project(saved).node("P").den == "s*(s+1)*(s+2)"


def test_save_as_then_title_and_clean_state(window, dialogs, make_loop, tmp_path):
    window.set_document(make_loop())
    push(window.undo_stack, RenameCommand(window.diagram, "belt loop"))
    assert window.isWindowModified()
    dialogs.answers["save_path"] = str(tmp_path / "belt")
    assert window.files.save()
    target = tmp_path / "belt.loop.json"
    assert target.is_file() and window.files.path == target
    assert window.windowTitle() == "belt loop — belt.loop.json[*] — Loopwright"
    assert not window.isWindowModified() and window.undo_stack.isClean()
    assert project_to_dict(load_project(target)) == project_to_dict(window.diagram)


def test_file_changed_on_disk_asks_before_overwriting(window, dialogs, saved):
    window.files.open(saved)
    edit(window)
    other = project_to_dict(load_project(saved))
    other["name"] = "changed elsewhere"
    saved.write_text(json.dumps(other), encoding="utf-8")
    dialogs.answers["changed_on_disk"] = "cancel"
    assert not window.files.save()
    assert load_project(saved).name == "changed elsewhere"
    dialogs.answers["changed_on_disk"] = "overwrite"
    assert window.files.save()
    assert load_project(saved).node("P").den == "s+5"
    assert (saved.parent / (saved.name + ".bak")).is_file()


@pytest.mark.skipif(os.geteuid() == 0 if hasattr(os, "geteuid") else False,
                    reason="root ignores folder permissions")
def test_read_only_folder_offers_save_as(window, dialogs, make_loop, tmp_path):
    folder = tmp_path / "locked"
    folder.mkdir()
    path = folder / "loop.loop.json"
    save_project(make_loop(), path)
    window.files.open(path)
    edit(window)
    folder.chmod(0o500)
    try:
        dialogs.answers["save_failed"] = "save_as"
        dialogs.answers["save_path"] = str(tmp_path / "elsewhere.loop.json")
        assert window.files.save()
    finally:
        folder.chmod(0o700)
    assert dialogs.names()[:2] == ["save_failed", "save_path"]
    assert load_project(tmp_path / "elsewhere.loop.json").node("P").den == "s+5"


def test_missing_folder_offers_save_as(window, dialogs, make_loop, tmp_path):
    window.set_document(make_loop())
    dialogs.answers["save_path"] = [str(tmp_path / "gone" / "x.loop.json"), None]
    dialogs.answers["save_failed"] = "save_as"
    assert not window.files.save_as()
    kind, (err,) = dialogs.asked[1]
    assert kind == "save_failed" and err.code == "E209"
    assert dialogs.names() == ["save_path", "save_failed", "save_path"]


def test_autosave_writes_recovery_and_clean_save_removes_it(window, dialogs, saved):
    window.files.open(saved)
    assert window.files.autosave() is None  # nothing unsaved
    edit(window)
    copy = window.files.autosave()
    assert copy == recovery_path(saved, window.files.owner) and copy.is_file()
    assert window.files.autosave_timer.interval() == 30_000
    assert window.files.save()
    assert not copy.exists()


def test_recovery_offered_after_a_crash(qtbot, dialogs, state_dir, saved, make_loop):
    crashed = make_loop("work in progress")
    crashed.update_node("P", den="s^2 + 4")
    write_recovery(crashed, saved, new_recovery_owner())  # what an autosave left behind before the crash
    from app.window import MainWindow
    dialogs.answers["recover"] = "recover"
    win = MainWindow(dialogs=dialogs)
    qtbot.addWidget(win)
    assert win.files.offer_recoveries()
    assert dialogs.names() == ["recover"] and dialogs.asked[0][1][0].name == "work in progress"
    assert project_to_dict(win.diagram) == project_to_dict(crashed)
    assert win.files.path == saved.absolute() and win.isWindowModified()
    assert find_recoveries()  # kept until the work is saved
    assert win.files.save()
    assert find_recoveries() == []
    win.close()


def test_recovery_later_keeps_and_discard_removes(qtbot, dialogs, state_dir, make_loop):
    write_recovery(make_loop("never saved"), None, new_recovery_owner())
    from app.window import MainWindow
    win = MainWindow(dialogs=dialogs)
    qtbot.addWidget(win)
    dialogs.answers["recover"] = "later"
    assert not win.files.offer_recoveries()
    assert len(find_recoveries()) == 1
    dialogs.answers["recover"] = "discard"
    assert not win.files.offer_recoveries()
    assert find_recoveries() == []
    win.close()


def test_later_then_leaving_keeps_the_crashed_runs_copy(qtbot, dialogs, state_dir, saved, make_loop, monkeypatch):
    # issue 17 item 1: every launch may get the same process id (containers)
    monkeypatch.setattr(os, "getpid", lambda: 1)
    crashed = write_recovery(make_loop("crashed work"), saved, new_recovery_owner())
    before = crashed.read_bytes()
    from app.window import MainWindow
    win = MainWindow(dialogs=dialogs)
    qtbot.addWidget(win)
    dialogs.answers["recover"] = "later"
    assert not win.files.offer_recoveries()
    assert win.files.open(saved)
    edit(win)
    assert win.files.autosave() != crashed  # our own copy, never the crashed run's
    assert crashed.read_bytes() == before
    assert win.files.save()
    dialogs.answers["unsaved"] = "discard"
    assert win.files.new_project()
    win.close()
    assert crashed.read_bytes() == before
    assert [r.path for r in find_recoveries()] == [crashed]


def test_save_as_a_name_too_long_shows_the_failure(window, dialogs, tmp_path):
    # issue 17 item 3: the error is a dialog, not an OSError out of the slot (255 bytes: ext4 limit, from memory)
    dialogs.answers["save_path"] = [str(tmp_path / ("n" * 300 + ".loop.json")), None]
    dialogs.answers["save_failed"] = "save_as"
    assert not window.files.save_as()
    kind, (err,) = dialogs.asked[1]
    assert kind == "save_failed" and err.code == "E209" and "bytes long" in err.message


def test_recent_files_newest_first_capped_and_pruned(tmp_path):
    recent = RecentFiles()
    paths = []
    for i in range(MAX_RECENT + 2):
        path = tmp_path / f"p{i}.loop.json"
        path.write_text("{}", encoding="utf-8")
        recent.add(path)
        paths.append(path)
    assert recent.paths() == list(reversed(paths))[:MAX_RECENT]
    paths[-1].unlink()
    assert recent.paths() == list(reversed(paths[:-1]))[:MAX_RECENT - 1]


def test_open_adds_to_recent_menu(window, saved):
    window.files.open(saved)
    titles = [a.text() for a in window.recent_menu.actions()]
    assert titles[0] == saved.name


def test_new_project_is_empty_and_clean(window, dialogs, saved):
    window.files.open(saved)
    edit(window)
    dialogs.answers["unsaved"] = "discard"
    assert window.files.new_project()
    assert window.diagram.nodes == {} and window.files.path is None and window.undo_stack.isClean()
    assert isinstance(window.undo_stack, QUndoStack) and window.undo_stack.count() == 0
