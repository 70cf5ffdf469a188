"""The command line's ``--plane X=LO..HI,Y=LO..HI``: reading it and computing the plane.

Ranges may be left out for a project (``--plane Kp,Ki``: each axis's min and max from the
parameter table); with ``--poly`` they are required. Values are exact (``1/3``, ``2.5``, ``1e-3``);
the decimal separator is a point.

>>> from fractions import Fraction
>>> def exact(text, where):
...     value = Fraction(text)
...     return fmpq(value.numerator, value.denominator)
>>> axes = read_plane_option("Kp=0..10, Ki=1/2..30", True, exact)
>>> axes.x, axes.y, [str(v) for v in axes.x_range + axes.y_range]
('Kp', 'Ki', ['0', '10', '1/2', '30'])
"""
from __future__ import annotations

import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass

from flint import fmpq

from core.analysis import plane
from core.analysis.plane import Plane, short_text, stability_plane
from core.analysis.stable_range import _simplest_between
from core.errors import AnalysisError, UsageError

RESOLUTION = 100  # grid of the command line's plane (RESOLUTION x RESOLUTION points)
_NAME = r"[^\W\d]\w*"
_AXIS = rf"\s*({_NAME})\s*(?:=(.+?)\.\.(.+?))?\s*"
_OPTION = re.compile(rf"^{_AXIS},{_AXIS}$")
WHERE = "--plane"
MAX_TEXT = 400  # characters read at most (the pattern is matched only on text this short)


@dataclass(frozen=True)
class PlaneAxes:
    """The two axes asked for, with their ranges when given."""

    x: str
    y: str
    x_range: tuple[fmpq, fmpq] | None
    y_range: tuple[fmpq, fmpq] | None


def read_plane_option(text: str, need_ranges: bool, read_value: Callable[[str, str], fmpq]) -> PlaneAxes:
    """``X=LO..HI,Y=LO..HI`` (or ``X,Y`` unless ``need_ranges``) as PlaneAxes. E501 malformed text
    or a missing range, E430 the same name twice, E431 LO >= HI; each number read by
    ``read_value(text, where)`` (the command line's exact reader, with its own codes)."""
    match = _OPTION.match(text) if len(text) <= MAX_TEXT else None
    if match is None:
        raise UsageError("E501", f"--plane wants X=LO..HI,Y=LO..HI, got '{text[:60]}'", where=WHERE)
    x, xlo, xhi, y, ylo, yhi = match.groups()
    if x == y:
        raise AnalysisError("E430", f"the plane needs two different parameters, got '{x[:40]}' twice", where=WHERE)
    ranges: list[tuple[fmpq, fmpq] | None] = []
    for name, lo, hi in ((x, xlo, xhi), (y, ylo, yhi)):
        if lo is None:
            if need_ranges:
                raise UsageError("E501", f"give the range of {name[:40]} with --poly: {name[:40]}=LO..HI",
                                 where=WHERE)
            ranges.append(None)
            continue
        where = f"{WHERE} {name[:40]}"
        ranges.append(_checked_range(name, read_value(lo, where), read_value(hi, where)))
    return PlaneAxes(x, y, ranges[0], ranges[1])


def _checked_range(name: str, lo: fmpq, hi: fmpq) -> tuple[fmpq, fmpq]:
    if not lo < hi:
        raise AnalysisError("E431", f"the range of {name[:40]} is empty: {short_text(lo)} is not below {short_text(hi)}",
                            where=f"{WHERE} {name[:40]}")
    return lo, hi


def values_for_polynomial(text: str, axes: PlaneAxes, at: Mapping[str, object]) -> tuple[dict[str, object], list[str]]:
    """``at`` with a value for each axis that has none (the simplest rational in the upper half of
    its range: 0, often a degenerate gain, only when nothing simpler lies there), and a note for
    each value so chosen; E432 for an axis that is not a parameter of the polynomial."""
    from core.algebra.expression import expression_parameters

    names = sorted(expression_parameters(text))
    for name in (axes.x, axes.y):
        if name not in names:
            raise AnalysisError("E432", f"'{name[:40]}' is not a parameter of the polynomial "
                                f"(it has {', '.join(names) or 'none'})", where=f"{WHERE} {name[:40]}")
    values = dict(at)
    notes = []
    for name, rng in ((axes.x, axes.x_range), (axes.y, axes.y_range)):
        if name not in values and rng is not None:
            values[name] = _simplest_between((rng[0] + rng[1]) / 2, rng[1])
            notes.append(f"{name} = {values[name]} taken for the report (inside the plane's range); "
                         f"give --at {name}=VALUE to choose")
    return values, notes


def plane_of_polynomial(text: str, axes: PlaneAxes, values: Mapping[str, fmpq]) -> Plane:
    """The plane of a typed characteristic polynomial (axes checked by :func:`values_for_polynomial`)."""
    from core.algebra.expression import expression_parameters, parse_polynomial, to_mpoly
    from core.algebra.polynomial import mpoly_context

    names = sorted(expression_parameters(text))
    poly = to_mpoly(parse_polynomial(text, where="polynomial", declared=set(values) | {axes.x, axes.y}),
                    mpoly_context(names))
    assert axes.x_range is not None and axes.y_range is not None  # read with need_ranges=True
    return stability_plane(poly, axes.x, axes.y, values, axes.x_range, axes.y_range, RESOLUTION)


def plane_of_project(project, report, axes: PlaneAxes) -> Plane:
    """The plane of an analysed project: its characteristic polynomial, every other parameter at
    the value the report used, missing ranges from the parameter table (E432 for an axis that is
    not a parameter of the project)."""
    return plane.plane_of_project(project, report, axes.x, axes.y, axes.x_range, axes.y_range, RESOLUTION, WHERE)
