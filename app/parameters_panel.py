"""The parameters panel: parameter values, the tuning choice, the decay requirement, input and output.

The table lists every parameter that has a value and every name typed in a block; a name used in
a block without a value is flagged (typing a nominal gives it one). Nominal, min and max are
validated as typed numbers and committed through undoable commands; the "Tune" column picks the
tuning parameter. Below: the decay requirement (mode and value) and the analysis input/output.
"""
from __future__ import annotations

from dataclasses import replace
from functools import lru_cache

from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtGui import QBrush, QUndoStack
from PySide6.QtWidgets import (
    QAbstractItemView,
    QButtonGroup,
    QComboBox,
    QFormLayout,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QRadioButton,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from app.document.commands import SetAnalysisCommand, SetParameterCommand, SetTuningParameterCommand, push
from app.theme import error_style, figure_font, meaning_colour
from core.algebra.expression import expression_parameters
from core.algebra.numbers import read_value
from core.errors import ExpressionError, LoopwrightError
from core.model.diagram import DECAY_WORDS, Diagram, Parameter

COLUMNS = ("Parameter", "Nominal", "Min", "Max", "Tolerance", "Tune")
FIELDS = {1: "nominal", 2: "minimum", 3: "maximum"}
TOLERANCE_COLUMN, TUNE_COLUMN = 4, 5
DECAY_MODES = tuple((mode, w.name[:1].upper() + w.name[1:], w.unit, w.rule) for mode, w in DECAY_WORDS.items())


def number_text(value: float) -> str:
    """A parameter value as typed: ``2``, ``0.25``, ``1e-06``."""
    return f"{value:.12g}"


@lru_cache(maxsize=4096)
def block_names(num: str, den: str) -> frozenset[str]:
    """Parameter names typed in one block's numerator and denominator, parsed once per pair of
    texts (every model change refreshes the panel; re-parsing all blocks each time was ~12 ms on a
    30-node loop). Raises LoopwrightError on invalid text.

    >>> sorted(block_names("Kp (s + 1)", "Ti s"))
    ['Kp', 'Ti']
    """
    return frozenset(expression_parameters(num) | expression_parameters(den))


def tolerance_text(tolerance: tuple[float, float] | None) -> str:
    """``0.08 .. 0.12``, or empty for none."""
    return "" if tolerance is None else f"{number_text(tolerance[0])} .. {number_text(tolerance[1])}"


def read_tolerance(text: str, where: str | None = None) -> tuple[float, float] | None:
    """``lo .. hi`` (or ``lo..hi``) as a pair, empty text as no tolerance; E112 for anything else.

    >>> read_tolerance("0.08 .. 0.12"), read_tolerance("  ")
    ((0.08, 0.12), None)
    """
    if not text.strip():
        return None
    low, dots, high = text.partition("..")
    if not dots:
        raise ExpressionError("E112", f"a tolerance is typed as low .. high, e.g. 0.08 .. 0.12 (got {text.strip()[:40]!r})",
                              where=where)
    return read_value(low.strip(), where), read_value(high.strip(), where)


def read_number(text: str, where: str | None = None) -> float:
    """A typed number (``,`` accepted as a decimal comma); ExpressionError E112/E105 for text that
    is not one or is ambiguous, such as ``1,000`` (:func:`core.algebra.numbers.read_value`)."""
    return read_value(text, where)


class ParametersPanel(QWidget):
    """Bind it to a document with :meth:`set_document`; it follows the model's signals."""

    message = Signal(str)

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self.diagram: Diagram | None = None
        self.undo_stack: QUndoStack | None = None
        self._signals = None
        self._filling = False
        self._stale = False

        self.table = QTableWidget(0, len(COLUMNS))
        self.table.setHorizontalHeaderLabels(COLUMNS)
        self.table.verticalHeader().hide()
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.DoubleClicked
                                   | QAbstractItemView.EditTrigger.EditKeyPressed
                                   | QAbstractItemView.EditTrigger.AnyKeyPressed)
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        for column in range(1, len(COLUMNS)):
            header.setSectionResizeMode(column, QHeaderView.ResizeMode.ResizeToContents)
        self.table.setFont(figure_font(9.5))
        self.tune_group = QButtonGroup(self)
        self.tune_group.setExclusive(True)
        self.problem = QLabel()
        self.problem.setStyleSheet(error_style())
        self.problem.setWordWrap(True)
        self.problem.hide()

        self.decay_mode = QComboBox()
        for mode, title, unit, _ in DECAY_MODES:
            self.decay_mode.addItem(f"{title} ({unit})", mode)
        self.decay_value = QLineEdit()
        self.decay_value.setFont(figure_font(9.5))
        self.decay_value.setPlaceholderText("0 = no requirement")
        self.decay_note = QLabel()
        self.decay_note.setStyleSheet("color: palette(placeholder-text); font-size: 8.5pt;")
        self.input_choice = QComboBox()
        self.output_choice = QComboBox()

        decay_row = QHBoxLayout()
        decay_row.addWidget(self.decay_value, 1)
        decay_row.addWidget(self.decay_note, 2)
        form = QFormLayout()
        form.addRow("Decay requirement", self.decay_mode)
        form.addRow("Value", decay_row)
        form.addRow("Analysis input", self.input_choice)
        form.addRow("Analysis output", self.output_choice)
        layout = QVBoxLayout(self)
        layout.addWidget(self.table, 1)
        layout.addWidget(self.problem)
        layout.addLayout(form)

        self.table.itemChanged.connect(self._on_item_changed)
        self.table.itemDelegate().closeEditor.connect(lambda *_: self._stale and self._refill_later())
        self.tune_group.idToggled.connect(self._on_tune_toggled)
        self.decay_mode.activated.connect(self._commit_decay)
        self.decay_value.editingFinished.connect(self._commit_decay)
        self.input_choice.activated.connect(lambda: self._commit_io("input", self.input_choice))
        self.output_choice.activated.connect(lambda: self._commit_io("output", self.output_choice))

    # -- binding ----------------------------------------------------------------------------------
    def set_document(self, diagram: Diagram, signals, undo_stack: QUndoStack) -> None:
        """Follow another diagram (after New or Open)."""
        if self._signals is not None:
            self._signals.changed.disconnect(self.refresh)
        self.diagram, self._signals, self.undo_stack = diagram, signals, undo_stack
        signals.changed.connect(self.refresh)
        self.refresh()

    # -- filling ----------------------------------------------------------------------------------
    def names(self) -> list[str]:
        """Rows in order: parameters with values first (model order), then names missing a value."""
        used = self._used_names()
        return list(self.diagram.parameters) + sorted(used - set(self.diagram.parameters))

    def _used_names(self) -> set[str]:
        """Every parameter name typed in a block (as Diagram.parameter_names_in_blocks, cached)."""
        try:
            return set().union(*(block_names(n.num, n.den) for n in self.diagram.nodes.values()
                                 if n.kind == "block"))
        except LoopwrightError:  # a block text the model holds always parses; stay safe anyway
            return set()

    def refresh(self) -> None:
        """Rebuild from the model (cheap: a handful of rows)."""
        if self.diagram is None:
            return
        if self.table.state() == QAbstractItemView.State.EditingState:
            self._stale = True  # rebuilt when the editor closes
            return
        self._stale = False
        self._filling = True
        try:
            self._fill_table()
            self._fill_decay()
            self._fill_io()
        finally:
            self._filling = False

    def _fill_table(self) -> None:
        d, used = self.diagram, self._used_names()
        names = self.names()
        if names != self._row_names():
            self._build_rows(names)
        for row, name in enumerate(names):
            p = d.parameters.get(name)
            title = self.table.item(row, 0)
            title.setForeground(QBrush(meaning_colour("unstable")) if p is None else self.palette().text())
            if p is None:
                title.setText(f"{name}  — no value")
                title.setToolTip(f"{name} is used in a block but has no value: type a nominal value")
            elif name not in used:
                title.setText(f"{name}  (unused)")
                title.setToolTip(f"{name} has a value but no block uses it")
            else:
                title.setText(name)
                title.setToolTip("")
            for column, field in FIELDS.items():
                self.table.item(row, column).setText(number_text(getattr(p, field)) if p else "")
            self.table.item(row, TOLERANCE_COLUMN).setText(tolerance_text(p.tolerance) if p else "")
            radio = self.tune_group.button(row)
            radio.setEnabled(p is not None)
            radio.setChecked(d.tuning_parameter == name)
        if d.tuning_parameter is None and self.tune_group.checkedButton() is not None:
            self.tune_group.setExclusive(False)
            self.tune_group.checkedButton().setChecked(False)
            self.tune_group.setExclusive(True)

    def _row_names(self) -> list[str]:
        return [self.table.item(row, 0).data(Qt.ItemDataRole.UserRole) for row in range(self.table.rowCount())]

    def _build_rows(self, names: list[str]) -> None:
        for button in self.tune_group.buttons():
            self.tune_group.removeButton(button)
        self.table.clearContents()
        self.table.setRowCount(len(names))
        for row, name in enumerate(names):
            title = QTableWidgetItem(name)
            title.setFlags(Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemIsSelectable)
            title.setData(Qt.ItemDataRole.UserRole, name)
            self.table.setItem(row, 0, title)
            for column in (*FIELDS, TOLERANCE_COLUMN):
                item = QTableWidgetItem()
                item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                self.table.setItem(row, column, item)
            holder = QWidget()
            box = QHBoxLayout(holder)
            box.setContentsMargins(0, 0, 0, 0)
            radio = QRadioButton()
            radio.setToolTip(f"Analyse the stable range over {name}")
            box.addWidget(radio, 0, Qt.AlignmentFlag.AlignCenter)
            self.tune_group.addButton(radio, row)
            tolerance = self.table.item(row, TOLERANCE_COLUMN)
            tolerance.setToolTip(f"The interval {name}'s true value lies in, e.g. 0.08 .. 0.12: the robust range "
                                 "then holds for every value in it (empty: none)")
            self.table.setCellWidget(row, TUNE_COLUMN, holder)

    def _fill_decay(self) -> None:
        a = self.diagram.analysis
        self.decay_mode.setCurrentIndex(max(0, self.decay_mode.findData(a.decay_mode)))
        if not self.decay_value.hasFocus():
            self.decay_value.setText(number_text(a.decay_value))
        self.decay_note.setText(next(note for mode, _, _, note in DECAY_MODES if mode == a.decay_mode))

    def _fill_io(self) -> None:
        d = self.diagram
        for key, combo, kind in (("input", self.input_choice, "input"), ("output", self.output_choice, "output")):
            current = getattr(d.analysis, key)
            combo.clear()
            combo.addItem("(not set)", None)
            for node in d.nodes.values():
                if node.kind == kind or node.id == current:
                    combo.addItem(node.title if node.title == node.id else f"{node.title} ({node.id})", node.id)
            combo.setCurrentIndex(max(0, combo.findData(current)))

    # -- commits ----------------------------------------------------------------------------------
    def _push(self, command) -> bool:
        try:
            push(self.undo_stack, command)
        except LoopwrightError as err:
            self._complain(str(err))
            return False
        self.problem.hide()
        return True

    def _complain(self, text: str) -> None:
        self.problem.setText(text)
        self.problem.show()
        self.message.emit(text)

    def _on_item_changed(self, item: QTableWidgetItem) -> None:
        if self._filling or item.column() not in (*FIELDS, TOLERANCE_COLUMN):
            return
        name = self.table.item(item.row(), 0).data(Qt.ItemDataRole.UserRole)
        field = FIELDS.get(item.column(), "tolerance")
        old = self.diagram.parameters.get(name) or Parameter(name)
        read = read_tolerance if field == "tolerance" else read_number
        try:
            value = read(item.text(), where=f"parameter {name}, {field}")
        except LoopwrightError as err:
            self._complain(str(err))
            self._refill_later()
            return
        new = replace(old, **{field: value})  # every other field, the tolerance too, kept
        if field == "nominal" and name not in self.diagram.parameters:
            new.minimum, new.maximum = min(old.minimum, value), max(old.maximum, value if value else 1.0)
        if new == self.diagram.parameters.get(name):
            return
        if not self._push(SetParameterCommand(self.diagram, new)):
            self._refill_later()

    def _refill_later(self) -> None:
        QTimer.singleShot(0, self.refresh)

    def _on_tune_toggled(self, row: int, checked: bool) -> None:
        if self._filling or not checked:
            return
        name = self.table.item(row, 0).data(Qt.ItemDataRole.UserRole)
        if name != self.diagram.tuning_parameter:
            self._push(SetTuningParameterCommand(self.diagram, name))

    def _commit_decay(self) -> None:
        if self._filling or self.diagram is None:
            return
        a = self.diagram.analysis
        mode = self.decay_mode.currentData()
        try:
            value = read_number(self.decay_value.text() or "0", where="decay requirement")
        except LoopwrightError as err:
            self._complain(str(err))
            return
        changes = {k: v for k, v in (("decay_mode", mode), ("decay_value", value)) if getattr(a, k) != v}
        if changes:
            self._push(SetAnalysisCommand(self.diagram, **changes))
        self.decay_note.setText(next(note for m, _, _, note in DECAY_MODES if m == mode))

    def _commit_io(self, key: str, combo: QComboBox) -> None:
        node_id = combo.currentData()
        if node_id != getattr(self.diagram.analysis, key):
            self._push(SetAnalysisCommand(self.diagram, **{key: node_id}))
