"""The stability plane as a short section of the terminal report.

>>> from core.algebra.polynomial import fmpq, mpoly_context
>>> from core.analysis.plane import stability_plane
>>> s, Ki, Kp = mpoly_context(["Ki", "Kp"]).gens()
>>> plane = stability_plane(s**3 + 3*s**2 + (2 + Kp)*s + Ki, "Kp", "Ki", {},
...                         (fmpq(0), fmpq(10)), (fmpq(0), fmpq(30)), resolution=20)
>>> print("\\n".join(plane_lines(plane)[:6]))
Stability plane: Kp from 0 to 10, Ki from 0 to 30 (counts exact, 20 x 20 grid)
  boundary, a real root through s = 0: Ki = 0
  boundary, a pair on the imaginary axis: 3*Kp - Ki + 6 = 0
  region 1: STABLE, e.g. at Kp = 33/4, Ki = 1 (about 66 % of the grid)
  region 2: 2 roots in the right half plane, e.g. at Kp = 1/4, Ki = 7 (about 30 % of the grid)
  at Kp = 5/3: stable for Ki in (0, 11) (exact)
"""
from __future__ import annotations

from core.analysis.plane import Plane
from core.present.report_text import abbreviate

KIND_WORDS = {"singular": "the polynomial vanishes identically", "origin": "a real root through s = 0",
              "infinity": "a root to infinity (leading coefficient zero)",
              "crossing": "a pair on the imaginary axis"}
CAUTION_LINE = "\n\nCaution: "


def plane_lines(plane: Plane, width: int = 80) -> list[str]:
    """Axes, boundary polynomials, regions (count and an exact point) and the exact slices (their
    ends in twelve digits here; exact in the JSON report)."""
    d = plane.to_dict()
    (xlo, xhi), (ylo, yhi) = (abbreviate(v, 30) for v in d["x_range"]), (abbreviate(v, 30) for v in d["y_range"])
    out = [f"Stability plane: {plane.x} from {xlo} to {xhi}, {plane.y} from {ylo} to {yhi} "
           f"(counts exact, {d['resolution']} x {d['resolution']} grid)"]
    for kind, polys in d["boundaries"].items():
        for poly in polys:
            out.append(f"  boundary, {KIND_WORDS[kind]}: {abbreviate(poly, width)} = 0")
    for i, region in enumerate(d["regions"], start=1):
        what = "STABLE" if region["stable"] else _roots_text(region["rhp"], "in the right half plane")
        if region["jw"]:
            what += f", {_roots_text(region['jw'], 'on the imaginary axis')} (not stable)"
        at = ", ".join(f"{name} = {abbreviate(value, 30)}" for name, value in region["point"].items())
        out.append(f"  region {i}: {what}, e.g. at {at} (about {100 * region['share']:.0f} % of the grid)")
    for piece in d["slices"]:
        ivs = " U ".join(f"({lo or '-inf'}, {hi or '+inf'})" for lo, hi in piece["approx_intervals"])
        out.append(f"  at {plane.x} = {abbreviate(piece['x'], 30)}: stable for {plane.y} in {ivs or 'no value'} (exact)")
    return out


def _roots_text(count: int, where: str) -> str:
    return f"{count} root{'s' if count != 1 else ''} {where}"


def with_plane_section(text: str, plane: Plane) -> str:
    """The report text with the plane section put before the closing caution."""
    head, sep, tail = text.rpartition(CAUTION_LINE)
    if not sep:
        return text + "\n\n" + "\n".join(plane_lines(plane))
    return head + "\n\n" + "\n".join(plane_lines(plane)) + sep + tail
