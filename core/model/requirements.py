"""Performance requirements as the project stores them (the decay requirement lives in the
analysis settings); their verdicts are computed in :mod:`core.analysis.requirements`.

>>> Requirements(min_damping=0.5).to_dict()
{'min_damping': 0.5}
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

from core.errors import ModelError

GAIN_MARGIN_UNITS = ("factor", "db")


@dataclass(frozen=True)
class Requirements:
    """The requirements besides decay; None means not set.

    >>> Requirements(min_gain_margin=6, gain_margin_unit="db").gain_margin_factor
    1.9952623149688795
    """

    min_damping: float | None = None
    max_overshoot: float | None = None
    min_gain_margin: float | None = None
    gain_margin_unit: str = "factor"

    @property
    def gain_margin_factor(self) -> float | None:
        """The gain margin as a factor (from dB: 10^(dB/20))."""
        if self.min_gain_margin is None:
            return None
        return self.min_gain_margin if self.gain_margin_unit == "factor" else 10 ** (self.min_gain_margin / 20)

    @property
    def is_empty(self) -> bool:
        """Whether no requirement here is set."""
        return self.min_damping is None and self.max_overshoot is None and self.min_gain_margin is None

    def check(self) -> None:
        """Raise ModelError E304 naming the first value out of range."""
        where = "requirements"
        for name, v, ok, rule in (
                ("minimum damping ratio", self.min_damping, lambda x: 0 < x <= 1, "in (0, 1]"),
                ("maximum overshoot", self.max_overshoot, lambda x: 0 <= x <= 1000, "from 0 to 1000 %"),
                ("minimum gain margin", self.min_gain_margin,
                 (lambda x: 1 <= x <= 1e6) if self.gain_margin_unit == "factor" else (lambda x: 0 <= x <= 120),
                 "from 1 to 1e6" if self.gain_margin_unit == "factor" else "from 0 to 120 dB")):
            if v is None:
                continue
            if not (isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) and ok(v)):
                raise ModelError("E304", f"the {name} must be a number {rule}", where=where)
        if self.gain_margin_unit not in GAIN_MARGIN_UNITS:
            raise ModelError("E304", "the gain margin unit must be 'factor' or 'db'", where=where)

    def to_dict(self) -> dict:
        """The project file's ``requirements`` object (unset entries left out)."""
        out: dict[str, float | str] = {k: v for k, v in (("min_damping", self.min_damping), ("max_overshoot", self.max_overshoot),
                                 ("min_gain_margin", self.min_gain_margin)) if v is not None}
        if self.min_gain_margin is not None:
            out["gain_margin_unit"] = self.gain_margin_unit
        return out

    def with_changes(self, **changes) -> Requirements:
        """A copy with some fields changed, checked."""
        new = replace(self, **changes)
        new.check()
        return new
