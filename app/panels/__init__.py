"""The analysis panels. Each reads AnalysisResults only: ``show_result(result)`` and
``set_current_value(value)``; :func:`attach` wires a panel to an AnalysisController.
"""
from __future__ import annotations

from app.panels.pole_map import PoleMap
from app.panels.polynomial_panel import PolynomialPanel
from app.panels.range_panel import RangePanel
from app.panels.routh_panel import RouthPanel

__all__ = ["PoleMap", "PolynomialPanel", "RangePanel", "RouthPanel", "attach"]


def attach(panel, controller) -> None:
    """Show the controller's results and current value in ``panel``; a pole map's slider drives
    the controller's current value (live while dragging, committed on release)."""
    controller.resultReady.connect(panel.show_result)
    controller.currentValueChanged.connect(panel.set_current_value)
    if controller.result is not None:
        panel.show_result(controller.result)
    if isinstance(panel, PoleMap):
        panel.valueDragged.connect(controller.set_current_value)
        panel.valueCommitted.connect(lambda _value: controller.commit_current_value())
