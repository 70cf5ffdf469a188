"""The report (HTML and PDF), the command line that writes it, picture export and Routh copy.

The HTML is read back with html.parser; its numbers are compared with the Report, with the panels
fed the same AnalysisResult, and with outside references (numpy roots, hand-worked Routh rows).
"""
from __future__ import annotations

import base64
import csv
import io
import math
import os
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtGui import QGuiApplication

from app.export import copy_routh
from app.panels.common import MINUS
from app.pictures import ExportError, save_diagram, save_plot
from app.report_export import export_report, report_page
from core.analysis.report import CAUTION
from core.io.project_file import save_project

REPO = Path(__file__).resolve().parents[2]
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
SECTIONS = ["meta", "caution", "verdict", "diagram", "blocks", "parameters", "settings", "polynomial",
            "char-poly", "transfer", "routh", "routh-array", "routh-values", "sign-changes", "range", "intervals",
            "endpoints", "margins", "poles", "pole-table", "warnings"]


class Page(HTMLParser):
    """Text of every element with an id, cell texts of every table with an id, picture sources."""

    def __init__(self, text: str):
        super().__init__()
        self.open: list[tuple[str, str | None]] = []
        self.text: dict[str, str] = {}
        self.tables: dict[str, list[list[str]]] = {}
        self.images: list[str] = []
        self._table: str | None = None
        self._cell: list[str] | None = None
        self.feed(text)

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "img":
            self.images.append(a.get("src", ""))
            return
        if tag in ("br", "meta"):
            return
        self.open.append((tag, a.get("id")))
        if a.get("id"):
            self.text.setdefault(a["id"], "")
        if tag == "table" and a.get("id"):
            self._table = a["id"]
            self.tables[self._table] = []
        elif tag == "tr" and self._table:
            self.tables[self._table].append([])
        elif tag in ("td", "th") and self._table:
            self._cell = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None and self._table:
            self.tables[self._table][-1].append("".join(self._cell).strip())
            self._cell = None
        if tag == "table":
            self._table = None
        while self.open:
            t, _ = self.open.pop()
            if t == tag:
                break

    def handle_data(self, data):
        for _, ident in self.open:
            if ident:
                self.text[ident] += data
        if self._cell is not None:
            self._cell.append(data)


def plain(text: str) -> str:
    return text.replace(MINUS, "-")


@pytest.fixture
def loop_window(window, make_loop, analysed):
    window.set_document(make_loop())
    analysed(window)
    return window


def test_html_report_holds_every_section_with_the_reports_numbers(loop_window, tmp_path):
    win = loop_window
    path = export_report(win, tmp_path / "loop.html")
    page = Page(path.read_text(encoding="utf-8"))
    report = win.controller.result.report
    assert [s for s in SECTIONS if s not in page.text] == []
    assert " ".join(page.text["caution"].split()) == "Caution. " + CAUTION
    assert "STABLE" in page.text["verdict"]
    # blocks and parameters as in the diagram
    blocks = {row[0]: row for row in page.tables["blocks"][1:]}
    assert set(blocks) == {"C", "P"} and blocks["C"][2] == "Controller" and blocks["P"][2] == "Plant"
    assert page.tables["parameters"][1] == ["K", "2", "0", "10", "yes"]
    # the stable range: (0, 6), lost at 6 by a pair crossing at +-j sqrt(2) (Routh's textbook cubic,
    # s^3 + 3s^2 + 2s + K, from memory)
    ends = page.tables["endpoints"][1:]
    data = report.stable_range.to_dict()["endpoints"]
    assert [plain(r[0]) for r in ends] == [f"K = {e['exact']}" for e in data] == ["K = 0", "K = 6"]
    assert [float(plain(r[1])) for r in ends] == pytest.approx([e["value"] for e in data], rel=1e-9)
    assert "±j1.41421" in ends[1][2]
    # margins: 6 / 2 = x3, 20 log10 3 = 9.54 dB
    rise = page.tables["margins"][1]
    assert plain(rise[1]) == "×3" and float(rise[2].split()[0]) == pytest.approx(20 * math.log10(3), abs=0.01)
    # Routh values at K = 2, worked by hand: 1, 3, (3*2 - 2)/3 = 4/3, 2; no sign change
    values = page.tables["routh-values"][1:]
    assert [float(plain(r[1])) for r in values] == pytest.approx([1, 3, 4 / 3, 2], rel=1e-5)
    assert [r[-1] for r in values] == ["+"] * 4
    assert page.text["sign-changes"].split(":")[-1].strip(" .") == "0"
    # symbolic entries: the Report's first column
    symbolic = [plain(r[1]).replace("·", "*") for r in page.tables["routh-array"][1:]]
    assert [s.replace(" ", "") for s in symbolic] == \
        [t.replace(" ", "") for t in report.routh.first_column_text()]
    # poles at K = 2 against numpy.roots of s^3 + 3s^2 + 2s + 2
    shown = sorted((complex(*_complex(plain(r[0]))) for r in page.tables["pole-table"][1:]),
                   key=lambda z: (z.real, z.imag))
    want = sorted(np.roots([1, 3, 2, 2]), key=lambda z: (z.real, z.imag))
    assert np.allclose(shown, want, atol=1e-4)
    # pictures: the diagram, the pole map and (with the time-domain part) the step response, as PNG data
    assert len(page.images) == 2 + ("step" in page.text)
    for src in page.images:
        assert base64.b64decode(src.split(",", 1)[1])[:8] == PNG_MAGIC


def _complex(text: str) -> tuple[float, float]:
    m = re.fullmatch(r"(-?[\d.e-]+)(?: ([+-]) j([\d.e-]+))?", text.strip())
    assert m, text
    im = 0.0 if m.group(2) is None else float(m.group(3)) * (1 if m.group(2) == "+" else -1)
    return float(m.group(1)), im


def test_report_numbers_are_the_panels_numbers(loop_window):
    win = loop_window
    page = Page(report_page(win))
    # the Routh panel at the current (= nominal) value shows the same value texts
    panel_values = [[ev.text for ev in row] for row in win.routh_panel.values]
    report_values = [[c for c in row[1:-1] if c] for row in page.tables["routh-values"][1:]]
    assert report_values == panel_values
    # the range panel's endpoint texts appear in the report's endpoint table
    details = win.range_panel.details_html()
    for row in page.tables["endpoints"][1:]:
        assert row[0] in details and row[1] in details
    # the polynomial panel shows the same expanded polynomial text
    assert page.text["char-poly"].strip() in re.sub(r"<[^>]+>", "", win.polynomial_panel.html())


def test_hidden_mode_and_warning_sections(window, make_loop, analysed):
    loop = make_loop()
    # a common factor (s + 3) in the plant hides the mode s = -3 (by construction)
    loop.update_node("P", num="s+3", den="s*(s+1)*(s+2)*(s+3)")
    window.set_document(loop)
    analysed(window)
    page = Page(report_page(window))
    assert "hidden-modes" in page.text
    assert re.search(r"s = -3\b", plain(page.text["hidden-modes"]))
    assert "decays" in page.text["hidden-modes"]


def test_pdf_report_has_pages(loop_window, tmp_path):
    path = export_report(loop_window, tmp_path / "loop.pdf")
    data = path.read_bytes()
    assert data.startswith(b"%PDF-")
    assert data.rstrip().endswith(b"%%EOF")
    pages = len(re.findall(rb"/Type\s*/Page(?!s)", data))
    assert pages >= 2
    counts = [int(n) for n in re.findall(rb"/Type\s*/Pages\b[^>]*?/Count\s+(\d+)", data, re.DOTALL)]
    counts += [int(n) for n in re.findall(rb"/Count\s+(\d+)[^>]*?/Type\s*/Pages\b", data, re.DOTALL)]
    assert counts and max(counts) == pages


def test_report_refuses_other_suffixes(loop_window, tmp_path):
    with pytest.raises(ExportError):
        export_report(loop_window, tmp_path / "loop.docx")


def _run_app(args, tmp_path):
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", HOME=str(tmp_path), XDG_CONFIG_HOME=str(tmp_path / "cfg"),
               LOOPWRIGHT_STATE_DIR=str(tmp_path / "state"))
    return subprocess.run([sys.executable, "-m", "app", *args], check=False, cwd=REPO, env=env, capture_output=True,
                          text=True, timeout=300)


def test_command_line_report(tmp_path, make_loop):
    project = tmp_path / "loop.loop.json"
    save_project(make_loop(), project)
    out = tmp_path / "out.html"
    run = _run_app(["--report", str(out), str(project)], tmp_path)
    assert run.returncode == 0, run.stderr
    page = Page(out.read_text(encoding="utf-8"))
    assert [plain(r[0]) for r in page.tables["endpoints"][1:]] == ["K = 0", "K = 6"]
    assert page.tables["meta"][0] == ["File", "loop.loop.json"]
    pdf = tmp_path / "out.pdf"
    assert _run_app(["--report", str(pdf), str(project)], tmp_path).returncode == 0
    assert pdf.read_bytes().startswith(b"%PDF-")


def test_command_line_report_bad_project(tmp_path):
    bad = tmp_path / "bad.loop.json"
    bad.write_text("{ not json", encoding="utf-8")
    run = _run_app(["--report", str(tmp_path / "out.pdf"), str(bad)], tmp_path)
    assert run.returncode == 2
    assert len(run.stderr.strip().splitlines()) == 1 and "E201" in run.stderr
    assert not (tmp_path / "out.pdf").exists()


@pytest.mark.parametrize("suffix", [".png", ".svg"])
def test_diagram_and_pole_map_pictures(loop_window, tmp_path, suffix):
    for path in (save_diagram(loop_window.scene, tmp_path / f"d{suffix}"),
                 save_plot(loop_window.pole_map.plot, tmp_path / f"p{suffix}")):
        data = path.read_bytes()
        if suffix == ".png":
            assert data[:8] == PNG_MAGIC
        else:
            assert ET.fromstring(data).tag.endswith("svg")
    with pytest.raises(ExportError):
        save_diagram(loop_window.scene, tmp_path / "d.gif")


def test_routh_copy_formats(loop_window):
    arr = loop_window.controller.result.report.routh
    text = copy_routh(loop_window, "csv")
    assert QGuiApplication.clipboard().text() == text
    rows = list(csv.reader(io.StringIO(text)))[1:]
    assert [r[1:3] for r in rows] == [row + [""] * (2 - len(row)) for row in arr.rows_text()]
    # exact values at K = 2 (hand-worked: 1 2 | 3 2 | 4/3 | 2)
    assert [r[3:5] for r in rows] == [["1", "2"], ["3", "2"], ["4/3", ""], ["2", ""]]
    assert copy_routh(loop_window, "latex").count(r" \\") == len(arr.powers)
    assert copy_routh(loop_window, "markdown").splitlines()[2].startswith("| s^3 |")
    names = [a.text() for a in loop_window.routh_panel.table.actions()]
    assert {"Copy as CSV", "Copy as Markdown", "Copy as LaTeX"} <= set(names)


def test_export_menu_writes_through_the_asked_path(loop_window, tmp_path):
    exports = loop_window.exports
    asked = []
    exports.ask = lambda parent, title, suggestion, filters: asked.append(suggestion) or tmp_path / "menu.pdf"
    assert exports.export_report(".pdf") == tmp_path / "menu.pdf"
    assert (tmp_path / "menu.pdf").read_bytes().startswith(b"%PDF-")
    exports.ask = lambda *args: tmp_path / "diagram.svg"
    assert exports.export_diagram() == tmp_path / "diagram.svg"
    exports.ask = lambda *args: None
    assert exports.export_diagram() is None
    texts = [a.text() for a in exports.menu.actions()]
    assert "Report as &PDF…" in texts and "Pole map…" in texts


class FigurePanel:
    """Stands in for a later analysis panel that offers its own report fragment."""

    TITLE = "Figures check"

    def report_html(self) -> str:
        return "<table id='figures'><tr><td>settling</td><td>1.5 s</td></tr></table>"


def test_panels_offering_report_fragments_and_plots_get_sections(loop_window, qtbot):
    from app.panels import PoleMap

    class SecondPlot(PoleMap):  # any panel with a pyqtgraph ``plot`` gets its picture in a section
        TITLE = "Second plot"

    extra = SecondPlot()
    qtbot.addWidget(extra)
    loop_window.analysis_panels += [FigurePanel(), extra]
    page = Page(report_page(loop_window))
    assert page.tables["figures"] == [["settling", "1.5 s"]]
    assert "figures-check" in page.text and "second-plot" in page.text
    assert len(page.images) == 3 + ("step" in page.text)  # diagram, pole map, [step,] the second plot


def test_step_response_and_requirements_sections(window, make_loop, analysed):
    from scipy import signal

    from core.model.requirements import Requirements
    loop = make_loop()
    loop.set_requirements(Requirements(min_damping=0.3, max_overshoot=60.0))
    window.set_document(loop)
    analysed(window)
    page = Page(report_page(window))
    figures = dict(page.tables["step-figures"][1:])
    # scipy reference: unit step of 2 / (s^3 + 3s^2 + 2s + 2), the unity loop at K = 2
    _t, y = signal.step(([2.0], [1.0, 3.0, 2.0, 2.0]), T=np.linspace(0, 60, 60001))
    overshoot = (y.max() - 1.0) * 100
    assert float(figures["Overshoot"].split()[0]) == pytest.approx(overshoot, abs=0.1)
    assert float(plain(figures["Steady-state value"])) == pytest.approx(1.0)
    verdicts = {row[0]: row for row in page.tables["requirement-verdicts"][1:]}
    # numpy reference: the smallest damping ratio of the roots of s^3 + 3s^2 + 2s + 2
    roots = np.roots([1, 3, 2, 2])
    zeta = min(-r.real / abs(r) for r in roots)
    damping = next(row for label, row in verdicts.items() if "damping" in label)
    assert float(damping[2]) == pytest.approx(zeta, abs=1e-3)
    assert damping[3] == ("PASS" if zeta >= 0.3 else "FAIL")
    over = next(row for label, row in verdicts.items() if "overshoot" in label)
    assert over[3] == ("PASS" if overshoot <= 60 else "FAIL")
    assert "Stable and meeting all" in page.text["joint-range"]
    assert len(page.images) == 3  # diagram, pole map, step response
