"""The main window: opening the example with every panel filled, title and unsaved marker, menus,
the caution, and ``python -m app --screenshot``."""
from __future__ import annotations

import os
import struct
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import QSettings
from PySide6.QtWidgets import QMessageBox

from app import about
from app.document.commands import RenameCommand, push
from app.panels.common import colour
from app.window import shipped_examples
from core.analysis.report import CAUTION, check_project
from core.io.project_file import load_project

REPO = Path(__file__).resolve().parents[2]


def test_example_opens_with_every_panel_filled(window, example_path, analysed):
    assert window.files.open(example_path, ask=False)
    analysed(window)
    result = window.controller.result
    assert result.report is not None, result.message
    reference = check_project(load_project(example_path))  # the same analysis without the app
    assert window.polynomial_panel.html()
    assert window.routh_panel.table.rowCount() == len(reference.routh.rows) + 1
    assert window.range_panel.verdict_html()
    degree = reference.analysed.degree
    # reference: numpy.roots of the analysed polynomial at the nominal value
    coeffs = [float(c) for c in reference.analysed.at(reference.values.get(reference.parameter))]
    expected = np.sort_complex(np.roots(coeffs))
    assert np.allclose(np.sort_complex(window.pole_map.plotted_poles()), expected, atol=1e-6)
    assert len(window.pole_map.plotted_poles()) == degree
    assert window.parameters.table.rowCount() >= len(load_project(example_path).parameters)
    assert window.verdict.text()
    assert len(window.scene.node_items) == len(load_project(example_path).nodes)
    for dock in window.docks.values():
        assert dock.isVisible() and dock.widget().width() > 50 and dock.widget().height() > 50


def test_title_and_unsaved_marker_follow_the_undo_stack(window, example_path):
    assert window.files.open(example_path, ask=False)
    name = window.diagram.name
    assert window.windowTitle() == f"{name} — {example_path.name}[*] — Loopwright"
    assert not window.isWindowModified()
    push(window.undo_stack, RenameCommand(window.diagram, "renamed loop"))
    assert window.isWindowModified()
    assert window.windowTitle().startswith("renamed loop — ")
    window.undo_stack.undo()
    assert not window.isWindowModified() and window.windowTitle().startswith(f"{name} — ")


def test_menus(window):
    titles = {a.text().replace("&", ""): a for a in window.menuBar().actions()}
    assert list(titles) == ["File", "Edit", "View", "Help"]
    file_items = [a.text().replace("&", "") for a in titles["File"].menu().actions() if a.text()]
    assert file_items == ["New", "Open…", "Open Recent", "Open Example", "Save", "Save As…", "Export", "Quit"]
    examples = [a.text() for a in window.example_menu.actions()]
    assert examples == [name for name, _ in shipped_examples()]
    assert len(examples) == len(list((REPO / "resources" / "examples").glob("*.loop.json")))
    view_items = [a.text() for a in titles["View"].menu().actions() if a.text()]
    for dock in window.docks.values():
        assert dock.windowTitle() in view_items


def test_open_example_is_an_unsaved_copy(window, dialogs):
    name, _path = shipped_examples()[0]
    window.example_menu.actions()[0].trigger()
    assert window.diagram.name == name and window.files.path is None
    assert window.windowTitle() == f"{name} — not saved[*] — Loopwright"


def test_about_and_caution_show_the_caution_and_version(window, monkeypatch):
    shown = []
    monkeypatch.setattr(QMessageBox, "exec", lambda box: shown.append(box.text()) or 0)
    window.act_about.trigger()
    window.act_caution.trigger()
    assert len(shown) == 2
    version = about.program_version()
    for text in shown:
        assert CAUTION in text and version in text


def test_first_start_caution_once_and_never_offscreen(qapp, monkeypatch):
    settings = QSettings()
    settings.setValue(about.SEEN_KEY, False)
    assert not about.first_start_due(settings)  # offscreen platform: never blocks a test
    monkeypatch.setattr(about.QGuiApplication, "platformName", staticmethod(lambda: "xcb"))
    assert not about.first_start_due(settings, rendering=True)
    shown = []
    monkeypatch.setattr(QMessageBox, "exec", lambda box: shown.append(box.text()) or 0)
    assert about.show_first_start_caution(None, settings)
    assert not about.show_first_start_caution(None, settings)
    assert len(shown) == 1 and CAUTION in shown[0]


def test_select_all_delete_and_undo(window, example_path):
    assert window.files.open(example_path, ask=False)
    nodes = len(window.diagram.nodes)
    window.select_all()
    assert len(window.scene.selected_node_ids()) == nodes
    window.act_delete.trigger()
    assert window.diagram.nodes == {}
    window.undo_stack.undo()
    assert len(window.diagram.nodes) == nodes


def png_size(path: Path) -> tuple[int, int]:
    header = path.read_bytes()[:24]
    assert header[:8] == b"\x89PNG\r\n\x1a\n"
    return struct.unpack(">II", header[16:24])


def run_app(*args: str, tmp_path: Path) -> subprocess.CompletedProcess:
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", LOOPWRIGHT_STATE_DIR=str(tmp_path / "state"),
               XDG_CONFIG_HOME=str(tmp_path / "config"))
    return subprocess.run([sys.executable, "-m", "app", *args], check=False, cwd=REPO, env=env, capture_output=True,
                          text=True, timeout=300)


def test_screenshot_command(tmp_path, example_path):
    out = tmp_path / "shot.png"
    done = run_app("--screenshot", str(out), str(example_path), tmp_path=tmp_path)
    assert done.returncode == 0, done.stderr
    assert png_size(out) == (1600, 1000)
    assert out.stat().st_size > 20_000  # a real picture, not an empty frame


def test_screenshot_of_a_bad_project_fails_in_one_line(tmp_path):
    bad = tmp_path / "bad.loop.json"
    bad.write_text("not json", encoding="utf-8")
    done = run_app("--screenshot", str(tmp_path / "x.png"), str(bad), tmp_path=tmp_path)
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "E201" in lines[0]
    assert not (tmp_path / "x.png").exists()


@pytest.mark.parametrize("flag", ["--help"])
def test_help(tmp_path, flag):
    done = run_app(flag, tmp_path=tmp_path)
    assert done.returncode == 0 and "--screenshot" in done.stdout


def test_window_rebuilds_on_new_document(window, example_path):
    assert window.files.open(example_path, ask=False)
    old_scene = window.scene
    window.files.new_project()
    assert window.scene is not old_scene and window.view.scene() is window.scene
    assert window.palette_panel.editor is window.editor and window.editor.scene is window.scene


def test_an_edit_marks_the_headline_and_the_panels_out_of_date_at_once(window, example_path, analysed):
    assert window.files.open(example_path, ask=False)
    analysed(window)
    verdict = window.verdict.text()
    assert verdict.startswith("STABLE") and "out of date" not in window.docks["range"].windowTitle()
    name = window.controller.result.tuning_range.name
    param = window.diagram.parameters[name]
    window.diagram.set_parameter(type(param)(name, param.nominal * 1.5, param.minimum, param.maximum))
    # no event processed yet: the marks come with the change itself
    assert window.verdict.text() == f"Analysing the change (last: {verdict})"
    assert all(window.docks[key].windowTitle().endswith("· out of date") for key in window.stale_docks)
    analysed(window)
    assert not window.verdict.text().startswith("Analysing")
    assert not any("out of date" in window.docks[key].windowTitle() for key in window.stale_docks)


def test_headline_states_stability_and_requirements_like_the_command_line(window, example_path, analysed):
    from core.model.requirements import Requirements
    from core.present.verdicts import headline, requirements_outcome

    assert window.files.open(example_path, ask=False)
    analysed(window)
    assert window.verdict.text().startswith("STABLE") and "no requirements set" in window.verdict.text()
    assert colour("stable").name() in window.verdict.styleSheet()
    # a damping ratio of 0.99 cannot hold for a loop with a complex pair (the example has one)
    window.diagram.set_requirements(Requirements(min_damping=0.99, min_gain_margin=1.5))
    analysed(window)
    text = window.verdict.text()
    assert text.startswith("STABLE") and "requirements NOT met: damping" in text
    assert colour("warning").name() in window.verdict.styleSheet()
    # the same words as the command line's headline for the same project
    project = load_project(example_path)
    project.set_requirements(Requirements(min_damping=0.99, min_gain_margin=1.5))
    report = window.controller.result.report
    param = project.parameters[report.parameter]
    assert text == headline(report, requirements_outcome(report, project.requirements, project,
                                                         span=(param.minimum, param.maximum)))


@pytest.mark.parametrize("size", [(1366, 768), (1920, 1080)])
def test_palette_entries_keep_their_full_height_on_small_screens(window, example_path, analysed, qtbot, size):
    """Palette labels were cut at 1366 x 768 (buttons squeezed below their size hint); now the palette
    scrolls instead. Reference: Qt's own size hint of each button (text under icon)."""
    assert window.files.open(example_path, ask=False)
    analysed(window)
    window.resize(*size)
    qtbot.wait(50)
    for button in window.palette_panel.buttons.values():
        assert button.height() >= button.sizeHint().height(), button.text()
