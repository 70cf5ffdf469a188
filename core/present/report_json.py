"""The JSON text of a report (``python -m core check --json``): strict JSON, never NaN or Infinity.

A number that is not finite (a pole beyond the double range, a margin without limit) is written as
``null``; every such place is already one where ``null`` can stand (an unbounded end, an unknown
value), so readers need no special case.

>>> json_text({"rise_factor": float("inf"), "poles": [[float("-inf"), 0.0]], "ok": True})
'{\\n  "rise_factor": null,\\n  "poles": [\\n    [\\n      null,\\n      0.0\\n    ]\\n  ],\\n  "ok": true\\n}'
"""
from __future__ import annotations

import json
import math

__all__ = ["finite_only", "json_text"]


def finite_only(value):
    """A copy of a JSON-ready value with every non-finite float replaced by None."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: finite_only(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [finite_only(v) for v in value]
    return value


def json_text(data: dict) -> str:
    """Indented strict JSON (``allow_nan=False`` guards the rule)."""
    return json.dumps(finite_only(data), indent=2, allow_nan=False)
