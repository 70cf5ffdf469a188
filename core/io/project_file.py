"""Project files (``*.loop.json``): read, validate, migrate, write atomically, recover.

Reading goes in three steps: bytes -> JSON (strict: UTF-8, no NaN/Infinity, no duplicate keys,
bounded size and nesting) -> a plain, fully type-checked :class:`ProjectSpec` -> a
:class:`~core.model.diagram.Diagram` built through its own methods, so the model's validation applies.
Old files are lifted to :data:`CURRENT_VERSION` by the chained :data:`MIGRATIONS` first.

Errors. Everything that goes wrong raises :class:`~core.errors.ProjectFileError` whose ``where``
names the file and the node, wire or field at fault (``"belt.loop.json, node P, den"``).
Codes are the E2xx of the catalogue (E201 not JSON or not UTF-8, E202 not a project file, E203
newer version, E204 field missing, E205 wrong type or value, E206 wire to a missing node, E207
duplicate id, E208 cannot read, E209 cannot save, E210 changed on disk), with one exception: when
a block's typed polynomial text is invalid the parser's own E1xx code is kept (the text is the
fault, not the file structure) and the original :class:`~core.errors.ExpressionError` is chained
as ``__cause__``.

Parameters named in blocks but missing from ``parameters`` are accepted and left missing: the
analysis reports them (E404), and the file is not silently changed.

Version 1 wrote the decay requirement as ``analysis.decay`` (sigma, 1/s); version 2 writes
``decay_mode`` + ``decay_value``. Version 3 names the tuning parameter ``tuning_parameter`` (was
``sweep``), a block's polynomials ``numerator`` and ``denominator`` (were ``num``/``den``) and gives a
summing junction one entry per input, ``"inputs": [{"polarity": "add"}, {"polarity": "subtract"}]``
(was a sign string). Version 4 adds a parameter's optional ``tolerance``, ``{"low": 0.08, "high": 0.12}``
(older files have none and load unchanged). Optional fields in all versions: node ``label``/``flipped``, wire
``bends``, top-level ``notes`` and ``view`` (window state; dropped when it is not a JSON object of
plain values, since it never changes meaning).

>>> text = '''{"format": "loopwright-project", "version": 1, "name": "demo",
...   "nodes": [{"id": "r", "kind": "input"}, {"id": "y", "kind": "output", "x": 100}],
...   "wires": [{"from": "r", "to": "y"}], "analysis": {"input": "r", "output": "y", "decay": 0.5}}'''
>>> d = loads_project(text, "demo.loop.json")
>>> d.analysis.decay_mode, d.analysis.decay_value, d.node("y").x
('sigma', 0.5, 100.0)
>>> project_to_dict(d)["version"] == CURRENT_VERSION
True
>>> loads_project('{"format": "loopwright-project", "version": 99, "nodes": []}', "x")
Traceback (most recent call last):
core.errors.ProjectFileError: E203 at x: made by a newer Loopwright (version 99); this one reads up to 4
"""
from __future__ import annotations

import errno
import hashlib
import json
import math
import os
import re
import secrets
import stat
import time
from collections.abc import Callable
from dataclasses import dataclass
from itertools import accumulate
from pathlib import Path
from typing import Any, NamedTuple

from core.errors import ExpressionError, LoopwrightError, ModelError, ProjectFileError
from core.model.diagram import Diagram, Node, Parameter
from core.model.requirements import Requirements

FORMAT = "loopwright-project"
RECOVERY_FORMAT = "loopwright-recovery"
CURRENT_VERSION = 4
SUFFIX = ".loop.json"
MAX_FILE_BYTES = 10 * 1024 * 1024
MAX_NODES = 5000
MAX_WIRES = 20000
MAX_PARAMETERS = 500
MAX_BENDS = 500
MAX_SUM_INPUTS = 64    # entries read; the model enforces its own port limit
MAX_DEPTH = 32          # JSON nesting; a valid project needs 5 (top, list, wire, bends, pair)
MAX_VIEW_DEPTH = 4
MAX_TEXT = 100_000      # notes
MAX_SHORT_TEXT = 1_000  # name, label
MAX_COORDINATE = 1e9
SMALLEST_VALUE = 1e-300  # a parameter or requirement value is 0 or at least this in magnitude
DECAY_VALUE_LIMITS = (1e-12, 1e12)  # a decay requirement (sigma 1/s, T or Ts in s), when set
DEFAULT_NAME = "untitled loop"
SAVE_AS_HINT = "choose another folder with Save As"


# -- the intermediate plain form --------------------------------------------------------------
@dataclass(frozen=True)
class NodeSpec:
    id: str
    kind: str
    x: float
    y: float
    label: str
    flipped: bool
    role: str
    num: str
    den: str
    signs: str  # the model's form: one '+' or '-' per input, in port order


@dataclass(frozen=True)
class WireSpec:
    source: str
    target: str
    port: int
    bends: tuple[tuple[float, float], ...]


@dataclass(frozen=True)
class ParameterSpec:
    name: str
    nominal: float
    minimum: float
    maximum: float
    tolerance: tuple[float, float] | None = None


@dataclass(frozen=True)
class ProjectSpec:
    """A project file's content, every field type-checked, in the current version's shape."""

    name: str
    notes: str
    parameters: tuple[ParameterSpec, ...]
    tuning_parameter: str | None
    nodes: tuple[NodeSpec, ...]
    wires: tuple[WireSpec, ...]
    analysis_input: str | None
    analysis_output: str | None
    decay_mode: str
    decay_value: float
    plane: tuple[str, str] | None
    view: dict
    requirements: Requirements


# -- migrations ---------------------------------------------------------------------------------
def migrate_1_to_2(data: dict, where: str) -> dict:
    """Version 1 -> 2: ``analysis.decay`` (sigma, 1/s) becomes ``decay_mode`` + ``decay_value``.

    When a version-1 file already carries ``decay_mode``/``decay_value`` those win over ``decay``.

    >>> migrate_1_to_2({"version": 1, "analysis": {"decay": 0.3}}, "x")["analysis"]
    {'decay_mode': 'sigma', 'decay_value': 0.3}
    """
    out = dict(data, version=2)
    analysis = data.get("analysis")
    if isinstance(analysis, dict) and "decay" in analysis:
        analysis = dict(analysis)
        decay = analysis.pop("decay")
        if "decay_value" not in analysis:
            analysis.setdefault("decay_mode", "sigma")
            analysis["decay_value"] = decay
        out["analysis"] = analysis
    return out


POLARITY_WORDS = {"+": "add", "-": "subtract"}
RENAMED_IN_3 = {"sweep": "tuning_parameter", "num": "numerator", "den": "denominator", "signs": "inputs"}


def _inputs_from_signs(signs, where: str) -> list[dict]:
    """A version-2 sign string as version-3 input entries (E205 naming the node when it is not one)."""
    if not isinstance(signs, str) or not signs or set(signs) - set(POLARITY_WORDS):
        raise ProjectFileError("E205", f"'signs' must be a text of '+' and '-', not {str(signs)[:40]!r}",
                               where=where)
    return [{"polarity": POLARITY_WORDS[c]} for c in signs]


def migrate_2_to_3(data: dict, where: str) -> dict:
    """Version 2 -> 3: ``sweep`` -> ``tuning_parameter``, ``num``/``den`` -> ``numerator``/``denominator``,
    a junction's sign string -> one ``inputs`` entry per input.

    >>> out = migrate_2_to_3({"version": 2, "sweep": "K", "nodes": [
    ...     {"id": "P", "kind": "block", "num": "K", "den": "s+1"}, {"id": "e", "kind": "sum", "signs": "+-"}]}, "x")
    >>> out["tuning_parameter"], out["nodes"][0]["numerator"], out["nodes"][1]["inputs"][1]
    ('K', 'K', {'polarity': 'subtract'})
    """
    out = {("tuning_parameter" if k == "sweep" else k): v for k, v in data.items()}
    out["version"] = 3
    nodes = data.get("nodes")
    if isinstance(nodes, list):
        out["nodes"] = [_migrate_node_2_to_3(n, where) if isinstance(n, dict) else n for n in nodes]
    return out


def _migrate_node_2_to_3(node: dict, where: str) -> dict:
    renamed = {"num": "numerator", "den": "denominator"}
    out = {renamed.get(k, k): v for k, v in node.items() if k != "signs"}
    if "signs" in node:
        node_id = node.get("id")
        name = node_id if isinstance(node_id, str) else "?"
        out["inputs"] = _inputs_from_signs(node["signs"], f"{where}, node {name[:64]}")
    return out


def migrate_3_to_4(data: dict, where: str) -> dict:
    """Version 3 -> 4: parameters may carry a ``tolerance``; a version-3 file has none, so only the
    version changes.

    >>> migrate_3_to_4({"version": 3, "parameters": [{"name": "K"}]}, "x")
    {'version': 4, 'parameters': [{'name': 'K'}]}
    """
    return {**data, "version": 4}


MIGRATIONS: dict[int, Callable[[dict, str], dict]] = {1: migrate_1_to_2, 2: migrate_2_to_3, 3: migrate_3_to_4}


def migrate(data: dict, where: str) -> dict:
    """Lift a raw project dict to :data:`CURRENT_VERSION` through the chained migrations."""
    version = data.get("version")
    if version is None:
        raise ProjectFileError("E204", "the 'version' field is missing", where=where)
    if not _is_int(version) or version < 1:
        raise ProjectFileError("E205", f"'version' must be a whole number from 1, not {version!r}", where=where)
    if version > CURRENT_VERSION:
        raise ProjectFileError("E203", f"made by a newer Loopwright (version {version}); "
                                       f"this one reads up to {CURRENT_VERSION}", where=where)
    while version < CURRENT_VERSION:
        data = MIGRATIONS[version](data, where)
        version = data["version"]
    return data


# -- JSON text ----------------------------------------------------------------------------------
def _reject_constant(name: str):
    raise ValueError(f"{name} is not allowed in a project file")


def _finite_float(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):
        raise ValueError(f"number {text[:20]} is out of range")
    return value


def _object_without_duplicates(pairs: list[tuple[str, Any]]) -> dict:
    out: dict = {}
    for key, value in pairs:
        if key in out:
            raise ValueError(f"the key '{key[:40]}' appears twice in one object")
        out[key] = value
    return out


# a string, or an unterminated one running to the end: always matches at a quote, so linear time
_JSON_STRING = re.compile(r'"[^"\\]*(?:\\.[^"\\]*)*"?', re.DOTALL)
_NOT_BRACKET = re.compile(r"[^\[\]{}]+")


def _json_depth_ok(text: str) -> bool:
    """Whether brackets outside strings nest at most :data:`MAX_DEPTH` deep (checked before parsing)."""
    brackets = _NOT_BRACKET.sub("", _JSON_STRING.sub("", text))
    return max(accumulate(1 if c in "[{" else -1 for c in brackets), default=0) <= MAX_DEPTH


def _decode(raw: bytes | str, where: str) -> str:
    if isinstance(raw, str):
        return raw
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ProjectFileError("E201", f"the file is not UTF-8 text (byte 0x{raw[exc.start]:02x} at offset "
                                       f"{exc.start}); save it as UTF-8", where=where) from None


def _parse_json(text: str, where: str) -> Any:
    if not _json_depth_ok(text):
        raise ProjectFileError("E201", f"the JSON is nested more than {MAX_DEPTH} levels deep", where=where)
    try:
        return json.loads(text, parse_constant=_reject_constant, parse_float=_finite_float,
                          object_pairs_hook=_object_without_duplicates)
    except json.JSONDecodeError as exc:
        raise ProjectFileError("E201", f"not valid JSON: {exc.msg} (line {exc.lineno}, column {exc.colno})",
                               where=where) from None
    except (ValueError, RecursionError) as exc:
        raise ProjectFileError("E201", f"not valid JSON: {exc}", where=where) from None


# -- field checks -------------------------------------------------------------------------------
def _is_int(v) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _is_number(v) -> bool:
    """A JSON number: an int of any size (never converted to float here) or a finite float."""
    return _is_int(v) or (isinstance(v, float) and math.isfinite(v))


_LONE_SURROGATE = re.compile("[\ud800-\udfff]")


def _is_text(v) -> bool:
    """Text that can be written back as UTF-8 (JSON escapes can spell lone surrogates; those cannot)."""
    return isinstance(v, str) and not _LONE_SURROGATE.search(v)


def _type_name(v) -> str:
    return {bool: "true/false", int: "a whole number", float: "a number", str: "text", list: "a list",
            dict: "an object", type(None): "null"}.get(type(v), type(v).__name__)


class _Fields:
    """Typed access to one JSON object's fields, every error naming the place in the file."""

    def __init__(self, obj, where: str, what: str, known: tuple[str, ...]):
        if not isinstance(obj, dict):
            raise ProjectFileError("E205", f"{what} must be an object, not {_type_name(obj)}", where=where)
        unknown = [k for k in obj if k not in known]
        if unknown:
            new_name = RENAMED_IN_3.get(unknown[0])
            hint = (f"; since version 3 it is '{new_name}'" if new_name in known
                    else f" (known: {', '.join(known)})")
            raise ProjectFileError("E205", f"{what} has an unknown field '{str(unknown[0])[:40]}'{hint}",
                                   where=where)
        self.obj, self.where = obj, where

    def _get(self, key, default, required):
        if key not in self.obj:
            if required:
                raise ProjectFileError("E204", f"the '{key}' field is missing", where=self.where)
            return default
        return self.obj[key]

    def text(self, key, default="", *, required=False, limit=MAX_SHORT_TEXT, nullable=False):
        v = self._get(key, default, required)
        if v is None and nullable:
            return None
        if not isinstance(v, str):
            raise ProjectFileError("E205", f"'{key}' must be text, not {_type_name(v)}", where=self.where)
        if not _is_text(v):
            raise ProjectFileError("E205", f"'{key}' holds an unpaired surrogate escape (not Unicode text)",
                                   where=self.where)
        if len(v) > limit:
            raise ProjectFileError("E205", f"'{key}' is longer than {limit} characters", where=self.where)
        return v

    def number(self, key, default=0.0, *, required=False, limit=1e300, smallest=0.0):
        """A finite number within +/-``limit``; non-zero ones at least ``smallest`` in magnitude."""
        v = self._get(key, default, required)
        if not _is_number(v) or abs(v) > limit:
            found = "a number out of that range" if _is_number(v) else _type_name(v)
            raise ProjectFileError("E205", f"'{key}' must be a finite number"
                                           f"{'' if limit >= 1e300 else f' within +/-{limit:g}'}, "
                                           f"not {found}", where=self.where)
        if v != 0 and abs(v) < smallest:
            raise ProjectFileError("E205", f"'{key}' is {v:.3g}: a value is 0 or at least {smallest:g} in "
                                           "magnitude", where=self.where)
        return float(v)

    def decay_value(self, key):
        """The decay requirement: 0 (none) or within :data:`DECAY_VALUE_LIMITS`."""
        v = self.number(key, 0.0)
        low, high = DECAY_VALUE_LIMITS
        if v != 0 and not low <= v <= high:
            raise ProjectFileError("E205", f"'{key}' is {v:.3g}: the decay requirement is 0 (none) or from "
                                           f"{low:g} to {high:g} (1/s for a decay rate, s for a time)".replace("e+", "e"),
                                   where=self.where)
        return v

    def integer(self, key, default=0):
        v = self._get(key, default, False)
        if not _is_int(v) or v < 0:
            raise ProjectFileError("E205", f"'{key}' must be a whole number >= 0, not {_type_name(v)}",
                                   where=self.where)
        return v

    def boolean(self, key, default=False):
        v = self._get(key, default, False)
        if not isinstance(v, bool):
            raise ProjectFileError("E205", f"'{key}' must be true or false, not {_type_name(v)}",
                                   where=self.where)
        return v

    def items(self, key, limit, *, required=False):
        v = self._get(key, [], required)
        if not isinstance(v, list):
            raise ProjectFileError("E205", f"'{key}' must be a list, not {_type_name(v)}", where=self.where)
        if len(v) > limit:
            raise ProjectFileError("E205", f"'{key}' has {len(v)} entries; at most {limit} are allowed",
                                   where=self.where)
        return v


NODE_FIELDS = {
    "input": (), "output": (), "branch": (), "sum": ("inputs",), "block": ("role", "numerator", "denominator"),
}
COMMON_NODE_FIELDS = ("id", "kind", "x", "y", "label", "flipped")


def _node_spec(obj, source: str, index: int) -> NodeSpec:
    place = f"{source}, node {index + 1}"
    if isinstance(obj, dict) and isinstance(obj.get("id"), str):
        place = f"{source}, node {obj['id'][:64]}"
    if not isinstance(obj, dict):
        raise ProjectFileError("E205", f"a node must be an object, not {_type_name(obj)}", where=place)
    if "kind" not in obj:
        raise ProjectFileError("E204", "the 'kind' field is missing", where=place)
    kind = obj["kind"]
    if not isinstance(kind, str) or kind not in NODE_FIELDS:
        raise ProjectFileError("E205", f"unknown node kind {str(kind)[:40]!r} "
                                       f"(one of {', '.join(NODE_FIELDS)})", where=place)
    f = _Fields(obj, place, "a node", COMMON_NODE_FIELDS + NODE_FIELDS.get(kind, ()))
    return NodeSpec(
        id=f.text("id", required=True, limit=64), kind=f.text("kind", required=True),
        x=f.number("x", limit=MAX_COORDINATE), y=f.number("y", limit=MAX_COORDINATE),
        label=f.text("label"), flipped=f.boolean("flipped"),
        role=f.text("role", "other"), num=f.text("numerator", "1", limit=MAX_TEXT),
        den=f.text("denominator", "1", limit=MAX_TEXT), signs=_junction_signs(f, place))


def _junction_signs(fields: _Fields, place: str) -> str:
    """A junction's ``inputs`` entries in the model's form (default: one added, one subtracted input)."""
    words = {word: sign for sign, word in POLARITY_WORDS.items()}
    signs = []
    for i, entry in enumerate(fields.items("inputs", MAX_SUM_INPUTS)):
        where = f"{place}, input {i + 1}"
        polarity = _Fields(entry, where, "an input", ("polarity",)).text("polarity", required=True)
        if polarity not in words:
            raise ProjectFileError("E205", f"'polarity' must be {' or '.join(words)}, not {polarity[:40]!r}",
                                   where=where)
        signs.append(words[polarity])
    return "".join(signs) if "inputs" in fields.obj else "+-"


def _wire_spec(obj, source: str, index: int) -> WireSpec:
    place = f"{source}, wire {index + 1}"
    if isinstance(obj, dict) and isinstance(obj.get("from"), str) and isinstance(obj.get("to"), str):
        place = f"{source}, wire {obj['from'][:64]}->{obj['to'][:64]}"
    f = _Fields(obj, place, "a wire", ("from", "to", "port", "bends"))
    bends = []
    for i, b in enumerate(f.items("bends", MAX_BENDS)):
        if not (isinstance(b, list) and len(b) == 2 and all(_is_number(v) and abs(v) <= MAX_COORDINATE for v in b)):
            raise ProjectFileError("E205", f"bend {i + 1} must be a pair [x, y] of finite numbers", where=place)
        bends.append((float(b[0]), float(b[1])))
    return WireSpec(f.text("from", required=True, limit=64), f.text("to", required=True, limit=64),
                    f.integer("port"), tuple(bends))


def _parameter_spec(obj, source: str, index: int) -> ParameterSpec:
    place = f"{source}, parameter {index + 1}"
    if isinstance(obj, dict) and isinstance(obj.get("name"), str):
        place = f"{source}, parameter {obj['name'][:64]}"
    f = _Fields(obj, place, "a parameter", ("name", "nominal", "min", "max", "tolerance"))
    return ParameterSpec(f.text("name", required=True, limit=64), f.number("nominal", 1.0, smallest=SMALLEST_VALUE),
                         f.number("min", 0.0, smallest=SMALLEST_VALUE), f.number("max", 10.0, smallest=SMALLEST_VALUE),
                         _tolerance_spec(obj.get("tolerance"), place))


def _tolerance_spec(obj, place: str) -> tuple[float, float] | None:
    """A parameter's optional ``tolerance`` object ``{"low": LO, "high": HI}`` (null or absent: none)."""
    if obj is None:
        return None
    where = f"{place}, tolerance"
    f = _Fields(obj, where, "'tolerance'", ("low", "high"))
    low, high = (f.number(k, required=True, smallest=SMALLEST_VALUE) for k in ("low", "high"))
    if not low < high:
        raise ProjectFileError("E205", f"the tolerance {low:g} .. {high:g} is empty or inverted: 'low' must be "
                                       "below 'high'", where=where)
    return low, high


def _plain_view(value, depth: int = 0) -> bool:
    """Whether ``value`` is window state made of plain JSON values, nested at most a few levels."""
    if value is None or isinstance(value, bool) or _is_text(value) or _is_number(value):
        return True
    if depth >= MAX_VIEW_DEPTH:
        return False
    if isinstance(value, list):
        return all(_plain_view(v, depth + 1) for v in value)
    if isinstance(value, dict):
        return all(_is_text(k) and _plain_view(v, depth + 1) for k, v in value.items())
    return False


TOP_FIELDS = ("format", "version", "name", "notes", "parameters", "tuning_parameter", "nodes", "wires", "analysis", "view",
              "requirements")
REQUIREMENT_FIELDS = ("min_damping", "max_overshoot", "min_gain_margin", "gain_margin_unit")


def _plane_spec(analysis, where: str) -> tuple[str, str] | None:
    """``analysis.plane`` = {"x": name, "y": name} (optional) as a pair of names."""
    plane = analysis.get("plane") if isinstance(analysis, dict) else None
    if plane is None:
        return None
    fields = _Fields(plane, f"{where}, plane", "'plane'", ("x", "y"))
    return fields.text("x", required=True, limit=64), fields.text("y", required=True, limit=64)


def _requirements_spec(obj, source: str) -> Requirements:
    """The optional ``requirements`` object (each entry optional; null or absent = not set)."""
    place = f"{source}, requirements"
    fields = _Fields(obj, place, "'requirements'", REQUIREMENT_FIELDS)
    values = {k: None if obj.get(k) is None else fields.number(k, smallest=SMALLEST_VALUE)
              for k in REQUIREMENT_FIELDS[:3]}
    requirements = Requirements(**values, gain_margin_unit=fields.text("gain_margin_unit", "factor", limit=16))
    try:
        requirements.check()
    except ModelError as exc:
        raise ProjectFileError("E205", exc.message, where=place) from exc
    return requirements


def parse_spec(data, source: str = "<memory>") -> ProjectSpec:
    """Check a decoded JSON value field by field and return it in the current version's plain form."""
    if not isinstance(data, dict):
        raise ProjectFileError("E202", f"a project file holds one JSON object, not {_type_name(data)}",
                               where=source)
    if data.get("format") != FORMAT:
        found = data.get("format")
        raise ProjectFileError("E202", f"not a Loopwright project file (format is "
                                       f"{str(found)[:40]!r}, expected '{FORMAT}')", where=source)
    data = migrate(data, source)
    top = _Fields(data, source, "the project", TOP_FIELDS)
    nodes = tuple(_node_spec(o, source, i) for i, o in enumerate(top.items("nodes", MAX_NODES, required=True)))
    wires = tuple(_wire_spec(o, source, i) for i, o in enumerate(top.items("wires", MAX_WIRES)))
    params = tuple(_parameter_spec(o, source, i)
                   for i, o in enumerate(top.items("parameters", MAX_PARAMETERS)))
    analysis = _Fields(data.get("analysis", {}), f"{source}, analysis", "'analysis'",
                       ("input", "output", "decay_mode", "decay_value", "plane"))
    view = data.get("view", {})
    return ProjectSpec(
        name=top.text("name", DEFAULT_NAME), notes=top.text("notes", limit=MAX_TEXT),
        parameters=params, tuning_parameter=top.text("tuning_parameter", None, nullable=True, limit=64),
        nodes=nodes, wires=wires,
        analysis_input=analysis.text("input", None, nullable=True, limit=64),
        analysis_output=analysis.text("output", None, nullable=True, limit=64),
        decay_mode=analysis.text("decay_mode", "sigma"), decay_value=analysis.decay_value("decay_value"),
        plane=_plane_spec(data.get("analysis", {}), f"{source}, analysis"),
        view=view if isinstance(view, dict) and _plain_view(view) else {},
        requirements=_requirements_spec(data.get("requirements", {}), source))


# -- building the model ---------------------------------------------------------------------------
def _model_error(exc: LoopwrightError, place: str, source: str) -> ProjectFileError:
    """The file-level error for a refusal by the model or the expression parser at ``place``.

    An expression error keeps its E1xx code and its own place, which already reads
    ``node P, denominator, column 7``; the file name goes in front.
    """
    if isinstance(exc, ExpressionError):
        return ProjectFileError(exc.code, exc.message, where=f"{source}, {exc.where}" if exc.where else place)
    code = {"E303": "E207", "E301": "E206"}.get(exc.code, "E205")
    return ProjectFileError(code, exc.message, where=place)


def diagram_from_spec(spec: ProjectSpec, source: str = "<memory>") -> Diagram:
    """Build a :class:`Diagram` through its methods; refusals become :class:`ProjectFileError`."""
    d = Diagram(name=spec.name, notes=spec.notes)
    for p in spec.parameters:
        place = f"{source}, parameter {p.name}"
        if p.name in d.parameters:
            raise ProjectFileError("E207", f"the parameter '{p.name}' is defined twice", where=place)
        try:
            d.set_parameter(Parameter(p.name, p.nominal, p.minimum, p.maximum, p.tolerance))
        except LoopwrightError as exc:
            raise _model_error(exc, place, source) from exc
    for n in spec.nodes:
        place = f"{source}, node {n.id}"
        if n.id in d.nodes:
            raise ProjectFileError("E207", f"the node id '{n.id}' is used twice", where=place)
        try:
            d.add_node(Node(n.id, n.kind, n.x, n.y, n.label, n.role, n.num, n.den, n.signs, n.flipped))
        except LoopwrightError as exc:
            raise _model_error(exc, place, source) from exc
    for w in spec.wires:
        place = f"{source}, wire {w.source}->{w.target}:{w.port}"
        for end in (w.source, w.target):
            if end not in d.nodes:
                raise ProjectFileError("E206", f"the wire refers to node '{end}', which does not exist",
                                       where=place)
        try:
            d.connect(w.source, w.target, w.port, bends=list(w.bends))
        except LoopwrightError as exc:
            raise _model_error(exc, place, source) from exc
    for key, value in (("input", spec.analysis_input), ("output", spec.analysis_output)):
        if value is not None and value not in d.nodes:
            raise ProjectFileError("E206", f"the analysis {key} '{value}' is not a node of this diagram",
                                   where=f"{source}, analysis")
    try:
        d.set_tuning_parameter(spec.tuning_parameter)
    except ModelError as exc:
        raise _model_error(exc, f"{source}, tuning_parameter", source) from exc
    try:
        d.set_analysis(input=spec.analysis_input, output=spec.analysis_output,
                       decay_mode=spec.decay_mode, decay_value=spec.decay_value,
                       plane_x=spec.plane[0] if spec.plane else None, plane_y=spec.plane[1] if spec.plane else None)
    except ModelError as exc:
        raise _model_error(exc, f"{source}, analysis", source) from exc
    d.set_requirements(spec.requirements)
    d.view = dict(spec.view)
    return d


def project_from_dict(data, source: str = "<memory>") -> Diagram:
    """A :class:`Diagram` from a decoded JSON value (any version this program reads).

    >>> d = project_from_dict({"format": "loopwright-project", "version": 2,
    ...                        "nodes": [{"id": "r", "kind": "input"}]})
    >>> list(d.nodes), d.name
    (['r'], 'untitled loop')
    """
    return diagram_from_spec(parse_spec(data, source), source)


def loads_project(text: str | bytes, source: str = "<memory>") -> Diagram:
    """A :class:`Diagram` from the text (or UTF-8 bytes) of a project file."""
    size = len(text.encode("utf-8")) if isinstance(text, str) else len(text)
    if size > MAX_FILE_BYTES:
        raise ProjectFileError("E208", f"the file is {size / 1e6:.1f} MB; project files are at most "
                                       f"{MAX_FILE_BYTES // (1024 * 1024)} MB", where=source)
    return project_from_dict(_parse_json(_decode(text, source), source), source)


def _read_bytes(path: Path) -> bytes:
    where = str(path)
    try:
        if path.is_dir():
            raise ProjectFileError("E208", "this is a folder, not a project file", where=where)
        with open(path, "rb") as fh:
            raw = fh.read(MAX_FILE_BYTES + 1)
    except FileNotFoundError:
        raise ProjectFileError("E208", "there is no such file", where=where) from None
    except PermissionError:
        raise ProjectFileError("E208", "no permission to read this file", where=where) from None
    except OSError as exc:
        raise ProjectFileError("E208", f"cannot read the file: {exc.strerror or exc}", where=where) from None
    if len(raw) > MAX_FILE_BYTES:
        raise ProjectFileError("E208", f"the file is larger than {MAX_FILE_BYTES // (1024 * 1024)} MB, "
                                       "too large for a project file", where=where)
    return raw


def load_project(path) -> Diagram:
    """Read a project file; every problem is a :class:`ProjectFileError` naming the file."""
    path = Path(path)
    return loads_project(_read_bytes(path), str(path))


# -- writing --------------------------------------------------------------------------------------
def _plain_number(v: float):
    """Whole floats written as ints (``80`` rather than ``80.0``) for readable files."""
    return int(v) if float(v).is_integer() and abs(v) < 2 ** 53 else float(v)


def project_to_dict(diagram: Diagram) -> dict:
    """The current-version JSON form of a diagram (only fields that carry something are written)."""
    nodes = []
    for n in diagram.nodes.values():
        item: dict[str, object] = {"id": n.id, "kind": n.kind}
        if n.kind == "block":
            item.update(role=n.role, numerator=n.num, denominator=n.den)
        elif n.kind == "sum":
            item["inputs"] = [{"polarity": POLARITY_WORDS[c]} for c in n.signs]
        item.update(x=_plain_number(n.x), y=_plain_number(n.y))
        if n.label:
            item["label"] = n.label
        if n.flipped:
            item["flipped"] = True
        nodes.append(item)
    wires = []
    for w in diagram.wires:
        wire: dict[str, object] = {"from": w.source, "to": w.target, "port": w.port}
        if w.bends:
            wire["bends"] = [[_plain_number(x), _plain_number(y)] for x, y in w.bends]
        wires.append(wire)
    out = {"format": FORMAT, "version": CURRENT_VERSION, "name": diagram.name}
    if diagram.notes:
        out["notes"] = diagram.notes
    out["parameters"] = [_parameter_dict(p) for p in diagram.parameters.values()]
    out["tuning_parameter"] = diagram.tuning_parameter
    out["nodes"], out["wires"] = nodes, wires
    a = diagram.analysis
    analysis: dict[str, object] = {"input": a.input, "output": a.output, "decay_mode": a.decay_mode,
                                   "decay_value": _plain_number(a.decay_value)}
    if a.plane_x is not None and a.plane_y is not None:
        analysis["plane"] = {"x": a.plane_x, "y": a.plane_y}
    out["analysis"] = analysis
    if not diagram.requirements.is_empty:
        out["requirements"] = diagram.requirements.to_dict()
    if diagram.view and _plain_view(diagram.view):
        out["view"] = diagram.view
    return out


def _parameter_dict(p: Parameter) -> dict:
    item: dict[str, object] = {"name": p.name, "nominal": _plain_number(p.nominal), "min": _plain_number(p.minimum),
                               "max": _plain_number(p.maximum)}
    if p.tolerance is not None:
        item["tolerance"] = {"low": _plain_number(p.tolerance[0]), "high": _plain_number(p.tolerance[1])}
    return item


def dumps_project(diagram: Diagram) -> str:
    """Project file text: one node, wire or parameter per line, so diffs stay readable."""
    data = project_to_dict(diagram)
    lines = []
    for key, value in data.items():
        if isinstance(value, list) and value:
            inner = ",\n".join("    " + json.dumps(v, ensure_ascii=False) for v in value)
            lines.append(f"  {json.dumps(key)}: [\n{inner}\n  ]")
        else:
            lines.append(f"  {json.dumps(key)}: {json.dumps(value, ensure_ascii=False)}")
    return "{\n" + ",\n".join(lines) + "\n}\n"


class Fingerprint(NamedTuple):
    """What a file looked like when it was read: a file counts as changed when size or hash differ."""

    mtime_ns: int
    size: int
    sha256: str

    def same_content(self, other: Fingerprint | None) -> bool:
        """Whether ``other`` describes the same bytes (a touched but unchanged file is the same)."""
        return other is not None and (self.size, self.sha256) == (other.size, other.sha256)


def file_fingerprint(path) -> Fingerprint:
    """Modification time, size and SHA-256 of a file (E208 when it cannot be read)."""
    path = Path(path)
    raw = _read_bytes(path)
    try:
        mtime = path.stat().st_mtime_ns
    except OSError as exc:
        raise ProjectFileError("E208", f"cannot read the file: {exc.strerror or exc}", where=str(path)) from None
    return Fingerprint(mtime, len(raw), hashlib.sha256(raw).hexdigest())


def _os_problem(exc: OSError, reading: bool = False) -> str:
    if exc.errno in (errno.ENOSPC, getattr(errno, "EDQUOT", -1)):
        return "the disk is full"
    if exc.errno == errno.ENAMETOOLONG:
        return f"a file name there would be too long (at most {MAX_NAME_BYTES} bytes)"
    if isinstance(exc, PermissionError) or exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
        return "no permission to read it" if reading else "no permission to write there"
    return exc.strerror or str(exc) or type(exc).__name__


MAX_NAME_BYTES = 255          # one file name, on the file systems people save to
TEMP_TOKEN_HEX = 12
STALE_TEMP_SECONDS = 3600     # a temp file of ours this old is left over from a killed save
_TEMP_NAME = re.compile(r"\..+\.[0-9a-f]{" + str(TEMP_TOKEN_HEX) + r"}\.tmp", re.DOTALL)


def _fit_name(prefix: str, suffix: str) -> str:
    """``prefix + suffix``, the prefix cut at a character boundary so the name fits MAX_NAME_BYTES.

    >>> len(_fit_name("é" * 200, ".bak").encode()), _fit_name("belt", ".bak")
    (254, 'belt.bak')
    """
    room = MAX_NAME_BYTES - len(os.fsencode(suffix))
    while len(os.fsencode(prefix)) > room:
        prefix = prefix[:-1]
    return prefix + suffix


def temp_name(name: str, token: str) -> str:
    """The hidden temp file's name for a save of ``name`` (fits MAX_NAME_BYTES; see :data:`_TEMP_NAME`)."""
    return _fit_name("." + name, f".{token}.tmp")


def backup_name(name: str) -> str:
    """``NAME.bak``; for a name too long for that, a cut name with a short hash of the whole name.

    >>> backup_name("belt.loop.json")
    'belt.loop.json.bak'
    >>> long = "x" * 250 + ".loop.json"
    >>> b = backup_name(long); len(b), b.endswith(".bak"), b == backup_name(long)
    (255, True, True)
    """
    plain = name + ".bak"
    if len(os.fsencode(plain)) <= MAX_NAME_BYTES:
        return plain
    digest = hashlib.sha256(os.fsencode(name)).hexdigest()[:8]
    return _fit_name(name, f"~{digest}.bak")


def _fsync_directory(directory: Path) -> None:
    """Make a rename durable where the platform allows opening a directory (not on Windows)."""
    try:
        fd = os.open(directory, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _write_all(fd: int, data: bytes) -> None:
    view = memoryview(data)
    while view:
        written = os.write(fd, view)
        view = view[written:]


def _write_temp(directory: Path, name: str, data: bytes, mode: int | None = None) -> Path:
    """A new hidden temp file beside ``name`` holding ``data``, written and fsynced.

    Created with mode 0o666 less the umask (like any new file), or ``mode`` to keep an existing
    file's permissions.
    """
    temp = directory / temp_name(name, secrets.token_hex(TEMP_TOKEN_HEX // 2))
    fd = os.open(temp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0), 0o666)
    try:
        try:
            if mode is not None:
                os.chmod(temp, mode)
            _write_all(fd, data)
            os.fsync(fd)
        finally:
            os.close(fd)
    except BaseException:
        _remove_quietly(temp)
        raise
    return temp


def _remove_quietly(path: Path) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def remove_stale_temps(directory: Path, now: float | None = None) -> list[Path]:
    """Delete hidden temp files of our own pattern older than :data:`STALE_TEMP_SECONDS` (left by
    a save that was killed); return what was removed. Problems only mean nothing is removed."""
    now = time.time() if now is None else now
    removed: list[Path] = []
    try:
        entries = list(os.scandir(directory))
    except OSError:
        return removed
    for entry in entries:
        if not _TEMP_NAME.fullmatch(entry.name):
            continue
        try:
            if entry.is_file(follow_symlinks=False) and now - entry.stat(follow_symlinks=False).st_mtime > STALE_TEMP_SECONDS:
                os.unlink(entry.path)
                removed.append(Path(entry.path))
        except OSError:
            continue
    return removed


def save_target(path) -> Path:
    """Where a save of ``path`` really goes: a symbolic link's target (so the link stays a link).

    E209 when the name is too long or its folder cannot be entered.
    """
    path = Path(path)
    _check_name_length(path, str(path))
    try:
        return Path(os.path.realpath(path)) if path.is_symlink() else path
    except OSError as exc:
        raise _folder_problem(path, exc) from None


def _check_name_length(path: Path, where: str) -> None:
    size = len(os.fsencode(path.name))
    if size > MAX_NAME_BYTES:
        raise ProjectFileError("E209", f"the file name is {size} bytes long; at most {MAX_NAME_BYTES} are "
                                       f"allowed; {SAVE_AS_HINT} and a shorter name", where=where)


def _folder_problem(path: Path, exc: OSError) -> ProjectFileError:
    return ProjectFileError("E209", f"cannot open the folder {path.parent}: {_os_problem(exc, True)}; "
                                    f"{SAVE_AS_HINT}", where=str(path))


class _Step:
    """Turns an OSError in one step of a save into E209 naming that step; the previous file is unchanged."""

    def __init__(self, where: str, directory: Path):
        self.where, self.directory = where, directory

    def fail(self, what: str, exc: OSError, reading: bool = False) -> ProjectFileError:
        return ProjectFileError("E209", f"could not save in {self.directory}: {what}: "
                                        f"{_os_problem(exc, reading)}; the previous file is unchanged; "
                                        f"{SAVE_AS_HINT}", where=self.where)


def _check_target(path: Path, where: str) -> None:
    """E209 before anything is written: a folder, a missing folder, a name too long."""
    _check_name_length(path, where)
    try:
        if path.is_dir():
            raise ProjectFileError("E209", f"this is a folder; {SAVE_AS_HINT} and a file name", where=where)
        if not path.parent.is_dir():
            raise ProjectFileError("E209", f"the folder {path.parent} does not exist; {SAVE_AS_HINT}",
                                   where=where)
    except OSError as exc:
        raise _folder_problem(path, exc) from None


def atomic_write(path, data: bytes, *, backup: bool = True) -> None:
    """Replace ``path`` with ``data`` so that readers see the old file or the new one, never half.

    A symbolic link is followed: its target is replaced (the ``.bak`` goes beside the target).
    The new bytes go to a hidden temp file in the same folder (written and fsynced), the old file
    is copied to :func:`backup_name` (itself written atomically), then the temp file is renamed
    over the target and the folder fsynced. Stale temp files of ours are removed first. On any
    failure the old file is untouched, temp files are removed and :class:`ProjectFileError` E209
    says which step failed and where.
    """
    where = str(path)
    target = save_target(path)
    _check_target(target, where)
    directory = target.parent
    step = _Step(where, directory)
    remove_stale_temps(directory)
    temps: list[Path] = []
    try:
        try:
            existing = target.is_file()
            mode = stat.S_IMODE(target.stat().st_mode) if existing else None
        except OSError as exc:
            raise step.fail("cannot look at the previous file", exc, reading=True) from exc
        try:
            temps.append(_write_temp(directory, target.name, data, mode))
        except OSError as exc:
            raise step.fail("cannot write the new file", exc) from exc
        if backup and existing:
            _keep_backup(target, mode, temps, step)
        try:
            os.replace(temps[0], target)
        except OSError as exc:
            raise step.fail("cannot put the new file in place", exc) from exc
        temps.pop()
    finally:
        for temp in temps:
            _remove_quietly(temp)
    _fsync_directory(directory)


def _keep_backup(target: Path, mode: int | None, temps: list[Path], step: _Step) -> None:
    """Copy the file about to be replaced to its backup name, atomically."""
    bak = target.with_name(backup_name(target.name))
    try:
        old = target.read_bytes()
    except OSError as exc:
        raise step.fail(f"cannot read the previous file to keep it as {bak.name}", exc, reading=True) from exc
    try:
        temps.append(_write_temp(target.parent, bak.name, old, mode))
        os.replace(temps[-1], bak)
    except OSError as exc:
        raise step.fail(f"cannot write the backup {bak.name}", exc) from exc
    temps.pop()


def save_project(diagram: Diagram, path, *, expected_fingerprint: Fingerprint | None = None,
                 force: bool = False) -> Fingerprint:
    """Write the diagram atomically, keeping the previous file as ``NAME.bak``; return the new fingerprint.

    With ``expected_fingerprint`` (from :func:`file_fingerprint` when the file was opened or last
    saved) the save is refused with E210 if the file's content changed on disk meanwhile, unless
    ``force`` is true.

    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> fp = save_project(Diagram("demo"), folder / "demo.loop.json")
    >>> load_project(folder / "demo.loop.json").name, fp == file_fingerprint(folder / "demo.loop.json")
    ('demo', True)
    """
    path = Path(path)
    data = dumps_project(diagram).encode("utf-8")
    if expected_fingerprint is not None and not force:
        try:
            current = file_fingerprint(path)
        except ProjectFileError:
            current = None
        if not expected_fingerprint.same_content(current):
            what = "was removed" if current is None else "was changed by another program"
            raise ProjectFileError("E210", f"the file {what} since it was opened; save anyway to "
                                           f"overwrite, or {SAVE_AS_HINT}", where=str(path))
    atomic_write(path, data)
    try:
        mtime = path.stat().st_mtime_ns
    except OSError:
        mtime = 0
    return Fingerprint(mtime, len(data), hashlib.sha256(data).hexdigest())


# -- crash recovery ---------------------------------------------------------------------------------
# Every run that autosaves has an *owner* token (random, so runs that share a process id, as in
# containers, never collide). The token is in each autosaved copy's name and in its owner record;
# a run writes and removes only its own copies. Removing another run's copy takes the user's word.
@dataclass(frozen=True)
class Recovery:
    """An autosaved copy found on start-up: where it is, which project it belongs to, when, whose."""

    path: Path
    project_path: Path | None
    saved_at: float
    name: str
    owner: str | None = None


def new_recovery_owner() -> str:
    """A fresh owner token for one run's autosaved copies."""
    return secrets.token_hex(8)


def state_directory() -> Path:
    """Per-user state folder: $LOOPWRIGHT_STATE_DIR, else $XDG_STATE_HOME/loopwright, else ~/.local/state/loopwright."""
    override = os.environ.get("LOOPWRIGHT_STATE_DIR")
    if override:
        return Path(override)
    base = os.environ.get("XDG_STATE_HOME") or str(Path.home() / ".local" / "state")
    return Path(base) / "loopwright"


def recovery_directory() -> Path:
    """Where autosaved copies live."""
    return state_directory() / "recovery"


_OWNER_TOKEN = re.compile(r"[0-9a-f]{16}")


def recovery_path(project_path, owner: str) -> Path:
    """The autosave file of one run (``owner``) for a project (by its absolute path) or an untitled one.

    >>> p = recovery_path("/home/a/belt.loop.json", "0123456789abcdef")
    >>> p.name.startswith("belt-"), p.name.endswith("-0123456789abcdef.recovery.json")
    (True, True)
    """
    if not _OWNER_TOKEN.fullmatch(owner or ""):
        raise ValueError("a recovery owner is a token from new_recovery_owner()")
    if project_path is None:
        name = f"untitled-{owner}"
    else:
        absolute = str(Path(project_path).expanduser().absolute())
        stem = Path(absolute).name.removesuffix(SUFFIX)[:40] or "project"
        name = f"{stem}-{hashlib.sha256(absolute.encode('utf-8', 'surrogatepass')).hexdigest()[:12]}-{owner}"
    return recovery_directory() / f"{name}.recovery.json"


def write_recovery(diagram: Diagram, project_path, owner: str) -> Path:
    """Autosave the diagram (atomically, no backup) to this run's :func:`recovery_path`; return it.

    A file there that another run owns is never replaced (E209).
    """
    target = recovery_path(project_path, owner)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ProjectFileError("E209", f"cannot create the recovery folder: {_os_problem(exc)}",
                               where=str(target.parent)) from exc
    if target.exists() and _owner_of(target) != owner:
        raise ProjectFileError("E209", "an autosaved copy of another run is in the way; it is kept",
                               where=str(target))
    wrapper = {"format": RECOVERY_FORMAT, "version": 1,
               "project_path": None if project_path is None else str(Path(project_path).absolute()),
               "saved_at": time.time(), "owner": owner, "pid": os.getpid(), "project": project_to_dict(diagram)}
    atomic_write(target, json.dumps(wrapper, ensure_ascii=False).encode("utf-8"), backup=False)
    return target


def _read_recovery(path: Path) -> dict:
    data = _parse_json(_decode(_read_bytes(path), str(path)), str(path))
    if not (isinstance(data, dict) and data.get("format") == RECOVERY_FORMAT and data.get("version") == 1
            and isinstance(data.get("project"), dict) and _is_number(data.get("saved_at"))
            and abs(data["saved_at"]) < 1e300
            and (data.get("project_path") is None or isinstance(data.get("project_path"), str))):
        raise ProjectFileError("E202", "not a Loopwright recovery file", where=str(path))
    return data


def _owner_of(path: Path) -> str | None:
    """The owner token recorded in an autosaved copy (None when unreadable or not recorded)."""
    try:
        owner = _read_recovery(path).get("owner")
    except ProjectFileError:
        return None
    return owner if isinstance(owner, str) else None


def find_recoveries() -> list[Recovery]:
    """Autosaved copies waiting to be restored or discarded, newest first (unreadable ones skipped)."""
    directory = recovery_directory()
    try:
        paths = list(directory.glob("*.recovery.json")) if directory.is_dir() else []
    except OSError:
        return []
    found = []
    for path in paths:
        try:
            data = _read_recovery(path)
        except ProjectFileError:
            continue
        name, owner = data["project"].get("name"), data.get("owner")
        found.append(Recovery(path, Path(data["project_path"]) if data["project_path"] else None,
                              float(data["saved_at"]), name if isinstance(name, str) else DEFAULT_NAME,
                              owner if isinstance(owner, str) else None))
    return sorted(found, key=lambda r: r.saved_at, reverse=True)


def load_recovery(path) -> Diagram:
    """The diagram held in an autosaved copy."""
    path = Path(path)
    return project_from_dict(_read_recovery(path)["project"], str(path))


def discard_recovery(path, owner: str | None = None) -> bool:
    """Delete an autosaved copy in :func:`recovery_directory`; return whether it was removed.

    With ``owner`` only a copy recorded as that run's is removed (another run's, or one that
    cannot be read, is kept). Without it the user chose to discard this copy. A missing one is fine.
    """
    path = Path(path)
    if path.parent.resolve() != recovery_directory().resolve() or not path.name.endswith(".recovery.json"):
        raise ProjectFileError("E209", "only autosaved copies in the recovery folder can be discarded",
                               where=str(path))
    if owner is not None and path.exists() and _owner_of(path) != owner:
        return False
    try:
        path.unlink()
    except FileNotFoundError:
        return False
    except OSError as exc:
        raise ProjectFileError("E209", f"cannot remove the autosaved copy: {_os_problem(exc)}",
                               where=str(path)) from exc
    return True
