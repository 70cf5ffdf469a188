"""The window with a toleranced parameter: the robust range in the stable-range panel and the report,
and a headline that says when the nominal gain is not stable for every toleranced value."""
from __future__ import annotations

import pytest
from test_controller import unity_loop

from app.panels.common import colour
from app.report_export import export_report
from core.io.project_file import save_project
from core.model.diagram import Parameter


@pytest.fixture
def toleranced_path(tmp_path):
    """K / (s (s+1) (T s+1)) in unity feedback, T = 0.1 known within 0.08 .. 0.12."""
    d = unity_loop(num="K", den="s*(s+1)*(T*s+1)")
    d.set_parameter(Parameter("T", 0.1, 0.01, 1.0, tolerance=(0.08, 0.12)))
    path = tmp_path / "toleranced.loop.json"
    save_project(d, path)
    return path


def test_robust_range_shown_and_the_headline_says_robust(window, toleranced_path, analysed, tmp_path):
    # Reference (Routh by hand, from memory): T s^3 + (T+1) s^2 + s + K is stable iff 0 < K < (T+1)/T;
    # over T in [0.08, 0.12] the worst case is T = 0.12, K < 1.12/0.12 = 28/3.
    assert window.files.open(toleranced_path, ask=False)
    analysed(window)
    details = window.range_panel.details_html()
    assert "Robust for every T in [2/25, 3/25]" in details and "28/3" in details
    assert "worst case T = 3/25" in details
    assert window.verdict.text() == "STABLE at K = 2 for every T in [2/25, 3/25]; no requirements set"
    html = export_report(window, tmp_path / "r.html").read_text(encoding="utf-8")
    assert "id='robust'" in html and "28/3" in html


def test_a_nominal_gain_outside_the_robust_range_is_amber(window, toleranced_path, analysed):
    assert window.files.open(toleranced_path, ask=False)
    window.diagram.set_parameter(Parameter("K", 10.0, 0.0, 20.0))  # stable at T = 0.1 (K < 11), not at 0.12
    analysed(window)
    text = window.verdict.text()
    assert text.startswith("STABLE at K = 10, but NOT for every T in [2/25, 3/25]")
    assert colour("warning").name() in window.verdict.styleSheet()
