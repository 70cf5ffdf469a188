"""Parts of a diagram on no wire path from the input to the output are left out of the analysis
and named (rule in docs/guarantees.md).

Reference: the conveyor example's single loop, characteristic polynomial
s (s + 8)(s + 0.6)(s + 5)(s + 25) + 600 K (s + 1) from 1 + C A P H = 0 cleared of denominators
(Nise, *Control Systems Engineering*, ch. 6, from memory), built with sympy; the stable range
checked against numpy's roots of that polynomial.
"""
import json
from pathlib import Path

import numpy as np
import pytest
import sympy

from core.algebra.polynomial import mpoly_text
from core.analysis.report import check_project
from core.io.project_file import load_project, project_to_dict
from core.model.diagram import Node

EXAMPLES = Path(__file__).resolve().parents[1] / "resources" / "examples"
s, K = sympy.symbols("s K")
REFERENCE = sympy.expand(s * (s + 8) * (s + sympy.Rational(3, 5)) * (s + 5) * (s + 25) + 600 * K * (s + 1))


def as_sympy(poly):
    names = poly.context().names()
    return sympy.expand(sympy.sympify(mpoly_text(poly).replace("^", "**"),
                                      locals={n: sympy.Symbol(n) for n in names}))


def conveyor():
    return load_project(EXAMPLES / "conveyor_speed.loop.json")


def park_plant(d, wiring):
    """Add an unstable plant 1/(s - 3) with its own parameter, wired as ``wiring`` says."""
    d.add_node(Node("P2", "block", role="plant", num="Kz", den="s-3", x=900, y=500))
    if wiring in ("input", "both"):
        d.connect("C", "P2")
    if wiring in ("output", "both_out"):
        d.add_node(Node("e2", "sum", signs="++", x=950, y=500))
        d.connect("P2", "e2", 0)
    return d


@pytest.mark.parametrize("wiring", ["none", "input", "output"])
def test_a_parked_block_leaves_the_verdict_unchanged(wiring):
    plain = check_project(conveyor())
    parked = check_project(park_plant(conveyor(), wiring))
    assert as_sympy(parked.reduction.characteristic) == REFERENCE
    assert as_sympy(plain.reduction.characteristic) == REFERENCE
    assert parked.stable_range.to_dict() == plain.stable_range.to_dict()
    assert parked.nominal.stable == plain.nominal.stable
    assert "P2" in parked.left_out and not plain.left_out
    assert any("left out of the analysis" in w and "P2" in w for w in parked.warnings)


def test_the_stable_range_matches_numpy_roots_of_the_reference():
    report = check_project(park_plant(conveyor(), "none"))
    low, high = report.stable_range.to_dict()["intervals"][0][:2]
    for value, stable in ((low + 1e-6 * high, True), ((low + high) / 2, True), (high * (1 + 1e-6), False)):
        # reference: numpy's roots of the sympy-built polynomial at that K
        coeffs = [float(c) for c in sympy.Poly(REFERENCE.subs(K, value), s).all_coeffs()]
        assert (max(np.roots(coeffs).real) < 0) == stable


def test_left_out_nodes_are_in_the_json_contract():
    d = park_plant(conveyor(), "none")
    report = check_project(d)
    out = json.loads(json.dumps(report.to_dict()))
    assert out["left_out"] == ["P2"]


def test_the_command_line_leaves_the_same_part_out(tmp_path):
    from core.cli import main
    path = tmp_path / "parked.loop.json"
    path.write_text(json.dumps(project_to_dict(park_plant(conveyor(), "none"))))
    import contextlib
    import io
    buffer = io.StringIO()
    with contextlib.redirect_stdout(buffer):
        code = main(["check", str(path), "--json"])
    data = json.loads(buffer.getvalue())
    assert code == 0 and data["left_out"] == ["P2"]
    assert data["stable_range"] == check_project(conveyor()).stable_range.to_dict()


def test_the_canvas_draws_left_out_nodes_and_their_wires_faded(qtbot):
    from app.bridge import ModelSignals
    from app.canvas.scene import LEFT_OUT_OPACITY, DiagramScene
    d = park_plant(conveyor(), "input")
    scene = DiagramScene(d, ModelSignals(d))
    scene.mark_left_out(check_project(d).left_out)
    assert scene.node_items["P2"].opacity() == LEFT_OUT_OPACITY < 1.0
    assert "Left out of the analysis" in scene.node_items["P2"].toolTip()
    assert scene.wire_items["C->P2:0"].opacity() == LEFT_OUT_OPACITY
    assert all(item.opacity() == 1.0 for nid, item in scene.node_items.items() if nid != "P2")
    scene.mark_left_out([])  # once wired in, drawn plainly again
    assert scene.node_items["P2"].opacity() == 1.0
