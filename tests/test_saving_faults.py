"""Saving never loses work: an error injected at every write, fsync and rename of a save leaves the
old file, its .bak and the recovery file intact; links, long names, unreadable targets, killed
saves and recovery copies of other runs sharing our process id.

References: the POSIX rename guarantee (a reader sees the old or the new file, from memory); the
255-byte name limit of ext4/tmpfs/NTFS/APFS (from memory); os.path.realpath as the independent
resolver of symbolic links; the fault-injection method of testing every I/O call of a commit
(common practice for embedded databases).
"""
from __future__ import annotations

import errno
import os
import time
from pathlib import Path

import pytest

from core.errors import ProjectFileError
from core.io import project_file as pf
from core.io.project_file import load_project, save_project
from core.model.diagram import Diagram

FAULT_CALLS = ("write", "fsync", "replace")


def leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


class Faults:
    """Wraps os.write, os.fsync and os.replace: counts calls of each and fails the n-th of one."""

    def __init__(self, monkeypatch):
        self.real = {name: getattr(os, name) for name in FAULT_CALLS}
        self.counts = dict.fromkeys(FAULT_CALLS, 0)
        self.fail_at: tuple[str, int] | None = None
        for name in FAULT_CALLS:
            monkeypatch.setattr(os, name, self._wrap(name))

    def _wrap(self, name):
        def call(*args, **kwargs):
            index = self.counts[name]
            self.counts[name] += 1
            if self.fail_at == (name, index):
                raise OSError(errno.EIO, f"injected {name} failure")
            return self.real[name](*args, **kwargs)
        return call

    def arm(self, name: str | None = None, index: int = 0) -> None:
        self.counts = dict.fromkeys(FAULT_CALLS, 0)
        self.fail_at = None if name is None else (name, index)


@pytest.fixture
def state(tmp_path, monkeypatch):
    folder = tmp_path / "state"
    monkeypatch.setenv("LOOPWRIGHT_STATE_DIR", str(folder))
    return folder


def project_with_backup_and_recovery(folder: Path, owner: str):
    """A saved project (``old`` bytes), its .bak (``bak`` bytes) and a recovery copy (``rec`` bytes)."""
    path = folder / "press.loop.json"
    save_project(Diagram("first"), path)
    save_project(Diagram("second"), path)
    recovery = pf.write_recovery(Diagram("unsaved edits"), path, owner)
    return path, path.read_bytes(), (folder / "press.loop.json.bak").read_bytes(), recovery, recovery.read_bytes()


def count_calls(faults: Faults, action) -> dict[str, int]:
    faults.arm()
    action()
    return dict(faults.counts)


def test_an_error_at_every_write_fsync_and_rename_of_a_save_loses_nothing(tmp_path, state, monkeypatch):
    owner = pf.new_recovery_owner()
    faults = Faults(monkeypatch)
    scratch = tmp_path / "count"
    scratch.mkdir()
    path, *_ = project_with_backup_and_recovery(scratch, owner)
    calls = count_calls(faults, lambda: save_project(Diagram("third"), path))
    assert calls["write"] >= 2 and calls["fsync"] >= 2 and calls["replace"] == 2  # new file + backup
    injected = 0
    for name in FAULT_CALLS:
        for index in range(calls[name]):
            folder = tmp_path / f"{name}{index}"
            folder.mkdir()
            faults.arm()
            path, old, bak, recovery, rec = project_with_backup_and_recovery(folder, owner)
            faults.arm(name, index)
            try:
                save_project(Diagram("third"), path)
                saved = True
            except ProjectFileError as err:
                assert err.code == "E209" and "previous file is unchanged" in err.message
                saved = False
            faults.arm()
            now, now_bak = path.read_bytes(), (folder / "press.loop.json.bak").read_bytes()
            if saved:  # only the folder's fsync may fail after the rename; the save stands
                assert load_project(path).name == "third" and now_bak == old
            else:
                assert now == old, (name, index)
                assert now_bak in (bak, old), (name, index)  # the previous backup or a whole new one
            assert recovery.read_bytes() == rec
            assert leftovers(folder) == []
            injected += 1
    assert injected == sum(calls.values())


def test_an_error_at_every_step_of_an_autosave_keeps_the_previous_copy(tmp_path, state, monkeypatch):
    owner = pf.new_recovery_owner()
    path = tmp_path / "press.loop.json"
    save_project(Diagram("on disk"), path)
    on_disk = path.read_bytes()
    faults = Faults(monkeypatch)
    first = pf.write_recovery(Diagram("edit 1"), path, owner)
    calls = count_calls(faults, lambda: pf.write_recovery(Diagram("edit 2"), path, owner))
    for name in FAULT_CALLS:
        for index in range(calls[name]):
            faults.arm()
            pf.write_recovery(Diagram("edit 1"), path, owner)
            before = first.read_bytes()
            faults.arm(name, index)
            try:
                pf.write_recovery(Diagram("edit 2"), path, owner)
            except ProjectFileError:
                faults.arm()
                assert first.read_bytes() == before
            faults.arm()
            assert pf.load_recovery(first).name in ("edit 1", "edit 2")
            assert path.read_bytes() == on_disk and leftovers(first.parent) == []


def test_saving_through_a_link_replaces_its_target(tmp_path):
    real_dir, link_dir = tmp_path / "real", tmp_path / "links"
    real_dir.mkdir()
    link_dir.mkdir()
    target = real_dir / "ram.loop.json"
    save_project(Diagram("before"), target)
    before = target.read_bytes()
    link = link_dir / "ram.loop.json"
    link.symlink_to(os.path.relpath(target, link_dir))
    save_project(Diagram("after"), link)
    assert link.is_symlink() and os.path.realpath(link) == os.path.realpath(target)  # os.path as reference
    assert load_project(target).name == "after"
    assert (real_dir / "ram.loop.json.bak").read_bytes() == before
    assert sorted(p.name for p in link_dir.iterdir()) == ["ram.loop.json"]  # no .bak beside the link


def test_a_link_to_a_link_and_a_dangling_link(tmp_path):
    target = tmp_path / "a.loop.json"
    first, second = tmp_path / "b.loop.json", tmp_path / "c.loop.json"
    first.symlink_to(target)          # dangling until the first save creates the target
    second.symlink_to(first)
    save_project(Diagram("through two links"), second)
    assert second.is_symlink() and first.is_symlink() and target.is_file()
    assert load_project(target).name == "through two links"


@pytest.mark.parametrize("char", ["x", "é", "水"])
def test_names_up_to_255_bytes_save_twice_with_backup(tmp_path, char):
    stem = char * ((255 - len(pf.SUFFIX)) // len(char.encode()))
    name = stem + pf.SUFFIX
    assert 250 <= len(name.encode()) <= 255
    path = tmp_path / name
    save_project(Diagram("one"), path)
    save_project(Diagram("two"), path)
    backups = [p for p in tmp_path.iterdir() if p.name.endswith(".bak")]
    assert len(backups) == 1 and len(backups[0].name.encode()) <= 255
    assert load_project(backups[0]).name == "one" and load_project(path).name == "two"
    assert leftovers(tmp_path) == []


def test_two_long_names_sharing_a_start_keep_separate_backups(tmp_path):
    base = "p" * 240
    a, b = tmp_path / (base + "a" + pf.SUFFIX), tmp_path / (base + "b" + pf.SUFFIX)
    for path in (a, b):
        save_project(Diagram(path.name[-12:]), path)
        save_project(Diagram("again"), path)
    assert pf.backup_name(a.name) != pf.backup_name(b.name)
    assert load_project(tmp_path / pf.backup_name(a.name)).name == a.name[-12:]


def test_a_name_over_255_bytes_is_a_clear_refusal(tmp_path):
    path = tmp_path / ("n" * 250 + pf.SUFFIX)
    with pytest.raises(ProjectFileError) as info:
        save_project(Diagram(), path)
    assert info.value.code == "E209" and "bytes long" in info.value.message and "Save As" in info.value.message


def test_a_folder_that_cannot_be_entered_is_a_clear_refusal(tmp_path, monkeypatch):
    # Tests may run as root, where permissions do not stop anything: simulate the refusal.
    locked = tmp_path / "locked"
    locked.mkdir()
    real_is_dir = Path.is_dir

    def refusing(self):
        if locked in (self, *self.parents):
            raise PermissionError(errno.EACCES, "Permission denied", str(self))
        return real_is_dir(self)

    monkeypatch.setattr(Path, "is_dir", refusing)
    with pytest.raises(ProjectFileError) as info:
        save_project(Diagram(), locked / "x.loop.json")
    assert info.value.code == "E209" and "cannot open the folder" in info.value.message


def test_a_write_only_target_names_reading_for_the_backup(tmp_path, monkeypatch):
    path = tmp_path / "w.loop.json"
    save_project(Diagram("old"), path)
    before = path.read_bytes()
    real_read = Path.read_bytes

    def write_only(self):
        if self == path:
            raise PermissionError(errno.EACCES, "Permission denied", str(self))
        return real_read(self)

    monkeypatch.setattr(Path, "read_bytes", write_only)
    with pytest.raises(ProjectFileError) as info:
        save_project(Diagram("new"), path)
    message = info.value.message
    assert "cannot read the previous file" in message and "no permission to read" in message
    assert "write there" not in message
    monkeypatch.undo()
    assert path.read_bytes() == before and leftovers(tmp_path) == []


def test_stale_temp_files_of_ours_are_cleaned_others_kept(tmp_path):
    path = tmp_path / "belt.loop.json"
    old = time.time() - 2 * pf.STALE_TEMP_SECONDS
    stale = tmp_path / pf.temp_name(path.name, "0123456789ab")
    fresh = tmp_path / pf.temp_name("other.loop.json", "ba9876543210")  # a save running right now
    foreign = tmp_path / ".editor-swap.tmp"
    for p in (stale, fresh, foreign):
        p.write_bytes(b"half a file")
    for p in (stale, foreign):
        os.utime(p, (old, old))
    save_project(Diagram(), path)
    assert not stale.exists() and fresh.exists() and foreign.exists()


# -- recovery copies of other runs -------------------------------------------------------------------
def test_runs_sharing_a_process_id_never_touch_each_others_copies(tmp_path, state, monkeypatch):
    monkeypatch.setattr(os, "getpid", lambda: 1)  # as in a container: every launch is process 1
    crashed_run, this_run = pf.new_recovery_owner(), pf.new_recovery_owner()
    project = tmp_path / "belt.loop.json"
    theirs = [pf.write_recovery(Diagram("crashed untitled"), None, crashed_run),
              pf.write_recovery(Diagram("crashed project"), project, crashed_run)]
    before = [p.read_bytes() for p in theirs]
    ours = [pf.write_recovery(Diagram("ours untitled"), None, this_run),
            pf.write_recovery(Diagram("ours project"), project, this_run)]
    assert set(ours).isdisjoint(theirs)
    assert [p.read_bytes() for p in theirs] == before
    assert not any(pf.discard_recovery(p, this_run) for p in theirs)  # not ours: kept
    assert [p.read_bytes() for p in theirs] == before
    assert all(pf.discard_recovery(p, this_run) for p in ours)
    assert {r.owner for r in pf.find_recoveries()} == {crashed_run}


def test_a_copy_of_another_run_in_our_place_is_never_replaced(tmp_path, state):
    crashed_run, this_run = pf.new_recovery_owner(), pf.new_recovery_owner()
    ours = pf.recovery_path(None, this_run)
    theirs = pf.write_recovery(Diagram("crashed"), None, crashed_run)
    ours.write_bytes(theirs.read_bytes())  # however it got there
    with pytest.raises(ProjectFileError) as info:
        pf.write_recovery(Diagram("ours"), None, this_run)
    assert info.value.code == "E209"
    assert pf.load_recovery(ours).name == "crashed"
    assert not pf.discard_recovery(ours, this_run) and ours.exists()


def test_old_copies_without_an_owner_are_offered_and_kept(tmp_path, state):
    # the version before owner records named untitled copies after the process id
    folder = pf.recovery_directory()
    folder.mkdir(parents=True)
    legacy = folder / "untitled-1.recovery.json"
    legacy.write_text('{"format": "loopwright-recovery", "version": 1, "project_path": null, '
                      '"saved_at": 1.0, "project": {"format": "loopwright-project", "version": 2, '
                      '"name": "legacy", "nodes": []}}')
    (found,) = pf.find_recoveries()
    assert found.owner is None and found.name == "legacy"
    assert not pf.discard_recovery(legacy, pf.new_recovery_owner()) and legacy.exists()
