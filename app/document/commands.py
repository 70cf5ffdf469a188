"""Undo commands: each one only calls :class:`core.model.diagram.Diagram` methods.

Use :func:`push` rather than ``QUndoStack.push``: it applies the command first and pushes it only
when the model accepted the edit, so a refused edit raises the model's own error and leaves both
the model and the undo stack untouched. Several edits that belong together go in one
:class:`Macro`.

>>> from PySide6.QtGui import QUndoStack
>>> from core.model.diagram import Diagram, Node
>>> d, stack = Diagram(), QUndoStack()
>>> push(stack, AddNodeCommand(d, Node("r", "input")))
>>> push(stack, AddNodeCommand(d, Node("y", "output", x=100)))
>>> push(stack, ConnectCommand(d, "r", "y"))
>>> [w.key for w in d.wires]
['r->y:0']
>>> stack.undo(); stack.undo(); list(d.nodes)
['r']
"""
from __future__ import annotations

from PySide6.QtGui import QUndoCommand, QUndoStack

from core.model.diagram import Diagram, Node, Parameter
from core.model.requirements import Requirements

NUDGE_MERGE_ID = 7301  # consecutive keyboard nudges of the same nodes merge into one step


class ModelCommand(QUndoCommand):
    """Base: subclasses implement ``apply`` and ``revert`` with model calls only."""

    def __init__(self, text: str):
        super().__init__(text)
        self._already_applied = False

    def apply(self) -> None:
        raise NotImplementedError

    def revert(self) -> None:
        raise NotImplementedError

    def redo(self) -> None:
        if self._already_applied:  # push() applied it to find out whether the model accepts it
            self._already_applied = False
            return
        self.apply()

    def undo(self) -> None:
        self.revert()


def push(stack: QUndoStack, command: ModelCommand) -> None:
    """Apply ``command``; push it on ``stack`` only if the model accepted it (else re-raise)."""
    command.apply()
    command._already_applied = True
    stack.push(command)


class Macro(ModelCommand):
    """Several commands as one undo step; if one is refused, the earlier ones are reverted."""

    def __init__(self, text: str, commands: list[ModelCommand]):
        super().__init__(text)
        self.commands = list(commands)

    def apply(self) -> None:
        done: list[ModelCommand] = []
        try:
            for command in self.commands:
                command.apply()
                done.append(command)
        except Exception:
            for command in reversed(done):
                command.revert()
            raise

    def revert(self) -> None:
        for command in reversed(self.commands):
            command.revert()


class AddNodeCommand(ModelCommand):
    """Add a node (at ``index`` in the node order, default last)."""

    def __init__(self, diagram: Diagram, node: Node, index: int | None = None):
        super().__init__(f"add {node.title}")
        self.diagram, self.node, self.index = diagram, node, index

    def apply(self) -> None:
        self.diagram.add_node(self.node, self.index)

    def revert(self) -> None:
        self.diagram.remove_node(self.node.id)


class RemoveNodeCommand(ModelCommand):
    """Remove a node and its wires; undo puts all of them back at their old indices."""

    def __init__(self, diagram: Diagram, node_id: str):
        super().__init__(f"delete {node_id}")
        self.diagram, self.node_id = diagram, node_id
        self.removed = None

    def apply(self) -> None:
        self.removed = self.diagram.remove_node(self.node_id)

    def revert(self) -> None:
        self.diagram.restore_node(self.removed)


Position = tuple[float, float]


class MoveNodesCommand(ModelCommand):
    """Move nodes: ``moves`` maps node id -> (old position, new position).

    With ``nudge=True`` consecutive commands on the same nodes merge into one undo step.
    """

    def __init__(self, diagram: Diagram, moves: dict[str, tuple[Position, Position]], nudge: bool = False):
        names = ", ".join(sorted(moves))
        super().__init__(f"move {names}" if len(moves) < 4 else f"move {len(moves)} nodes")
        self.diagram, self.moves, self.nudge = diagram, dict(moves), nudge

    def apply(self) -> None:
        for node_id, (_, new) in self.moves.items():
            self.diagram.move_node(node_id, *new)

    def revert(self) -> None:
        for node_id, (old, _) in self.moves.items():
            self.diagram.move_node(node_id, *old)

    def id(self) -> int:
        return NUDGE_MERGE_ID if self.nudge else -1

    def mergeWith(self, other: QUndoCommand) -> bool:
        if not isinstance(other, MoveNodesCommand) or not other.nudge or set(other.moves) != set(self.moves):
            return False
        self.moves = {k: (old, other.moves[k][1]) for k, (old, _) in self.moves.items()}
        return True


class EditNodeCommand(ModelCommand):
    """Change node fields (label, role, num, den, signs, flipped)."""

    def __init__(self, diagram: Diagram, node_id: str, **changes):
        super().__init__(f"edit {node_id}")
        self.diagram, self.node_id, self.changes = diagram, node_id, changes
        self.old: dict = {}

    def apply(self) -> None:
        self.old = self.diagram.update_node(self.node_id, **self.changes)

    def revert(self) -> None:
        self.diagram.update_node(self.node_id, **self.old)


class ConnectCommand(ModelCommand):
    """Wire ``source``'s output to input ``port`` of ``target``."""

    def __init__(self, diagram: Diagram, source: str, target: str, port: int = 0, bends=None,
                 index: int | None = None):
        super().__init__(f"connect {source} to {target}")
        self.diagram, self.args = diagram, (source, target, port)
        self.bends, self.index = list(bends or []), index
        self.key = f"{source}->{target}:{port}"

    def apply(self) -> None:
        self.key = self.diagram.connect(*self.args, bends=self.bends, index=self.index).key

    def revert(self) -> None:
        self.diagram.disconnect(self.key)


class DisconnectCommand(ModelCommand):
    """Remove one wire; undo puts it back at its old index with its bends."""

    def __init__(self, diagram: Diagram, key: str):
        super().__init__(f"remove wire {key}")
        self.diagram, self.key = diagram, key
        self.removed = None

    def apply(self) -> None:
        self.removed = self.diagram.disconnect(self.key)

    def revert(self) -> None:
        index, w = self.removed
        self.diagram.connect(w.source, w.target, w.port, bends=w.bends, index=index)


class SetBendsCommand(ModelCommand):
    """Replace a wire's waypoints."""

    def __init__(self, diagram: Diagram, key: str, bends: list[Position]):
        super().__init__("reshape wire")
        self.diagram, self.key, self.bends = diagram, key, list(bends)
        self.old: list[Position] = []

    def apply(self) -> None:
        self.old = self.diagram.set_wire_bends(self.key, self.bends)

    def revert(self) -> None:
        self.diagram.set_wire_bends(self.key, self.old)


class SetParameterCommand(ModelCommand):
    """Add or replace a parameter."""

    def __init__(self, diagram: Diagram, parameter: Parameter):
        super().__init__(f"set parameter {parameter.name}")
        self.diagram, self.parameter = diagram, parameter
        self.old: Parameter | None = None

    def apply(self) -> None:
        self.old = self.diagram.set_parameter(self.parameter)

    def revert(self) -> None:
        if self.old is None:
            self.diagram.remove_parameter(self.parameter.name)
        else:
            self.diagram.set_parameter(self.old)


class RemoveParameterCommand(ModelCommand):
    """Remove a parameter; undo restores it at its old place in the order and as tuning choice."""

    def __init__(self, diagram: Diagram, name: str):
        super().__init__(f"remove parameter {name}")
        self.diagram, self.name = diagram, name
        self.old: Parameter | None = None
        self.order: list[str] = []
        self.tuning_parameter: str | None = None

    def apply(self) -> None:
        self.order, self.tuning_parameter = list(self.diagram.parameters), self.diagram.tuning_parameter
        self.old = self.diagram.remove_parameter(self.name)

    def revert(self) -> None:
        d = self.diagram
        d.set_parameter(self.old)
        for name in self.order[self.order.index(self.name) + 1:]:  # re-append later ones: old order
            if name in d.parameters:
                d.set_parameter(d.remove_parameter(name))
        if d.tuning_parameter != self.tuning_parameter:
            d.set_tuning_parameter(self.tuning_parameter)


class SetTuningParameterCommand(ModelCommand):
    """Choose the tuning parameter (None for none)."""

    def __init__(self, diagram: Diagram, name: str | None):
        super().__init__(f"tune {name}" if name else "no tuning parameter")
        self.diagram, self.name = diagram, name
        self.old: str | None = None

    def apply(self) -> None:
        self.old = self.diagram.set_tuning_parameter(self.name)

    def revert(self) -> None:
        self.diagram.set_tuning_parameter(self.old)


class SetAnalysisCommand(ModelCommand):
    """Change analysis settings (input, output, decay_mode, decay_value)."""

    def __init__(self, diagram: Diagram, **changes):
        super().__init__("analysis settings")
        self.diagram, self.changes = diagram, changes
        self.old: dict = {}

    def apply(self) -> None:
        self.old = self.diagram.set_analysis(**self.changes)

    def revert(self) -> None:
        self.diagram.set_analysis(**self.old)


class RenameCommand(ModelCommand):
    """Set the project's name."""

    def __init__(self, diagram: Diagram, name: str):
        super().__init__("rename project")
        self.diagram, self.name = diagram, name
        self.old = ""

    def apply(self) -> None:
        self.old = self.diagram.rename(self.name)

    def revert(self) -> None:
        self.diagram.rename(self.old)


class SetRequirementsCommand(ModelCommand):
    """Replace the diagram's requirements (one undo step)."""

    def __init__(self, diagram: Diagram, requirements: Requirements):
        super().__init__("requirements")
        self.diagram, self.requirements = diagram, requirements
        self.old: Requirements | None = None

    def apply(self) -> None:
        self.old = self.diagram.set_requirements(self.requirements)

    def revert(self) -> None:
        self.diagram.set_requirements(self.old)
