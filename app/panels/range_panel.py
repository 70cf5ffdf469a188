"""Stable range panel: a number line of the tuning parameter with the stable intervals, the
intervals meeting the decay requirement and the current value; the endpoints exact and decimal
with how stability is lost there; margins at nominal; the verdict at the current value.
"""
from __future__ import annotations

import html
import math
import re
from dataclasses import dataclass, field

from PySide6.QtCore import QPointF, QRectF, QSize, Qt
from PySide6.QtGui import QColor, QGuiApplication, QPainter, QPainterPath, QPalette, QPen
from PySide6.QtWidgets import (
    QFrame,
    QHBoxLayout,
    QLabel,
    QScrollArea,
    QSizePolicy,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from app.panels.common import (
    MINUS,
    MessageLabel,
    Readout,
    colour,
    is_palette_change,
    math_html,
    number,
    number_css,
)
from app.theme import figure_font, label_font
from core.present.report_text import distance_phrase

HOW_LOST = {
    "origin": "a real pole passes through s = 0",
    "crossing": "a complex pair crosses the imaginary axis at s = ±j{omega} rad/s",
    "infinity": "the leading coefficient vanishes: a pole goes to infinity and the order drops",
    "singular": "the whole polynomial vanishes",
}


def how_lost(kind: str, omega: float | None) -> str:
    """Plain words for how stability is lost at an endpoint of this kind.

    >>> how_lost("crossing", 1.5)
    'a complex pair crosses the imaginary axis at s = ±j1.5 rad/s'
    """
    if kind == "crossing" and omega is None:
        return "a pair of poles reaches the imaginary axis"
    return HOW_LOST.get(kind, kind).format(omega=number(omega))


def nice_ticks(lo: float, hi: float, count: int = 6) -> list[float]:
    """Round tick values covering [lo, hi] (1, 2, 5 steps).

    >>> nice_ticks(0, 10)
    [0.0, 2.0, 4.0, 6.0, 8.0, 10.0]
    """
    if not hi > lo:
        return [lo]
    raw = (hi - lo) / max(count - 1, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw)
    first = math.ceil(lo / step - 1e-9) * step
    out, t = [], first
    while t <= hi + 1e-9 * step:
        out.append(round(t, 12) + 0.0)
        t += step
    return out


@dataclass
class LineData:
    """What the number line draws (floats; None is an unbounded end)."""

    name: str = ""
    span: tuple[float, float] = (0.0, 1.0)
    stable: list[tuple[float | None, float | None]] = field(default_factory=list)
    decay: list[tuple[float | None, float | None]] | None = None
    endpoints: list[float] = field(default_factory=list)
    current: float | None = None


def view_span(minimum: float | None, maximum: float | None, endpoints: list[float],
              current: float | None) -> tuple[float, float]:
    """The slider's min..max, widened to show every finite endpoint and the current value.

    >>> view_span(0, 4, [0.0, 6.0], 2.0)
    (-0.3, 6.3)
    """
    points = [v for v in (minimum, maximum, current, *endpoints) if v is not None and math.isfinite(v)]
    if not points:
        return (0.0, 1.0)
    lo, hi = min(points), max(points)
    if hi - lo < 1e-12:
        lo, hi = lo - 1.0, hi + 1.0
    pad = 0.05 * (hi - lo)
    return (round(lo - pad, 12), round(hi + pad, 12))


class NumberLine(QWidget):
    """A painted axis with the stable and decay intervals as bars and the current value marker."""

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self.data = LineData()
        self.setMinimumHeight(86)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)

    def sizeHint(self) -> QSize:
        return QSize(420, 86)

    def set_data(self, data: LineData) -> None:
        """Replace what is drawn."""
        self.data = data
        self.update()

    def set_current(self, value: float | None) -> None:
        """Move the current value marker."""
        self.data.current = value
        self.update()

    def x_of(self, value: float) -> float:
        """Pixel x of a parameter value."""
        lo, hi = self.data.span
        left, right = 16.0, self.width() - 16.0
        return left + (value - lo) / (hi - lo) * (right - left)

    def paintEvent(self, event) -> None:
        d = self.data
        p = QPainter(self)
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        text = self.palette().color(QPalette.ColorRole.WindowText)
        lo, hi = d.span
        left, right = self.x_of(lo), self.x_of(hi)
        axis_y = 50.0
        p.setFont(figure_font(8.5))
        # bars: stable above the axis, decay (thinner) just below it
        self._bars(p, d.stable, axis_y - 16, 10, colour("stable"))
        if d.decay is not None:
            self._bars(p, d.decay, axis_y - 4, 4, colour("decay"))
        p.setPen(QPen(text, 1))
        p.drawLine(QPointF(left, axis_y), QPointF(right, axis_y))
        p.setPen(QPen(colour("muted"), 1))
        for t in nice_ticks(lo, hi):
            x = self.x_of(t)
            p.drawLine(QPointF(x, axis_y), QPointF(x, axis_y + 4))
            label = number(t, 4)
            w = p.fontMetrics().horizontalAdvance(label)
            p.drawText(QPointF(min(max(x - w / 2, 0), self.width() - w), axis_y + 17), label)
        p.setPen(QPen(colour("unstable"), 1.4))
        for v in d.endpoints:
            if lo <= v <= hi:
                x = self.x_of(v)
                p.drawLine(QPointF(x, axis_y - 20), QPointF(x, axis_y + 2))
        if d.current is not None and lo <= d.current <= hi:
            x = self.x_of(d.current)
            marker = colour("marker")
            p.setPen(QPen(marker, 1.2))
            p.drawLine(QPointF(x, axis_y - 22), QPointF(x, axis_y + 6))
            tri = QPainterPath()
            tri.moveTo(x, axis_y - 22)
            tri.lineTo(x - 5, axis_y - 30)
            tri.lineTo(x + 5, axis_y - 30)
            tri.closeSubpath()
            p.fillPath(tri, marker)
            label = f"{d.name} = {number(d.current, 5)}"
            w = p.fontMetrics().horizontalAdvance(label)
            p.drawText(QPointF(min(max(x - w / 2, 0), self.width() - w), axis_y - 34), label)
        self._legend(p, axis_y + 32, d.decay is not None)
        p.end()

    def _bars(self, p: QPainter, intervals, top: float, height: float, fill: QColor) -> None:
        lo, hi = self.data.span
        for a, b in intervals:
            a = lo if a is None or a < lo else a
            b = hi if b is None or b > hi else b
            if b <= a:
                continue
            rect = QRectF(self.x_of(a), top, self.x_of(b) - self.x_of(a), height)
            p.fillRect(rect, fill)

    def _legend(self, p: QPainter, y: float, with_decay: bool) -> None:
        p.setFont(label_font(8))
        x = 16.0
        entries = [("stable", colour("stable"))] + ([("meets the decay requirement", colour("decay"))]
                                                   if with_decay else [])
        for text, fill in entries:
            p.fillRect(QRectF(x, y - 8, 14, 7), fill)
            p.setPen(QPen(colour("muted")))
            p.drawText(QPointF(x + 18, y), text)
            x += 26 + p.fontMetrics().horizontalAdvance(text)


SHORT_EXACT = 28  # exact texts longer than this are summarised on screen (full text: Copy exact)


def _plain(exact: str) -> str:
    return exact.replace("-", MINUS)


def exact_summary(exact: str, name: str) -> str:
    """Exact endpoint text as rich text for the panel: a rational as it is, a root of a short
    polynomial written out without its decimal (shown elsewhere), a long one summarised by degree.

    >>> exact_summary("20020/3249", "K")
    '20020/3249'
    >>> exact_summary("root of 2*K^2 - 3 near 1.22474487139159", "K")
    'root of 2K<sup>2</sup> − 3'
    >>> exact_summary("root of 98531853088*K^11 + 70827113850250847*K^10 - 125813400206225556 near 0.2", "K")
    'root of a degree-11 polynomial in K'
    """
    m = re.fullmatch(r"root of (.*) near \S+", exact)
    if m is None:
        return html.escape(_plain(exact))
    poly = m.group(1)
    if len(poly) <= 2 * SHORT_EXACT:
        return "root of " + math_html(poly)
    degree = max((int(e) for e in re.findall(r"\^(\d+)", poly)), default=1)
    return f"root of a degree-{degree} polynomial in {html.escape(name)}"


def _decimal(x: float | None, approx: str | None, unbounded: str) -> str:
    if x is None and approx is None:
        return unbounded
    return number(x) if x is not None and math.isfinite(x) else str(approx).replace("-", MINUS)


def _interval_text(iv, exact, approx=(None, None)) -> str:
    """``(0, 6)`` in decimals (from ``approx`` beyond the float range); the exact ends after it when
    they are short and differ."""
    decimals = [_decimal(iv[0], approx[0], "−∞"), _decimal(iv[1], approx[1], "+∞")]
    text = f"({decimals[0]}, {decimals[1]})"
    ends = [("−∞" if iv[0] is None else _plain(exact[0])), ("+∞" if iv[1] is None else _plain(exact[1]))]
    if ends != decimals and all(len(e) <= SHORT_EXACT for e in ends):
        text += f" <span class='muted'>= ({html.escape(ends[0])}, {html.escape(ends[1])})</span>"
    return text


def range_intervals_html(ranges: dict) -> str:
    """A stable-range dict's intervals joined by ∪, each as :func:`_interval_text` writes it.
    The panel and the exported report both use it, so their numbers are the same text."""
    approx = ranges.get("approx_intervals") or [(None, None)] * len(ranges["intervals"])
    return " ∪ ".join(_interval_text(iv, ex, ap)
                      for iv, ex, ap in zip(ranges["intervals"], ranges["exact_intervals"], approx, strict=True))


def robust_html(report) -> str:
    """The robust range (every toleranced value at once) with its method and each end's worst case;
    empty without tolerances. The panel and the exported report both use it."""
    robust = getattr(report, "robust_range", None)
    if robust is None:
        return ""
    d, name = robust.to_dict(), html.escape(report.parameter or "")
    boxes = ", ".join(f"{html.escape(q)} in [{html.escape(lo)}, {html.escape(hi)}]" for q, (lo, hi) in d["tolerances"].items())
    kind = ("<span class='good'>exact</span>" if d["exact"] else
            "<span class='warn'><b>ESTIMATED</b> (sampled: a value found stable may still fail elsewhere in the "
            "tolerances)</span>")
    head = (f"<p style='margin:6px 0 2px 0'><b>Robust for every {boxes}:</b> ")
    if d["intervals"]:
        head += f"{name} in <span class='num'>{range_intervals_html(d)}</span>"
    else:
        head += f"<span class='bad'>no value of {name}</span>"
    rows = "".join(f"<tr><td class='num'>{name} = {html.escape(e['approx']).replace('-', MINUS)}</td>"
                   f"<td>worst case {', '.join(f'{html.escape(q)} = {html.escape(v)}' for q, v in e['worst_case_exact'].items())}</td></tr>"
                   for e in d["endpoints"] if e["worst_case_exact"])
    notes = "".join(f"<div class='muted'>{html.escape(n)}</div>" for n in d["notes"])
    method = "" if d["method"] == "exact" else f"; {html.escape(d['method'])}"
    return (head + f" &nbsp;({kind}{method}: {html.escape(d['reason'])})</p>"
            + (f"<table cellspacing='0'>{rows}</table>" if rows else "") + notes)


def _interval_plain(iv, exact) -> str:
    ends = ["−∞" if iv[0] is None else _plain(exact[0]), "+∞" if iv[1] is None else _plain(exact[1])]
    return f"({ends[0]}, {ends[1]})"


class RangePanel(QWidget):
    """Shows the stable range of the tuning parameter and the verdict at the current value."""

    TITLE = "Stable range"

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self._result = None
        self._value: float | None = None
        self.message = MessageLabel(self)
        self.line = NumberLine(self)
        self.verdict = QLabel(self)
        self.verdict.setTextFormat(Qt.TextFormat.RichText)
        verdict = Readout(self.verdict)  # a slider frame never relayouts the panel
        self.details = QLabel()
        self.details.setWordWrap(True)
        self.details.setTextFormat(Qt.TextFormat.RichText)
        self.details.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.details.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        self.details.setMinimumWidth(160)  # long words never widen the panel
        self.scroll = QScrollArea(self)
        self.scroll.setWidget(self.details)
        self.scroll.setWidgetResizable(True)
        self.scroll.setFrameShape(QFrame.Shape.NoFrame)
        self.scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.copy_button = QToolButton(self)
        self.copy_button.setText("Copy exact")
        self.copy_button.setToolTip("Copy the stable intervals and endpoints with their exact values as text")
        self.copy_button.clicked.connect(self.copy_exact)
        self.copy_button.setEnabled(False)
        top = QHBoxLayout()
        top.addWidget(verdict, 1)
        top.addWidget(self.copy_button)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(6, 4, 6, 4)
        layout.addWidget(self.message)
        layout.addWidget(self.line)
        layout.addLayout(top)
        layout.addWidget(self.scroll, 1)

    # -- public -----------------------------------------------------------------------------------
    def show_result(self, result) -> None:
        """Show a new AnalysisResult (its error message when it has no Report)."""
        self._result = result
        self.message.show_message(result.message)
        if result.tuning_range is not None:
            self._value = result.tuning_range.nominal
        report = result.report
        has_range = report is not None and report.stable_range is not None
        self.line.setVisible(has_range)
        self.copy_button.setEnabled(has_range)
        if report is None:
            self.details.setText("")
            self.verdict.setText("")
            return
        if not has_range:
            self.details.setText(f"<style>{number_css()}</style>Choose a tuning parameter to see the range "
                                 "of its values for which the loop is stable.")
        else:
            rng = report.stable_range.to_dict()
            dec = report.decay.to_dict() if report.decay is not None else None
            tuning = result.tuning_range
            ends = [e["value"] for e in rng["endpoints"]]
            if dec and dec["endpoints"]:
                ends += [e["value"] for e in dec["endpoints"]]
            span = view_span(tuning.minimum if tuning else None, tuning.maximum if tuning else None,
                             ends, self._value)
            self.line.set_data(LineData(report.parameter, span, [tuple(iv) for iv in rng["intervals"]],
                                        [tuple(iv) for iv in dec["intervals"]]
                                        if dec and dec["intervals"] is not None else None,
                                        [e["value"] for e in rng["endpoints"]], self._value))
            self.details.setText(self.details_html())
        self._update_verdict()

    def changeEvent(self, event) -> None:
        if is_palette_change(event) and hasattr(self, "scroll") and self._result is not None:
            value = self._value
            self.show_result(self._result)  # rich text colours follow the palette
            if value is not None:
                self.set_current_value(value)
        super().changeEvent(event)

    def set_current_value(self, value: float) -> None:
        """Move the marker and the verdict to the tuning parameter's current value."""
        self._value = value = float(value)
        self.line.set_current(value)
        self._update_verdict()

    # -- text -------------------------------------------------------------------------------------
    def details_html(self) -> str:
        """Intervals, endpoints, margins and the decay range as rich text."""
        report = self._result.report
        name = report.parameter
        rng = report.stable_range.to_dict()
        out = [f"<style>{number_css()} td {{ padding: 1px 8px 1px 0; }}</style>"]
        if rng["intervals"]:
            ivs = range_intervals_html(rng)
            out.append(f"<p style='margin:2px 0'><b>Stable for {name} in</b> <span class='num'>{ivs}</span></p>")
        else:
            out.append(f"<p style='margin:2px 0' class='bad'>Stable for no value of {name}.</p>")
        if rng["endpoints"]:
            rows = "".join(self._endpoint_rows(name, e) for e in rng["endpoints"])
            out.append(f"<p style='margin:6px 0 2px 0'><b>Endpoints</b></p>"
                       f"<table cellspacing='0'>{rows}</table>")
        out.append(robust_html(report))
        out.append(self._margins_html(name))
        out.append(self._decay_html(name))
        return "".join(out)

    @staticmethod
    def _endpoint_rows(name: str, e: dict) -> str:
        """The decimal value first, how stability is lost beside it; the exact value below in small
        muted type (summarised when long; Copy exact gives the full text)."""
        decimal = number(e["value"], 10) if math.isfinite(e["value"]) else e["approx"].replace("-", MINUS)
        exact = _plain(e["exact"])
        same = exact == decimal
        head = (f"<tr><td class='num' style='white-space:nowrap'><b>{name} {'=' if same else '≈'} {decimal}</b>"
                f"</td><td>{how_lost(e['kind'], e['omega'])}</td></tr>")
        if same:
            return head
        summary = exact_summary(e["exact"], name)
        shown = html.escape(f"{name} = {exact}") if summary == html.escape(exact) else f"{name} = {summary}"
        return head + (f"<tr><td colspan='2' class='num muted' style='font-size:small; padding-bottom:4px'>"
                       f"exact: {shown}</td></tr>")

    def exact_text(self) -> str:
        """Plain text of the stable intervals and endpoints with their full exact values."""
        report = self._result.report if self._result is not None else None
        if report is None or report.stable_range is None:
            return ""
        name = report.parameter
        rng = report.stable_range.to_dict()
        ivs = " ∪ ".join(_interval_plain(iv, ex) for iv, ex in zip(rng["intervals"], rng["exact_intervals"]))
        lines = [f"Stable for {name} in {ivs}" if ivs else f"Stable for no value of {name}"]
        for e in rng["endpoints"]:
            lines.append(f"{name} = {_plain(e['exact'])}  (≈ {number(e['value'], 15)}): "
                         f"{how_lost(e['kind'], e['omega'])}")
        return "\n".join(lines)

    def copy_exact(self) -> None:
        """Put :meth:`exact_text` on the clipboard."""
        QGuiApplication.clipboard().setText(self.exact_text())

    def _margins_html(self, name: str) -> str:
        m = self._result.report.margins
        if m is None:
            return ""
        md = m.to_dict()
        if not md["stable"]:
            return (f"<p style='margin:6px 0 2px 0'><b>Margins at nominal</b> ({name} = "
                    f"<span class='num'>{number(md['nominal'])}</span>): none, the nominal value is not stable.</p>")
        rows = []
        for side, factor, db, edge in (("may rise", "rise_factor", "rise_db", "high"),
                                             ("may fall", "fall_factor", "fall_db", "low")):
            if md[edge] is None:
                rows.append(f"<tr><td>{side}</td><td colspan='3'>without limit</td></tr>")
                continue
            ratio = (f"×{number(md[factor], 4)}" if md[factor] is not None else "")
            dbs = f"{number(md[db], 3)} dB" if md[db] is not None else ""
            rows.append(f"<tr><td>{side}</td><td class='num'>{ratio}</td><td class='num'>{dbs}</td>"
                        f"<td class='num muted'>{distance_phrase(md, side.split()[1]).replace('-', MINUS)}</td></tr>")
        return (f"<p style='margin:6px 0 2px 0'><b>Margins at nominal</b> {name} = "
                f"<span class='num'>{number(md['nominal'])}</span></p><table>{''.join(rows)}</table>")

    def _decay_html(self, name: str) -> str:
        dec = self._result.report.decay
        if dec is None:
            return ""
        d = dec.to_dict()
        head = (f"<p style='margin:6px 0 2px 0'><b>Decay requirement</b> σ = <span class='num'>"
                f"{number(d['sigma'])}</span> 1/s <span class='muted'>({d['note']})</span></p>")
        if d["intervals"] is None:
            return head
        if d["intervals"]:
            ivs = range_intervals_html(d)
            body = f"met for {name} in <span class='num'>{ivs}</span>"
        else:
            body = f"<span class='bad'>met for no value of {name}</span>"
        return head + f"<p style='margin:0 0 0 12px'>{body}</p>"

    def _update_verdict(self) -> None:
        self.verdict.setText(self.verdict_html())

    def verdict_html(self) -> str:
        """The verdict at the current value: stable or not (exact), and whether decay is met."""
        report = self._result.report if self._result is not None else None
        if report is None:
            return ""
        if report.parameter is None or self._value is None:
            nominal = report.nominal
            if nominal is None:
                return ""
            return self._verdict_words("", nominal.stable, nominal.rhp, nominal.jw, None)
        verdict = self._result.verdict_at(self._value)
        where = f"At {report.parameter} = <span class='num'>{number(self._value)}</span>: "
        return self._verdict_words(where, verdict.stable, verdict.rhp, verdict.jw, verdict.decay_met,
                                   verdict.order_drops)

    @staticmethod
    def _verdict_words(where: str, stable: bool, rhp: int, jw: int, decay: bool | None,
                       dropped: bool = False) -> str:
        css = f"<style>{number_css()}</style>"
        if stable:
            words = "<span class='good'>STABLE</span>"
        else:
            why = []
            if rhp:
                why.append(f"{rhp} pole{'s' if rhp > 1 else ''} in the right half plane")
            if jw:
                why.append(f"{jw} on the imaginary axis")
            if dropped:
                why.append("the order drops here")
            words = "<span class='bad'>UNSTABLE</span>" + (f" ({', '.join(why)})" if why else "")
        if decay is not None:
            words += ("; decay <span class='good'>met</span>" if decay
                      else "; decay <span class='bad'>not met</span>")
        return css + where + words
