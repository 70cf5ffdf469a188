"""Stability plane: two parameters as axes, each point coloured by the exact number of closed-loop
roots in the right half plane (the stable region shaded), the boundaries drawn by kind, and the
nominal point marked. A click sets both nominal values (one undo step).

The plane itself is computed with the analysis, on its worker (``AnalysisResult.plane``); this
panel only draws it. The axes are the diagram's analysis settings ``plane_x`` / ``plane_y``.
"""
from __future__ import annotations

import html
import math
from dataclasses import replace

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QPalette
from PySide6.QtWidgets import QComboBox, QHBoxLayout, QLabel, QVBoxLayout, QWidget

from app.document.editing import edit_analysis, set_nominals
from app.panels.common import MessageLabel, colour, is_palette_change, number
from app.theme import figure_font
from core.errors import LoopwrightError

NONE = "—"
BOUNDARY_STYLES = {  # kind -> (legend text, colour name, pen style)
    "origin": ("real root through s = 0", "unstable", Qt.PenStyle.SolidLine),
    "infinity": ("root to infinity (order drops)", "axis", Qt.PenStyle.DashLine),
    "crossing": ("pair on the imaginary axis", "decay", Qt.PenStyle.SolidLine),
    "singular": ("polynomial vanishes", "muted", Qt.PenStyle.DotLine),
}


def grid_image(grid: list[list[int]], stable_rgb: tuple[int, int, int], unstable_rgb: tuple[int, int, int]) -> np.ndarray:
    """RGBA (x, y, 4) for ``grid[j][i]`` (row j = y from the bottom): stable points in the stable
    colour, unstable ones in the unstable colour, paler for fewer roots, boundary points clear.

    >>> img = grid_image([[0, 2], [-1, 1]], (0, 200, 0), (200, 0, 0))
    >>> img.shape, img[0, 0].tolist(), bool(img[1, 1, 3] < img[1, 0, 3]), int(img[0, 1, 3])
    ((2, 2, 4), [0, 200, 0, 110], True, 0)
    """
    counts = np.array(grid, dtype=int).T  # (x, y)
    img = np.zeros((*counts.shape, 4), dtype=np.uint8)
    stable, unstable = counts == 0, counts > 0
    img[stable] = (*stable_rgb, 110)
    top = max(int(counts.max(initial=1)), 1)
    alpha = (70 + 110 * counts / top).clip(0, 200).astype(np.uint8)
    img[unstable, :3] = unstable_rgb
    img[unstable, 3] = alpha[unstable]
    img[counts == -2] = (128, 128, 128, 90)
    return img


def label_points(grid: list[list[int]], xs: list[float], ys: list[float]) -> list[tuple[int, float, float]]:
    """(count, x, y) for each count in the grid: the grid point of that count nearest to the mean of
    its points (inside the region even when it is not convex).

    >>> label_points([[0, 0, 2], [0, 0, 2]], [1.0, 2.0, 3.0], [10.0, 20.0])
    [(0, 1.0, 10.0), (2, 3.0, 10.0)]
    """
    counts = np.array(grid, dtype=int)
    out = []
    for count in sorted(set(counts.ravel().tolist()) - {-1, -2}):
        rows, cols = np.nonzero(counts == count)
        px, py = np.asarray(xs)[cols], np.asarray(ys)[rows]
        k = int(np.argmin((px - px.mean()) ** 2 / np.ptp(xs or [0, 1]) ** 2 + (py - py.mean()) ** 2 / np.ptp(ys or [0, 1]) ** 2))
        out.append((count, float(px[k]), float(py[k])))
    return out


def nice_value(v: float, span: float) -> float:
    """``v`` rounded to a thousandth of ``span`` (a clicked point gives a value one can type).

    >>> nice_value(3.14159, 10.0), nice_value(0.012345, 0.05)
    (3.14, 0.01234)
    """
    if span <= 0 or not math.isfinite(v):
        return v
    step = 10 ** math.floor(math.log10(span / 1000))
    return float(round(round(v / step) * step, 12))


class PlanePanel(QWidget):
    """The stability plane of the two chosen parameters (see the module notes)."""

    TITLE = "Stability plane"

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self._result = None
        self._filling = False
        self.diagram = self._signals = self.undo_stack = None
        self.message = MessageLabel(self)
        self.x_axis, self.y_axis = QComboBox(self), QComboBox(self)
        for combo, key in ((self.x_axis, "plane_x"), (self.y_axis, "plane_y")):
            combo.setMinimumContentsLength(6)
            combo.activated.connect(lambda _i, k=key, c=combo: self._choose_axis(k, c))
        self.caption = QLabel(self)
        self.caption.setFont(figure_font(9))
        self.caption.setWordWrap(True)
        self.plot = pg.PlotWidget(self)
        self._make_items()
        row = QHBoxLayout()
        row.addWidget(QLabel("x", self))
        row.addWidget(self.x_axis, 1)
        row.addWidget(QLabel("y", self))
        row.addWidget(self.y_axis, 1)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addLayout(row)
        layout.addWidget(self.message)
        layout.addWidget(self.caption)
        layout.addWidget(self.plot, 1)

    # -- plot items (made once) -------------------------------------------------------------------
    def _make_items(self) -> None:
        item = self.plot.getPlotItem()
        item.setMenuEnabled(False)
        item.hideButtons()
        for axis in ("bottom", "left"):
            item.getAxis(axis).enableAutoSIPrefix(False)
        self.image = pg.ImageItem()
        self.image.setZValue(-20)
        self.plot.addItem(self.image)
        self.arcs: list[pg.PlotDataItem] = []
        self.legend = item.addLegend(offset=(-8, -8), labelTextSize="8pt")  # bottom right
        self.hint = ""
        self.nominal = pg.TargetItem(movable=True, size=14)  # dragged: both nominal values, one undo step
        self.nominal.setZValue(10)
        self.nominal.setVisible(False)
        self.nominal.sigPositionChangeFinished.connect(self._dropped)
        self.plot.addItem(self.nominal)
        self.labels: list[pg.TextItem] = []
        self.plot.scene().sigMouseClicked.connect(self._clicked)
        self.plot.scene().sigMouseMoved.connect(self._hovered)
        self._apply_theme()

    def _apply_theme(self) -> None:
        self.plot.setBackground(self.palette().color(QPalette.ColorRole.Base))
        text = self.palette().color(QPalette.ColorRole.Text)
        for axis in ("bottom", "left"):
            self.plot.getAxis(axis).setPen(pg.mkPen(colour("axis")))
            self.plot.getAxis(axis).setTextPen(pg.mkPen(text))
        self.nominal.setPen(pg.mkPen(colour("marker"), width=2.2))
        self.nominal.setBrush(pg.mkBrush(None))

    def changeEvent(self, event) -> None:
        if is_palette_change(event) and hasattr(self, "nominal"):
            self._apply_theme()
            if self._result is not None:
                self.show_result(self._result)
        super().changeEvent(event)

    # -- document (the axes are analysis settings) ------------------------------------------------
    def set_document(self, diagram, signals, undo_stack) -> None:
        """Choose this diagram's plane axes through ``undo_stack``; follow its parameters."""
        if self._signals is not None:
            for signal in (self._signals.settingsChanged, self._signals.parametersChanged):
                try:
                    signal.disconnect(self._fill_axes)
                except (RuntimeError, TypeError):
                    pass
        self.diagram, self._signals, self.undo_stack = diagram, signals, undo_stack
        signals.settingsChanged.connect(self._fill_axes)
        signals.parametersChanged.connect(self._fill_axes)
        self._fill_axes()

    def _fill_axes(self, *_args) -> None:
        names = sorted(self.diagram.parameters)
        self._filling = True
        try:
            for combo, chosen in ((self.x_axis, self.diagram.analysis.plane_x),
                                  (self.y_axis, self.diagram.analysis.plane_y)):
                combo.clear()
                combo.addItems([NONE, *names])
                combo.setCurrentIndex(combo.findText(chosen) if chosen in names else 0)
        finally:
            self._filling = False
        self._draw_nominal()

    def _choose_axis(self, key: str, combo: QComboBox) -> None:
        if self._filling or self.diagram is None:
            return
        name = None if combo.currentText() == NONE else combo.currentText()
        other = self.diagram.analysis.plane_y if key == "plane_x" else self.diagram.analysis.plane_x
        changes = {key: name}
        if name is not None and name == other:  # the same parameter twice: swap the axes instead
            changes = {"plane_x": self.diagram.analysis.plane_y, "plane_y": self.diagram.analysis.plane_x}
        try:
            edit_analysis(self.diagram, self.undo_stack, **changes)
        except LoopwrightError as err:
            self.message.show_message(str(err))

    # -- results ----------------------------------------------------------------------------------
    def show_result(self, result) -> None:
        """Draw the result's plane (or say why there is none)."""
        self._result = result
        for it in self.arcs + self.labels:
            self.plot.removeItem(it)
        self.arcs, self.labels = [], []
        self.legend.clear()
        plane = getattr(result, "plane", None)
        self.message.show_message(result.message or getattr(result, "plane_error", None))
        if plane is None:
            self.image.clear()
            self.caption.setText("" if result.message else
                                 "Choose two parameters (x and y) to see where the loop is stable.")
            self._draw_nominal()
            return
        self._draw_plane(plane)
        self._draw_nominal()

    @property
    def empty(self) -> bool:
        """No plane to show (no axes chosen, or it could not be computed)."""
        return getattr(self._result, "plane", None) is None

    def report_html(self) -> str:
        """The plane's exact facts for the report: regions with their counts and points, boundaries."""
        plane = getattr(self._result, "plane", None)
        if plane is None:
            return ""
        rows = "".join(f"<tr><td>{'stable' if r.stable else f'{r.rhp} in the right half plane'}</td>"
                       f"<td>{html.escape(', '.join(f'{k} = {v}' for k, v in r.point.items()))}</td>"
                       f"<td>{100 * r.share:.0f} %</td></tr>" for r in plane.regions)
        bounds = "".join(f"<li>{html.escape(BOUNDARY_STYLES.get(kind, BOUNDARY_STYLES['singular'])[0])}: "
                         f"{html.escape('; '.join(f'{f} = 0' for f in factors))}</li>"
                         for kind, factors in plane.boundaries.items())
        complete = "" if plane.regions_complete else (
            "<p>Regions thinner than one grid column may be missing from this list (none is mislabelled).</p>")
        return (f"<p>{html.escape(plane.x)} from {plane.x_range[0]} to {plane.x_range[1]}, "
                f"{html.escape(plane.y)} from {plane.y_range[0]} to {plane.y_range[1]}; counts exact at "
                f"{len(plane.xs)} x {len(plane.ys)} points.</p><table><tr><th>Region</th><th>Exact point inside</th>"
                f"<th>Share (grid)</th></tr>{rows}</table><p>Boundaries (exact):</p><ul>{bounds}</ul>{complete}")

    def set_current_value(self, value: float) -> None:
        """The tuning parameter's current value moves the marker along its axis."""
        self._draw_nominal(current=float(value))

    def _draw_plane(self, plane) -> None:
        x0, x1 = (float(v) for v in plane.x_range)
        y0, y1 = (float(v) for v in plane.y_range)
        stable, unstable = colour("stable"), colour("unstable")
        self.image.setImage(grid_image(plane.grid, stable.getRgb()[:3], unstable.getRgb()[:3]), autoLevels=False)
        self.image.setRect(x0, y0, x1 - x0, y1 - y0)
        text_colour = self.palette().color(QPalette.ColorRole.Text)
        self.legend.setLabelTextColor(text_colour)  # before the items: it applies to labels made after it
        shown = set()
        for arc in plane.arcs:
            text, name, style = BOUNDARY_STYLES.get(arc.kind, BOUNDARY_STYLES["singular"])
            xs, ys = zip(*arc.points) if arc.points else ((), ())
            curve = pg.PlotDataItem(list(xs), list(ys), pen=pg.mkPen(colour(name), width=2, style=style),
                                    name=None if arc.kind in shown else text)
            shown.add(arc.kind)
            self.plot.addItem(curve)
            self.arcs.append(curve)
        for count, x, y in label_points(plane.grid, plane.xs, plane.ys):
            label = pg.TextItem("stable" if count == 0 else f"{count} in RHP", anchor=(0.5, 0.5), color=text_colour)
            label.setPos(x, y)
            self.plot.addItem(label)
            self.labels.append(label)
        item = self.plot.getPlotItem()
        item.setLabel("bottom", plane.x)
        item.setLabel("left", plane.y)
        item.getViewBox().setRange(xRange=(x0, x1), yRange=(y0, y1), padding=0)
        stable_share = sum(r.share for r in plane.regions if r.stable)
        self.caption.setText(f"Stable (shaded) on {100 * stable_share:.0f} % of the rectangle · counts exact at "
                             f"{len(plane.xs)} × {len(plane.ys)} points")
        self.hint = (f"Click, or drag the marker, to set {plane.x} and {plane.y} (one undo step); "
                     "hover a boundary for its crossing frequency")
        self.plot.setToolTip(self.hint)

    def _draw_nominal(self, current: float | None = None) -> None:
        plane = getattr(self._result, "plane", None) if self._result is not None else None
        if plane is None or self.diagram is None:
            self.nominal.setVisible(False)
            return
        px, py = (self.diagram.parameters.get(n) for n in (plane.x, plane.y))
        if px is None or py is None:
            self.nominal.setVisible(False)
            return
        x, y = px.nominal, py.nominal
        if current is not None and self.diagram.tuning_parameter in (plane.x, plane.y):
            x, y = (current, y) if self.diagram.tuning_parameter == plane.x else (x, current)
        self.nominal.blockSignals(True)
        self.nominal.setPos(x, y)
        self.nominal.blockSignals(False)
        self.nominal.setVisible(True)

    def nominal_point(self) -> tuple[float, float] | None:
        """Where the nominal marker is drawn (None when hidden)."""
        if not self.nominal.isVisible():
            return None
        pos = self.nominal.pos()
        return pos.x(), pos.y()

    def _dropped(self, _item) -> None:
        pos = self.nominal.pos()
        self.set_point(pos.x(), pos.y())

    def boundary_tip(self, x: float, y: float) -> str:
        """What the boundary nearest to (x, y) is, with the crossing frequency there (within 2 % of
        the rectangle; empty when no boundary is that near)."""
        plane = getattr(self._result, "plane", None) if self._result is not None else None
        if plane is None:
            return ""
        sx = float(plane.x_range[1] - plane.x_range[0]) or 1.0
        sy = float(plane.y_range[1] - plane.y_range[0]) or 1.0
        best, tip = 0.02, ""
        for arc in plane.arcs:
            for k, (px, py) in enumerate(arc.points):
                d = math.hypot((px - x) / sx, (py - y) / sy)
                if d < best:
                    best = d
                    tip = BOUNDARY_STYLES.get(arc.kind, BOUNDARY_STYLES["singular"])[0]
                    if arc.omega is not None and k < len(arc.omega) and arc.omega[k] is not None:
                        tip += f" at s = ±j{number(arc.omega[k], 4)} rad/s"
                    tip += f" ({plane.x} = {number(px, 4)}, {plane.y} = {number(py, 4)})"
        return tip

    def _hovered(self, pos) -> None:
        point = self.plot.getPlotItem().getViewBox().mapSceneToView(pos)
        self.plot.setToolTip(self.boundary_tip(point.x(), point.y()) or self.hint)

    def _clicked(self, event) -> None:
        plane = getattr(self._result, "plane", None) if self._result is not None else None
        if plane is None or self.diagram is None or event.button() != Qt.MouseButton.LeftButton:
            return
        point = self.plot.getPlotItem().getViewBox().mapSceneToView(event.scenePos())
        self.set_point(point.x(), point.y())

    def set_point(self, x: float, y: float) -> None:
        """Set both axes' nominal values (one undo step), rounded to a thousandth of their ranges."""
        plane = self._result.plane
        params = [self.diagram.parameters.get(n) for n in (plane.x, plane.y)]
        if any(p is None for p in params):
            return
        new = [replace(p, nominal=nice_value(v, p.maximum - p.minimum))
               for p, v in zip(params, (x, y), strict=True)]
        if not all(p.minimum <= q.nominal <= p.maximum for p, q in zip(params, new, strict=True)):
            self._draw_nominal()  # outside the rectangle: the marker goes back
            return
        title = f"set {plane.x} = {number(new[0].nominal)}, {plane.y} = {number(new[1].nominal)}"
        try:
            set_nominals(self.diagram, self.undo_stack, {p.name: p.nominal for p in new}, title)
        except LoopwrightError as err:
            self.message.show_message(str(err))

