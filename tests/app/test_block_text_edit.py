"""Typed block texts and the parameters they bring or leave: one undoable command per edit.

Reference for the analyses: the characteristic polynomial of the conveyor example's single loop,
1 + C A P H = 0 cleared of denominators (Nise, *Control Systems Engineering*, ch. 6, from memory),
built with sympy from the block texts.
"""
import pytest
import sympy
from PySide6.QtGui import QUndoStack

from app.document.commands import push
from app.document.editing import block_text_command
from core.algebra.polynomial import mpoly_text
from core.analysis.report import check_project
from core.errors import ExpressionError
from core.model.diagram import Parameter

s, K = sympy.symbols("s K")


def loop_characteristic(C_num):
    """Sympy's characteristic polynomial of the conveyor loop with controller numerator C_num / s."""
    return sympy.expand(s * (s + 8) * (s + sympy.Rational(3, 5)) * (s + 5) * (s + 25) + C_num * 8 * 3 * 25)


def characteristic_of(diagram):
    red = check_project(diagram).reduction
    names = red.characteristic.context().names()
    return sympy.expand(sympy.sympify(mpoly_text(red.characteristic).replace("^", "**"),
                                      locals={n: sympy.Symbol(n) for n in names}))


def edit(diagram, stack, node, num, den, **kwargs):
    command = block_text_command(diagram, node, num, den, **kwargs)
    assert command is not None
    push(stack, command)


def test_a_typo_then_its_fix_restores_parameters_and_tuning(diagram):
    stack = QUndoStack()
    diagram.set_parameter(Parameter("K", 2.0, 0.0, 20.0))
    before = (dict(diagram.parameters), diagram.tuning_parameter)
    edit(diagram, stack, "C", "Kk*(s+1)", "s")  # K mistyped: the only user of K
    assert set(diagram.parameters) == {"Kk"} and diagram.tuning_parameter == "Kk"
    assert diagram.parameters["Kk"].maximum == 20.0  # a one-for-one swap keeps the values
    edit(diagram, stack, "C", "K*(s+1)", "s")
    assert (dict(diagram.parameters), diagram.tuning_parameter) == before
    assert stack.count() == 2  # one undo step per edit
    assert characteristic_of(diagram) == loop_characteristic(K * (s + 1))
    stack.undo()
    assert set(diagram.parameters) == {"Kk"} and diagram.tuning_parameter == "Kk"
    stack.undo()
    assert (dict(diagram.parameters), diagram.tuning_parameter) == before
    assert diagram.nodes["C"].num == "K*(s+1)"


def test_a_new_name_from_a_typo_is_removed_when_the_text_is_fixed(diagram):
    stack = QUndoStack()
    edit(diagram, stack, "C", "K*(Tn*s+1)", "s")  # a new parameter Tn, K kept
    assert set(diagram.parameters) == {"K", "Tn"} and diagram.tuning_parameter == "K"
    edit(diagram, stack, "C", "K*(s+1)", "s")
    assert set(diagram.parameters) == {"K"} and diagram.tuning_parameter == "K"
    assert characteristic_of(diagram) == loop_characteristic(K * (s + 1))


@pytest.mark.parametrize("den", ["s^2 + 3ss", "Tis + 1", "s2 + 1"])
def test_a_name_with_s_run_into_it_changes_nothing(diagram, den):
    stack = QUndoStack()
    before = (dict(diagram.parameters), diagram.tuning_parameter, diagram.nodes["P"].den)
    with pytest.raises(ExpressionError) as info:
        block_text_command(diagram, "P", "3", den)
    assert info.value.code == "E111" and "did you mean" in info.value.message
    assert (dict(diagram.parameters), diagram.tuning_parameter, diagram.nodes["P"].den) == before
    assert stack.count() == 0


def test_a_name_confirmed_as_meant_is_declared_in_the_same_step(diagram):
    stack = QUndoStack()
    edit(diagram, stack, "P", "3", "(Ts+0.6)*(s+5)", confirmed={"Ts"})
    assert "Ts" in diagram.parameters and diagram.tuning_parameter == "K"
    Ts = sympy.Symbol("Ts")
    expected = sympy.expand(s * (s + 8) * (Ts + sympy.Rational(3, 5)) * (s + 5) * (s + 25) + K * (s + 1) * 600)
    assert characteristic_of(diagram) == expected
    stack.undo()
    assert "Ts" not in diagram.parameters and diagram.nodes["P"].den == "(s+0.6)*(s+5)"


def test_a_parameter_another_block_still_uses_is_kept(diagram):
    stack = QUndoStack()
    edit(diagram, stack, "A", "8*K", "s+8")  # K now in two blocks
    edit(diagram, stack, "C", "s+1", "s")  # C no longer uses K, A still does
    assert set(diagram.parameters) == {"K"} and diagram.tuning_parameter == "K"


def test_the_issue_case_leaves_no_panel_on_an_error(diagram):
    # no tuning parameter yet; a typo name made the tuning parameter used to survive the fix
    stack = QUndoStack()
    diagram.set_tuning_parameter(None)
    edit(diagram, stack, "P", "3", "(s+0.6)*(s+5) + Kx*0")
    assert diagram.tuning_parameter == "Kx"
    edit(diagram, stack, "P", "3", "(s+0.6)*(s+5)")
    assert "Kx" not in diagram.parameters and diagram.tuning_parameter is None
    check_project(diagram)  # analyses without error
    assert characteristic_of(diagram) == loop_characteristic(K * (s + 1))


def test_unchanged_text_makes_no_command(diagram):
    node = diagram.nodes["C"]
    assert block_text_command(diagram, "C", node.num, node.den) is None
