"""Characteristic polynomial panel: expanded and factored forms, the closed-loop transfer function
as a fraction, hidden modes and other warnings. Read-only on an AnalysisResult.
"""
from __future__ import annotations

from flint import fmpq_poly
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QLabel, QTextBrowser, QVBoxLayout, QWidget

from app.panels.common import (
    MessageLabel,
    Readout,
    colour,
    is_palette_change,
    math_html,
    number,
    number_css,
    pole_number,
)
from core.algebra.polynomial import ParametricPolynomial, mpoly_context, mpoly_text, poly_text, to_fmpq
from core.errors import notice_kind


def _factor_text(const, factors: list[tuple[object, int]], text_of) -> str:
    """``(s + 1)^2 (s + 2)`` from a flint factorisation, constant first when it is not 1."""
    parts = []
    for f, e in factors:
        body = text_of(f)
        if len(factors) > 1 or e > 1 or const != 1:
            body = f"({body})" if (" + " in body or " - " in body) else body
        parts.append(body + (f"^{e}" if e > 1 else ""))
    lead = "" if const == 1 else ("-" if const == -1 else str(const) + " ")
    return lead + " ".join(parts)


def factored(poly: ParametricPolynomial) -> str | None:
    """The polynomial factored over Q (in s and the tuning parameter); None when irreducible.

    >>> factored(ParametricPolynomial.from_coefficients([1, 3, 2]))
    '(s + 1) (s + 2)'
    """
    names = [poly.parameter] if poly.parameter else []
    ctx = mpoly_context(names)
    n = len(poly.coeffs) - 1
    terms = {}
    for i, c in enumerate(poly.coeffs):
        for k in range(c.degree() + 1):
            if c[k] != 0:
                terms[(n - i, k) if names else (n - i,)] = c[k]
    mp = ctx.from_dict(terms)
    if mp.is_zero():
        return None
    const, factors = mp.factor()
    if sum(e for _, e in factors) <= 1:
        return None
    return _factor_text(const, factors, mpoly_text)


def factored_at(poly: ParametricPolynomial, value: float | None) -> str:
    """The polynomial at one value of the tuning parameter, factored over Q where it factors.

    >>> factored_at(ParametricPolynomial.from_coefficients([1, 0, -4]), None)
    '(s - 2) (s + 2)'
    """
    coeffs = poly.at(value)
    p = fmpq_poly(list(reversed(coeffs)))
    if p.degree() < 1:
        return poly_text(coeffs)
    const, factors = p.factor()
    if sum(e for _, e in factors) <= 1:
        return poly_text(coeffs)
    return _factor_text(const, factors,
                        lambda f: poly_text([f[i] for i in range(f.degree(), -1, -1)]))


def fraction_html(num: str, den: str) -> str:
    """A fraction as an HTML table: the numerator over a rule over the denominator."""
    rule = colour("marker").name()
    return ("<table cellspacing='0' cellpadding='1' style='margin-left:12px'>"
            f"<tr><td align='center' class='math' style='border-bottom: 1px solid {rule};'>"
            f"&nbsp;{math_html(num)}&nbsp;</td></tr>"
            f"<tr><td align='center' class='math'>&nbsp;{math_html(den)}&nbsp;</td></tr></table>")


def _section(title: str, body: str) -> str:
    return f"<p style='margin:8px 0 2px 0'><b>{title}</b></p>{body}"


def _line(html_text: str, cls: str = "math") -> str:
    return f"<p style='margin:0 0 0 12px' class='{cls}'>{html_text}</p>"


class PolynomialPanel(QWidget):
    """Shows the characteristic polynomial of the newest result and its value at the current value."""

    TITLE = "Characteristic polynomial"

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self._result = None
        self._value: float | None = None
        self._shown_html: str | None = None
        self.message = MessageLabel(self)
        self.view = QTextBrowser(self)
        self.view.setOpenLinks(False)
        self.view.document().setDefaultStyleSheet(number_css())
        self.at_value = QLabel(self)
        at_value = Readout(self.at_value, lines=2, pad=8)  # a slider frame never relayouts the panel
        self.at_value.setTextFormat(Qt.TextFormat.RichText)
        self.at_value.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addWidget(self.message)
        layout.addWidget(self.view, 1)
        layout.addWidget(at_value)

    def show_result(self, result) -> None:
        """Show a new AnalysisResult (its error message when it has no Report)."""
        self._result = result
        if result.tuning_range is not None:
            self._value = result.tuning_range.nominal
        self.message.show_message(result.message)
        text = self.html()
        if text != self._shown_html:  # laying out rich text is slow; many edits leave it as it was
            self._shown_html = text
            bar = self.view.verticalScrollBar()
            keep = bar.value()
            self.view.setHtml(text)
            bar.setValue(keep)
        self.at_value.setText(self.at_value_html())

    def changeEvent(self, event) -> None:
        if is_palette_change(event) and hasattr(self, "at_value"):
            self.view.document().setDefaultStyleSheet(number_css())
            self._shown_html = None  # the new style sheet applies when the text is set again
            if self._result is not None:
                value = self._value
                self.show_result(self._result)
                if value is not None:
                    self.set_current_value(value)
        super().changeEvent(event)

    def set_current_value(self, value: float) -> None:
        """Follow the tuning parameter's current value (the "at value" line)."""
        if float(value) == self._value and self.at_value.text():
            return  # e.g. the nominal value, announced again right after the result that showed it
        self._value = float(value)
        self.at_value.setText(self.at_value_html())

    def html(self) -> str:
        """The panel's rich text (empty without a Report): readied on the worker when it can be."""
        if self._result is None:
            return ""
        ready = self._result.display.get(HTML_KEY)
        return ready if isinstance(ready, str) else polynomial_html(self._result)

    def at_value_html(self) -> str:
        """The polynomial at the current value, factored over Q where it factors."""
        report = self._result.report if self._result is not None else None
        if report is None or not report.parameter or self._value is None:
            return ""
        at = factored_at(report.analysed, to_fmpq(self._value))
        return (f"<style>{number_css()}</style><b>At {report.parameter} = <span class='num'>"
                f"{number(self._value)}</span></b>&nbsp;&nbsp;<span class='math'>{math_html(at)}</span>")


HTML_KEY = "polynomial_html"  # result.display key: the panel's rich text, readied on the worker


def polynomial_html(result) -> str:
    """The panel's rich text for an AnalysisResult (empty without a Report); widget-free, so the
    analysis worker can make it."""
    report = result.report
    if report is None:
        return ""
    parts = [_section("Expanded", _line(math_html(report.polynomial)))]
    analysed = report.analysed.text()
    if analysed != report.polynomial:
        parts.append(_section("With other parameters at nominal", _line(math_html(analysed))))
    fac = factored(report.analysed)
    parts.append(_section("Factored (rational coefficients)", _line(math_html(fac)) if fac else
                          _line("does not factor over the rationals", "muted")))
    transfer = report.transfer_function
    if transfer:
        body = fraction_html(transfer["num"], transfer["den"])
        if (transfer["num"], transfer["den"]) != (transfer["num_full"], transfer["den_full"]):
            body += _line("before cancelling common factors: (" + math_html(transfer["num_full"]) + ") / ("
                          + math_html(transfer["den_full"]) + ")", "muted")
        parts.append(_section("Closed-loop transfer function, input to output", body))
    parts += warnings_html(report)
    return "".join(parts)


def warnings_html(report) -> list[str]:
    """The hidden modes and the other warnings and notes, as rich-text sections."""
    out = []
    if report.hidden_modes:
        lines = []
        for mode in report.hidden_modes:
            blocks = ", ".join(mode.blocks) if mode.blocks else "the loop"
            state = ("<span class='bad'>does not decay</span>" if mode.unstable
                     else "<span class='good'>decays</span>")
            mult = f" (×{mode.pole.multiplicity})" if mode.pole.multiplicity > 1 else ""
            lines.append(_line(f"⚠ s = <span class='num'>{pole_number(mode.pole)}"
                               f"</span>{mult} sits in {blocks}: it cancels out of the input-to-output "
                               f"transfer function but stays in the loop; it {state}.", "warn"))
        out.append(_section("Hidden modes", "".join(lines)))
    others = [w for w in report.warnings if notice_kind(w) != "hidden_mode"]  # those have their section
    if report.nominal is not None:
        others += report.nominal.notes
    if others:
        out.append(_section("Warnings and notes", "".join(_line("• " + math_html(w), "warn") for w in others)))
    return out


__all__ = ["HTML_KEY", "PolynomialPanel", "factored", "factored_at", "fraction_html", "polynomial_html"]
