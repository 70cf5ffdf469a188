"""Imported once by the analysis fork server (``app.controller.PRELOAD``): it analyses a small loop
so that every worker process forked from the server starts with the engine's imports done and its
caches filled (a cold first analysis costs about 200 ms more than a warm one).

Importing it anywhere else only costs that one small analysis.
"""
from __future__ import annotations

from core.analysis.pipeline import analyse_snapshot
from core.io.project_file import project_to_dict
from core.model.diagram import Diagram, Node, Parameter


def warm_loop() -> Diagram:
    """A unity-feedback loop K(s+2)/(s^3 + 4s^2 + 3s) with K tuned, a decay requirement set.

    >>> warm_loop().tuning_parameter
    'K'
    """
    d = Diagram(name="warm-up loop")
    for node in (Node("r", "input"), Node("e", "sum", signs="+-"), Node("G", "block", num="K*(s+2)", den="s^3+4*s^2+3*s"),
                 Node("b", "branch"), Node("y", "output")):
        d.add_node(node)
    for src, dst, port in (("r", "e", 0), ("e", "G", 0), ("G", "b", 0), ("b", "y", 0), ("b", "e", 1)):
        d.connect(src, dst, port)
    d.set_parameter(Parameter("K", 2.0, 0.0, 10.0))
    d.set_tuning_parameter("K")
    d.set_analysis(input="r", output="y", decay_value=0.1)
    return d


def warm() -> None:
    """Analyse the warm-up loop as the window would (the panels' ready-made texts included)."""
    from app.panels import prepare_for_panels

    result = analyse_snapshot(project_to_dict(warm_loop()), 0)
    prepare_for_panels(result)


warm()
