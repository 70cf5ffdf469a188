"""Every catalogued error code is documented, and errors render as 'CODE at PLACE: message'."""
from pathlib import Path

import pytest

from core.errors import CATALOGUE, NOTICE_KINDS, ExpressionError, LoopwrightError

DOC = Path(__file__).resolve().parents[1] / "docs" / "errors.md"


@pytest.mark.parametrize("code", sorted(CATALOGUE))
def test_every_code_is_documented(code):
    assert f"| {code} |" in DOC.read_text(encoding="utf-8")


def test_error_text_names_code_and_place():
    err = ExpressionError("E101", "unexpected character '$'", where="node P, denominator, column 4")
    assert str(err) == "E101 at node P, denominator, column 4: unexpected character '$'"
    assert isinstance(err, LoopwrightError)


def test_unknown_code_is_a_programming_error():
    with pytest.raises(ValueError):
        LoopwrightError("E999", "nope")


@pytest.mark.parametrize("kind", sorted(NOTICE_KINDS))
def test_every_warning_kind_is_documented(kind):
    assert f"| `{kind}` |" in DOC.read_text(encoding="utf-8")


def test_report_warnings_carry_their_kind_into_json():
    from core import check_project
    from core.io.project_file import project_from_dict, project_to_dict
    from core.model.diagram import Diagram, Node

    d = Diagram(name="kinds")
    for node in (Node("r", "input"), Node("G", "block", num="s^2", den="s+1"), Node("y", "output"),
                 Node("P", "block", num="1", den="s+2")):
        d.add_node(node)
    d.connect("r", "G")
    d.connect("G", "y")
    d.set_analysis(input="r", output="y")
    data = check_project(project_from_dict(project_to_dict(d))).to_dict()
    kinds = dict(zip(data["warnings"], data["warning_kinds"], strict=True))
    assert any(k == "improper_block" and w.startswith("block G is improper") for w, k in kinds.items())
    assert any(k == "left_out" and "P" in w for w, k in kinds.items())
    assert set(kinds.values()) <= set(NOTICE_KINDS)
