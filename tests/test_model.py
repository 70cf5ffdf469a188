"""The diagram model: every Diagram method, its refusals (codes), its events, undo round trips.

References: the node-kind and port rules of the shared DESIGN.md, section 3 (our own glossary), the
error catalogue in core/errors.py, and Python's own ``dataclasses.replace``/``==`` as the judge of
"unchanged". A refused edit must leave ``snapshot(d)`` exactly as it was.
"""
from __future__ import annotations

import copy
import math

import pytest

from core.errors import ExpressionError, ModelError
from core.model.diagram import (
    DECAY_MODES,
    MAX_SUM_PORTS,
    MIN_SUM_PORTS,
    NODE_KINDS,
    ROLES,
    Diagram,
    Node,
    Parameter,
    RemovedNode,
    Wire,
)


def snapshot(d: Diagram):
    return (d.name, copy.deepcopy(list(d.nodes.items())), copy.deepcopy(d.wires), copy.deepcopy(d.parameters),
            d.tuning_parameter, copy.deepcopy(d.analysis))


@pytest.fixture
def loop():
    """r -> e -> C -> P -> b -> y with b feeding e's second port; records events."""
    d = Diagram("test loop")
    for node in (Node("r", "input"), Node("e", "sum", signs="+-"),
                 Node("C", "block", role="controller", num="K", den="1"),
                 Node("P", "block", role="plant", num="1", den="s*(s+1)"), Node("b", "branch"),
                 Node("y", "output")):
        d.add_node(node)
    for a, b, port in (("r", "e", 0), ("e", "C", 0), ("C", "P", 0), ("P", "b", 0), ("b", "y", 0), ("b", "e", 1)):
        d.connect(a, b, port)
    d.set_parameter(Parameter("K", 2, 0, 20))
    d.events = []
    d.subscribe(lambda event, payload: d.events.append((event, payload)))
    return d


def refused(d: Diagram, code: str, call, *args, **kwargs):
    before = snapshot(d)
    events = list(d.events)
    with pytest.raises((ModelError, ExpressionError)) as info:
        call(*args, **kwargs)
    assert info.value.code == code, str(info.value)
    assert snapshot(d) == before, "a refused edit must change nothing"
    assert d.events == events, "a refused edit must emit nothing"
    return info.value


# -- nodes ------------------------------------------------------------------------------------
def test_node_ports_by_kind():
    counts = {k: Node("n", k).input_count for k in NODE_KINDS}
    assert counts == {"input": 0, "output": 1, "sum": 2, "branch": 1, "block": 1}
    assert Node("n", "sum", signs="+-+").input_count == 3
    assert [Node("n", k).has_output for k in NODE_KINDS] == [True, False, True, True, True]
    assert Node("n", "block", label="gain").title == "gain" and Node("n", "block").title == "n"


def test_add_node_emits_and_keeps_order(loop):
    loop.add_node(Node("z", "branch"), index=1)
    assert list(loop.nodes)[:3] == ["r", "z", "e"]
    assert loop.events == [("node_added", "z")]


@pytest.mark.parametrize("node", [
    Node("1x", "branch"), Node("a b", "branch"), Node("x" * 65, "branch"), Node("q", "junction"),
    Node("q", "branch", x=math.nan), Node("q", "branch", y=math.inf), Node("q", "branch", x="3"),
    Node("q", "branch", x=True), Node("q", "sum", signs="+"), Node("q", "sum", signs="+" * (MAX_SUM_PORTS + 1)),
    Node("q", "sum", signs="+*"), Node("q", "block", role="boss"), Node("q", "branch", label=3),
    Node("q", "branch", flipped="yes"), Node("q", "block", num=2),
])
def test_add_node_refuses_invalid(loop, node):
    refused(loop, "E302", loop.add_node, node)


def test_add_node_refuses_duplicate_id(loop):
    refused(loop, "E303", loop.add_node, Node("C", "branch"))


def test_add_block_with_bad_text_keeps_parser_code(loop):
    err = refused(loop, "E102", loop.add_node, Node("G", "block", num="1", den="(s+1"))
    assert "node G" in err.where and "denominator" in err.where


def test_sum_port_limits_are_the_documented_ones():
    assert (MIN_SUM_PORTS, MAX_SUM_PORTS) == (2, 4)  # DESIGN.md: a sign per input, 2 to 4 inputs
    assert set(ROLES) == {"gain", "controller", "actuator", "plant", "sensor", "other"}
    assert set(DECAY_MODES) == {"sigma", "half_time", "settling"}


def test_node_lookup(loop):
    assert loop.node("P").den == "s*(s+1)"
    refused(loop, "E301", loop.node, "Q")
    refused(loop, "E301", loop.node, ["P"])  # an unhashable id is just "no such node"


def test_remove_and_restore_round_trip(loop):
    before = snapshot(loop)
    removed = loop.remove_node("e")
    assert isinstance(removed, RemovedNode) and removed.index == 1
    assert [i for i, _ in removed.wires] == [0, 1, 5]
    assert "e" not in loop.nodes and all("e" not in (w.source, w.target) for w in loop.wires)
    assert loop.events == [("wire_removed", "b->e:1"), ("wire_removed", "e->C:0"),
                           ("wire_removed", "r->e:0"), ("node_removed", "e")]
    loop.events.clear()
    loop.restore_node(removed)
    assert snapshot(loop) == before, "node order and wire indices restored"
    assert loop.events[0] == ("node_added", "e") and len(loop.events) == 4


def test_remove_unknown_node(loop):
    refused(loop, "E301", loop.remove_node, "nope")


def test_move_node(loop):
    loop.move_node("P", 10, -2.5)
    assert (loop.node("P").x, loop.node("P").y) == (10.0, -2.5)
    assert loop.events == [("node_moved", "P")]
    for bad in ((math.nan, 0), (0, math.inf), ("1", 0), (True, 0)):
        refused(loop, "E302", loop.move_node, "P", *bad)
    refused(loop, "E301", loop.move_node, "nope", 0, 0)


def test_update_node_returns_old_values(loop):
    old = loop.update_node("P", den="s*(s+2)", label="belt", flipped=True)
    assert old == {"den": "s*(s+1)", "label": "", "flipped": False}
    assert (loop.node("P").den, loop.node("P").label, loop.node("P").flipped) == ("s*(s+2)", "belt", True)
    assert loop.events == [("node_changed", "P")]
    assert loop.update_node("P", **old) == {"den": "s*(s+2)", "label": "belt", "flipped": True}


def test_update_node_refusals(loop):
    refused(loop, "E302", loop.update_node, "P", kind="sum")
    refused(loop, "E302", loop.update_node, "P", id="Q")
    refused(loop, "E302", loop.update_node, "P", role="boss")
    refused(loop, "E110", loop.update_node, "P", den="0")
    refused(loop, "E302", loop.update_node, "e", signs="+")
    refused(loop, "E301", loop.update_node, "nope", label="x")


def test_sum_port_with_wire_cannot_be_dropped(loop):
    loop.update_node("e", signs="+-+")
    loop.connect("r", "e", 2)
    err = refused(loop, "E302", loop.update_node, "e", signs="+-")
    assert "input 3" in err.message and "'r'" in err.message
    loop.disconnect("r->e:2")
    assert loop.update_node("e", signs="+-") == {"signs": "+-+"}


def test_signs_on_a_block_do_not_touch_its_port(loop):
    # Fixed bug: a non-sum node's ports do not depend on its (unused) signs field.
    assert loop.update_node("P", signs="++") == {"signs": "+-"}


def test_unique_id(loop):
    assert loop.unique_id("C") == "C2"
    assert loop.unique_id("new block") == "new_block"
    assert loop.unique_id("9") == "n9"
    long = loop.unique_id("x" * 200)
    loop.add_node(Node(long, "branch"))  # always usable as an id
    assert loop.unique_id("x" * 200) != long


# -- wires --------------------------------------------------------------------------------------------
def test_connect_and_lookup(loop):
    loop.update_node("e", signs="+-+")
    loop.events.clear()
    wire = loop.connect("C", "e", 2, bends=[(1, 2), [3, 4]])
    assert wire == Wire("C", "e", 2, [(1.0, 2.0), (3.0, 4.0)]) and wire.key == "C->e:2"
    assert loop.events == [("wire_added", "C->e:2")]
    assert loop.wire_into("e", 2) is wire and loop.wire_into("P", 0).source == "C"
    assert loop.wire_index("C->e:2") == len(loop.wires) - 1
    assert [i for i, _ in loop.wires_of("C")] == [1, 2, 6]


@pytest.mark.parametrize("args", [
    ("y", "b", 0),        # an output sends nothing
    ("b", "r", 0),        # an input takes no wire
    ("C", "P", 0),        # port already wired
    ("r", "e", 2),        # no such port
    ("r", "e", -1),
    ("r", "e", True),     # a bool is not a port number
    ("r", "e", "1"),
    ("b", "b", 0),        # a node cannot feed itself
])
def test_connect_refusals(loop, args):
    if args == ("b", "b", 0):
        loop.disconnect("P->b:0")
        loop.events.clear()
    refused(loop, "E302", loop.connect, *args)


def test_connect_unknown_nodes(loop):
    refused(loop, "E301", loop.connect, "Q", "e", 0)
    refused(loop, "E301", loop.connect, "r", "Q", 0)


@pytest.mark.parametrize("bends", [[(1, 2, 3)], [(math.nan, 0)], [("1", 2)], [5], [(True, 1)]])
def test_connect_refuses_bad_bends(loop, bends):
    loop.disconnect("b->e:1")
    loop.events.clear()
    refused(loop, "E302", loop.connect, "b", "e", 1, bends=bends)


def test_disconnect_and_reconnect_at_index(loop):
    before = snapshot(loop)
    index, wire = loop.disconnect("C->P:0")
    assert index == 2 and loop.events == [("wire_removed", "C->P:0")]
    loop.connect(wire.source, wire.target, wire.port, bends=wire.bends, index=index)
    assert snapshot(loop) == before
    refused(loop, "E305", loop.disconnect, "C->P:0:9")


def test_set_wire_bends(loop):
    old = loop.set_wire_bends("b->e:1", [(380, 120), (80, 120)])
    assert old == [] and loop.wires[5].bends == [(380.0, 120.0), (80.0, 120.0)]
    assert loop.events == [("wire_changed", "b->e:1")]
    assert loop.set_wire_bends("b->e:1", old) == [(380.0, 120.0), (80.0, 120.0)]
    refused(loop, "E302", loop.set_wire_bends, "b->e:1", [(0, math.inf)])
    refused(loop, "E305", loop.set_wire_bends, "x->y:0", [])


# -- parameters and settings ----------------------------------------------------------------------------
def test_set_parameter_replaces_and_returns_old(loop):
    old = loop.set_parameter(Parameter("K", 3, 1, 5))
    assert old == Parameter("K", 2.0, 0.0, 20.0)
    assert loop.parameters["K"] == Parameter("K", 3.0, 1.0, 5.0)
    assert isinstance(loop.parameters["K"].nominal, float)
    assert loop.set_parameter(Parameter("T_1", 0.5)) is None
    assert loop.events == [("parameters_changed", "K"), ("parameters_changed", "T_1")]


@pytest.mark.parametrize("p", [
    Parameter("s"), Parameter("1K"), Parameter("_K"), Parameter("K", math.nan), Parameter("K", 1, 5, 5),
    Parameter("K", 1, 6, 5), Parameter("K", 1, 0, math.inf), Parameter("K", True), Parameter("K", "1"),
    Parameter("K", 1e301),
])
def test_set_parameter_refusals(loop, p):
    refused(loop, "E304", loop.set_parameter, p)


def test_tuning_parameter_and_remove_parameter(loop):
    assert loop.set_tuning_parameter("K") is None and loop.tuning_parameter == "K"
    assert loop.set_tuning_parameter(None) == "K"
    loop.set_tuning_parameter("K")
    refused(loop, "E304", loop.set_tuning_parameter, "L")
    refused(loop, "E304", loop.set_tuning_parameter, ["K"])
    loop.events.clear()
    assert loop.remove_parameter("K") == Parameter("K", 2.0, 0.0, 20.0)
    assert loop.tuning_parameter is None and "K" not in loop.parameters
    # Added event: clearing the tuning choice is announced too.
    assert loop.events == [("parameters_changed", "K"), ("settings_changed", "tuning_parameter")]
    refused(loop, "E304", loop.remove_parameter, "K")


def test_set_analysis(loop):
    old = loop.set_analysis(input="r", output="y", decay_mode="settling", decay_value=4)
    assert old == {"input": None, "output": None, "decay_mode": "sigma", "decay_value": 0.0}
    a = loop.analysis
    assert (a.input, a.output, a.decay_mode, a.decay_value) == ("r", "y", "settling", 4.0)
    assert isinstance(a.decay_value, float)
    assert loop.events == [("settings_changed", "analysis")]
    assert loop.set_analysis(input=None) == {"input": "r"}


@pytest.mark.parametrize("changes, code", [
    ({"input": "y"}, "E302"),            # an output node sends no signal
    ({"input": "Q"}, "E301"),
    ({"output": 3}, "E301"),
    ({"decay_mode": "fast"}, "E302"),
    ({"decay_value": -1}, "E304"),
    ({"decay_value": math.nan}, "E304"),
    ({"decay_value": True}, "E304"),
    ({"speed": 1}, "E302"),
])
def test_set_analysis_refusals(loop, changes, code):
    refused(loop, code, loop.set_analysis, **changes)


def test_rename_and_unsubscribe(loop):
    assert loop.rename("other") == "test loop" and loop.name == "other"
    assert loop.events == [("settings_changed", "name")]
    listener = loop._listeners[0]
    loop.unsubscribe(listener)
    loop.rename("again")
    assert len(loop.events) == 1


def test_parameter_names_in_blocks(loop):
    loop.update_node("P", num="Kp*(T_1*s+1)")
    assert loop.parameter_names_in_blocks() == {"K", "Kp", "T_1"}


def test_huge_integer_position_is_refused_with_our_error():
    # a Python int beyond float range must give E302, not OverflowError
    d = Diagram()
    with pytest.raises(ModelError) as err:
        d.add_node(Node("r", "input", x=10**400))
    assert err.value.code == "E302"
