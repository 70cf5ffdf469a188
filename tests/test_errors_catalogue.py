"""Every catalogued error code is documented, and errors render as 'CODE at PLACE: message'."""
from pathlib import Path

import pytest

from core.errors import CATALOGUE, ExpressionError, LoopwrightError

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
