"""Pole map: poles (x) and zeros (o) at the current value, their paths over the tuning range, the
right half plane shaded pale red, the decay requirement as a labelled dotted line (no band), hover details,
and a slider with a spin box for the current value.

Plot items are made once; a new result or value only calls ``setData``. A slider frame costs one
``numpy.roots`` of the analysed polynomial's float coefficients (precomputed table) and a setData.
"""
from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QPalette
from PySide6.QtWidgets import QDoubleSpinBox, QHBoxLayout, QLabel, QSlider, QToolButton, QVBoxLayout, QWidget

from app.panels.common import MessageLabel, Readout, colour, complex_number, is_palette_change, number
from app.theme import figure_font

SLIDER_STEPS = 1000


def pole_tip(x: float, y: float, name: str | None, value: float | None) -> str:
    """Hover text for the pole at x + jy: position, damping ratio, natural frequency.

    >>> print(pole_tip(-3.0, 4.0, "K", 2.0))
    s = −3 + j4  at K = 2
    damping ratio 0.6
    natural frequency 5 rad/s
    """
    wn = math.hypot(x, y)
    zeta = "undefined (pole at the origin)" if wn == 0 else number(-x / wn, 4)
    at = f"  at {name} = {number(value)}" if name and value is not None else ""
    return (f"s = {complex_number(complex(x, y))}{at}\ndamping ratio {zeta}\n"
            f"natural frequency {number(wn, 5)} rad/s")


def path_curve(paths: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """One (x, y) pair for all paths, NaN-separated, for a single curve with connect='finite'."""
    if paths.size == 0:
        return np.empty(0), np.empty(0)
    cols = [np.append(paths[:, j], np.nan) for j in range(paths.shape[1])]
    z = np.concatenate(cols)
    return z.real.copy(), z.imag.copy()


MAX_ARROWS = 24  # direction marks on at most this many paths (the longest in view)


def path_arrows(paths: np.ndarray, box: tuple[float, float, float, float]) -> list[tuple[complex, complex]]:
    """(point, direction) of one arrow per path that moves inside ``box`` (x0, x1, y0, y1): half
    way along its visible length, pointing the way the tuning parameter increases.

    >>> t = np.linspace(0, 1, 11)
    >>> [(complex(p), round(float(d.imag), 9)) for p, d in path_arrows(np.stack([-1 + 2j * t], axis=1), (-2, 0, -1, 3))]
    [((-1+0.8j), 0.2)]
    """
    x0, x1, y0, y1 = box
    found = []
    for column in paths.T:
        inside = np.isfinite(column) & (column.real >= x0) & (column.real <= x1) & (column.imag >= y0) & (column.imag <= y1)
        steps = np.abs(np.diff(column)) * (inside[1:] & inside[:-1])
        steps = np.where(np.isfinite(steps), steps, 0.0)
        length = steps.sum()
        if length <= 0.02 * max(x1 - x0, y1 - y0):
            continue
        i = int(np.searchsorted(np.cumsum(steps), length / 2))
        found.append((length, column[i], column[i + 1] - column[i]))
    found.sort(key=lambda item: -item[0])
    return [(point, direction) for _, point, direction in found[:MAX_ARROWS]]


def _finite_box(points: np.ndarray) -> tuple[float, float, float, float] | None:
    pts = points[np.isfinite(points)]
    if pts.size == 0:
        return None
    return float(pts.real.min()), float(pts.real.max()), float(pts.imag.min()), float(pts.imag.max())


FAR_FACTOR = 6.0  # a pole or zero this many times farther than the dominant ones is left outside the view


def dominant(points: np.ndarray, crossings: list[float], sigma: float | None) -> np.ndarray:
    """The points within FAR_FACTOR times the size of what matters most: the slowest pole, the
    crossing frequencies and the decay rate (poles at -500 and -200 must not squash a pair at ±4j).

    >>> dominant(np.array([-500, -200, -1 + 4j, -1 - 4j]), [44.0], None).tolist()
    [(-200+0j), (-1+4j), (-1-4j)]
    """
    finite = points[np.isfinite(points)]
    if finite.size == 0:
        return finite
    slowest = finite[np.argmax(finite.real)]
    ref = max([abs(slowest), *crossings, sigma or 0.0, 1e-12])
    return finite[np.abs(finite) <= FAR_FACTOR * ref]


def view_box(poles: np.ndarray, zeros: np.ndarray, paths: np.ndarray, sigma: float | None,
             crossings: list[float] | None = None):
    """x and y ranges showing the dominant poles and zeros (:func:`dominant`), the imaginary axis,
    the decay line and the axis crossings, and the paths as far as 3 times that extent (paths may
    run off to infinity where the order drops)."""
    crossings = crossings or []
    near = dominant(np.concatenate([poles, zeros]), crossings, sigma)
    core_pts = np.concatenate([near, np.array([0j, complex(-(sigma or 0.0), 0.0)]),
                               np.array([1j * w for w in crossings] + [-1j * w for w in crossings])])
    x0, x1, y0, y1 = _finite_box(core_pts)
    size = max(x1 - x0, y1 - y0, 1.0)
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    limit = 1.5 * size
    box = _finite_box(paths.ravel()) if paths.size else None
    if box is not None:
        x0 = min(x0, max(box[0], cx - limit))
        x1 = max(x1, min(box[1], cx + limit))
        y0 = min(y0, max(box[2], cy - limit))
        y1 = max(y1, min(box[3], cy + limit))
    y = max(abs(y0), abs(y1), 0.5)  # symmetric about the real axis
    pad_x = 0.08 * max(x1 - x0, 1e-9) + 0.05
    return (x0 - pad_x, x1 + pad_x), (-1.1 * y, 1.1 * y)


class PoleMap(QWidget):
    """The pole map with its current-value slider; emits what the user asks for on the slider."""

    TITLE = "Pole map"
    valueDragged = Signal(float)    # live, while dragging or stepping
    valueCommitted = Signal(float)  # slider released, keyboard step, or spin box edited

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self._result = None
        self._value: float | None = None
        self._range = (0.0, 1.0)
        self._updating = False
        self.message = MessageLabel(self)
        self.caption = QLabel(self)
        self.caption.setFont(figure_font(9))
        caption = Readout(self.caption, lines=2)  # a slider frame never relayouts the panel
        self.plot = pg.PlotWidget(self)
        self._make_items()
        self.slider = QSlider(Qt.Orientation.Horizontal, self)
        self.slider.setRange(0, SLIDER_STEPS)
        self.spin = QDoubleSpinBox(self)
        self.spin.setFont(figure_font(9))
        self.spin.setKeyboardTracking(False)
        self.name_label = QLabel(self)
        self.slider.valueChanged.connect(self._slider_moved)
        self.slider.sliderReleased.connect(self._commit)
        self.spin.valueChanged.connect(self._spin_changed)
        self.reset_view = QToolButton(self)
        self.reset_view.setText("Reset view")
        self.reset_view.setToolTip("Back to the view of the analysis (drag to pan, wheel to zoom)")
        self.reset_view.clicked.connect(self._reset_view)
        self._home = None
        row = QHBoxLayout()
        row.addWidget(self.name_label)
        row.addWidget(self.slider, 1)
        row.addWidget(self.spin)
        row.addWidget(self.reset_view)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addWidget(self.message)
        layout.addWidget(caption)
        layout.addWidget(self.plot, 1)
        layout.addLayout(row)
        self._set_controls_enabled(False)

    # -- plot items (made once) -------------------------------------------------------------------
    def _make_items(self) -> None:
        plot = self.plot
        item = plot.getPlotItem()
        item.setLabel("bottom", "Re s", units="1/s")
        item.setLabel("left", "Im s", units="rad/s")
        item.setMenuEnabled(False)
        item.hideButtons()  # no auto-range button floating in the corner
        for axis in ("bottom", "left"):
            item.getAxis(axis).enableAutoSIPrefix(False)  # 1/s and rad/s always, never m1/s or mrad/s
        self.rhp = pg.LinearRegionItem((0, 1), movable=False, pen=pg.mkPen(None))
        self.decay_line = pg.InfiniteLine(0, angle=90, movable=False, label="", labelOpts={
            "position": 0.93, "anchors": [(1, 0.5), (1, 0.5)], "rotateAxis": (1, 0)})
        self.imag_axis = pg.InfiniteLine(0, angle=90, movable=False)
        self.real_axis = pg.InfiniteLine(0, angle=0, movable=False)
        for it in (self.rhp, self.decay_line, self.imag_axis, self.real_axis):
            it.setZValue(-10)
            plot.addItem(it, ignoreBounds=True)
        self.paths = pg.PlotDataItem([], [], connect="finite")
        self.zeros = pg.ScatterPlotItem(symbol="o", size=11, brush=pg.mkBrush(None))
        self.poles = pg.ScatterPlotItem(symbol="x", size=12, hoverable=True, hoverSize=17, tip=self._tip)
        self.far = pg.ScatterPlotItem(symbol="t3", size=11)  # poles outside the view, pinned to its edge
        self.crossings = pg.ScatterPlotItem(symbol="d", size=10)  # where a pair crosses the axis, at the range ends
        self.crossing_labels: list[pg.TextItem] = []
        self.arrows: list[pg.ArrowItem] = []
        for it in (self.paths, self.crossings, self.far, self.zeros, self.poles):
            plot.addItem(it)
        self._apply_theme()
        item.getViewBox().sigXRangeChanged.connect(self._cover_right_half_plane)
        item.getViewBox().sigRangeChanged.connect(self._view_changed)
        item.getViewBox().sigResized.connect(self._view_changed)  # arrows are drawn in screen angles

    def _apply_theme(self) -> None:
        """Colour every plot item from the current (light or dark) palette."""
        plot = self.plot
        plot.setBackground(self.palette().color(QPalette.ColorRole.Base))
        text = self.palette().color(QPalette.ColorRole.Text)
        for axis in ("bottom", "left"):
            plot.getAxis(axis).setPen(pg.mkPen(colour("axis")))
            plot.getAxis(axis).setTextPen(pg.mkPen(text))
        self.rhp.setBrush(pg.mkBrush(colour("rhp")))
        self.decay_line.setPen(pg.mkPen(colour("decay"), width=2.2, style=Qt.PenStyle.DotLine))
        self.decay_line.label.setColor(colour("decay"))
        self.imag_axis.setPen(pg.mkPen(colour("axis"), width=1.2))
        self.real_axis.setPen(pg.mkPen(colour("axis"), width=0.8))
        self.paths.setPen(pg.mkPen(colour("path"), width=1))
        self.zeros.setPen(pg.mkPen(colour("zero"), width=1.8))
        self.crossings.setPen(pg.mkPen(colour("unstable"), width=1.4))
        self.far.setPen(pg.mkPen(colour("pole"), width=1.2))
        self.far.setBrush(pg.mkBrush(None))
        self.crossings.setBrush(pg.mkBrush(colour("unstable")))
        self.poles.setPen(pg.mkPen(colour("pole"), width=1.4))
        self.poles.setBrush(pg.mkBrush(colour("pole")))

    def changeEvent(self, event) -> None:
        if is_palette_change(event) and hasattr(self, "poles"):
            self._apply_theme()
        super().changeEvent(event)

    def _cover_right_half_plane(self, _box, x_range) -> None:
        """Keep the pale red shading from the imaginary axis to the right edge of the view."""
        self.rhp.setRegion((0, max(x_range[1], 0) + abs(x_range[1] - x_range[0])))

    def _tip(self, x: float, y: float, data) -> str:
        report = self._result.report if self._result is not None else None
        return pole_tip(x, y, report.parameter if report else None, self._value)

    # -- public -----------------------------------------------------------------------------------
    def show_result(self, result) -> None:
        """Show a new AnalysisResult: paths, decay line, slider range; poles at the current value."""
        self._result = result
        self.message.show_message(result.message or result.float_warning)
        report = result.report
        tuning = result.tuning_range
        if tuning is not None:
            self._value = tuning.nominal
        self._set_controls_enabled(tuning is not None and report is not None)
        if report is None:
            for it in (self.paths, self.poles, self.zeros, self.crossings):
                it.setData([], [])
            for label in self.crossing_labels:
                self.plot.removeItem(label)
            self.crossing_labels = []
            self.caption.setText("")
            return
        x, y = path_curve(result.paths)
        self.paths.setData(x, y)
        self._mark_crossings(report)
        self._draw_arrows()
        sigma = report.decay.sigma if report.decay is not None else None
        self.decay_line.setVisible(sigma is not None)
        if sigma is not None:
            self.decay_line.setValue(-sigma)
            self.decay_line.label.setFormat(f"decay limit σ = {number(sigma)} 1/s")
        if tuning is not None:
            self._range = (tuning.minimum, tuning.maximum)
            self.name_label.setText(tuning.name)
            self._updating = True
            span = tuning.maximum - tuning.minimum
            decimals = max(2, min(8, 3 - math.floor(math.log10(span)))) if span > 0 else 3
            self.spin.setDecimals(decimals)
            self.spin.setRange(tuning.minimum, tuning.maximum)
            self.spin.setSingleStep(span / 100 if span > 0 else 0.1)
            self._updating = False
        value = self._value if tuning is not None else None
        poles, zeros = result.poles_at(value), result.zeros_at(value)
        crossings = [y for y, _ in self.plotted_crossings()]
        self._home = view_box(poles, zeros, result.paths, sigma, crossings)
        self._reset_view()
        self._draw_at(value)

    def _outside_home(self, poles: np.ndarray) -> str:
        """``2 poles (far left)`` for the poles outside the analysis' view; empty when none."""
        if self._home is None or poles.size == 0:
            self.far.setData([], [])
            return ""
        (x0, x1), (y0, y1) = self._home
        out = poles[(poles.real < x0) | (poles.real > x1) | (poles.imag < y0) | (poles.imag > y1)]
        inset = 0.015 * (x1 - x0)
        self.far.setData(np.clip(out.real, x0 + inset, x1 - inset), np.clip(out.imag, y0, y1))
        if out.size == 0:
            return ""
        where = ", ".join(complex_number(z, 4) for z in out[np.argsort(out.real)][:3])
        return f"{out.size} pole{'s' if out.size > 1 else ''} ({where}{' …' if out.size > 3 else ''})"

    def _reset_view(self) -> None:
        if self._home is not None:
            xr, yr = self._home
            self.plot.getPlotItem().getViewBox().setRange(xRange=xr, yRange=yr, padding=0)

    def _mark_crossings(self, report) -> None:
        """A diamond at ±jω where a complex pair crosses the imaginary axis at a stable-range end,
        labelled with the parameter value there."""
        for label in self.crossing_labels:
            self.plot.removeItem(label)
        self.crossing_labels = []
        ends = [] if report.stable_range is None else [
            e for e in report.stable_range.endpoints if e.kind == "crossing" and e.omega and math.isfinite(e.omega)]
        self.crossings.setData([0.0] * 2 * len(ends), [s * e.omega for e in ends for s in (1, -1)])
        for e in ends:
            value = number(e.value, 5) if math.isfinite(e.value) else e.approx
            label = pg.TextItem(f"{report.parameter} = {value}", anchor=(1.05, 0.5), color=colour("unstable"))  # left of it
            label.setPos(0.0, e.omega)
            self.plot.addItem(label, ignoreBounds=True)
            self.crossing_labels.append(label)

    def _view_changed(self, *_args) -> None:
        self._draw_arrows()

    def _draw_arrows(self) -> None:
        """Small arrows along the paths in view, pointing the way the tuning parameter increases."""
        for arrow in self.arrows:
            self.plot.removeItem(arrow)
        self.arrows = []
        result = self._result
        if result is None or result.report is None or result.paths.size == 0:
            return
        box = self.plot.getPlotItem().getViewBox()
        (x0, x1), (y0, y1) = box.viewRange()
        pixel_w, pixel_h = box.viewPixelSize()
        if not (pixel_w > 0 and pixel_h > 0):
            return
        pen, brush = pg.mkPen(colour("path")), pg.mkBrush(colour("path"))
        for point, direction in path_arrows(result.paths, (x0, x1, y0, y1)):
            angle = math.degrees(math.atan2(direction.imag / pixel_h, -direction.real / pixel_w))
            arrow = pg.ArrowItem(pos=(point.real, point.imag), angle=angle, headLen=9, tipAngle=40, tailLen=None,
                                 pen=pen, brush=brush)
            arrow.setZValue(-5)
            self.plot.addItem(arrow, ignoreBounds=True)
            self.arrows.append(arrow)

    def plotted_arrows(self) -> list[tuple[complex, float]]:
        """(position, screen angle in degrees) of each direction arrow drawn."""
        return [(complex(a.pos().x(), a.pos().y()), a.opts["angle"]) for a in self.arrows]

    def plotted_crossings(self) -> list[tuple[float, str]]:
        """(ω, label) of each marked crossing (upper half plane)."""
        return [(label.pos().y(), label.toPlainText()) for label in self.crossing_labels]

    def set_current_value(self, value: float) -> None:
        """Move the poles (and the slider) to the tuning parameter's current value."""
        self._value = value = float(value)
        self._draw_at(value)

    def plotted_poles(self) -> np.ndarray:
        """The pole positions as drawn (complex)."""
        x, y = self.poles.getData()
        return np.asarray(x) + 1j * np.asarray(y)

    def plotted_zeros(self) -> np.ndarray:
        """The zero positions as drawn (complex)."""
        x, y = self.zeros.getData()
        return np.asarray(x) + 1j * np.asarray(y)

    # -- drawing ----------------------------------------------------------------------------------
    def _draw_at(self, value: float | None) -> None:
        result = self._result
        if result is None or result.report is None:
            return
        poles, beyond = result.poles_and_beyond(value)
        self.poles.setData(poles.real, poles.imag)
        zeros = result.zeros_at(value) if result.zero_table.size else self._nominal_zeros()
        self.zeros.setData(zeros.real, zeros.imag)
        caption = self._caption(poles, value)
        far = self._outside_home(poles)
        if far:
            caption += f" · {far} outside the view (Reset view, or zoom out)"
        if beyond:
            caption += f" · not drawn, beyond the float range: {', '.join(beyond[:3])}{' …' if len(beyond) > 3 else ''}"
        self.caption.setText(caption)
        if value is not None and result.tuning_range is not None:
            self._updating = True
            self.slider.setValue(self._slider_position(value))
            self.spin.setValue(value)
            self._updating = False

    def _nominal_zeros(self) -> np.ndarray:
        return np.array([complex(z.re, z.im) for z in self._result.report.zeros
                         for _ in range(z.multiplicity)], dtype=complex)

    def _caption(self, poles: np.ndarray, value: float | None) -> str:
        report = self._result.report
        at = f"{report.parameter} = {number(value)} · " if report.parameter and value is not None else ""
        if poles.size == 0:
            return at + "no poles"
        dom = poles[np.argmax(poles.real + 1e-12 * poles.imag)]
        wn = abs(dom)
        where = number(dom.real, 4) if dom.imag == 0 else f"{number(dom.real, 4)} ± j{number(abs(dom.imag), 4)}"
        zeta = f"ζ {number(-dom.real / wn, 3)} · " if wn > 0 else ""
        return f"{at}slowest pole {where} · {zeta}ωn {number(wn, 4)} rad/s"

    # -- slider and spin box ----------------------------------------------------------------------
    def _set_controls_enabled(self, on: bool) -> None:
        for w in (self.slider, self.spin):
            w.setEnabled(on)

    def _slider_position(self, value: float) -> int:
        lo, hi = self._range
        if hi <= lo:
            return 0
        return round((min(max(value, lo), hi) - lo) / (hi - lo) * SLIDER_STEPS)

    def _slider_value(self, position: int) -> float:
        lo, hi = self._range
        return lo + (hi - lo) * position / SLIDER_STEPS

    def _slider_moved(self, position: int) -> None:
        if self._updating:
            return
        value = self._slider_value(position)
        self.valueDragged.emit(value)
        if not self.slider.isSliderDown():  # keyboard or page step: commit at once
            self.valueCommitted.emit(value)

    def _commit(self) -> None:
        self.valueCommitted.emit(self._slider_value(self.slider.value()))

    def _spin_changed(self, value: float) -> None:
        if self._updating:
            return
        self.valueDragged.emit(value)
        self.valueCommitted.emit(value)
