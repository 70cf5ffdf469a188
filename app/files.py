"""Opening, saving, recent files and crash recovery for the main window.

:class:`ProjectFiles` holds the file side of one window: the current file path and its
fingerprint, the unsaved-changes question, saving with the changed-on-disk check (E210),
autosave to the recovery folder and the recovery offer on start. Every question goes through a
:class:`Dialogs` object so tests can answer it (replace its methods). A file that cannot be read
shows an error dialog and leaves the current project as it was; nothing here raises to Qt.

The window it serves (the *host*) provides ``diagram``, ``undo_stack`` and
``set_document(diagram, path, fingerprint, dirty)``; it is also the parent of every dialog.
"""
from __future__ import annotations

import time
from pathlib import Path

from PySide6.QtCore import QObject, QSettings, QTimer, Signal
from PySide6.QtWidgets import QFileDialog, QMessageBox, QWidget

from core.errors import LoopwrightError
from core.io.project_file import (
    SUFFIX,
    Recovery,
    discard_recovery,
    file_fingerprint,
    find_recoveries,
    load_project,
    load_recovery,
    new_recovery_owner,
    save_project,
    write_recovery,
)
from core.model.diagram import Diagram

AUTOSAVE_MS = 30_000
MAX_RECENT = 8
RECENT_KEY = "files/recent"
FILE_FILTER = f"Loopwright projects (*{SUFFIX});;All files (*)"


def error_text(err: LoopwrightError) -> str:
    """Code, what and where of an error, one per line, for a message box."""
    lines = [f"{err.code}: {err.message}"]
    if err.where:
        lines.append(f"Where: {err.where}")
    return "\n".join(lines)


class Dialogs:
    """Every question the window asks about files. Tests replace these methods with answers."""

    def error(self, parent: QWidget, title: str, err: LoopwrightError) -> None:
        """Show an error with its code, what and where."""
        QMessageBox.critical(parent, title, error_text(err))

    def unsaved(self, parent: QWidget, name: str) -> str:
        """``save``, ``discard`` or ``cancel`` for unsaved changes in project ``name``."""
        buttons = QMessageBox.StandardButton
        answer = QMessageBox.question(parent, "Unsaved changes",
                                      f"“{name}” has changes that are not saved. Save them first?",
                                      buttons.Save | buttons.Discard | buttons.Cancel, buttons.Save)
        return {buttons.Save: "save", buttons.Discard: "discard"}.get(answer, "cancel")

    def changed_on_disk(self, parent: QWidget, path: Path) -> str:
        """``overwrite``, ``save_as`` or ``cancel`` when the file changed since it was opened."""
        box = QMessageBox(QMessageBox.Icon.Warning, "File changed on disk",
                          f"The file changed on disk since you opened it:\n{path}", parent=parent)
        overwrite = box.addButton("Overwrite", QMessageBox.ButtonRole.DestructiveRole)
        save_as = box.addButton("Save As…", QMessageBox.ButtonRole.AcceptRole)
        box.addButton(QMessageBox.StandardButton.Cancel)
        box.exec()
        return {overwrite: "overwrite", save_as: "save_as"}.get(box.clickedButton(), "cancel")

    def save_failed(self, parent: QWidget, err: LoopwrightError) -> str:
        """``save_as`` or ``cancel`` after a save failed (read-only folder, full disk...)."""
        box = QMessageBox(QMessageBox.Icon.Critical, "Could not save",
                          error_text(err) + "\n\nYour work is still open. Save it somewhere else?", parent=parent)
        save_as = box.addButton("Save As…", QMessageBox.ButtonRole.AcceptRole)
        box.addButton(QMessageBox.StandardButton.Cancel)
        box.exec()
        return "save_as" if box.clickedButton() is save_as else "cancel"

    def open_path(self, parent: QWidget, folder: str) -> str | None:
        """A project file to open, or None."""
        path, _ = QFileDialog.getOpenFileName(parent, "Open project", folder, FILE_FILTER)
        return path or None

    def save_path(self, parent: QWidget, suggestion: str) -> str | None:
        """Where to save, or None."""
        path, _ = QFileDialog.getSaveFileName(parent, "Save project as", suggestion, FILE_FILTER)
        return path or None

    def recover(self, parent: QWidget, recovery: Recovery) -> str:
        """``recover``, ``discard`` or ``later`` for an autosaved copy found on start."""
        when = time.strftime("%Y-%m-%d %H:%M", time.localtime(recovery.saved_at))
        origin = str(recovery.project_path) if recovery.project_path else "a project never saved"
        box = QMessageBox(QMessageBox.Icon.Question, "Recover unsaved work",
                          f"Loopwright found unsaved work from {when}:\n“{recovery.name}” ({origin}).\n\n"
                          "Recover it now? “Later” keeps it for the next start.", parent=parent)
        recover = box.addButton("Recover", QMessageBox.ButtonRole.AcceptRole)
        discard = box.addButton("Discard", QMessageBox.ButtonRole.DestructiveRole)
        box.addButton("Later", QMessageBox.ButtonRole.RejectRole)
        box.exec()
        return {recover: "recover", discard: "discard"}.get(box.clickedButton(), "later")


class RecentFiles:
    """The recent-files list in QSettings: newest first, at most eight, missing files pruned."""

    def paths(self) -> list[Path]:
        """Recent files that still exist (the stored list is pruned as a side effect)."""
        stored = [Path(p) for p in self._stored()]
        alive = [p for p in stored if is_file_quietly(p)][:MAX_RECENT]
        if len(alive) != len(stored):
            self._store(alive)
        return alive

    def add(self, path: Path) -> None:
        """Put ``path`` at the front."""
        path = Path(path).absolute()
        self._store([path] + [p for p in self.paths() if p != path])

    def clear(self) -> None:
        """Forget every recent file."""
        self._store([])

    @staticmethod
    def _stored() -> list[str]:
        value = QSettings().value(RECENT_KEY, [])
        if isinstance(value, str):
            value = [value]
        return [v for v in (value or []) if isinstance(v, str)]

    @staticmethod
    def _store(paths: list[Path]) -> None:
        settings = QSettings()
        settings.setValue(RECENT_KEY, [str(p) for p in paths[:MAX_RECENT]])
        settings.sync()


class ProjectFiles(QObject):
    """The file side of one window (see the module docstring for what the host provides)."""

    pathChanged = Signal()
    recentChanged = Signal()
    message = Signal(str)

    def __init__(self, host, dialogs: Dialogs | None = None, autosave_ms: int = AUTOSAVE_MS):
        super().__init__(host)
        self.host = host
        self.dialogs = dialogs or Dialogs()
        self.recent = RecentFiles()
        self.path: Path | None = None
        self.fingerprint = None
        self.owner = new_recovery_owner()      # this run's autosaved copies carry it
        self._written: set[Path] = set()       # autosaved copies this run wrote for the open project
        self._adopted: set[Path] = set()       # another run's copy the user chose to recover
        self.autosave_timer = QTimer(self)
        self.autosave_timer.setInterval(autosave_ms)
        self.autosave_timer.timeout.connect(self.autosave)
        self.autosave_timer.start()

    # -- state ------------------------------------------------------------------------------------
    @property
    def is_clean(self) -> bool:
        return self.host.undo_stack.isClean()

    def _adopt(self, diagram: Diagram, path: Path | None, fingerprint, dirty: bool = False) -> None:
        self.path = Path(path).absolute() if path else None
        self.fingerprint = fingerprint
        self.host.set_document(diagram, dirty=dirty)
        self.pathChanged.emit()

    # -- questions --------------------------------------------------------------------------------
    def confirm_discard(self) -> bool:
        """Ask before unsaved work would go; True when it is fine to go on."""
        if self.is_clean:
            return True
        answer = self.dialogs.unsaved(self.host, self.host.diagram.name)
        if answer == "save":
            return self.save()
        return answer == "discard"

    # -- commands ---------------------------------------------------------------------------------
    def new_project(self) -> bool:
        """File > New: an empty project (after asking about unsaved work)."""
        if not self.confirm_discard():
            return False
        self.forget_recoveries()
        self._adopt(Diagram(), None, None)
        return True

    def open_dialog(self) -> bool:
        """File > Open...: ask for a file, then open it."""
        folder = str(self.path.parent) if self.path else str(Path.home())
        path = self.dialogs.open_path(self.host, folder)
        return bool(path) and self.open(path)

    def open(self, path, *, ask: bool = True) -> bool:
        """Open a project file; on error show it and keep the current project."""
        if ask and not self.confirm_discard():
            return False
        try:
            diagram = load_project(path)
            fingerprint = file_fingerprint(path)
        except LoopwrightError as err:
            self.dialogs.error(self.host, "Could not open the project", err)
            return False
        self.forget_recoveries()
        self._adopt(diagram, Path(path), fingerprint)
        self.recent.add(Path(path))
        self.recentChanged.emit()
        return True

    def open_copy(self, path) -> bool:
        """Open a project as a new, unsaved project (shipped examples): Save then asks where."""
        if not self.confirm_discard():
            return False
        try:
            diagram = load_project(path)
        except LoopwrightError as err:
            self.dialogs.error(self.host, "Could not open the example", err)
            return False
        self.forget_recoveries()
        self._adopt(diagram, None, None)
        return True

    def save(self) -> bool:
        """File > Save (Save As when the project has no file yet)."""
        if self.path is None:
            return self.save_as()
        return self._write(self.path, self.fingerprint)

    def save_as(self) -> bool:
        """File > Save As...: ask where, then save there."""
        suggestion = str(self.path) if self.path else str(Path.home() / (_file_stem(self.host.diagram.name) + SUFFIX))
        chosen = self.dialogs.save_path(self.host, suggestion)
        if not chosen:
            return False
        path = Path(chosen)
        if not path.name.endswith(SUFFIX):
            path = path.with_name(path.name.removesuffix(".json") + SUFFIX)
        return self._write(path, None)

    def _write(self, path: Path, expected, force: bool = False) -> bool:
        try:
            fingerprint = save_project(self.host.diagram, path, expected_fingerprint=expected, force=force)
        except LoopwrightError as err:
            if err.code == "E210":
                answer = self.dialogs.changed_on_disk(self.host, path)
                if answer == "overwrite":
                    return self._write(path, expected, force=True)
                return answer == "save_as" and self.save_as()
            if self.dialogs.save_failed(self.host, err) == "save_as":
                return self.save_as()
            return False
        self.forget_recoveries()
        self.path, self.fingerprint = Path(path).absolute(), fingerprint
        self.host.undo_stack.setClean()
        self.recent.add(self.path)
        self.recentChanged.emit()
        self.pathChanged.emit()
        self.message.emit(f"Saved {self.path.name}")
        return True

    # -- recovery ---------------------------------------------------------------------------------
    def autosave(self) -> Path | None:
        """Write this run's recovery copy when there are unsaved changes; return where it went."""
        if self.is_clean:
            return None
        try:
            target = write_recovery(self.host.diagram, self.path, self.owner)
        except LoopwrightError as err:
            self.message.emit(f"Autosave failed: {err}")
            return None
        self._written.add(target)
        return target

    def forget_recoveries(self) -> None:
        """After a save, or when the user let the open project's unsaved work go: remove the copies
        this run wrote (only if still recorded as ours) and the recovered copy the user adopted."""
        for path, owner in [(p, self.owner) for p in self._written] + [(p, None) for p in self._adopted]:
            try:
                discard_recovery(path, owner)
            except LoopwrightError as err:
                self.message.emit(f"Could not remove an autosaved copy: {err}")
        self._written.clear()
        self._adopted.clear()

    def offer_recoveries(self) -> bool:
        """On start: offer each autosaved copy (recover, discard, or keep for later); True if one was recovered."""
        for recovery in find_recoveries():
            if recovery.owner == self.owner:
                continue
            answer = self.dialogs.recover(self.host, recovery)
            if answer == "discard":
                try:
                    discard_recovery(recovery.path)
                except LoopwrightError as err:
                    self.dialogs.error(self.host, "Could not discard the autosaved copy", err)
            elif answer == "recover":
                try:
                    diagram = load_recovery(recovery.path)
                except LoopwrightError as err:
                    self.dialogs.error(self.host, "Could not recover", err)
                    continue
                project = recovery.project_path
                fingerprint = None
                if project is not None and is_file_quietly(project):
                    try:
                        fingerprint = file_fingerprint(project)
                    except LoopwrightError:
                        fingerprint = None
                self._adopt(diagram, project, fingerprint, dirty=True)
                self._adopted.add(recovery.path)
                return True
        return False


def is_file_quietly(path: Path) -> bool:
    """Whether ``path`` is a file; False also when its folder cannot be entered or the name is too long."""
    try:
        return Path(path).is_file()
    except OSError:
        return False


def _file_stem(name: str) -> str:
    """A file name from a project name: ``Conveyor speed`` -> ``Conveyor_speed``."""
    stem = "".join(c if c.isalnum() or c in "-_" else "_" for c in name.strip())[:60].strip("_")
    return stem or "untitled"
