"""Turn a :class:`core.model.diagram.Diagram`'s plain callbacks into Qt signals.

>>> from core.model.diagram import Diagram, Node
>>> d = Diagram(); signals = ModelSignals(d); seen = []
>>> _ = signals.nodeAdded.connect(seen.append)
>>> _ = d.add_node(Node("r", "input")); seen
['r']
>>> signals.detach()
"""
from __future__ import annotations

from PySide6.QtCore import QObject, Signal

from core.model.diagram import Diagram


class ModelSignals(QObject):
    """Qt signals for one diagram's change events, plus ``changed()`` after any of them."""

    nodeAdded = Signal(str)
    nodeRemoved = Signal(str)
    nodeChanged = Signal(str)
    nodeMoved = Signal(str)
    wireAdded = Signal(str)
    wireRemoved = Signal(str)
    wireChanged = Signal(str)
    parametersChanged = Signal(str)
    settingsChanged = Signal(str)
    changed = Signal()

    def __init__(self, diagram: Diagram, parent: QObject | None = None):
        super().__init__(parent)
        self.diagram = diagram
        self._by_event = {
            "node_added": self.nodeAdded, "node_removed": self.nodeRemoved,
            "node_changed": self.nodeChanged, "node_moved": self.nodeMoved,
            "wire_added": self.wireAdded, "wire_removed": self.wireRemoved,
            "wire_changed": self.wireChanged, "parameters_changed": self.parametersChanged,
            "settings_changed": self.settingsChanged,
        }
        self._attached = True
        diagram.subscribe(self._on_event)

    def _on_event(self, event: str, payload: object) -> None:
        signal = self._by_event.get(event)
        if signal is not None:
            signal.emit(str(payload))
        self.changed.emit()

    def detach(self) -> None:
        """Stop listening to the diagram (safe to call twice)."""
        if self._attached:
            self.diagram.unsubscribe(self._on_event)
            self._attached = False
