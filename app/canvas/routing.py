"""Orthogonal wire routing on plain (x, y) tuples (no Qt, so it is easy to test).

A wire leaves its source port along the port's direction, passes through the user's bends in
order and enters the target port along that port's direction; consecutive points are joined by
an L (horizontal then vertical or the other way round, whichever does not double back).

>>> route((0, 0), (1, 0), (100, 50), (1, 0))
[(0, 0), (50.0, 0), (50.0, 50), (100, 50)]
>>> route((0, 0), (1, 0), (100, 0), (1, 0))
[(0, 0), (100, 0)]
"""
from __future__ import annotations

Point = tuple[float, float]
Direction = tuple[int, int] | None

STUB = 14.0  # how far a wire runs straight out of a port before turning


def _sign(v: float) -> int:
    return (v > 1e-9) - (v < -1e-9)


def _heading(a: Point, b: Point) -> tuple[int, int]:
    return _sign(b[0] - a[0]), _sign(b[1] - a[1])


def _corner_cost(a: Point, corner: Point, b: Point, heading: Direction, arrive: Direction) -> int:
    """Penalty of going a -> corner -> b: doubling back on ``heading`` or arriving against ``arrive``."""
    cost = 0
    first, second = _heading(a, corner), _heading(corner, b)
    if heading and first == (-heading[0], -heading[1]):
        cost += 4
    if arrive and second != (0, 0) and second != arrive:
        cost += 4 if second == (-arrive[0], -arrive[1]) else 1
    return cost


def _detour(a: Point, b: Point, heading: tuple[int, int]) -> list[Point]:
    """Two corners that turn across ``heading`` first, for targets that lie behind ``a``."""
    if heading[0] != 0:
        mid = (a[1] + b[1]) / 2 if abs(a[1] - b[1]) > 2 * STUB else a[1] + 3 * STUB
        return [(a[0], mid), (b[0], mid), b]
    mid = (a[0] + b[0]) / 2 if abs(a[0] - b[0]) > 2 * STUB else a[0] + 3 * STUB
    return [(mid, a[1]), (mid, b[1]), b]


def _join(a: Point, b: Point, heading: Direction, arrive: Direction) -> list[Point]:
    """Points after ``a`` that reach ``b`` orthogonally (one corner at most)."""
    straight = abs(a[0] - b[0]) < 1e-9 or abs(a[1] - b[1]) < 1e-9
    if straight and not (heading and _heading(a, b) == (-heading[0], -heading[1])):
        return [b]
    across, down = (b[0], a[1]), (a[0], b[1])
    cost_across = _corner_cost(a, across, b, heading, arrive)
    cost_down = _corner_cost(a, down, b, heading, arrive)
    if min(cost_across, cost_down) >= 4 and heading:
        return _detour(a, b, heading)
    if cost_across == cost_down:
        prefer_across = heading is None or heading[0] != 0
        return [across if prefer_across else down, b]
    return [across if cost_across < cost_down else down, b]


def simplify(points: list[Point]) -> list[Point]:
    """Drop repeated points and middle points of straight runs."""
    out: list[Point] = []
    for p in points:
        if out and abs(out[-1][0] - p[0]) < 1e-9 and abs(out[-1][1] - p[1]) < 1e-9:
            continue
        if len(out) >= 2:
            a, b = out[-2], out[-1]
            if (abs(a[0] - b[0]) < 1e-9 and abs(b[0] - p[0]) < 1e-9) or \
                    (abs(a[1] - b[1]) < 1e-9 and abs(b[1] - p[1]) < 1e-9):
                out[-1] = p
                continue
        out.append(p)
    return out


def route(start: Point, out_dir: Direction, end: Point, in_dir: Direction,
          bends: list[Point] = ()) -> list[Point]:
    """Orthogonal polyline from ``start`` to ``end`` through ``bends``.

    ``out_dir`` is the direction the wire leaves the source port, ``in_dir`` the direction it
    travels when it enters the target port; None means any direction (branch points).
    """
    first = (start[0] + out_dir[0] * STUB, start[1] + out_dir[1] * STUB) if out_dir else start
    last = (end[0] - in_dir[0] * STUB, end[1] - in_dir[1] * STUB) if in_dir else end
    if not bends and out_dir and in_dir and out_dir == in_dir:
        # the usual forward path: one vertical jog half way, or straight when aligned
        if abs(start[1] - end[1]) < 1e-9 and _sign(end[0] - start[0]) == out_dir[0] and out_dir[1] == 0:
            return [start, end]
        if out_dir[1] == 0 and _sign(last[0] - first[0]) in (out_dir[0], 0):
            mid = (start[0] + end[0]) / 2
            return simplify([start, (mid, start[1]), (mid, end[1]), end])
    waypoints = [first, *[(float(x), float(y)) for x, y in bends], last]
    points, heading = [start, first], out_dir
    for i in range(1, len(waypoints)):
        arrive = in_dir if i == len(waypoints) - 1 else None
        step = _join(waypoints[i - 1], waypoints[i], heading, arrive)
        points.extend(step)
        h = _heading(points[-2], points[-1])
        heading = h if h != (0, 0) else heading
    points.append(end)
    return simplify(points)


def drag_segment(points: list[Point], index: int, offset: float) -> list[Point]:
    """The polyline with segment ``index`` moved ``offset`` across its own direction.

    End segments keep their port ends in place: a short stub is added so the wire still leaves
    (or enters) the port straight.
    """
    pts = list(points)
    a, b = pts[index], pts[index + 1]
    horizontal = abs(a[1] - b[1]) < 1e-9

    def shifted(p: Point) -> Point:
        return (p[0], p[1] + offset) if horizontal else (p[0] + offset, p[1])

    head, tail = pts[:index + 1], pts[index + 1:]
    if index == 0:  # keep the start fixed: go out a stub, then across
        d = _heading(a, b)
        stub = (a[0] + d[0] * STUB, a[1] + d[1] * STUB)
        head = [a, stub]
        a = stub
    if index + 1 == len(pts) - 1:
        d = _heading(a, b)
        stub = (b[0] - d[0] * STUB, b[1] - d[1] * STUB)
        tail = [stub, b]
        b = stub
    middle = [shifted(a), shifted(b)]
    return simplify([*head[:-1], head[-1], middle[0], middle[1], tail[0], *tail[1:]])


def interior(points: list[Point]) -> list[Point]:
    """The polyline's corner points without its two ends (what is stored as bends)."""
    return [(float(x), float(y)) for x, y in points[1:-1]]
