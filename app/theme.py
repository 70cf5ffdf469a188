"""Colours and fonts of the canvas, aware of the system's light or dark palette.

Role colours are the visual identity of DESIGN.md section 4 (controller teal, actuator violet,
plant slate blue, sensor amber, gain and other grey). :func:`current_theme` picks the light or
dark variant from the application's palette (:func:`dark_palette` is a ready-made dark one).

>>> light = Theme.light()
>>> light.role_band("plant").name()
'#4a6fa5'
"""
from __future__ import annotations

from dataclasses import dataclass

from PySide6.QtGui import QColor, QFont, QGuiApplication, QPalette
from PySide6.QtWidgets import QGraphicsDropShadowEffect

ROLE_COLOURS = {
    "controller": "#1f9e94",
    "actuator": "#7b5cc4",
    "plant": "#4a6fa5",
    "sensor": "#d99a1e",
    "gain": "#8a9099",
    "other": "#8a9099",
}


# Colours by meaning, for panels, plots, messages and the report (light, dark): one table.
MEANING_COLOURS = {
    "stable": ("#2e9e5b", "#4cc47e"), "decay": ("#1f7fb8", "#5aa9e0"), "unstable": ("#c0392b", "#ff7b6b"),
    "rhp": ("#fbe3e0", "#4a2a2a"), "tint": ("#eef4fb", "#243040"),
    "special": ("#fdf3dc", "#3e3520"), "marker": ("#1b1f24", "#e8eaed"), "muted": ("#5d6470", "#9aa1ab"),
    "path": ("#9aa4b1", "#6f7886"), "pole": ("#1b1f24", "#e8eaed"), "zero": ("#4a6fa5", "#8fb4ea"),
    "warning": ("#a35d00", "#f0b060"), "axis": ("#6b7380", "#9aa1ab"), "heading": ("#1f4f7a", "#8fb4ea"),
    "rule": ("#c9ced6", "#3a3f47"), "header": ("#eef1f5", "#2a2e35"), "good": ("#1b7f3b", "#4cc47e"),
    "caution": ("#fff4dc", "#3e3520"), "caution_rule": ("#d99a1e", "#d99a1e"),
    "logo": ("#1f7a78", "#1f7a78"), "logo_mark": ("#f2b134", "#f2b134"),
}


def meaning_colour(name: str, dark: bool | None = None) -> QColor:
    """The colour of a meaning (``"unstable"``, ``"decay"``...) in the light or dark scheme
    (default: the running application's).

    >>> meaning_colour("unstable", dark=False).name(), meaning_colour("unstable", dark=True).name()
    ('#c0392b', '#ff7b6b')
    """
    light, night = MEANING_COLOURS[name]
    return QColor(night if (system_is_dark() if dark is None else dark) else light)


def error_style() -> str:
    """Style sheet of a one-line error message under an entry field."""
    return f"color: {meaning_colour('unstable').name()}; font-size: 8.5pt;"


@dataclass(frozen=True)
class Theme:
    """Every colour the canvas draws with; one instance for light, one for dark."""

    is_dark: bool
    canvas: QColor
    grid_dot: QColor
    block_fill: QColor
    outline: QColor
    text: QColor
    muted_text: QColor
    wire: QColor
    glow: QColor
    port_ok: QColor
    port_hover: QColor
    rubber_wire: QColor

    @staticmethod
    def light() -> Theme:
        return Theme(False, QColor("#f7f8fa"), QColor("#c9ced6"), QColor("#ffffff"), QColor("#2b3038"),
                     QColor("#1b1f24"), QColor("#5d6470"), QColor("#4a4f57"), QColor(40, 120, 230, 200),
                     QColor("#2e9e5b"), QColor("#1d7f45"), QColor("#2878e6"))

    @staticmethod
    def dark() -> Theme:
        return Theme(True, QColor("#1e2126"), QColor("#3a3f47"), QColor("#2a2e35"), QColor("#c8ccd2"),
                     QColor("#e8eaed"), QColor("#9aa1ab"), QColor("#b4b9c0"), QColor(90, 160, 255, 220),
                     QColor("#4cc47e"), QColor("#7be0a4"), QColor("#5aa0ff"))

    def role_band(self, role: str) -> QColor:
        """The colour of the band along the top of a block with this role."""
        return QColor(ROLE_COLOURS.get(role, ROLE_COLOURS["other"]))


def system_is_dark() -> bool:
    """Whether the running application draws with a dark palette.

    The palette decides, not the platform's colour-scheme hint: widgets are painted with the
    palette, so panel colours must match it even where a style ignores the hint.
    """
    app = QGuiApplication.instance()
    if app is None:
        return False
    return app.palette().color(QPalette.ColorRole.Window).lightness() < 128


def dark_palette() -> QPalette:
    """A dark application palette in the canvas' dark colours (used by tests and screenshots).

    >>> dark_palette().color(QPalette.ColorRole.Window).lightness() < 128
    True
    """
    t = Theme.dark()
    pal = QPalette()
    roles = {
        QPalette.ColorRole.Window: "#25282d", QPalette.ColorRole.WindowText: t.text.name(),
        QPalette.ColorRole.Base: "#1e2126", QPalette.ColorRole.AlternateBase: "#2a2e35",
        QPalette.ColorRole.Text: t.text.name(), QPalette.ColorRole.Button: "#2f333a",
        QPalette.ColorRole.ButtonText: t.text.name(), QPalette.ColorRole.ToolTipBase: "#2f333a",
        QPalette.ColorRole.ToolTipText: t.text.name(), QPalette.ColorRole.Highlight: "#3d6fb8",
        QPalette.ColorRole.HighlightedText: "#ffffff", QPalette.ColorRole.PlaceholderText: t.muted_text.name(),
        QPalette.ColorRole.Mid: "#3a3f47", QPalette.ColorRole.Dark: "#15171a", QPalette.ColorRole.Light: "#3f444c",
        QPalette.ColorRole.Midlight: "#353940", QPalette.ColorRole.Shadow: "#000000",
        QPalette.ColorRole.Link: "#5aa0ff", QPalette.ColorRole.BrightText: "#ff7b6b",
    }
    for role, name in roles.items():
        pal.setColor(role, QColor(name))
    for role in (QPalette.ColorRole.WindowText, QPalette.ColorRole.Text, QPalette.ColorRole.ButtonText):
        pal.setColor(QPalette.ColorGroup.Disabled, role, QColor("#6c727c"))
    return pal


def current_theme() -> Theme:
    """The theme matching the application's current light or dark scheme."""
    return Theme.dark() if system_is_dark() else Theme.light()


def figure_font(point_size: float = 10.0) -> QFont:
    """Monospaced font with even-width figures, for numbers in panels."""
    font = QFont("DejaVu Sans Mono")
    font.setStyleHint(QFont.StyleHint.Monospace)
    font.setPointSizeF(point_size)
    return font


def label_font(point_size: float = 9.0, bold: bool = False) -> QFont:
    """Plain sans font for titles and labels on the canvas."""
    font = QFont("DejaVu Sans")
    font.setStyleHint(QFont.StyleHint.SansSerif)
    font.setPointSizeF(point_size)
    font.setBold(bold)
    return font


def math_font(point_size: float = 10.5) -> QFont:
    """Serif font for transfer functions drawn as fractions."""
    font = QFont("DejaVu Serif")
    font.setStyleHint(QFont.StyleHint.Serif)
    font.setPointSizeF(point_size)
    return font


def selection_glow(theme: Theme, radius: float) -> QGraphicsDropShadowEffect:
    """The soft glow a selected canvas item gets (off until selected), instead of a colour swap."""
    glow = QGraphicsDropShadowEffect()
    glow.setOffset(0, 0)
    glow.setBlurRadius(radius)
    glow.setColor(theme.glow)
    glow.setEnabled(False)
    return glow
