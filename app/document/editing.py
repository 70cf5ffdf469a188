"""Edits requested by the analysis side, made undoable: a committed slider value becomes the
tuning parameter's nominal.

>>> from PySide6.QtGui import QUndoStack
>>> from core.model.diagram import Diagram, Parameter
>>> d = Diagram(); d.set_parameter(Parameter("K", 1.0, 0.0, 5.0)); stack = QUndoStack()
>>> set_nominal(d, stack, "K", 2.5); d.parameters["K"].nominal, stack.count()
(2.5, 1)
"""
from __future__ import annotations

from dataclasses import replace

from PySide6.QtGui import QUndoStack

from app.document.commands import SetParameterCommand
from core.model.diagram import Diagram


def set_nominal(diagram: Diagram, undo_stack: QUndoStack, name: str, value: float) -> None:
    """Make ``value`` the nominal of parameter ``name``: one undoable command."""
    undo_stack.push(SetParameterCommand(diagram, replace(diagram.parameters[name], nominal=float(value))))


def commit_nominals(controller, diagram: Diagram, undo_stack: QUndoStack) -> None:
    """Turn the controller's committed slider values into undoable nominal changes."""
    controller.nominalCommitted.connect(
        lambda name, value: set_nominal(diagram, undo_stack, name, value) if name in diagram.parameters else None)
