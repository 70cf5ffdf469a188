"""Requirements panel: the requirements (editable, each edit one undoable command), their verdicts
at the current value with PASS/FAIL badges and margins, and the tuning-parameter range that is
stable and meets them all (exact, or marked numeric).

The decay requirement is the model's own (analysis settings; its mode is chosen in the parameters
panel). The gain margin is the factor by which the tuning parameter may *rise* before the loop
loses stability — the stable range's rise factor; when the parameter is not a gain it is a
parameter margin in the same sense.

At the nominal value the verdicts are the analysis' own (judged on its worker with the headline);
at any other current value they are judged on the current-value worker (:mod:`app.value_worker`).
"""
from __future__ import annotations

import math

from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtWidgets import QComboBox, QGridLayout, QLabel, QLineEdit, QVBoxLayout, QWidget

from app.document.editing import edit_analysis, edit_requirement
from app.panels.common import MINUS, MessageLabel, Readout, colour, number, number_css
from app.theme import figure_font, label_font
from app.value_worker import ValueWorker
from core.analysis.requirements import Verdict, evaluate, intervals_text
from core.errors import LoopwrightError
from core.model.diagram import DECAY_WORDS, Diagram
from core.model.requirements import Requirements

ROWS = ("decay", "damping", "overshoot", "gain margin")
OUTCOME_KEY = "requirements_outcome"  # result.display key: the verdicts at the nominal value, readied on the worker
EXACT_PARTS = ("stable", "decay", "gain margin")
GAIN_MARGIN_TIP = ("Gain margin: the factor by which the tuning parameter may rise before the loop "
                   "loses stability (the stable range's rise factor). When the tuning parameter is "
                   "not a gain, this is a parameter margin in the same sense.")


def reference_step(result, value: float | None):
    """The step response from the reference input at ``value`` when an overshoot is required (the
    analysis' own at the nominal value); None otherwise, or when it cannot be simulated."""
    td = result.time_domain
    if td is None or result.requirements.max_overshoot is None or td.reference not in td.transfers:
        return None
    try:
        return result.step_at(td.reference, value)
    except LoopwrightError:
        return None


def read_optional(text: str) -> float | None:
    """A typed number, or None for an empty field; ValueError for anything else.

    >>> read_optional(" 0,5 "), read_optional("")
    (0.5, None)
    """
    text = text.strip().replace(",", ".")
    if not text:
        return None
    value = float(text)
    if not math.isfinite(value):
        raise ValueError(text)
    return value


def badge_style(passed: bool | None) -> str:
    """Stylesheet of a PASS / FAIL / — badge."""
    fill = colour("stable" if passed else "unstable").name() if passed is not None else colour("muted").name()
    return (f"background: {fill}; color: white; border-radius: 4px; padding: 1px 6px; "
            "font-weight: bold; font-size: 8.5pt;")


def _set_badge(badge: QLabel, text: str, style: str) -> None:
    """Change a badge only where it differs (a new style sheet re-polishes the widget; a new text
    relayouts the grid): a slider frame mostly leaves PASS as PASS."""
    if badge.text() != text:
        badge.setText(text)
    if badge.styleSheet() != style:
        badge.setStyleSheet(style)


def figure(x: float | None, unit: str) -> str:
    """A verdict figure with its unit; '∞' for an unlimited margin, '—' for none."""
    if x is None:
        return "—"
    if x == float("inf"):
        return "∞"
    sep = "" if unit in ("%", "×", "") else " "
    return f"{number(x, 4)}{sep}{unit}" if unit != "×" else f"×{number(x, 4)}"


class RequirementsPanel(QWidget):
    """Bind it to a document with :meth:`set_document`; feed it results and the current value."""

    TITLE = "Requirements"
    message = Signal(str)

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self.diagram: Diagram | None = None
        self.undo_stack = None
        self._signals = None
        self._result = None
        self._value: float | None = None
        self.verdicts: list[Verdict] = []
        self.problem = MessageLabel(self)
        self.error = MessageLabel(self)
        grid = QGridLayout()
        grid.setHorizontalSpacing(8)
        grid.setVerticalSpacing(3)
        for column, title in enumerate(("Requirement", "Required", "", "At current value", "", "Margin")):
            head = QLabel(title, self)
            head.setFont(label_font(8.5, bold=True))
            grid.addWidget(head, 0, column)
        self.labels: dict[str, QLabel] = {}
        self.edits: dict[str, QLineEdit] = {}
        self.units: dict[str, QLabel] = {}
        self.actuals: dict[str, QLabel] = {}
        self.badges: dict[str, QLabel] = {}
        self.margins: dict[str, QLabel] = {}
        for row, key in enumerate(ROWS, start=1):
            label = QLabel(self)
            label.setFont(label_font(9))
            edit = QLineEdit(self)
            edit.setFont(figure_font(9.5))
            edit.setMaximumWidth(90)
            edit.setPlaceholderText("not set")
            edit.editingFinished.connect(lambda k=key: self._commit(k))
            unit = QLabel(self)
            actual, margin = QLabel(self), QLabel(self)
            for w in (actual, margin):
                w.setFont(figure_font(9.5))
            badge = QLabel(self)
            badge.setAlignment(Qt.AlignmentFlag.AlignCenter)
            badge.setMinimumWidth(44)
            self.labels[key], self.edits[key], self.units[key] = label, edit, unit
            self.actuals[key], self.badges[key], self.margins[key] = actual, badge, margin
            for column, w in enumerate((label, edit, unit, Readout(actual), badge, Readout(margin))):
                grid.addWidget(w, row, column)
        self.gm_unit = QComboBox(self)
        self.gm_unit.addItem("×", "factor")
        self.gm_unit.addItem("dB", "db")
        self.gm_unit.activated.connect(lambda _i: self._commit("gain margin"))
        grid.addWidget(self.gm_unit, ROWS.index("gain margin") + 1, 2)
        self.units["gain margin"].hide()
        self.labels["damping"].setText("Damping ratio ζ ≥")
        self.labels["overshoot"].setText("Overshoot ≤")
        self.units["overshoot"].setText("%")
        self.labels["gain margin"].setText("Gain margin ≥")
        for w in (self.labels["gain margin"], self.edits["gain margin"], self.gm_unit):
            w.setToolTip(GAIN_MARGIN_TIP)
        self.edits["decay"].setToolTip("The decay requirement of the analysis (its kind is chosen in "
                                       "Parameters); empty or 0 = none")
        grid.setColumnStretch(3, 1)
        grid.setColumnStretch(5, 1)
        self.range_text = QLabel(self)
        self.range_text.setWordWrap(True)
        self.range_text.setTextFormat(Qt.TextFormat.RichText)
        self.range_text.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.range_text.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(6, 4, 6, 4)
        layout.addWidget(self.error)
        layout.addLayout(grid)
        layout.addWidget(self.problem)
        layout.addWidget(self.range_text, 1)
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(0)
        self._timer.timeout.connect(self._update_verdicts)
        self._values = ValueWorker(self)
        self._fill_editors()

    # -- document -----------------------------------------------------------------------------------
    def set_document(self, diagram: Diagram, signals, undo_stack) -> None:
        """Edit this diagram's requirements through ``undo_stack``; follow its settings changes."""
        if self._signals is not None:
            try:
                self._signals.settingsChanged.disconnect(self._on_settings)
            except (RuntimeError, TypeError):
                pass
        self.diagram, self._signals, self.undo_stack = diagram, signals, undo_stack
        signals.settingsChanged.connect(self._on_settings)
        self._fill_editors()

    def _on_settings(self, what: str) -> None:
        if what in ("requirements", "analysis"):
            self._fill_editors()

    def _fill_editors(self) -> None:
        d = self.diagram
        req = d.requirements if d is not None else Requirements()
        mode = d.analysis.decay_mode if d is not None else "sigma"
        decay = d.analysis.decay_value if d is not None else 0.0
        words = DECAY_WORDS[mode]
        label, unit = words.label[:1].upper() + words.label[1:], words.unit
        self.labels["decay"].setText(label)
        self.units["decay"].setText(unit)
        for key, value in (("decay", decay or None), ("damping", req.min_damping),
                           ("overshoot", req.max_overshoot), ("gain margin", req.min_gain_margin)):
            edit = self.edits[key]
            if not edit.hasFocus():
                edit.setText("" if value is None else f"{value:.12g}")
            edit.setEnabled(d is not None)
        self.gm_unit.setCurrentIndex(max(0, self.gm_unit.findData(req.gain_margin_unit)))
        self.gm_unit.setEnabled(d is not None)

    # -- edits --------------------------------------------------------------------------------------
    def _commit(self, key: str) -> None:
        if self.diagram is None:
            return
        edit = self.edits[key]
        try:
            value = read_optional(edit.text())
        except ValueError:
            self._complain(f"{self.labels[key].text()} '{edit.text()}' is not a number")
            return
        try:
            if key == "decay":
                edit_analysis(self.diagram, self.undo_stack, decay_value=value or 0.0)
            else:
                field = {"damping": "min_damping", "overshoot": "max_overshoot", "gain margin": "min_gain_margin"}[key]
                edit_requirement(self.diagram, self.undo_stack, field, value, self.gm_unit.currentData())
        except LoopwrightError as err:
            self._complain(str(err))
            return
        self.problem.show_message(None)

    def _complain(self, text: str) -> None:
        self.problem.show_message(text)
        self.message.emit(text)

    # -- results ------------------------------------------------------------------------------------
    def show_result(self, result) -> None:
        """Take a new AnalysisResult: the joint range at once, the verdicts at the current value."""
        self._result = result
        if result.tuning_range is not None:
            self._value = result.tuning_range.nominal
        self.error.show_message(result.message)
        self.range_text.setText(self.range_html())
        self._update_verdicts()

    def set_current_value(self, value: float) -> None:
        """Re-judge at the tuning parameter's current value (coalesced per event-loop pass)."""
        self._value = float(value)
        self._timer.start()

    def _update_verdicts(self) -> None:
        result = self._result
        td = getattr(result, "time_domain", None) if result is not None else None
        if result is None or result.report is None or td is None:
            self._values.forget()
            self._show_verdicts(result, [], None)
            return
        report = result.report
        value = self._value if report.parameter is not None else None
        nominal = result.tuning_range.nominal if result.tuning_range is not None and report.parameter else None
        ready = result.display.get(OUTCOME_KEY)
        if ready is not None and value == nominal:  # judged on the worker with the headline
            self._values.forget()
            self._show_verdicts(result, ready.verdicts, None)
            return
        self._values.submit(lambda: evaluate(td.requirements, report, reference_step(result, value), value),
                            lambda verdicts, error: self._show_verdicts(result, verdicts, error))

    def _show_verdicts(self, result, verdicts: list[Verdict] | None, error: Exception | None) -> None:
        if result is not self._result:
            return  # a newer analysis arrived meanwhile
        if result is not None:
            problem = None if error is None else (str(error) if isinstance(error, LoopwrightError) else
                                                  f"Requirements not judged at this value ({type(error).__name__}).")
            self.error.show_message(problem or result.message)
        self.verdicts = verdicts or []
        by_name = {v.name: v for v in self.verdicts}
        for key in ROWS:
            verdict = by_name.get(key)
            self._show_row(key, verdict)

    def _show_row(self, key: str, v: Verdict | None) -> None:
        badge = self.badges[key]
        if v is None:
            self.actuals[key].setText("")
            self.margins[key].setText("")
            _set_badge(badge, "", "")
            return
        unit = "×" if v.unit == "×" else v.unit
        self.actuals[key].setText(figure(v.actual, unit))
        self.actuals[key].setToolTip(v.note)
        _set_badge(badge, {True: "PASS", False: "FAIL", None: "—"}[v.passed], badge_style(v.passed))
        badge.setToolTip(("exact" if v.exact else "numeric (floating point)") + (f": {v.note}" if v.note else ""))
        margin = "" if v.margin is None else (
            "∞" if v.margin == float("inf") else
            f"{'+' if v.margin >= 0 else MINUS}{number(abs(v.margin), 3)}{'' if unit in ('%', '×', '') else ' '}"
            f"{'' if unit == '×' else unit}")
        self.margins[key].setText(margin + ("" if v.exact or not margin else "  ≈"))

    def range_html(self) -> str:
        """The range meeting everything, with each criterion's own set below it."""
        result = self._result
        css = f"<style>{number_css()} td {{ padding: 1px 8px 1px 0; }}</style>"
        if result is None or result.report is None:
            return ""
        td = getattr(result, "time_domain", None)
        if td is None:
            return css + "<span class='muted'>No time-domain results for this loop.</span>"
        joint = td.joint
        name = result.report.parameter
        if joint is None:
            if name is None:
                return css + "<span class='muted'>Choose a tuning parameter to see the range meeting the requirements.</span>"
            return css + "<span class='muted'>No requirement set: the range meeting them all is the stable range.</span>"
        kind = "<span class='good'>exact</span>" if joint.exact else "<span class='warn'>numeric</span>"
        text = joint.text(short=True).replace("-", MINUS)
        head = (f"<p style='margin:6px 0 2px 0'><b>Stable and meeting all:</b> {name} in "
                f"<span class='num'>{text}</span> &nbsp;({kind})</p>")
        if not joint.intervals:
            head = (f"<p style='margin:6px 0 2px 0'><b>Stable and meeting all:</b> "
                    f"<span class='bad'>no value of {name}</span> &nbsp;({kind})</p>")
        rows = "".join(f"<tr><td>{key}</td><td class='num'>{_intervals(ivs)}</td>"
                       f"<td class='muted'>{'exact' if key in EXACT_PARTS else 'numeric'}</td></tr>"
                       for key, ivs in joint.parts.items())
        notes = "".join(f"<div class='muted'>{n}</div>" for n in joint.notes)
        roots = _irrational_ends(joint)
        if roots:
            notes += "<div class='muted'>exact ends: " + "; ".join(roots) + "</div>"
        return css + head + f"<table>{rows}</table>" + notes


def _intervals(intervals) -> str:
    return intervals_text(intervals, short=True).replace("-", MINUS)


def _irrational_ends(joint) -> list[str]:
    """``1.46182 = root of …`` for every exact end of the joint range that is not a plain number."""
    out = []
    for iv in joint.intervals:
        for b in iv:
            if b is not None and b.exact is not None and b.text(short=True) != b.exact:
                out.append(f"<span class='num'>{b.text(short=True)}</span> = {b.exact.replace('-', MINUS)}")
    return out
