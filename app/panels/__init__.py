"""The analysis panels. Each reads AnalysisResults only: ``show_result(result)`` and
``set_current_value(value)``; :func:`attach` wires a panel to an AnalysisController.
"""
from __future__ import annotations

from PySide6.QtCore import QEvent, QObject

from app.panels.pole_map import PoleMap
from app.panels.polynomial_panel import HTML_KEY, PolynomialPanel, polynomial_html
from app.panels.range_panel import RangePanel
from app.panels.requirements_panel import OUTCOME_KEY, reference_step
from app.panels.routh_panel import RouthPanel, ready_cells
from core.present.verdicts import headline, outcome_from_parts, robust_at_nominal

__all__ = ["PoleMap", "PolynomialPanel", "RangePanel", "RouthPanel", "attach", "prepare_for_panels"]


def prepare_for_panels(result) -> None:
    """Run on the analysis worker thread with each new result: the slow, widget-free part of what
    the panels show (the Routh cell texts, the verdict at the nominal value, the headline with the
    requirements' verdicts), so that showing a result on the GUI thread only writes texts."""
    if result.report is None:
        return
    ready_cells(result)
    nominal = result.tuning_range.nominal if result.tuning_range is not None else None
    result.verdict_at(nominal)
    result.poles_and_beyond(nominal)  # remembered: the pole map's first draw only reads it
    result.display[HTML_KEY] = polynomial_html(result)
    ready_headline(result)


def ready_headline(result) -> None:
    """``result.display["headline"]``: stability at the nominal values AND the requirements' verdict
    (the command line's own words); ``result.display["requirements_met"]``: True, False or None."""
    report, td = result.report, result.time_domain
    nominal = result.tuning_range.nominal if result.tuning_range is not None and report.parameter else None
    outcome = outcome_from_parts(report, result.requirements, reference_step(result, nominal),
                                 td.joint if td is not None else None)
    result.display[OUTCOME_KEY] = outcome
    result.display["headline"] = headline(report, outcome)
    result.display["requirements_met"] = None if outcome is None else outcome.all_met
    result.display["robust"] = robust_at_nominal(report)


class FollowWhenShown(QObject):
    """Passes the controller's current value to a panel, or, while nothing of the panel can be seen
    in a shown window (its dock tabbed away, which Qt moves out of view rather than hiding, or
    closed), at its next show or paint: a slider frame does not re-evaluate what nobody sees. A panel
    outside a shown window is always kept current."""

    def __init__(self, panel):
        super().__init__(panel)
        self._panel = panel
        self.controller = None
        self.pending = False
        panel.installEventFilter(self)

    @classmethod
    def of(cls, panel, controller) -> FollowWhenShown:
        """The panel's follower (made once per panel), now following ``controller``."""
        follower = panel.findChild(cls) or cls(panel)
        follower.controller, follower.pending = controller, False
        return follower

    def follow(self, value: float) -> None:
        """The controller's current value moved to ``value``."""
        panel = self._panel
        if panel.window().isVisible() and (not panel.isVisible() or panel.visibleRegion().isEmpty()):
            self.pending = True
            return
        self.pending = False
        panel.set_current_value(value)

    def eventFilter(self, watched, event) -> bool:
        if self.pending and event.type() in (QEvent.Type.Show, QEvent.Type.Paint):
            self.pending = False
            value = self.controller.current_value
            if value is not None:
                watched.set_current_value(value)
        return False


def attach(panel, controller) -> None:
    """Show the controller's results and current value in ``panel`` (the value only while the panel
    can be seen, see :class:`FollowWhenShown`); a pole map's slider drives the controller's current
    value (live while dragging, committed on release)."""
    controller.add_panel(panel.show_result)  # one panel per event-loop pass
    controller.currentValueChanged.connect(FollowWhenShown.of(panel, controller).follow)
    if controller.result is not None:
        panel.show_result(controller.result)
    if isinstance(panel, PoleMap):
        panel.valueDragged.connect(controller.set_current_value)
        panel.valueCommitted.connect(lambda _value: controller.commit_current_value())
