"""The inspector: parse-as-you-type block fields, commits through undoable commands, sums, in/out."""
from __future__ import annotations

import numpy as np
import pytest
import sympy
from PySide6.QtCore import Qt
from PySide6.QtGui import QUndoStack

from app.bridge import ModelSignals
from app.inspector import Inspector, check_transfer, factored_text
from core.io.project_file import project_to_dict
from core.model.diagram import Diagram, Node, Parameter


@pytest.fixture
def setup(qtbot):
    d = Diagram("inspector test")
    for node in (Node("r", "input"), Node("e", "sum", signs="+-", x=100),
                 Node("C", "block", role="controller", num="1", den="1", x=200),
                 Node("P", "block", role="plant", num="1", den="s+1", x=300), Node("y", "output", x=400)):
        d.add_node(node)
    d.connect("r", "e", 0)
    stack = QUndoStack()
    signals = ModelSignals(d)
    inspector = Inspector()
    qtbot.addWidget(inspector)
    inspector.set_document(d, signals, stack)
    inspector.show()
    return d, stack, inspector


def type_into(qtbot, edit, text: str) -> None:
    edit.setFocus()
    edit.selectAll()
    qtbot.keyClicks(edit, text)


def test_garbage_shows_error_with_column_and_leaves_model(qtbot, setup):
    d, stack, inspector = setup
    inspector.show_node("P")
    before = project_to_dict(d)
    type_into(qtbot, inspector.den.edit, "s*(s+")
    assert inspector.den.error.isVisible()
    # "s*(s+" ends after column 5: the parser expects an operand at column 6
    assert "column 6" in inspector.den.error.text()
    assert inspector.den.error.text().startswith("E102")
    qtbot.keyClick(inspector.den.edit, Qt.Key.Key_Return)
    inspector.den.edit.clearFocus()
    assert project_to_dict(d) == before
    assert stack.count() == 0


def test_error_clears_when_text_becomes_valid(qtbot, setup):
    d, _stack, inspector = setup
    inspector.show_node("P")
    type_into(qtbot, inspector.num.edit, "2 s +")
    assert inspector.num.error.isVisible()
    qtbot.keyClicks(inspector.num.edit, " 1")
    assert not inspector.num.error.isVisible()
    assert d.node("P").num == "1"  # typing alone never reaches the model


def test_enter_commits_and_adds_new_parameter_as_tuning_in_one_step(qtbot, setup):
    d, stack, inspector = setup
    inspector.show_node("C")
    type_into(qtbot, inspector.num.edit, "Kp (s + a)")
    qtbot.keyClick(inspector.num.edit, Qt.Key.Key_Return)
    assert d.node("C").num == "Kp (s + a)"
    assert d.parameters["Kp"] == Parameter("Kp", 1.0, 0.0, 10.0)
    assert d.parameters["a"] == Parameter("a", 1.0, 0.0, 10.0)
    assert d.tuning_parameter == "Kp"  # first new name (sorted) becomes the tuning parameter
    assert stack.count() == 1
    stack.undo()
    assert d.node("C").num == "1" and d.parameters == {} and d.tuning_parameter is None


def test_existing_tuning_parameter_is_kept(qtbot, setup):
    d, _stack, inspector = setup
    d.set_parameter(Parameter("K", 2.0, 0.0, 5.0))
    d.set_tuning_parameter("K")
    inspector.show_node("C")
    type_into(qtbot, inspector.num.edit, "K T")
    qtbot.keyClick(inspector.num.edit, Qt.Key.Key_Return)
    assert d.tuning_parameter == "K" and d.parameters["K"].nominal == 2.0 and "T" in d.parameters


def test_focus_change_to_other_node_commits_pending_valid_text(qtbot, setup):
    d, _stack, inspector = setup
    inspector.show_node("P")
    inspector.den.edit.setText("s^2 + 2 s + 5")
    inspector.show_nodes(["C"])
    assert d.node("P").den == "s^2 + 2 s + 5"


def test_factored_view_matches_sympy():
    text = factored_text("2 s + 2", "s^3 + 3 s^2 + 2 s")
    # reference: numpy.roots of s^3 + 3s^2 + 2s are 0, -1, -2, so the factors are s, s + 1, s + 2
    assert sorted(np.roots([1, 3, 2, 0]).real.round(9)) == [-2.0, -1.0, 0.0]
    assert text == "2·(s + 1) / (s·(s + 1)·(s + 2))"
    s, K = sympy.symbols("s K")
    # reference: sympy.factor_list finds K and three linear factors in s
    assert len(sympy.factor_list(K * s**3 + 3 * K * s**2 + 2 * K * s)[1]) == 4
    assert factored_text("1", "K s^3 + 3 K s^2 + 2 K s") == "1 / (K·s·(s + 1)·(s + 2))"


def test_check_transfer_blames_the_right_field():
    assert set(check_transfer("K(", "s")) == {"num"}
    assert set(check_transfer("K", "0")) == {"den"}
    assert check_transfer("K", "s+1") == {}


def test_undo_refreshes_the_fields(qtbot, setup):
    d, stack, inspector = setup
    inspector.show_node("P")
    type_into(qtbot, inspector.den.edit, "s + 4")
    qtbot.keyClick(inspector.den.edit, Qt.Key.Key_Return)
    assert d.node("P").den == "s + 4"
    stack.undo()
    assert inspector.den.edit.text() == "s+1"


def test_sum_signs_and_ports(qtbot, setup):
    d, _stack, inspector = setup
    inspector.show_node("e")
    sign = inspector.signs_row.findChild(type(inspector.add_port), "sign1")
    qtbot.mouseClick(sign, Qt.MouseButton.LeftButton)
    assert d.node("e").signs == "++"
    qtbot.mouseClick(inspector.add_port, Qt.MouseButton.LeftButton)
    assert d.node("e").signs == "+++"
    d.connect("P", "e", 2)
    qtbot.mouseClick(inspector.remove_port, Qt.MouseButton.LeftButton)
    assert d.node("e").signs == "+++"  # refused: input 3 still has a wire
    assert inspector.refusal.isVisible() and "E302" in inspector.refusal.text()


def test_use_as_analysis_input_and_output(qtbot, setup):
    d, stack, inspector = setup
    inspector.show_node("r")
    assert inspector.io_button.text() == "Use as analysis input"
    qtbot.mouseClick(inspector.io_button, Qt.MouseButton.LeftButton)
    assert d.analysis.input == "r" and not inspector.io_button.isEnabled()
    inspector.show_node("y")
    qtbot.mouseClick(inspector.io_button, Qt.MouseButton.LeftButton)
    assert d.analysis.output == "y"
    stack.undo()
    assert d.analysis.output is None


def test_name_and_role(qtbot, setup):
    d, stack, inspector = setup
    inspector.show_node("P")
    type_into(qtbot, inspector.name, "belt drive")
    qtbot.keyClick(inspector.name, Qt.Key.Key_Return)
    assert d.node("P").label == "belt drive"
    inspector.role.setCurrentIndex(inspector.role.findData("actuator"))
    inspector.role.activated.emit(inspector.role.currentIndex())
    assert d.node("P").role == "actuator"
    assert stack.count() == 2


def test_a_new_name_is_flagged_where_it_is_typed(qtbot, setup):
    _d, stack, inspector = setup
    inspector.show_node("P")
    type_into(qtbot, inspector.num.edit, "Kp (Tn s + 1)")
    text = inspector.num.error.text()
    # columns counted by hand in "Kp (Tn s + 1)"
    assert inspector.num.error.isVisible() and "new parameter 'Kp' (column 1)" in text
    assert "new parameter 'Tn' (column 5)" in text
    assert stack.count() == 0


def test_a_name_with_s_run_into_it_is_refused_and_can_be_declared(qtbot, setup):
    d, stack, inspector = setup
    inspector.show_node("P")
    type_into(qtbot, inspector.den.edit, "Ts + 1")
    assert inspector.den.error.text().startswith("E111") and "did you mean T*s?" in inspector.den.error.text()
    qtbot.keyClick(inspector.den.edit, Qt.Key.Key_Return)
    assert d.nodes["P"].den == "s+1" and "Ts" not in d.parameters
    assert inspector.declare.isVisibleTo(inspector) and "Ts" in inspector.declare.text()
    inspector.declare.click()
    assert d.nodes["P"].den == "Ts + 1" and "Ts" in d.parameters
    assert stack.count() == 1


def test_factored_view_of_a_high_power_is_exact_and_quick_to_build():
    # reference: sympy.factor_list of (s + K)^12 (1/(s+1)) is one factor s + K to the 12th
    s, K = sympy.symbols("s K")
    assert sympy.factor_list(sympy.expand((s + K) ** 12))[1] == [(s + K, 12)]
    assert factored_text("(s + K)^12", "s + 1") == "(s + K)^12 / (s + 1)"
    # a degree-199 power is factored by flint, not expanded and refactored term by term
    assert factored_text("(s + K)^199", "1") == "(s + K)^199"


def test_factored_view_names_a_long_irreducible_factor_by_its_degree():
    # reference: sympy finds (s + K)^20 + s irreducible over the rationals (one factor, power 1)
    s, K = sympy.symbols("s K")
    assert len(sympy.factor_list(sympy.expand((s + K) ** 20 + s))[1]) == 1
    assert factored_text("(s + K)^20 + s", "1") == "[degree 20 in s, 22 terms]"
