"""The diagram model: plain dataclasses, changed only through :class:`Diagram` methods.

Every method validates first and raises :class:`~core.errors.ModelError` (codes E3xx) before
touching anything, so a refused edit leaves the model exactly as it was. Listeners registered
with :meth:`Diagram.subscribe` hear ``(event, payload)`` after each change; the app turns these
into Qt signals, core never imports Qt.

>>> d = Diagram(name="demo")
>>> _ = d.add_node(Node("r", "input"))
>>> _ = d.add_node(Node("G", "block", num="1", den="s+1"))
>>> _ = d.add_node(Node("y", "output"))
>>> _ = d.connect("r", "G"); _ = d.connect("G", "y")
>>> [w.key for w in d.wires]
['r->G:0', 'G->y:0']
>>> removed = d.remove_node("G")
>>> len(d.wires), removed.index, [i for i, _ in removed.wires]
(0, 1, [0, 1])
"""
from __future__ import annotations

import math
import re
from collections.abc import Callable
from dataclasses import dataclass, field, replace

from core.errors import ModelError
from core.model.requirements import Requirements

NODE_KINDS = ("input", "output", "sum", "branch", "block")
ROLES = ("gain", "controller", "actuator", "plant", "sensor", "other")
DECAY_MODES = ("sigma", "half_time", "settling")


@dataclass(frozen=True)
class DecayWords:
    """How one decay mode is named to people (one wording for panels, verdicts and the report)."""

    name: str        # what the number is
    unit: str
    comparator: str  # how the requirement compares: the actual value must be >= or <= it
    rule: str        # how sigma follows from it, shown beside the field ("" for sigma itself)

    @property
    def label(self) -> str:
        """``decay rate σ ≥``: the requirement as a label."""
        return f"{self.name} {self.comparator}"


DECAY_WORDS = {
    "sigma": DecayWords("decay rate σ", "1/s", "≥", ""),
    "half_time": DecayWords("time to half amplitude", "s", "≤", "σ = ln 2 / T"),
    "settling": DecayWords("settling time (2 %, from σ)", "s", "≤", "rule of thumb: σ ≈ 4 / Ts"),
}
MIN_SUM_PORTS, MAX_SUM_PORTS = 2, 4
ID_PATTERN = re.compile(r"[A-Za-z_][A-Za-z0-9_]{0,63}")  # used with fullmatch: "$" would allow a final newline
PARAMETER_PATTERN = re.compile(r"[A-Za-z][A-Za-z0-9_]{0,63}")

Listener = Callable[[str, object], None]


def _is_real(value) -> bool:
    """True for an int or float that is not a bool (``True`` is an int in Python)."""
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _is_finite_real(value) -> bool:
    """A real number that a float can hold (huge integers are refused, not an OverflowError)."""
    try:
        return _is_real(value) and math.isfinite(value) and abs(value) <= 1e300
    except OverflowError:
        return False


def _checked_tolerance(tolerance, where: str) -> tuple[float, float] | None:
    """A tolerance as a (lo, hi) float pair with lo < hi, or E306."""
    if tolerance is None:
        return None
    if not isinstance(tolerance, (list, tuple)) or len(tolerance) != 2 or not all(map(_is_finite_real, tolerance)):
        raise ModelError("E306", "a tolerance is two finite numbers (lo, hi)", where=where)
    lo, hi = float(tolerance[0]), float(tolerance[1])
    if not lo < hi:
        raise ModelError("E306", f"the tolerance {lo:g} .. {hi:g} is empty or inverted: give lo < hi", where=where)
    return lo, hi


def _checked_bends(bends, where: str) -> list[tuple[float, float]]:
    """Waypoints as (x, y) float pairs, or E302 naming the first bad one."""
    out = []
    for i, b in enumerate(bends or []):
        if not isinstance(b, (list, tuple)) or len(b) != 2 or not all(_is_finite_real(v) for v in b):
            raise ModelError("E302", f"bend {i + 1} must be a pair of finite numbers", where=where)
        out.append((float(b[0]), float(b[1])))
    return out


@dataclass
class Node:
    """One node of the diagram. ``num``/``den``/``role`` matter for blocks, ``signs`` for sums."""

    id: str
    kind: str
    x: float = 0.0
    y: float = 0.0
    label: str = ""
    role: str = "other"
    num: str = "1"
    den: str = "1"
    signs: str = "+-"
    flipped: bool = False

    @property
    def input_count(self) -> int:
        """How many input ports the node has."""
        return {"input": 0, "sum": len(self.signs)}.get(self.kind, 1)

    @property
    def has_output(self) -> bool:
        """Whether wires may leave the node."""
        return self.kind != "output"

    @property
    def title(self) -> str:
        """The name shown to the user: the label, or the id when there is none."""
        return self.label or self.id


@dataclass
class Wire:
    """A wire from ``source``'s output to input ``port`` of ``target``; ``bends`` are waypoints."""

    source: str
    target: str
    port: int = 0
    bends: list[tuple[float, float]] = field(default_factory=list)

    @property
    def key(self) -> str:
        """Stable identity: an input port takes at most one wire."""
        return f"{self.source}->{self.target}:{self.port}"


@dataclass
class Parameter:
    """A named parameter with its nominal value, the range the tuning slider covers and, optionally,
    a tolerance: the interval (lo, hi) its true value lies in (the robust range checks every value)."""

    name: str
    nominal: float = 1.0
    minimum: float = 0.0
    maximum: float = 10.0
    tolerance: tuple[float, float] | None = field(default=None, repr=False)  # compared, not in the repr


@dataclass
class AnalysisSettings:
    """Which signal is the input and the output, the decay requirement, and the stability plane's
    axes (two parameter names, or None: no plane).

    ``decay_mode`` says how ``decay_value`` is read: ``sigma`` (1/s, directly), ``half_time``
    (time to half amplitude T, sigma = ln 2 / T) or ``settling`` (2 % settling time Ts,
    sigma ~ 4 / Ts, common practice). ``decay_value`` 0 means no requirement.
    """

    input: str | None = None
    output: str | None = None
    decay_mode: str = "sigma"
    decay_value: float = 0.0
    plane_x: str | None = None
    plane_y: str | None = None


@dataclass
class RemovedNode:
    """What :meth:`Diagram.remove_node` took away, enough to put it back."""

    node: Node
    index: int
    wires: list[tuple[int, Wire]]


class Diagram:
    """A whole project: the loop's nodes and wires, its parameters and analysis settings."""

    def __init__(self, name: str = "untitled loop", notes: str = ""):
        self.name = name
        self.notes = notes
        self.nodes: dict[str, Node] = {}
        self.wires: list[Wire] = []
        self.parameters: dict[str, Parameter] = {}
        self.tuning_parameter: str | None = None  # the parameter whose stable range is sought
        self.analysis = AnalysisSettings()
        self.requirements = Requirements()
        self.view: dict = {}
        self._listeners: list[Listener] = []

    # -- notification -------------------------------------------------------------------------
    def subscribe(self, listener: Listener) -> None:
        """Call ``listener(event, payload)`` after every change."""
        self._listeners.append(listener)

    def unsubscribe(self, listener: Listener) -> None:
        """Stop calling ``listener``."""
        self._listeners.remove(listener)

    def _emit(self, event: str, payload: object = None) -> None:
        for listener in list(self._listeners):
            listener(event, payload)

    # -- lookup -------------------------------------------------------------------------------
    def node(self, node_id: str) -> Node:
        """The node with this id, or E301."""
        try:
            if not isinstance(node_id, str):
                raise KeyError(node_id)
            return self.nodes[node_id]
        except KeyError:
            raise ModelError("E301", f"there is no node '{node_id}'", where=f"node {node_id}") from None

    def wire_index(self, key: str) -> int:
        """Position of the wire with this key in :attr:`wires`, or E305."""
        for i, w in enumerate(self.wires):
            if w.key == key:
                return i
        raise ModelError("E305", f"there is no wire '{key}'", where=f"wire {key}")

    def wires_of(self, node_id: str) -> list[tuple[int, Wire]]:
        """Every wire touching the node, with its index."""
        return [(i, w) for i, w in enumerate(self.wires) if node_id in (w.source, w.target)]

    def wire_into(self, node_id: str, port: int) -> Wire | None:
        """The wire feeding input ``port`` of the node, if any."""
        return next((w for w in self.wires if w.target == node_id and w.port == port), None)

    def unique_id(self, stem: str) -> str:
        """A fresh node id built from ``stem`` (``G``, ``G2``, ``G3``...)."""
        stem = re.sub(r"[^A-Za-z0-9_]", "_", stem)[:56] or "n"
        if not stem[0].isalpha() and stem[0] != "_":
            stem = "n" + stem
        candidate, n = stem, 1
        while candidate in self.nodes:
            n += 1
            candidate = f"{stem}{n}"
        return candidate

    # -- nodes --------------------------------------------------------------------------------
    def add_node(self, node: Node, index: int | None = None) -> Node:
        """Add a node (at ``index`` in the node order when restoring) after validating it."""
        self._check_node(node)
        if node.id in self.nodes:
            raise ModelError("E303", f"a node called '{node.id}' already exists", where=f"node {node.id}")
        items = list(self.nodes.items())
        items.insert(len(items) if index is None else index, (node.id, node))
        self.nodes = dict(items)
        self._emit("node_added", node.id)
        return node

    def remove_node(self, node_id: str) -> RemovedNode:
        """Remove a node and every wire touching it; return what is needed to restore them."""
        node = self.node(node_id)
        index = list(self.nodes).index(node_id)
        touching = self.wires_of(node_id)
        for i, _ in reversed(touching):
            wire = self.wires.pop(i)
            self._emit("wire_removed", wire.key)
        del self.nodes[node_id]
        self._emit("node_removed", node_id)
        return RemovedNode(node, index, touching)

    def restore_node(self, removed: RemovedNode) -> None:
        """Undo :meth:`remove_node`: the node at its old index, then its wires at theirs."""
        self.add_node(removed.node, removed.index)
        for i, wire in removed.wires:
            self.connect(wire.source, wire.target, wire.port, bends=wire.bends, index=i)

    def move_node(self, node_id: str, x: float, y: float) -> None:
        """Place the node's centre at (x, y)."""
        node = self.node(node_id)
        if not (_is_finite_real(x) and _is_finite_real(y)):
            raise ModelError("E302", "a position must be a finite number", where=f"node {node_id}")
        node.x, node.y = float(x), float(y)
        self._emit("node_moved", node_id)

    def update_node(self, node_id: str, **changes) -> dict:
        """Change fields of a node (label, role, num, den, signs, flipped); return the old values.

        Block texts are parsed first: text that is not a valid polynomial is refused with the
        parser's own error (E1xx) and nothing changes. Reducing a summing junction's ports is
        refused while a wire still feeds a port that would go away.
        """
        node = self.node(node_id)
        allowed = {"label", "role", "num", "den", "signs", "flipped"}
        unknown = set(changes) - allowed
        if unknown:
            raise ModelError("E302", f"cannot change {', '.join(sorted(unknown))}", where=f"node {node_id}")
        candidate = replace(node, **changes)
        self._check_node(candidate)
        if "signs" in changes:
            for w in self.wires:
                if w.target == node_id and w.port >= candidate.input_count:
                    raise ModelError("E302", f"input {w.port + 1} still has a wire from '{w.source}'",
                                     where=f"node {node_id}")
        old = {k: getattr(node, k) for k in changes}
        for k, v in changes.items():
            setattr(node, k, v)
        self._emit("node_changed", node_id)
        return old

    def _check_node(self, node: Node) -> None:
        where = f"node {node.id}"
        if not isinstance(node.id, str) or not ID_PATTERN.fullmatch(node.id):
            raise ModelError("E302", f"node id {node.id!r} must be a letter or _ then letters, digits or _",
                             where=where)
        if node.kind not in NODE_KINDS:
            raise ModelError("E302", f"unknown node kind '{node.kind}' (one of {', '.join(NODE_KINDS)})",
                             where=where)
        if not (_is_finite_real(node.x) and _is_finite_real(node.y)):
            raise ModelError("E302", "a position must be a finite number", where=where)
        if not isinstance(node.label, str) or not isinstance(node.flipped, bool):
            raise ModelError("E302", "label must be text and flipped true or false", where=where)
        if not all(isinstance(t, str) for t in (node.role, node.num, node.den, node.signs)):
            raise ModelError("E302", "role, num, den and signs must be text", where=where)
        bad_signs = not (MIN_SUM_PORTS <= len(node.signs) <= MAX_SUM_PORTS) or set(node.signs) - {"+", "-"}
        if node.kind == "sum" and bad_signs:
            raise ModelError("E302", f"signs must be {MIN_SUM_PORTS} to {MAX_SUM_PORTS} of '+' and '-'",
                             where=where)
        if node.kind == "block":
            if node.role not in ROLES:
                raise ModelError("E302", f"unknown role '{node.role}' (one of {', '.join(ROLES)})", where=where)
            from core.algebra.expression import block_transfer  # local: expression imports nothing from here
            block_transfer(node.num, node.den, where=where)

    # -- wires --------------------------------------------------------------------------------
    def connect(self, source: str, target: str, port: int = 0, bends=None, index: int | None = None) -> Wire:
        """Wire ``source``'s output to input ``port`` of ``target``."""
        src, dst = self.node(source), self.node(target)
        where = f"wire {source}->{target}:{port}"
        if not src.has_output:
            raise ModelError("E302", f"'{src.title}' is an output and has nothing to send", where=where)
        if dst.input_count == 0:
            raise ModelError("E302", f"'{dst.title}' is an input and takes no wire", where=where)
        if not isinstance(port, int) or isinstance(port, bool) or not 0 <= port < dst.input_count:
            raise ModelError("E302", f"'{dst.title}' has no input {port + 1 if isinstance(port, int) else port}",
                             where=where)
        if self.wire_into(target, port) is not None:
            raise ModelError("E302", f"input {port + 1} of '{dst.title}' already has a wire", where=where)
        if source == target:
            raise ModelError("E302", "a node cannot feed itself directly", where=where)
        wire = Wire(source, target, port, _checked_bends(bends, where))
        self.wires.insert(len(self.wires) if index is None else index, wire)
        self._emit("wire_added", wire.key)
        return wire

    def disconnect(self, key: str) -> tuple[int, Wire]:
        """Remove the wire with this key; return its index and the wire for restoring."""
        i = self.wire_index(key)
        wire = self.wires.pop(i)
        self._emit("wire_removed", key)
        return i, wire

    def set_wire_bends(self, key: str, bends: list[tuple[float, float]]) -> list[tuple[float, float]]:
        """Replace a wire's waypoints; return the old ones."""
        wire = self.wires[self.wire_index(key)]
        new = _checked_bends(bends, f"wire {key}")
        old, wire.bends = wire.bends, new
        self._emit("wire_changed", key)
        return old

    # -- parameters and settings --------------------------------------------------------------
    def set_parameter(self, parameter: Parameter) -> Parameter | None:
        """Add or replace a parameter; return the one it replaced."""
        p = parameter
        where = f"parameter {p.name}"
        if not isinstance(p.name, str) or not PARAMETER_PATTERN.fullmatch(p.name) or p.name == "s":
            raise ModelError("E304", f"{p.name!r} is not a usable parameter name", where=where)
        values = (p.nominal, p.minimum, p.maximum)
        if not all(_is_finite_real(v) and abs(v) <= 1e300 for v in values):
            raise ModelError("E304", "nominal, min and max must be finite numbers", where=where)
        if not p.minimum < p.maximum:
            raise ModelError("E304", "min must be below max", where=where)
        tolerance = _checked_tolerance(p.tolerance, where)
        if tolerance is not None and p.name == self.tuning_parameter:
            raise ModelError("E307", f"the tuning parameter '{p.name}' cannot carry a tolerance", where=where)
        old = self.parameters.get(p.name)
        self.parameters[p.name] = replace(p, nominal=float(p.nominal), minimum=float(p.minimum),
                                          maximum=float(p.maximum), tolerance=tolerance)
        self._emit("parameters_changed", p.name)
        return old

    def remove_parameter(self, name: str) -> Parameter:
        """Remove a parameter (and clear the tuning choice if it was that one)."""
        if not isinstance(name, str) or name not in self.parameters:
            raise ModelError("E304", f"there is no parameter '{name}'", where=f"parameter {name}")
        old = self.parameters.pop(name)
        self._emit("parameters_changed", name)
        if self.tuning_parameter == name:
            self.tuning_parameter = None
            self._emit("settings_changed", "tuning_parameter")
        return old

    def set_tuning_parameter(self, name: str | None) -> str | None:
        """Choose the tuning parameter (None for none); return the previous choice."""
        if name is not None and (not isinstance(name, str) or name not in self.parameters):
            raise ModelError("E304", f"there is no parameter '{name}' to tune", where=f"parameter {name}")
        if name is not None and self.parameters[name].tolerance is not None:
            raise ModelError("E307", f"'{name}' carries a tolerance, so it cannot be the tuning parameter; "
                             "clear its tolerance first", where=f"parameter {name}")
        old, self.tuning_parameter = self.tuning_parameter, name
        self._emit("settings_changed", "tuning_parameter")
        return old

    def set_analysis(self, **changes) -> dict:
        """Change analysis settings (input, output, decay_mode, decay_value, plane_x, plane_y);
        return old values."""
        unknown = set(changes) - {"input", "output", "decay_mode", "decay_value", "plane_x", "plane_y"}
        if unknown:
            raise ModelError("E302", f"no analysis setting {', '.join(sorted(unknown))}", where="analysis")
        for key in ("input", "output"):
            if changes.get(key) is not None:
                node = self.node(changes[key])
                if key == "input" and not node.has_output:
                    raise ModelError("E302", f"'{node.title}' sends no signal", where="analysis input")
        if "decay_mode" in changes and changes["decay_mode"] not in DECAY_MODES:
            raise ModelError("E302", f"decay mode must be one of {', '.join(DECAY_MODES)}", where="analysis")
        if "decay_value" in changes:
            v = changes["decay_value"]
            if not _is_finite_real(v) or v < 0:
                raise ModelError("E304", "the decay requirement must be a number >= 0", where="analysis")
        for key in ("plane_x", "plane_y"):
            v = changes.get(key)
            if v is not None and (not isinstance(v, str) or not 0 < len(v) <= 64):
                raise ModelError("E302", "a plane axis is a parameter name", where=f"analysis {key}")
        x, y = (changes.get(k, getattr(self.analysis, k)) for k in ("plane_x", "plane_y"))
        if x is not None and x == y:
            raise ModelError("E302", f"the plane needs two different parameters, got '{x}' twice",
                             where="analysis plane")
        old = {k: getattr(self.analysis, k) for k in changes}
        for k, v in changes.items():
            setattr(self.analysis, k, float(v) if k == "decay_value" else v)
        self._emit("settings_changed", "analysis")
        return old

    def set_requirements(self, requirements: Requirements) -> Requirements:
        """Replace the requirements (damping, overshoot, gain margin); return the old ones."""
        if not isinstance(requirements, Requirements):
            raise ModelError("E304", "requirements must be a Requirements value", where="requirements")
        requirements.check()
        old, self.requirements = self.requirements, requirements
        self._emit("settings_changed", "requirements")
        return old

    def rename(self, name: str) -> str:
        """Set the project's name; return the old one."""
        old, self.name = self.name, str(name)
        self._emit("settings_changed", "name")
        return old

    # -- derived ------------------------------------------------------------------------------
    def check_block_names(self) -> None:
        """E111 for the first block text with s run into a name that is not a declared parameter
        (``Tis`` where no parameter Tis exists: probably ``Ti*s``)."""
        from core.algebra.expression import check_glued_names
        for node in self.nodes.values():
            if node.kind == "block":
                for part, text in (("numerator", node.num), ("denominator", node.den)):
                    check_glued_names(text, self.parameters, where=f"node {node.id}, {part}")

    def parameter_names_in_blocks(self) -> set[str]:
        """Every parameter name typed in any block's numerator or denominator."""
        from core.algebra.expression import expression_parameters
        names: set[str] = set()
        for node in self.nodes.values():
            if node.kind == "block":
                names |= expression_parameters(node.num) | expression_parameters(node.den)
        return names
