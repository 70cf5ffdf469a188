"""The window on loops whose poles and Routh entries lie beyond the float range (about 1.8e308).

References: the magnitudes are worked by hand and with mpmath in tests/test_beyond_float.py;
here the window must open, show them in scientific form, draw what fits and export a report
without inf or nan.
"""
from __future__ import annotations

import re

import pytest
from test_controller import unity_loop

from app.report_export import export_report
from core.io.project_file import save_project

NOT_A_NUMBER = re.compile(r">\s*[−+-]?(inf|nan)\b", re.IGNORECASE)  # a table cell or text run


@pytest.fixture
def far_pole_path(tmp_path):
    """K / (1e-300 s^2 + 1e100 s) in unity feedback: at K = 2 one pole near -1e400, one at -2e-100."""
    path = tmp_path / "far_pole.loop.json"
    save_project(unity_loop(num="K", den="1e-300*s^2 + 1e100*s"), path)
    return path


@pytest.fixture
def huge_routh_path(tmp_path):
    """1e100 / (s^3 + 1e-300 s^2 + 1e200 s) in unity feedback: a Routh entry near -1e700."""
    d = unity_loop(num="1e100", den="s^3 + 1e-300*s^2 + 1e200*s")
    d.set_tuning_parameter(None)
    path = tmp_path / "huge_routh.loop.json"
    save_project(d, path)
    return path


def test_far_pole_is_named_not_drawn_and_the_rest_is_drawn(window, far_pole_path, analysed):
    assert window.files.open(far_pole_path, ask=False)
    analysed(window)
    result = window.controller.result
    assert result.ok, result.message
    caption = window.pole_map.caption.text()
    assert "not drawn, beyond the float range: -1e+400" in caption
    drawn = window.pole_map.plotted_poles()
    # Reference (by hand): the slow pole is -K/1e100 = -2e-100 at K = 2
    assert len(drawn) == 1 and drawn[0].real == pytest.approx(-2e-100, rel=1e-9)
    assert window.verdict.text().startswith("STABLE")


def test_huge_routh_entries_shown_in_scientific_form(window, huge_routh_path, analysed, tmp_path):
    assert window.files.open(huge_routh_path, ask=False)
    analysed(window)
    result = window.controller.result
    assert result.ok, result.message
    values = [row[0].text for row in window.routh_panel.values]
    assert "\u22121e+700" in values  # the s^1 entry, 1e500 - 1e700 (see tests/test_beyond_float.py)
    assert window.verdict.text().startswith("UNSTABLE: 2 poles in the right half plane")
    out = export_report(window, tmp_path / "report.html")
    html = out.read_text(encoding="utf-8")
    assert not NOT_A_NUMBER.search(html)


def test_report_of_the_far_pole_writes_its_size(window, far_pole_path, analysed, tmp_path):
    assert window.files.open(far_pole_path, ask=False)
    analysed(window)
    html = export_report(window, tmp_path / "far.html").read_text(encoding="utf-8")
    assert "1e+400" in html and not NOT_A_NUMBER.search(html)
