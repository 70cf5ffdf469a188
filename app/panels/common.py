"""Small helpers shared by the analysis panels: math text as HTML, numbers, colours, messages.

>>> math_html("3*s^2 + 1/2*K*s - 4")
'3s<sup>2</sup> + 1/2·K·s − 4'
>>> number(6.000000000001), number(-0.25), number(1e-9)
('6', '−0.25', '1e−09')
"""
from __future__ import annotations

import html
import re
from functools import lru_cache

from PySide6.QtCore import QEvent, QSize, Qt
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QLabel, QSizePolicy, QWidget

from app.theme import figure_font, math_font, meaning_colour, system_is_dark
from core.present import MINUS


def math_html(text: str) -> str:
    """Polynomial text from core as HTML: real superscripts, implied products, a true minus sign."""
    out = html.escape(text)
    out = re.sub(r"\^(\d+)", r"<sup>\1</sup>", out)
    out = re.sub(r"(?<![\d/.])(\d+)\*(?=[A-Za-z(])", r"\1", out)  # 3*s -> 3s, not 1/2*K
    out = out.replace("*", "·")
    return re.sub(r"(^|[\s(])-", lambda m: m.group(1) + MINUS, out)


def number(x: float | None, digits: int = 6) -> str:
    """A float in ``digits`` significant figures with a true minus sign; '∞' for None."""
    if x is None:
        return "∞"
    return f"{x:.{digits}g}".replace("-", MINUS)


def complex_number(z: complex, digits: int = 5) -> str:
    """``−1.5 ± j2`` style text of one pole (the sign of the imaginary part kept)."""
    if z.imag == 0:
        return number(z.real, digits)
    sign = "+" if z.imag > 0 else MINUS
    return f"{number(z.real, digits)} {sign} j{number(abs(z.imag), digits)}"


def pole_number(pole, digits: int = 5) -> str:
    """One certified pole as :func:`complex_number` text, also beyond the float range (``−1e+400``)."""
    if pole.scaled is None:
        return complex_number(complex(pole.re, pole.im), digits)
    re, im = pole.re_text.replace("-", MINUS), pole.im_text
    if pole.im == 0:
        return re
    return f"{re} {MINUS if im.startswith('-') else '+'} j{im.lstrip('-').replace('-', MINUS)}"


def pole_size(pole, digits: int = 5) -> str:
    """A pole's natural frequency |p| as text, also beyond the float range."""
    return number(pole.natural_frequency, digits) if pole.scaled is None else pole.natural_frequency_text


def dark() -> bool:
    """Whether the application uses a dark palette."""
    return system_is_dark()


def colour(name: str) -> QColor:
    """Panel colours by meaning, matched to the light or dark palette (app.theme.MEANING_COLOURS)."""
    return meaning_colour(name)


@lru_cache(maxsize=2)
def _css(is_dark: bool) -> str:
    fig, mth = figure_font(), math_font()
    return (f".num {{ font-family: '{fig.family()}', monospace; }} "
            f".math {{ font-family: '{mth.family()}', serif; font-size: {mth.pointSizeF():g}pt; }} "
            f".muted {{ color: {colour('muted').name()}; }} "
            f".warn {{ color: {colour('warning').name()}; }} "
            f".bad {{ color: {colour('unstable').name()}; font-weight: bold; }} "
            f".good {{ color: {colour('stable').name()}; font-weight: bold; }}")


def is_palette_change(event) -> bool:
    """Whether a widget's ``changeEvent`` reports a new palette (e.g. a switch to dark)."""
    return event.type() in (QEvent.Type.PaletteChange, QEvent.Type.ApplicationPaletteChange)


def number_css() -> str:
    """CSS for rich text: class ``num`` in the figure font, class ``math`` in the math font."""
    return _css(dark())


class Readout(QWidget):
    """A fixed-height holder for a label whose text changes on every slider frame.

    ``QLabel.setText`` always invalidates its parent's layout, and a layout that recomputes asks
    its own parent's to recompute too, up to the main window, which then relayouts and repaints
    every dock. This holder has no layout (it sizes its label itself) and a size hint that never
    changes, so a new text only repaints the label. Set the label's font before wrapping it:
    the height is ``lines`` of that font.
    """

    def __init__(self, label: QLabel, lines: int = 1, parent: QWidget | None = None, pad: int = 4):
        super().__init__(parent if parent is not None else label.parentWidget())
        label.setParent(self)
        self.label = label
        self.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Fixed)
        self.setMinimumWidth(40)
        self.setFixedHeight(lines * label.fontMetrics().lineSpacing() + pad)
        if lines > 1:
            label.setWordWrap(True)
            label.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignTop)

    def sizeHint(self) -> QSize:
        return QSize(120, self.height())

    def resizeEvent(self, event) -> None:
        self.label.setGeometry(self.rect())
        super().resizeEvent(event)


class MessageLabel(QLabel):
    """A plain, selectable line that shows an analysis error (hidden when there is none)."""

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self.setWordWrap(True)
        self.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self._apply_theme()
        self.hide()

    def _apply_theme(self) -> None:
        style = f"color: {colour('unstable').name()}; padding: 4px;"
        if self.styleSheet() != style:  # setting a style sheet sends another palette change
            self.setStyleSheet(style)

    def changeEvent(self, event) -> None:
        if is_palette_change(event):
            self._apply_theme()
        super().changeEvent(event)

    def show_message(self, message: str | None) -> None:
        """Show ``message``, or hide the label for None."""
        self.setText(message or "")
        self.setVisible(bool(message))
