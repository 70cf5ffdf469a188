"""Undo commands against the model: every command's undo gives back exactly the project it started
from (reference: the project file's own serialisation, core.io.project_file.project_to_dict), and a
refused edit changes neither the model nor the undo stack."""
from __future__ import annotations

import pytest
from conftest import sensor_feedback_loop
from PySide6.QtGui import QUndoStack

from app.document.commands import (
    AddNodeCommand,
    ConnectCommand,
    DisconnectCommand,
    EditNodeCommand,
    Macro,
    MoveNodesCommand,
    RemoveNodeCommand,
    RemoveParameterCommand,
    RenameCommand,
    SetAnalysisCommand,
    SetBendsCommand,
    SetParameterCommand,
    SetTuningParameterCommand,
    push,
)
from core.errors import LoopwrightError
from core.io.project_file import project_to_dict
from core.model.diagram import Diagram, Node, Parameter


def loop() -> Diagram:
    """An invented loop: controller, plant, sensor on the feedback path."""
    d = sensor_feedback_loop("test loop", ("K", "1"), "T*s + 1",
                             [Parameter("K", 2.0, 0.0, 20.0), Parameter("T", 0.5, 0.1, 5.0)])
    d.set_tuning_parameter("K")
    return d


def commands_for(d: Diagram):
    return [
        AddNodeCommand(d, Node("G", "block", 10, 10, num="2", den="s")),
        RemoveNodeCommand(d, "P"),
        RemoveNodeCommand(d, "e"),
        MoveNodesCommand(d, {"C": ((200, 0), (220, 40)), "H": ((280, 120), (300, 160))}),
        EditNodeCommand(d, "C", num="K*(s + 1)", den="s", label="PI"),
        EditNodeCommand(d, "e", signs="++"),
        EditNodeCommand(d, "H", flipped=False),
        DisconnectCommand(d, "C->P:0"),
        SetBendsCommand(d, "H->e:1", [(80, 120)]),
        SetParameterCommand(d, Parameter("K", 3.0, 1.0, 9.0)),
        SetParameterCommand(d, Parameter("a", 1.0, 0.0, 2.0)),
        RemoveParameterCommand(d, "K"),
        SetTuningParameterCommand(d, "T"),
        SetAnalysisCommand(d, output="b", decay_mode="settling", decay_value=4.0),
        RenameCommand(d, "renamed"),
    ]


@pytest.mark.parametrize("index", range(15))
def test_each_command_undoes_to_the_same_project_and_redoes(index):
    d = loop()
    stack = QUndoStack()
    before = project_to_dict(d)
    command = commands_for(d)[index]
    push(stack, command)
    after = project_to_dict(d)
    assert after != before
    stack.undo()
    assert project_to_dict(d) == before
    stack.redo()
    assert project_to_dict(d) == after


def test_connect_command_adds_the_wire_with_bends_and_undo_removes_it():
    d = loop()
    d.disconnect("b->H:0")
    stack = QUndoStack()
    before = project_to_dict(d)
    push(stack, ConnectCommand(d, "b", "H", 0, bends=[(460, 120)]))
    assert d.wires[-1].key == "b->H:0" and d.wires[-1].bends == [(460.0, 120.0)]
    stack.undo()
    assert project_to_dict(d) == before


def test_removing_a_node_restores_its_wires_at_their_indices():
    d = loop()
    stack = QUndoStack()
    keys = [w.key for w in d.wires]
    push(stack, RemoveNodeCommand(d, "e"))  # e has wires at indices 0, 1 and 6
    assert "e" not in d.nodes and all("e" not in (w.source, w.target) for w in d.wires)
    stack.undo()
    assert [w.key for w in d.wires] == keys
    assert list(d.nodes) == ["r", "e", "C", "P", "b", "y", "H"]


def test_refused_edit_leaves_model_and_stack_alone():
    d = loop()
    stack = QUndoStack()
    before = project_to_dict(d)
    with pytest.raises(LoopwrightError, match="already has a wire"):
        push(stack, ConnectCommand(d, "C", "e", 1))
    with pytest.raises(LoopwrightError) as caught:  # block text is validated by the model's parser
        push(stack, EditNodeCommand(d, "P", den="s^2 + (3"))
    assert caught.value.code.startswith("E1")
    assert stack.count() == 0 and project_to_dict(d) == before


def test_macro_rolls_back_when_a_later_step_is_refused():
    d = loop()
    stack = QUndoStack()
    before = project_to_dict(d)
    macro = Macro("two", [RemoveNodeCommand(d, "P"), ConnectCommand(d, "C", "nowhere")])
    with pytest.raises(LoopwrightError):
        push(stack, macro)
    assert stack.count() == 0 and project_to_dict(d) == before


def test_keyboard_nudges_merge_but_drags_do_not():
    d = loop()
    stack = QUndoStack()
    for step in range(1, 4):
        push(stack, MoveNodesCommand(d, {"C": ((200 + 10 * (step - 1), 0), (200 + 10 * step, 0))}, nudge=True))
    assert stack.count() == 1 and d.node("C").x == 230
    push(stack, MoveNodesCommand(d, {"C": ((230, 0), (300, 0))}))
    push(stack, MoveNodesCommand(d, {"C": ((300, 0), (310, 0))}))
    assert stack.count() == 3
    for _ in range(3):
        stack.undo()
    assert (d.node("C").x, d.node("C").y) == (200, 0)


def test_nudges_of_different_selections_stay_separate():
    d = loop()
    stack = QUndoStack()
    push(stack, MoveNodesCommand(d, {"C": ((200, 0), (210, 0))}, nudge=True))
    push(stack, MoveNodesCommand(d, {"P": ((360, 0), (370, 0))}, nudge=True))
    assert stack.count() == 2


def test_removing_the_tuning_parameter_comes_back_in_place():
    d = loop()
    stack = QUndoStack()
    before = project_to_dict(d)
    push(stack, RemoveParameterCommand(d, "K"))
    assert d.tuning_parameter is None and list(d.parameters) == ["T"]
    stack.undo()
    assert list(d.parameters) == ["K", "T"] and d.tuning_parameter == "K"
    assert project_to_dict(d) == before


def test_whole_history_undoes_and_redoes():
    d = loop()
    stack = QUndoStack()
    start = project_to_dict(d)
    for command in commands_for(d):
        try:
            push(stack, command)
        except LoopwrightError:
            pass  # later commands may refer to things earlier ones removed; refusals change nothing
    end = project_to_dict(d)
    assert stack.count() >= 10
    while stack.canUndo():
        stack.undo()
    assert project_to_dict(d) == start
    while stack.canRedo():
        stack.redo()
    assert project_to_dict(d) == end
