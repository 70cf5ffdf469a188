"""The parameters panel: values validated and undoable, missing values flagged, tuning choice,
decay requirement and analysis input/output."""
from __future__ import annotations

import pytest
from PySide6.QtCore import Qt
from PySide6.QtGui import QUndoStack

from app.bridge import ModelSignals
from app.parameters_panel import ParametersPanel
from core.model.diagram import Parameter


@pytest.fixture
def setup(qtbot, make_loop):
    d = make_loop()
    d.update_node("P", den="s*(s+1)*(T s+1)")  # T is used but has no value yet
    stack = QUndoStack()
    panel = ParametersPanel()
    qtbot.addWidget(panel)
    panel.set_document(d, ModelSignals(d), stack)
    panel.show()
    return d, stack, panel


def row_of(panel, name: str) -> int:
    for row in range(panel.table.rowCount()):
        if panel.table.item(row, 0).data(Qt.ItemDataRole.UserRole) == name:
            return row
    raise AssertionError(name)


def test_rows_and_missing_value_flag(setup):
    _d, _stack, panel = setup
    assert panel.names() == ["K", "T"]
    missing = panel.table.item(row_of(panel, "T"), 0)
    assert "no value" in missing.text()
    assert not panel.tune_group.button(row_of(panel, "T")).isEnabled()
    assert panel.tune_group.button(row_of(panel, "K")).isChecked()


def test_typing_a_nominal_gives_a_missing_parameter_its_value(setup):
    d, stack, panel = setup
    panel.table.item(row_of(panel, "T"), 1).setText("0.5")
    assert d.parameters["T"] == Parameter("T", 0.5, 0.0, 10.0)
    assert "no value" not in panel.table.item(row_of(panel, "T"), 0).text()
    stack.undo()
    assert "T" not in d.parameters


def test_invalid_values_are_refused_and_the_cell_restored(qtbot, setup):
    d, stack, panel = setup
    row = row_of(panel, "K")
    panel.table.item(row, 1).setText("two")
    assert panel.problem.isVisible() and "not a number" in panel.problem.text()
    panel.table.item(row, 2).setText("20")  # min above max
    assert "E304" in panel.problem.text()
    assert d.parameters["K"] == Parameter("K", 2.0, 0.0, 10.0) and stack.count() == 0
    qtbot.waitUntil(lambda: panel.table.item(row, 2).text() == "0")


def test_values_are_undoable(setup):
    d, stack, panel = setup
    panel.table.item(row_of(panel, "K"), 3).setText("12.5")
    assert d.parameters["K"].maximum == 12.5
    stack.undo()
    assert d.parameters["K"].maximum == 10.0
    assert panel.table.item(row_of(panel, "K"), 3).text() == "10"


def test_tuning_choice(qtbot, setup):
    d, stack, panel = setup
    panel.table.item(row_of(panel, "T"), 1).setText("0.5")
    qtbot.mouseClick(panel.tune_group.button(row_of(panel, "T")), Qt.MouseButton.LeftButton)
    assert d.tuning_parameter == "T"
    stack.undo()
    assert d.tuning_parameter == "K" and panel.tune_group.button(row_of(panel, "K")).isChecked()


def test_decay_requirement(qtbot, setup):
    d, _stack, panel = setup
    panel.decay_mode.setCurrentIndex(panel.decay_mode.findData("settling"))
    panel.decay_mode.activated.emit(panel.decay_mode.currentIndex())
    assert d.analysis.decay_mode == "settling"
    assert "rule of thumb" in panel.decay_note.text()
    panel.decay_value.setFocus()
    panel.decay_value.selectAll()
    qtbot.keyClicks(panel.decay_value, "4")
    qtbot.keyClick(panel.decay_value, Qt.Key.Key_Return)
    assert d.analysis.decay_value == 4.0
    panel.decay_value.setText("-1")
    panel.decay_value.editingFinished.emit()
    assert d.analysis.decay_value == 4.0 and "E304" in panel.problem.text()


def test_analysis_input_output_choosers(setup):
    d, stack, panel = setup
    assert panel.input_choice.currentData() == "r" and panel.output_choice.currentData() == "y"
    panel.output_choice.setCurrentIndex(panel.output_choice.findData(None))
    panel.output_choice.activated.emit(panel.output_choice.currentIndex())
    assert d.analysis.output is None
    stack.undo()
    assert d.analysis.output == "y" and panel.output_choice.currentData() == "y"


def test_names_follow_block_edits_with_parsed_texts_cached(setup):
    d, _stack, panel = setup
    # reference: the model's own scan of every block text (no cache)
    assert set(panel.names()) == d.parameter_names_in_blocks() | set(d.parameters)
    d.update_node("P", den="s*(s+1)*(Tm s+1)")  # T renamed: T leaves the list, Tm arrives
    assert panel.names() == ["K", "Tm"] and d.parameter_names_in_blocks() == {"K", "Tm"}
    d.update_node("P", den="s*(s+1)*(T s+1)")  # back to a text parsed before
    assert panel.names() == ["K", "T"]


def test_a_tolerance_is_typed_kept_through_edits_and_undoable(setup):
    from app.parameters_panel import TOLERANCE_COLUMN
    d, stack, panel = setup
    panel.table.item(row_of(panel, "T"), 1).setText("0.1")
    row = row_of(panel, "T")
    panel.table.item(row, TOLERANCE_COLUMN).setText("0.08 .. 0.12")
    assert d.parameters["T"].tolerance == (0.08, 0.12)
    panel.table.item(row, 3).setText("2")  # another field edited: the tolerance stays
    assert d.parameters["T"].tolerance == (0.08, 0.12) and d.parameters["T"].maximum == 2.0
    stack.undo()
    stack.undo()
    assert d.parameters["T"].tolerance is None
    panel.table.item(row, TOLERANCE_COLUMN).setText("0.12 .. 0.08")  # inverted: the model refuses it
    assert "E306" in panel.problem.text() and d.parameters["T"].tolerance is None
    panel.table.item(row, TOLERANCE_COLUMN).setText("0.08 to 0.12")
    assert "low .. high" in panel.problem.text()
