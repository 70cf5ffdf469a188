"""Help > About, the caution, and the first-start notice; also the program's icon, drawn at run time.

The caution is core.analysis.report.CAUTION, shown in a few plain sentences with the program version.
The first-start notice appears once (QSettings key ``caution/seen``); it is never shown on the
offscreen platform or while rendering a screenshot, so tests and ``--screenshot`` never block.
"""
from __future__ import annotations

from importlib import metadata
from pathlib import Path

from PySide6.QtCore import QPointF, QRectF, QSettings, Qt
from PySide6.QtGui import QColor, QGuiApplication, QIcon, QPainter, QPainterPath, QPen, QPixmap
from PySide6.QtWidgets import QMessageBox, QWidget

from app.theme import meaning_colour
from core.analysis.report import CAUTION

SEEN_KEY = "caution/seen"
SUMMARY = ("Loopwright finds the characteristic polynomial of a feedback loop drawn as a block "
           "diagram, keeps its Routh array symbolic in one tuning parameter, and gives the exact "
           "range of that parameter for which the loop is stable.")


def program_version() -> str:
    """The installed package version, or the one in pyproject.toml when running from a checkout."""
    try:
        return metadata.version("loopwright")
    except metadata.PackageNotFoundError:
        pass
    try:
        import tomllib
        text = (Path(__file__).resolve().parents[1] / "pyproject.toml").read_text(encoding="utf-8")
        return tomllib.loads(text)["project"]["version"]
    except (ImportError, OSError, KeyError, ValueError):
        return "development copy"


def caution_text() -> str:
    """The caution as rich text: what the verdicts mean, then core's caution."""
    return (f"<p><b>Loopwright {program_version()}</b></p>"
            "<p>The verdicts are exact for the linear model you typed, and only for that model.</p>"
            f"<p>{CAUTION}</p>")


def show_caution(parent: QWidget | None) -> None:
    """Help > Caution."""
    box = QMessageBox(QMessageBox.Icon.Warning, "Caution", caution_text(), QMessageBox.StandardButton.Ok, parent)
    box.setTextFormat(Qt.TextFormat.RichText)
    box.exec()


def show_about(parent: QWidget | None) -> None:
    """Help > About Loopwright: what the program does, its version, and the caution."""
    text = (f"<p><b>Loopwright {program_version()}</b></p><p>{SUMMARY}</p>"
            f"<p><i>Caution.</i> {CAUTION}</p>")
    box = QMessageBox(QMessageBox.Icon.NoIcon, "About Loopwright", text, QMessageBox.StandardButton.Ok, parent)
    box.setTextFormat(Qt.TextFormat.RichText)
    box.setIconPixmap(app_icon().pixmap(64, 64))
    box.exec()


def first_start_due(settings: QSettings, rendering: bool = False) -> bool:
    """Whether the first-start caution should be shown now."""
    if rendering or QGuiApplication.platformName() in ("offscreen", "minimal"):
        return False
    return not bool(settings.value(SEEN_KEY, False, type=bool))


def show_first_start_caution(parent: QWidget | None, settings: QSettings, rendering: bool = False) -> bool:
    """Show the caution once per user; return whether it was shown."""
    if not first_start_due(settings, rendering):
        return False
    show_caution(parent)
    settings.setValue(SEEN_KEY, True)
    return True


def _draw_icon(size: int) -> QPixmap:
    """A teal rounded square holding a feedback loop: an arrow running around to a summing circle."""
    pix = QPixmap(size, size)
    pix.fill(Qt.GlobalColor.transparent)
    p = QPainter(pix)
    p.setRenderHint(QPainter.RenderHint.Antialiasing)
    p.scale(size / 64.0, size / 64.0)
    p.setPen(Qt.PenStyle.NoPen)
    p.setBrush(meaning_colour("logo", dark=False))
    p.drawRoundedRect(QRectF(2, 2, 60, 60), 13, 13)
    white = QPen(QColor("white"), 4.2, Qt.PenStyle.SolidLine, Qt.PenCapStyle.RoundCap, Qt.PenJoinStyle.RoundJoin)
    p.setPen(white)
    p.setBrush(Qt.BrushStyle.NoBrush)
    p.drawEllipse(QPointF(18, 26), 7, 7)               # summing junction
    p.drawRoundedRect(QRectF(32, 19, 18, 14), 3, 3)    # block
    p.drawLine(QPointF(25, 26), QPointF(32, 26))
    loop = QPainterPath(QPointF(50, 26))               # feedback path back under the junction
    loop.lineTo(56, 26)
    loop.lineTo(56, 46)
    loop.lineTo(18, 46)
    loop.lineTo(18, 36)
    p.drawPath(loop)
    p.setPen(Qt.PenStyle.NoPen)
    p.setBrush(QColor("white"))
    arrow = QPainterPath(QPointF(18, 33.5))
    arrow.lineTo(13.5, 40)
    arrow.lineTo(22.5, 40)
    arrow.closeSubpath()
    p.drawPath(arrow)
    p.setBrush(meaning_colour("logo_mark", dark=False))                       # an amber pole mark
    p.drawRoundedRect(QRectF(8, 8, 7, 7), 1.5, 1.5)
    p.end()
    return pix


def app_icon() -> QIcon:
    """The program's icon at the usual sizes."""
    icon = QIcon()
    for size in (16, 24, 32, 48, 64, 128, 256):
        icon.addPixmap(_draw_icon(size))
    return icon
