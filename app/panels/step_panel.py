"""Step response panel: the closed-loop unit-step response at the current value from a chosen input
(the reference, or any other Input node as a disturbance), its figures, and the envelope the decay
requirement implies, final ± A e^(−σt) with A the step's initial deviation |y(0) − final|.

The transfer functions and the responses at the nominal value come precomputed with each
AnalysisResult (``result.time_domain``, ``result.steps``); a new current value is simulated on the
current-value worker (:mod:`app.value_worker`, off the GUI thread, newest request only), asked at
most once per :data:`THROTTLE_MS` while the slider moves, and drawn when it arrives.
"""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer
from PySide6.QtGui import QPalette
from PySide6.QtWidgets import QComboBox, QGridLayout, QHBoxLayout, QLabel, QVBoxLayout, QWidget

from app.panels.common import MessageLabel, Readout, colour, number
from app.theme import figure_font, label_font
from app.value_worker import ValueWorker
from core.analysis.time_response import UNSTABLE_NOTE, StepResponse
from core.errors import LoopwrightError

THROTTLE_MS = 100

READOUTS = (("overshoot", "Overshoot"), ("rise_time", "Rise time 10–90 %"),
            ("settling_time", "Settling 2 % (simulated)"), ("peak", "Peak"),
            ("final_value", "Steady-state value"), ("steady_state_error", "Steady-state error"))


def readout_texts(step: StepResponse) -> dict[str, str]:
    """The figures as text, '—' where a figure does not exist.

    >>> from core.analysis.time_response import transfer_from_text, step_response
    >>> readout_texts(step_response(transfer_from_text("4", "s^2 + 2*s + 4")))["overshoot"]
    '16.3 %'
    """
    m = step.metrics
    dash = "—"

    def seconds(x):
        return dash if x is None else f"{number(x, 4)} s"
    return {
        "overshoot": dash if m.overshoot is None else f"{number(m.overshoot, 3)} %",
        "rise_time": seconds(m.rise_time),
        "settling_time": seconds(m.settling_time),
        "peak": f"{number(m.peak_value, 4)} at {number(m.peak_time, 4)} s",
        "final_value": "none (unstable)" if m.final_value is None else number(m.final_value, 6),
        "steady_state_error": dash if m.steady_state_error is None else number(m.steady_state_error, 6),
    }


def decay_envelope(step: StepResponse, sigma: float | None) -> tuple[np.ndarray, np.ndarray] | None:
    """(upper, lower) = final ± A e^(−σt), A = |y(0) − final|; None without a final value or σ."""
    final = step.metrics.final_value
    if final is None or not sigma or step.t.size == 0:
        return None
    amplitude = abs(step.y[0] - final) or abs(final)
    spread = amplitude * np.exp(-sigma * step.t)
    return final + spread, final - spread


class StepPanel(QWidget):
    """Plots the step response at the current value; a combo box picks the input."""

    TITLE = "Step response"

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self._result = None
        self._value: float | None = None
        self.step: StepResponse | None = None
        self.message = MessageLabel(self)
        self.inputs = QComboBox(self)
        self.inputs.setToolTip("Which input steps: the reference, or another input as a disturbance")
        self.inputs.currentIndexChanged.connect(lambda _i: self._recompute())
        self.caption = QLabel(self)
        self.caption.setFont(figure_font(9))
        caption = Readout(self.caption)  # a slider frame never relayouts the panel
        self.plot = pg.PlotWidget(self)
        self._make_items()
        self.values: dict[str, QLabel] = {}
        grid = QGridLayout()
        grid.setHorizontalSpacing(10)
        grid.setVerticalSpacing(1)
        for i, (key, title) in enumerate(READOUTS):
            name = QLabel(title, self)
            name.setFont(label_font(9))
            value = QLabel("—", self)
            value.setFont(figure_font(9.5))
            value.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
            self.values[key] = value
            grid.addWidget(name, i % 3, 2 * (i // 3))
            grid.addWidget(Readout(value), i % 3, 2 * (i // 3) + 1)
        grid.setColumnStretch(1, 1)
        grid.setColumnStretch(3, 1)
        top = QHBoxLayout()
        top.addWidget(QLabel("Step from", self))
        top.addWidget(self.inputs)
        top.addWidget(caption, 1)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addWidget(self.message)
        layout.addLayout(top)
        layout.addWidget(self.plot, 1)
        layout.addLayout(grid)
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(THROTTLE_MS)
        self._timer.timeout.connect(self._recompute)
        self._values = ValueWorker(self)

    def _make_items(self) -> None:
        plot = self.plot
        item = plot.getPlotItem()
        item.setLabel("bottom", "t", units="s")
        item.setLabel("left", "y")
        item.setMenuEnabled(False)
        plot.setBackground(self.palette().color(QPalette.ColorRole.Base))
        text = self.palette().color(QPalette.ColorRole.Text)
        for axis in ("bottom", "left"):
            plot.getAxis(axis).setPen(pg.mkPen(colour("axis")))
            plot.getAxis(axis).setTextPen(pg.mkPen(text))
        self.final_line = pg.InfiniteLine(0, angle=0, movable=False,
                                          pen=pg.mkPen(colour("muted"), width=1, style=Qt.PenStyle.DotLine))
        self.zero_line = pg.InfiniteLine(0, angle=0, movable=False, pen=pg.mkPen(colour("axis"), width=0.8))
        for it in (self.final_line, self.zero_line):
            it.setZValue(-10)
            plot.addItem(it, ignoreBounds=True)
        dashed = pg.mkPen(colour("decay"), width=1.3, style=Qt.PenStyle.DashLine)
        self.envelope_upper = pg.PlotDataItem([], [], pen=dashed)
        self.envelope_lower = pg.PlotDataItem([], [], pen=dashed)
        self.curve = pg.PlotDataItem([], [], pen=pg.mkPen(colour("pole"), width=1.8))
        self.peak = pg.ScatterPlotItem(symbol="o", size=7, pen=pg.mkPen(colour("pole"), width=1.2),
                                       brush=pg.mkBrush(self.palette().color(QPalette.ColorRole.Base)))
        for it in (self.envelope_upper, self.envelope_lower, self.curve, self.peak):
            plot.addItem(it)

    # -- public -----------------------------------------------------------------------------------
    def show_result(self, result) -> None:
        """Take a new AnalysisResult: refill the input choice and recompute at the current value."""
        self._result = result
        if result.tuning_range is not None:
            self._value = result.tuning_range.nominal
        td = getattr(result, "time_domain", None)
        previous = self.inputs.currentData()
        self.inputs.blockSignals(True)
        self.inputs.clear()
        if td is not None:
            for node_id in list(td.transfers) + [k for k in td.errors if k != "joint range"]:
                role = "reference" if node_id == td.reference else "disturbance"
                self.inputs.addItem(f"{node_id} ({role})", node_id)
            index = self.inputs.findData(previous)
            self.inputs.setCurrentIndex(max(index, 0))
        self.inputs.blockSignals(False)
        self.inputs.setEnabled(self.inputs.count() > 1)
        self._timer.stop()
        self._recompute()

    def set_current_value(self, value: float) -> None:
        """Follow the tuning parameter's current value (throttled: at most one simulation per
        :data:`THROTTLE_MS`, always at the newest value)."""
        self._value = float(value)
        if not self._timer.isActive():
            self._timer.start()

    def select_input(self, node_id: str) -> None:
        """Step from this input node (as if chosen in the combo box)."""
        index = self.inputs.findData(node_id)
        if index >= 0:
            self.inputs.setCurrentIndex(index)

    # -- drawing ----------------------------------------------------------------------------------
    def _clear(self, message: str | None) -> None:
        self.step = None
        self.message.show_message(message)
        for it in (self.curve, self.envelope_upper, self.envelope_lower, self.peak):
            it.setData([], [])
        self.caption.setText("")
        for label in self.values.values():
            label.setText("—")

    def _recompute(self) -> None:
        result = self._result
        if result is None or result.report is None:
            self._clear(result.message if result is not None else None)
            return
        td = getattr(result, "time_domain", None)
        node_id = self.inputs.currentData()
        if td is None or node_id is None:
            self._clear("No step response: choose the analysis input and output.")
            return
        if node_id in td.errors:
            self._clear(td.errors[node_id])
            return
        value = self._value if result.report.parameter is not None else None
        if result.step_ready(node_id, value):  # the analysis' own, at the nominal value
            self._values.forget()
            try:
                self._show_step(result, result.step_at(node_id, value), None)
            except LoopwrightError as exc:
                self._show_step(result, None, exc)
            return
        self._values.submit(lambda: result.step_at(node_id, value),
                            lambda step, error: self._show_step(result, step, error))

    def _show_step(self, result, step: StepResponse | None, error: Exception | None) -> None:
        if result is not self._result:
            return  # a newer analysis arrived meanwhile
        if step is None:
            self._clear(str(error) if isinstance(error, LoopwrightError)
                        else f"No step response at this value ({type(error).__name__}).")
            return
        self.step = step
        self.message.show_message(None)
        self._draw(step, result.report)

    def _draw(self, step: StepResponse, report) -> None:
        self.curve.setData(step.t, step.y)
        final = step.metrics.final_value
        self.final_line.setVisible(final is not None)
        if final is not None:
            self.final_line.setValue(final)
        sigma = report.decay.sigma if report.decay is not None else None
        envelope = decay_envelope(step, sigma)
        for item, data in zip((self.envelope_upper, self.envelope_lower), envelope or (None, None)):
            item.setData(step.t if data is not None else [], data if data is not None else [])
        self.peak.setData([step.metrics.peak_time], [step.metrics.peak_value])
        self._fit(step, envelope)
        for key, text in readout_texts(step).items():
            self.values[key].setText(text)
        at = f"{report.parameter} = {number(self._value)}: " if report.parameter and self._value is not None else ""
        notes = [n for n in step.note.split("; ") if n and n != UNSTABLE_NOTE]
        state = "stable" if step.stable else "UNSTABLE: no steady state"
        self.caption.setText(at + "; ".join([state, *notes]))
        self.caption.setStyleSheet("" if step.stable else f"color: {colour('unstable').name()};")

    def _fit(self, step: StepResponse, envelope) -> None:
        y = step.y[np.isfinite(step.y)]
        if y.size == 0:
            return
        lo, hi = min(float(y.min()), 0.0), max(float(y.max()), 0.0)
        if step.metrics.final_value is not None:
            lo, hi = min(lo, step.metrics.final_value), max(hi, step.metrics.final_value)
        if envelope is not None:  # the envelope may start far out: show it only as far as the response
            span = hi - lo
            lo, hi = max(min(lo, float(envelope[1].min())), lo - 0.25 * span), \
                min(max(hi, float(envelope[0].max())), hi + 0.25 * span)
        pad = 0.06 * (hi - lo) if hi > lo else 1.0
        box = self.plot.getPlotItem().getViewBox()
        box.setRange(xRange=(0.0, float(step.t[-1])), yRange=(lo - pad, hi + pad), padding=0)

    def plotted_response(self) -> tuple[np.ndarray, np.ndarray]:
        """The curve's data as drawn (t, y)."""
        t, y = self.curve.getData()
        return np.asarray(t), np.asarray(y)
