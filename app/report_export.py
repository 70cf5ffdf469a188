"""Write the report of the window's project to HTML or PDF; ``python -m app --report OUT PROJECT``.

One code path for the menu and the command line: :func:`export_report` takes a window whose
analysis is idle, draws the pictures (the diagram from the scene, each plot panel from a fresh,
fixed-size copy fed the same AnalysisResult at the nominal value), builds the page with
:func:`app.report_html.report_html`, and writes either an HTML file with the pictures inside it
(data URIs) or a PDF through Qt's own writer (QPdfWriter + QTextDocument, A4).

Extra sections come from the panels themselves (``window.analysis_panels`` besides the pole
map): a panel that draws a plot (attribute ``plot``) gets a section under its ``TITLE`` with the
plot's picture, and a panel with a ``report_html()`` method (an HTML fragment for white paper,
e.g. figures or verdicts) gets that fragment in its section.
"""
from __future__ import annotations

import base64
import datetime
from pathlib import Path

from PySide6.QtCore import QBuffer, QByteArray, QCoreApplication, QIODevice, QMarginsF, Qt, QUrl
from PySide6.QtGui import QFont, QImage, QPageLayout, QPageSize, QPdfWriter, QTextDocument

from app.about import program_version
from app.pictures import ExportError, diagram_image, plot_image, plot_panels
from app.report_html import OWN_SECTIONS, ReportInputs, ReportSection, report_html

REPORT_SUFFIXES = (".html", ".pdf")
PLOT_SIZE = (640, 400)     # widget size of the plot panels drawn for the report
PAGE_WIDTH_PX = 630        # widest picture (CSS px): A4 less the 2 cm margins Qt's printing adds holds ~640
PLOT_WIDTH_PX = 560


def _key(panel) -> str:
    return "plot-" + panel.TITLE.lower().replace(" ", "-")


def panel_picture(panel, result, value: float | None) -> QImage:
    """The panel's plot drawn from a fresh copy of the panel, fixed size, showing ``result`` at ``value``."""
    copy = type(panel)()
    copy.setAttribute(Qt.WidgetAttribute.WA_DontShowOnScreen)
    try:
        copy.resize(*PLOT_SIZE)
        copy.show()  # lays the plot out at its size; never appears on screen
        copy.show_result(result)
        if value is not None:
            copy.set_current_value(value)
        QCoreApplication.processEvents()
        return plot_image(copy.plot)
    finally:
        copy.close()
        copy.deleteLater()


def report_pictures(window) -> dict[str, QImage]:
    """Pictures by key: ``diagram`` and one ``plot-<title>`` per plot panel (with a Report)."""
    pictures = {}
    image = diagram_image(window.scene)
    if image is not None:
        pictures["diagram"] = image
    result = window.controller.result
    if result is not None and result.report is not None:
        value = result.tuning_range.nominal if result.tuning_range is not None else None
        for panel in plot_panels(window):
            pictures[_key(panel)] = panel_picture(panel, result, value)
    return pictures


def _width(key: str, image: QImage) -> int:
    natural = round(image.width() / 2)  # pictures are drawn at twice their CSS size
    return min(natural, PAGE_WIDTH_PX if key == "diagram" else PLOT_WIDTH_PX)


def report_inputs(window, sources: dict[str, str] | None = None,
                  pictures: dict[str, QImage] | None = None) -> ReportInputs:
    """Everything the page needs from the window; ``sources`` maps picture keys to image sources."""
    result = window.controller.result
    if result is None or window.controller.busy:
        raise ExportError("the analysis is still running; try again when it has finished")
    pictures = pictures or {}
    sources = sources or {}
    placed = {k: (sources[k], _width(k, img)) for k, img in pictures.items() if k in sources}
    sections = []
    if result.report is not None:
        plots = plot_panels(window)
        for panel in window.analysis_panels:
            if panel.TITLE in OWN_SECTIONS or getattr(panel, "empty", False):
                continue  # the page builds these sections itself, or the panel has nothing to show
            key = _key(panel) if panel in plots else None
            make = getattr(panel, "report_html", None)
            body = make() if callable(make) else ""
            if body or (key and key in placed):
                sections.append(ReportSection(panel.TITLE.lower().replace(" ", "-"), panel.TITLE, body, key))
    path = window.files.path
    return ReportInputs(diagram=window.diagram, result=result, file_name=path.name if path else "not saved",
                        date=datetime.date.today().isoformat(), version=program_version(), pictures=placed,
                        sections=sections)


def _png_bytes(image: QImage) -> bytes:
    data = QByteArray()
    buffer = QBuffer(data)
    buffer.open(QIODevice.OpenModeFlag.WriteOnly)
    image.save(buffer, "PNG")
    buffer.close()
    return bytes(data)


def report_page(window, pictures: dict[str, QImage] | None = None, embed: bool = True) -> str:
    """The report page; pictures as data URIs (``embed``) or as their keys (resources)."""
    pictures = report_pictures(window) if pictures is None else pictures
    if embed:
        sources = {k: "data:image/png;base64," + base64.b64encode(_png_bytes(img)).decode("ascii")
                   for k, img in pictures.items()}
    else:
        sources = {k: k for k in pictures}
    return report_html(report_inputs(window, sources, pictures))


def write_html(window, path) -> Path:
    """Write the report as one self-contained HTML file."""
    path = Path(path)
    try:
        path.write_text(report_page(window), encoding="utf-8")
    except OSError as err:
        raise ExportError(f"cannot write {path}: {err.strerror or err}") from None
    return path


def report_document(window) -> QTextDocument:
    """The report laid out by Qt's rich-text engine, pictures added as resources."""
    pictures = report_pictures(window)
    doc = QTextDocument()
    font = QFont("DejaVu Sans")
    font.setPointSizeF(9.5)
    doc.setDefaultFont(font)
    for key, image in pictures.items():
        doc.addResource(QTextDocument.ResourceType.ImageResource, QUrl(key), image)
    doc.setHtml(report_page(window, pictures, embed=False))
    return doc


def write_pdf(window, path) -> Path:
    """Write the report as an A4 PDF with Qt's own PDF writer."""
    path = Path(path)
    doc = report_document(window)
    try:
        path.touch()
    except OSError as err:
        raise ExportError(f"cannot write {path}: {err.strerror or err}") from None
    writer = QPdfWriter(str(path))
    writer.setPageSize(QPageSize(QPageSize.PageSizeId.A4))
    writer.setPageMargins(QMarginsF(0, 0, 0, 0), QPageLayout.Unit.Millimeter)  # QTextDocument.print adds 2 cm
    writer.setTitle(f"{window.diagram.name} — stability report")
    writer.setCreator(f"Loopwright {program_version()}")
    doc.print_(writer)
    del writer  # closes the file
    if path.stat().st_size == 0:
        raise ExportError(f"cannot write {path}")
    return path


def export_report(window, path) -> Path:
    """Write the report to ``path``: HTML or PDF by its suffix."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in REPORT_SUFFIXES:
        raise ExportError(f"{path.name}: choose a name ending in .html or .pdf")
    return write_html(window, path) if suffix == ".html" else write_pdf(window, path)
