"""Edits that keep several parts of the model in step, each made undoable as one command.

A committed slider value becomes the tuning parameter's nominal (:func:`set_nominal`). Typed
block texts go in through :func:`block_text_command`, which also keeps the parameters in step
with what the blocks use:

* a name typed for the first time becomes a parameter (nominal 1, min 0, max 10), and the tuning
  parameter when the project has none (or the edit removed it);
* a parameter the block's old text used and no block uses any more is removed;
* when the edit swaps exactly one parameter for exactly one new name (fixing a typo, renaming),
  the new one takes the old one's values, so fixing the text restores the previous state,
  tuning choice included;
* a name with s run into it (``Tis``) is refused (E111, "did you mean Ti*s?") unless it is a
  declared parameter or listed in ``confirmed`` (the person said it is meant as a name).

>>> from PySide6.QtGui import QUndoStack
>>> from core.model.diagram import Diagram, Node, Parameter
>>> d = Diagram(); d.set_parameter(Parameter("K", 1.0, 0.0, 5.0)); stack = QUndoStack()
>>> set_nominal(d, stack, "K", 2.5); d.parameters["K"].nominal, stack.count()
(2.5, 1)
>>> _ = d.add_node(Node("C", "block", num="K", den="1")); d.set_tuning_parameter("K")
>>> stack.push(block_text_command(d, "C", "Kk", "1")); sorted(d.parameters), d.tuning_parameter
(['Kk'], 'Kk')
>>> stack.push(block_text_command(d, "C", "K", "1")); d.parameters["K"], d.tuning_parameter
(Parameter(name='K', nominal=2.5, minimum=0.0, maximum=5.0), 'K')
"""
from __future__ import annotations

from collections.abc import Collection
from dataclasses import replace

from PySide6.QtGui import QUndoStack

from app.document.commands import (
    EditNodeCommand,
    Macro,
    ModelCommand,
    RemoveParameterCommand,
    SetAnalysisCommand,
    SetParameterCommand,
    SetRequirementsCommand,
    SetTuningParameterCommand,
    push,
)
from core.algebra.expression import read_block, typed_names
from core.model.diagram import Diagram, Parameter

NEW_PARAMETER = {"nominal": 1.0, "minimum": 0.0, "maximum": 10.0}


def set_nominal(diagram: Diagram, undo_stack: QUndoStack, name: str, value: float) -> None:
    """Make ``value`` the nominal of parameter ``name``: one undoable command."""
    undo_stack.push(SetParameterCommand(diagram, replace(diagram.parameters[name], nominal=float(value))))


def set_nominals(diagram: Diagram, undo_stack: QUndoStack, values: dict[str, float], title: str) -> None:
    """Several parameters' nominal values in one undo step (a point picked on the stability plane)."""
    commands = [SetParameterCommand(diagram, replace(diagram.parameters[name], nominal=float(v)))
                for name, v in values.items()]
    push(undo_stack, Macro(title, commands))


def edit_requirement(diagram: Diagram, undo_stack: QUndoStack, field: str, value: float | None,
                     gain_margin_unit: str) -> None:
    """Set one requirement (``min_damping``, ``max_overshoot``, ``min_gain_margin``; None clears
    it): one undoable command, none when nothing changes. Raises LoopwrightError when refused."""
    old = diagram.requirements
    new = old.with_changes(**{field: value, "gain_margin_unit": gain_margin_unit})
    if new != old:
        push(undo_stack, SetRequirementsCommand(diagram, new))


def edit_analysis(diagram: Diagram, undo_stack: QUndoStack, **changes) -> None:
    """Change analysis settings (decay value, plane axes...): one undoable command, none when
    nothing changes. Raises LoopwrightError when refused."""
    if any(getattr(diagram.analysis, key) != value for key, value in changes.items()):
        push(undo_stack, SetAnalysisCommand(diagram, **changes))


def commit_nominals(controller, diagram: Diagram, undo_stack: QUndoStack) -> None:
    """Turn the controller's committed slider values into undoable nominal changes."""
    controller.nominalCommitted.connect(
        lambda name, value: set_nominal(diagram, undo_stack, name, value) if name in diagram.parameters else None)


def _names(*texts: str) -> list[str]:
    """Parameter names in the texts, in the order typed, each once."""
    return list(dict.fromkeys(t.name for text in texts for t in typed_names(text)))


def block_text_command(diagram: Diagram, node_id: str, num: str, den: str,
                       confirmed: Collection[str] = ()) -> ModelCommand | None:
    """The command that puts typed ``num``/``den`` into block ``node_id`` and keeps the parameters
    in step (module docstring); None when the texts are unchanged. Raises the parser's error
    (E1xx, E111 for a name with s run into it) without changing anything."""
    node = diagram.node(node_id)
    if (num, den) == (node.num, node.den):
        return None
    reading = read_block(num, den, set(diagram.parameters) | set(confirmed), where=f"node {node_id}")
    others = {name for other in diagram.nodes.values() if other.kind == "block" and other.id != node_id
              for name in _names(other.num, other.den)}
    dropped = [n for n in _names(node.num, node.den)
               if n in diagram.parameters and n not in others and n not in reading.names]
    added = [n for n in _names(num, den) if n not in diagram.parameters]
    commands: list[ModelCommand] = [EditNodeCommand(diagram, node_id, num=num, den=den)]
    commands += [RemoveParameterCommand(diagram, name) for name in dropped]
    renamed = len(dropped) == 1 and len(added) == 1
    for name in added:
        values = replace(diagram.parameters[dropped[0]], name=name) if renamed else Parameter(name, **NEW_PARAMETER)
        commands.append(SetParameterCommand(diagram, values))
    tuning = diagram.tuning_parameter
    if added and (tuning is None or tuning in dropped):
        commands.append(SetTuningParameterCommand(diagram, added[0]))
    return commands[0] if len(commands) == 1 else Macro(f"edit {node.title}", commands)
