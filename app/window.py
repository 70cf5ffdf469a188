"""The main window: canvas in the centre, palette, inspector, parameters and analysis panels in docks.

One window holds one document: a :class:`~core.model.diagram.Diagram`, its :class:`~app.bridge.ModelSignals`,
the scene that mirrors it and the analysis controller. Opening or making a new project replaces
all four (:meth:`MainWindow.set_document`); the undo stack, panels and actions stay. Files are
handled by :class:`~app.files.ProjectFiles` (``window.files``), whose dialogs tests can answer
through ``window.files.dialogs``.
"""
from __future__ import annotations

import json
from pathlib import Path

from PySide6.QtCore import QSettings, Qt, QTimer
from PySide6.QtGui import QAction, QCloseEvent, QKeySequence, QUndoStack
from PySide6.QtWidgets import (
    QDockWidget,
    QFrame,
    QInputDialog,
    QLabel,
    QMainWindow,
    QProgressBar,
    QScrollArea,
    QStyle,
    QTabWidget,
    QToolButton,
    QWidget,
)

from app.about import app_icon, show_about, show_caution
from app.bridge import ModelSignals
from app.canvas.scene import DiagramScene
from app.canvas.view import ZOOM_STEP, DiagramView
from app.controller import AnalysisController
from app.document.commands import RenameCommand, push
from app.document.editing import commit_nominals
from app.document.editor import DiagramEditor
from app.export import ExportActions
from app.files import Dialogs, ProjectFiles
from app.inspector import Inspector
from app.palette import Palette
from app.panels import PoleMap, PolynomialPanel, RangePanel, RouthPanel, attach, prepare_for_panels
from app.panels.common import colour
from app.panels.plane_panel import PlanePanel
from app.panels.requirements_panel import RequirementsPanel
from app.panels.step_panel import StepPanel
from app.parameters_panel import ParametersPanel
from core.errors import LoopwrightError
from core.model.diagram import Diagram

EXAMPLES = Path(__file__).resolve().parents[1] / "resources" / "examples"
APP_NAME = "Loopwright"
FIRST_PAINT_WAIT_MS = 1000


def shipped_examples() -> list[tuple[str, Path]]:
    """(project name, path) of every shipped example, sorted by name; unreadable files skipped."""
    found = []
    for path in sorted(EXAMPLES.glob("*.loop.json")):
        try:
            name = json.loads(path.read_text(encoding="utf-8")).get("name")
        except (OSError, ValueError, AttributeError):
            continue
        found.append((name if isinstance(name, str) and name else path.name, path))
    return sorted(found, key=lambda item: item[0].lower())


def scrolling(widget: QWidget) -> QScrollArea:
    """``widget`` in a frameless vertical scroll area: shown at its own size, scrolled when the
    dock is shorter (a palette of fixed-height buttons is never squeezed until labels are cut)."""
    area = QScrollArea()
    area.setWidget(widget)
    area.setWidgetResizable(True)
    area.setFrameShape(QFrame.Shape.NoFrame)
    area.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
    area.setMinimumWidth(widget.sizeHint().width() + area.verticalScrollBar().sizeHint().width())
    return area


class MainWindow(QMainWindow):
    """Loopwright's main window. ``rendering=True`` skips saved window state (for screenshots)."""

    def __init__(self, dialogs: Dialogs | None = None, rendering: bool = False):
        super().__init__()
        self.rendering = rendering
        self.setWindowIcon(app_icon())
        self.undo_stack = QUndoStack(self)
        self.files = ProjectFiles(self, dialogs)
        self.diagram = Diagram()
        self.signals: ModelSignals | None = None
        self.scene: DiagramScene | None = None
        self.editor: DiagramEditor | None = None
        self.view: DiagramView | None = None
        self.controller: AnalysisController | None = None
        self._painted = False

        self.palette_panel: Palette | None = None
        self.inspector = Inspector(self)
        self.parameters = ParametersPanel(self)
        self.polynomial_panel = PolynomialPanel(self)
        self.routh_panel = RouthPanel(self)
        self.range_panel = RangePanel(self)
        self.pole_map = PoleMap(self)
        self.step_panel = StepPanel(self)
        self.requirements_panel = RequirementsPanel(self)
        self.plane_panel = PlanePanel(self)
        self.analysis_panels = [self.polynomial_panel, self.routh_panel, self.range_panel, self.pole_map,
                                self.step_panel, self.requirements_panel, self.plane_panel]
        for panel in self.analysis_panels:
            panel.setAutoFillBackground(True)  # opaque: a panel repainted never repaints its dock and the window
        self.stale_docks = {"polynomial": self.polynomial_panel, "routh": self.routh_panel, "range": self.range_panel,
                            "poles": self.pole_map, "step": self.step_panel, "requirements": self.requirements_panel,
                            "plane": self.plane_panel}
        self._build_status_bar()
        self.stop_button.clicked.connect(lambda: self.controller.cancel())
        self.set_document(Diagram())
        self.palette_panel = Palette(self.editor, self)
        self.setCentralWidget(self.view)
        self.docks: dict[str, QDockWidget] = {}
        self._arranged = False
        self._build_docks()
        self._build_actions()
        self._build_menus()
        self._build_toolbar()

        self.undo_stack.cleanChanged.connect(self._update_title)
        self.files.pathChanged.connect(self._update_title)
        self.files.recentChanged.connect(self._fill_recent_menu)
        self.files.message.connect(lambda text: self.statusBar().showMessage(text, 5000))
        self.inspector.message.connect(lambda text: self.statusBar().showMessage(text, 8000))
        self.parameters.message.connect(lambda text: self.statusBar().showMessage(text, 8000))
        if not rendering:
            self._restore_window_state()

    # -- layout -----------------------------------------------------------------------------------
    def _dock(self, key: str, title: str, widget: QWidget, area: Qt.DockWidgetArea) -> QDockWidget:
        dock = QDockWidget(title, self)
        dock.setObjectName(f"dock_{key}")
        dock.setWidget(widget)
        dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                         | QDockWidget.DockWidgetFeature.DockWidgetFloatable
                         | QDockWidget.DockWidgetFeature.DockWidgetClosable)
        self.addDockWidget(area, dock)
        self.docks[key] = dock
        return dock

    def _build_docks(self) -> None:
        self.setCorner(Qt.Corner.BottomRightCorner, Qt.DockWidgetArea.RightDockWidgetArea)
        self.setCorner(Qt.Corner.BottomLeftCorner, Qt.DockWidgetArea.BottomDockWidgetArea)
        self.setDockOptions(QMainWindow.DockOption.AnimatedDocks | QMainWindow.DockOption.AllowTabbedDocks
                            | QMainWindow.DockOption.AllowNestedDocks)
        self.setTabPosition(Qt.DockWidgetArea.AllDockWidgetAreas, QTabWidget.TabPosition.North)
        left, right, bottom = (Qt.DockWidgetArea.LeftDockWidgetArea, Qt.DockWidgetArea.RightDockWidgetArea,
                               Qt.DockWidgetArea.BottomDockWidgetArea)
        self._dock("palette", "Palette", scrolling(self.palette_panel), left)  # never squeezed on a short screen
        inspector = self._dock("inspector", "Inspector", self.inspector, right)
        poles = self._dock("poles", PoleMap.TITLE, self.pole_map, right)
        self.splitDockWidget(inspector, poles, Qt.Orientation.Vertical)
        parameters = self._dock("parameters", "Parameters", self.parameters, right)
        self.tabifyDockWidget(inspector, parameters)
        inspector.raise_()
        polynomial = self._dock("polynomial", PolynomialPanel.TITLE, self.polynomial_panel, bottom)
        routh = self._dock("routh", RouthPanel.TITLE, self.routh_panel, bottom)
        stable = self._dock("range", RangePanel.TITLE, self.range_panel, bottom)
        self.splitDockWidget(polynomial, routh, Qt.Orientation.Horizontal)
        self.splitDockWidget(routh, stable, Qt.Orientation.Horizontal)
        self.tabifyDockWidget(stable, self._dock("step", StepPanel.TITLE, self.step_panel, bottom))
        self.tabifyDockWidget(stable, self._dock("requirements", RequirementsPanel.TITLE, self.requirements_panel, bottom))
        self.tabifyDockWidget(stable, self._dock("plane", PlanePanel.TITLE, self.plane_panel, bottom))
        stable.raise_()
        self._arrange_docks()

    def _arrange_docks(self) -> None:
        """Default dock sizes for the window's current size (again once shown: sizes need a layout)."""
        d = self.docks
        width, height = max(self.width(), 1200), max(self.height(), 800)
        self.resizeDocks([d["palette"]], [140], Qt.Orientation.Horizontal)
        self.resizeDocks([d["inspector"]], [int(width * 0.27)], Qt.Orientation.Horizontal)
        self.resizeDocks([d["inspector"], d["poles"]], [int(height * 0.3), int(height * 0.62)],
                         Qt.Orientation.Vertical)
        bottom = [d["polynomial"], d["routh"], d["range"]]
        self.resizeDocks(bottom, [28, 40, 32], Qt.Orientation.Horizontal)
        self.resizeDocks([d["polynomial"]], [int(height * 0.41)], Qt.Orientation.Vertical)

    def showEvent(self, event) -> None:
        super().showEvent(event)
        if not self._arranged:
            self._arranged = True
            if self.rendering or QSettings().value("window/state") is None:
                self._arrange_docks()
            if not self._painted:  # the first analysis waits for the first paint (or FIRST_PAINT_WAIT_MS)
                self.controller.hold(True)
                QTimer.singleShot(FIRST_PAINT_WAIT_MS, self._release_analysis)

    def paintEvent(self, event) -> None:
        super().paintEvent(event)
        if not self._painted:
            self._painted = True
            QTimer.singleShot(0, self._release_analysis)  # runs once this paint pass is done

    def _release_analysis(self) -> None:
        self._painted = True
        if self.controller is not None:
            self.controller.hold(False)

    def _action(self, text: str, slot, shortcut=None, icon: QStyle.StandardPixmap | None = None,
                tip: str = "") -> QAction:
        action = QAction(text, self)
        if shortcut is not None:
            action.setShortcut(QKeySequence(shortcut))
        if icon is not None:
            action.setIcon(self.style().standardIcon(icon))
        action.setStatusTip(tip)
        action.triggered.connect(lambda _=False: slot())
        return action

    def _build_actions(self) -> None:
        SP, Key = QStyle.StandardPixmap, QKeySequence.StandardKey
        self.act_new = self._action("&New", self.files.new_project, Key.New, SP.SP_FileIcon, "Start an empty project")
        self.act_open = self._action("&Open…", self.files.open_dialog, Key.Open, SP.SP_DialogOpenButton,
                                     "Open a project file")
        self.act_save = self._action("&Save", self.files.save, Key.Save, SP.SP_DialogSaveButton, "Save the project")
        self.act_save_as = self._action("Save &As…", self.files.save_as, Key.SaveAs, None,
                                        "Save the project under another name")
        self.act_quit = self._action("&Quit", self.close, Key.Quit)
        self.act_undo = self.undo_stack.createUndoAction(self, "&Undo")
        self.act_undo.setShortcut(QKeySequence(Key.Undo))
        self.act_undo.setIcon(self.style().standardIcon(SP.SP_ArrowBack))
        self.act_redo = self.undo_stack.createRedoAction(self, "&Redo")
        self.act_redo.setShortcut(QKeySequence(Key.Redo))
        self.act_redo.setIcon(self.style().standardIcon(SP.SP_ArrowForward))
        self.act_cut = self._action("Cu&t", self.cut, Key.Cut)
        self.act_copy = self._action("&Copy", lambda: self.editor.copy_selection(), Key.Copy)
        self.act_paste = self._action("&Paste", lambda: self.editor.paste(), Key.Paste)
        self.act_delete = self._action("&Delete", lambda: self.editor.delete_selection(), Key.Delete)
        self.act_select_all = self._action("Select &All", self.select_all, Key.SelectAll)
        for action in (self.act_cut, self.act_copy, self.act_paste, self.act_delete, self.act_select_all):
            # only while the canvas has focus: text fields keep their own editing keys
            action.setShortcutContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
            self.view.addAction(action)
        self.act_rename = self._action("Project &Name…", self.rename_project, None, None,
                                       "Change the project's name")
        self.act_zoom_in = self._action("Zoom &In", lambda: self.view.zoom_by(ZOOM_STEP), Key.ZoomIn, None, "Zoom in")
        self.act_zoom_out = self._action("Zoom &Out", lambda: self.view.zoom_by(1 / ZOOM_STEP), Key.ZoomOut, None, "Zoom out")
        self.act_fit = self._action("&Fit Diagram", lambda: self.view.fit_all(), "Ctrl+0", None,
                                    "Show the whole diagram")
        self.act_about = self._action("&About Loopwright", lambda: show_about(self))
        self.act_caution = self._action("&Caution", lambda: show_caution(self))

    def _build_menus(self) -> None:
        bar = self.menuBar()
        file_menu = bar.addMenu("&File")
        file_menu.addActions([self.act_new, self.act_open])
        self.recent_menu = file_menu.addMenu("Open &Recent")
        self.example_menu = file_menu.addMenu("Open &Example")
        for name, path in shipped_examples():
            action = self.example_menu.addAction(name)
            action.setStatusTip(str(path))
            action.triggered.connect(lambda _=False, p=path: self.files.open_copy(p))
        self.example_menu.setEnabled(bool(self.example_menu.actions()))
        file_menu.addSeparator()
        file_menu.addActions([self.act_save, self.act_save_as])
        file_menu.addSeparator()
        self.exports = ExportActions(self)
        file_menu.addMenu(self.exports.menu)
        file_menu.addSeparator()
        file_menu.addAction(self.act_quit)
        self._fill_recent_menu()

        edit = bar.addMenu("&Edit")
        edit.addActions([self.act_undo, self.act_redo])
        edit.addSeparator()
        edit.addActions([self.act_cut, self.act_copy, self.act_paste, self.act_delete])
        edit.addSeparator()
        edit.addActions([self.act_select_all, self.act_rename])
        edit.addSeparator()
        edit.addMenu(self.exports.routh_menu)

        view = bar.addMenu("&View")
        view.addActions([self.act_zoom_in, self.act_zoom_out, self.act_fit])
        view.addSeparator()
        for dock in self.docks.values():
            view.addAction(dock.toggleViewAction())

        help_menu = bar.addMenu("&Help")
        help_menu.addActions([self.act_about, self.act_caution])

    def _fill_recent_menu(self) -> None:
        self.recent_menu.clear()
        paths = self.files.recent.paths()
        for path in paths:
            action = self.recent_menu.addAction(path.name)
            action.setStatusTip(str(path))
            action.triggered.connect(lambda _=False, p=path: self.files.open(p))
        if paths:
            self.recent_menu.addSeparator()
            self.recent_menu.addAction("Clear List", self._clear_recent)
        self.recent_menu.setEnabled(bool(paths))

    def _clear_recent(self) -> None:
        self.files.recent.clear()
        self._fill_recent_menu()

    def _build_toolbar(self) -> None:
        bar = self.addToolBar("Main")
        bar.setObjectName("toolbar_main")
        bar.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
        bar.addActions([self.act_new, self.act_open, self.act_save])
        bar.addSeparator()
        bar.addActions([self.act_undo, self.act_redo])
        bar.addSeparator()
        bar.addActions([self.act_fit, self.act_zoom_in, self.act_zoom_out])

    def _build_status_bar(self) -> None:
        status = self.statusBar()
        self.busy = QProgressBar()
        self.busy.setRange(0, 0)
        self.busy.setFixedWidth(90)
        self.busy.setTextVisible(False)
        self.busy.setToolTip("Analysing…")
        self.busy.hide()
        self.stop_button = QToolButton()
        self.stop_button.setText("Stop")
        self.stop_button.setToolTip("Stop this analysis: the panels keep the last result, marked out of date")
        self.stop_button.hide()
        self.verdict = QLabel()
        self.verdict.setObjectName("verdict")
        self._verdict_shown = ""
        status.addPermanentWidget(self.busy)
        status.addPermanentWidget(self.stop_button)
        status.addPermanentWidget(self.verdict)

    # -- the document -----------------------------------------------------------------------------
    def set_document(self, diagram: Diagram, dirty: bool = False) -> None:
        """Show another diagram: new signals, scene and controller; the undo stack starts empty."""
        self._retire()
        self.diagram = diagram
        self.undo_stack.clear()
        self.signals = ModelSignals(diagram, self)
        old_scene, self.scene = self.scene, DiagramScene(diagram, self.signals, parent=self)
        self.editor = DiagramEditor(self.scene, self.undo_stack)
        if self.view is None:
            self.view = DiagramView(self.scene, self)
            self.view.setObjectName("canvas")
        else:
            self.view.setScene(self.scene)
        if old_scene is not None:
            old_scene.deleteLater()
        self.scene.selectionChangedTo.connect(self.inspector.show_nodes)
        self.scene.statusHint.connect(lambda text: self.statusBar().showMessage(text, 6000))
        if self.palette_panel is not None:
            self.palette_panel.set_editor(self.editor)
        self.inspector.set_document(diagram, self.signals, self.undo_stack)
        self.parameters.set_document(diagram, self.signals, self.undo_stack)
        self.requirements_panel.set_document(diagram, self.signals, self.undo_stack)
        self.plane_panel.set_document(diagram, self.signals, self.undo_stack)
        self.signals.settingsChanged.connect(self._on_settings_changed)
        self.controller = AnalysisController(diagram, self.signals, self, prepare=prepare_for_panels)
        commit_nominals(self.controller, diagram, self.undo_stack)
        for panel in self.analysis_panels:
            attach(panel, self.controller)
        self.controller.resultReady.connect(self._show_verdict)
        self.controller.resultReady.connect(
            lambda result: self.scene.mark_left_out(result.report.left_out if result.ok else []))
        self.controller.busyChanged.connect(self.busy.setVisible)
        self.controller.busyChanged.connect(self.stop_button.setVisible)
        self.controller.busyChanged.connect(lambda _: self._mark_stale())
        self.controller.staleChanged.connect(lambda _: self._mark_stale())
        self.verdict.setText("")
        self._verdict_shown = ""
        if dirty:
            self.undo_stack.resetClean()
        self._update_title()
        QTimer.singleShot(0, self.view.fit_all)

    def _retire(self) -> None:
        """Let go of the previous document's signals and controller (a running analysis is dropped)."""
        if self.signals is not None:
            self.signals.detach()
            self.signals.deleteLater()  # after the panels let go of it in set_document
        if self.controller is not None:
            for signal in (self.controller.resultReady, self.controller.currentValueChanged,
                           self.controller.busyChanged, self.controller.staleChanged, self.pole_map.valueDragged, self.pole_map.valueCommitted):
                signal.disconnect()
            self.controller.dispose()
            self.controller.deleteLater()

    def _show_verdict(self, result) -> None:
        self._verdict_shown = self._verdict_text(result)
        self.verdict.setText(self._verdict_shown)
        self.verdict.setStyleSheet(self._verdict_style(result))

    def _mark_stale(self) -> None:
        """The moment the model changes, the headline and the analysis docks say that what they
        show is out of date; the next result clears the marks."""
        stale = self.controller.stale and self.controller.result is not None
        for key, panel in self.stale_docks.items():
            if key in self.docks:
                self.docks[key].setWindowTitle(panel.TITLE + (" · out of date" if stale else ""))
        if not stale:
            return
        doing = "Analysing the change" if self.controller.busy else "Stopped: out of date"
        self.verdict.setText(f"{doing} (last: {self._verdict_shown})" if self._verdict_shown else doing)
        self.verdict.setStyleSheet(f"color: {colour('muted').name()}; padding: 0 6px;")

    @staticmethod
    def _verdict_text(result) -> str:
        """The headline readied on the worker (stability AND requirements), or what stopped it."""
        if result.report is None:
            return result.message or ""
        return str(result.display.get("headline", ""))

    @staticmethod
    def _verdict_style(result) -> str:
        """Stable (for every toleranced value) and every requirement met (or none set): the stable
        colour; stable with a requirement not met or not judged, or not robustly: the warning colour;
        not stable: the unstable colour."""
        report = result.report
        if report is None or report.nominal is None:
            meaning = "warning"
        elif not report.nominal.stable:
            meaning = "unstable"
        else:
            met = result.display.get("requirements_met")
            required = not (result.requirements.is_empty and report.decay is None)
            robust = result.display.get("robust") is not False
            meaning = "stable" if (met is True or not required) and robust else "warning"
        return f"color: {colour(meaning).name()}; font-weight: 600; padding: 0 6px;"

    def _on_settings_changed(self, what: str) -> None:
        if what == "name":
            self._update_title()

    def _update_title(self) -> None:
        file_name = self.files.path.name if self.files.path else "not saved"
        self.setWindowTitle(f"{self.diagram.name} — {file_name}[*] — {APP_NAME}")
        self.setWindowModified(not self.undo_stack.isClean())

    # -- edit actions -----------------------------------------------------------------------------
    def cut(self) -> None:
        """Copy the selection, then delete it (one undo step)."""
        self.editor.copy_selection()
        self.editor.delete_selection()

    def select_all(self) -> None:
        """Select every node and wire on the canvas."""
        for item in self.scene.items():
            if item.flags() & item.GraphicsItemFlag.ItemIsSelectable:
                item.setSelected(True)

    def rename_project(self) -> None:
        """Edit > Project Name…"""
        name, ok = QInputDialog.getText(self, "Project name", "Name of the project:", text=self.diagram.name)
        if ok and name.strip() and name.strip() != self.diagram.name:
            try:
                push(self.undo_stack, RenameCommand(self.diagram, name.strip()))
            except LoopwrightError as err:
                self.statusBar().showMessage(str(err), 8000)

    # -- window life ------------------------------------------------------------------------------
    def _restore_window_state(self) -> None:
        settings = QSettings()
        geometry = settings.value("window/geometry")
        state = settings.value("window/state")
        if geometry is not None:
            self.restoreGeometry(geometry)
        if state is not None:
            self.restoreState(state)

    def closeEvent(self, event: QCloseEvent) -> None:
        if not self.files.confirm_discard():
            event.ignore()
            return
        self.files.forget_recoveries()
        self.files.autosave_timer.stop()
        if self.controller is not None:
            self.controller.dispose()
        if not self.rendering:
            settings = QSettings()
            settings.setValue("window/geometry", self.saveGeometry())
            settings.setValue("window/state", self.saveState())
        event.accept()
