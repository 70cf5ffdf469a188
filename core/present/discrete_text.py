"""Plain-text rendering of a report on a polynomial in z: headline, the w-plane Routh array (labelled
as such), the Jury table, the nominal verdict, the stable range with how each end loses stability,
the radius requirement and the largest sample period.

>>> from core.analysis.discrete_report import check_z_polynomial
>>> text = discrete_text(check_z_polynomial("z^2 - z + K", "K"))
>>> print("\\n".join(text.splitlines()[:2]))
Verdict: stable for K in (0, 1); no nominal value; no requirements set
Characteristic polynomial in z: z^2 - z + K
"""
from __future__ import annotations

import cmath
import math

from core.analysis.discrete_report import DiscreteReport
from core.analysis.report import CAUTION
from core.present.report_text import SCREEN_LINE, abbreviate, margins_lines

__all__ = ["discrete_headline", "discrete_text", "endpoint_phrase", "jury_lines", "w_routh_lines"]


def _interval(iv) -> str:
    lo, hi = iv
    return f"({'-inf' if lo is None else lo}, {'+inf' if hi is None else hi})"


def discrete_headline(report: DiscreteReport) -> str:
    """One line: the verdict at the nominal values, or the stable range without them, and the
    decay (radius) requirement's verdict."""
    d = report.to_dict()
    nominal = d["nominal"]
    if nominal is not None:
        at = ", ".join(f"{k} = {v}" for k, v in sorted(nominal["exact_values"].items()))
        state = "STABLE" if nominal["stable"] else "UNSTABLE" if nominal["outside"] else "NOT STABLE"
        line = f"{state}{' at ' + at if at else ''} (every root inside the unit circle)" if nominal["stable"] else \
            f"{state}{' at ' + at if at else ''} ({nominal['outside']} outside, {nominal['on']} on the unit circle)"
        return line + _requirement_phrase(d.get("decay"))
    rng = d["stable_range"]
    if not rng["intervals"]:
        return f"stable for no value of {d['parameter']}" + _requirement_phrase(d.get("decay"))
    return f"stable for {d['parameter']} in " + " U ".join(_interval(iv) for iv in rng["approx_intervals"]) + \
        "; no nominal value" + _requirement_phrase(d.get("decay"))


def _requirement_phrase(decay: dict | None) -> str:
    """``; no requirements set`` / ``; decay requirement met (|z| < 0.904837)`` / ``..., but ... NOT met``."""
    if not decay or not decay.get("radius"):
        return "; no requirements set"
    bound = f"|z| < {decay['radius']:.6g}"
    ok = decay.get("nominal_ok")
    if ok is None:
        return f"; decay requirement ({bound}) judged as a range only"
    return f"; decay requirement met ({bound})" if ok else f", but decay requirement NOT met ({bound})"


def endpoint_phrase(e: dict) -> str:
    """How stability is lost at one end of the range, in z-plane words."""
    omega = "" if e["omega"] is None else f", omega = {e['omega']:.6g} rad/s"
    if e["kind"] == "z_one":
        return "a real root crosses the unit circle at z = 1"
    if e["kind"] == "z_minus_one":
        return f"a real root crosses the unit circle at z = -1 (angle pi{omega})"
    if e["kind"] == "unit_circle":
        angle = "unknown angle" if e["angle"] is None else f"angle +-{e['angle']:.6g} rad"
        return f"a complex pair crosses the unit circle at {angle}{omega}"
    return "the polynomial vanishes identically"


def w_routh_lines(report: DiscreteReport, width: int | None = SCREEN_LINE) -> list[str]:
    """The w-plane Routh array, ``w^k |`` labels, entries abbreviated past ``width``."""
    rd = report.w_routh.to_dict()
    rows = [[e if width is None else abbreviate(e, width) for e in row] for row in rd["rows"]]
    ncols = max((len(row) for row in rows), default=0)
    widths = [max((len(row[j]) for row in rows if j < len(row)), default=1) for j in range(ncols)]
    labels = [f"w^{p}" for p in rd["powers"]]
    label_w = max((len(x) for x in labels), default=3)
    special = {s["row"]: s["note"].replace("row s^", "row w^") for s in rd["special"]}
    out = []
    for i, (label, row) in enumerate(zip(labels, rows)):
        note = f"   <- {special[i]}" if i in special else ""
        out.append(f"  {label.rjust(label_w)} | " + "  ".join(e.rjust(widths[j]) for j, e in enumerate(row)).rstrip() + note)
    if rd["omitted"]:
        out.append(f"  (not shown: {rd['omitted'].replace('row s^', 'row w^')})")
    return out


def jury_lines(report: DiscreteReport, width: int | None = SCREEN_LINE) -> list[str]:
    """The Jury table (each row with its reverse below it, z^0 first) and its conditions."""
    jury = report.to_dict()["jury"]
    if jury is None:
        return ["  (degree 0: no table)"]
    if jury["omitted"]:
        return [f"  (not shown: {jury['omitted']})"]
    rows = [[e if width is None else abbreviate(e, width) for e in row] for row in jury["rows"]]
    ncols = max(len(row) for row in rows)
    widths = [max((len(row[j]) for row in rows if j < len(row)), default=1) for j in range(ncols)]
    out = []
    for i, row in enumerate(rows):
        label = f"{i + 1}".rjust(len(str(len(rows))))
        out.append(f"  row {label} | " + "  ".join(e.rjust(widths[j]) for j, e in enumerate(row)).rstrip())
    out.append("  conditions (all must hold; each is necessary):")
    for c in jury["conditions"]:
        state = "" if c["holds"] is None else "  [holds]" if c["holds"] else "  [FAILS]"
        out.append(f"    {abbreviate(c['condition'], 2 * (width or SCREEN_LINE))}{state}")
    return out


def _pole_line(re: float, im: float) -> str:
    z = complex(re, im)
    sign = "-" if im < 0 else "+"
    return f"    {re:+.6g} {sign} j{abs(im):.6g}   |z| = {abs(z):.6g}, angle {cmath.phase(z):+.6g} rad"


def discrete_text(report: DiscreteReport, width: int = SCREEN_LINE) -> str:
    """A readable report on a polynomial in z."""
    d = report.to_dict()
    name = d["parameter"]
    out = [f"Verdict: {discrete_headline(report)}",
           f"Characteristic polynomial in z: {abbreviate(d['polynomial'], width)}"]
    if d["analysed_polynomial"] != d["polynomial"]:
        out.append(f"With other parameters at nominal: {abbreviate(d['analysed_polynomial'], width)}")
    ts = d["sample_period"]
    out.append(f"Sample period: {d['exact_sample_period']} s" if ts is not None else
               "Sample period: not given (angles in rad per sample only)")
    out.append(f"Tuning parameter: {name or 'none'}")
    out += ["", f"w-plane Routh array (z = (1 + w)/(1 - w); W(w) = {abbreviate(d['w_polynomial'], width)}):"]
    out += w_routh_lines(report, width)
    out += ["", "Jury table (P(z) coefficients, z^0 first):"]
    out += jury_lines(report, width)
    nominal = d["nominal"]
    out.append("")
    if nominal is not None:
        state = "STABLE" if nominal["stable"] else "UNSTABLE" if nominal["outside"] else "NOT STABLE"
        at = ", ".join(f"{k} = {v}" for k, v in sorted(nominal["exact_values"].items()))
        out.append(f"{'At ' + at if at else 'Verdict'}: {state} ({nominal['inside']} inside, {nominal['on']} on, "
                   f"{nominal['outside']} outside the unit circle)")
        out += [f"  note: {n}" for n in nominal["notes"]]
        if nominal["poles"]:
            out.append("  roots in z:")
            out += [_pole_line(re, im) for re, im in nominal["poles"]]
    else:
        out.append(f"No nominal value for {name}: verdict given as a range only.")
    rng = d["stable_range"]
    if rng is not None:
        out.append("")
        out.append(f"Stable for {name} in: " + " U ".join(_interval(iv) for iv in rng["approx_intervals"])
                   if rng["intervals"] else f"Stable for no value of {name}.")
        out += [f"  {name} = {abbreviate(e['exact'], width)} (~{e['approx']}): {endpoint_phrase(e)}"
                for e in rng["endpoints"]]
        out += margins_lines(name, d["margins"])
    out += _radius_lines(d, name)
    out += _period_lines(d)
    if d["warnings"]:
        out.append("")
        out += [f"Warning: {abbreviate(w, 4 * width)}" for w in d["warnings"]]
    out += ["", f"Caution: {CAUTION}"]
    return "\n".join(out)


def _radius_lines(d: dict, name: str | None) -> list[str]:
    dec = d["decay"]
    if not dec:
        return []
    out = ["", f"Decay requirement: sigma = {dec['sigma']:.6g} 1/s ({dec['note']}), so every root inside "
           f"|z| < e^(-sigma Ts) = {dec['radius']:.12g}"]
    if dec["intervals"] is not None:
        ivs = " U ".join(_interval([None if x is None else f"{x:.12g}" for x in iv]) for iv in dec["intervals"])
        out.append(f"  met for {name} in: {ivs or 'no value'} (certified: every value listed meets it)")
    if dec["nominal_ok"] is not None:
        out.append(f"  at nominal: {'met' if dec['nominal_ok'] else 'NOT met'} (exact)")
    return out


def _period_lines(d: dict) -> list[str]:
    period = d["max_sample_period"]
    if not period:
        return []
    if period["stable_for_none"]:
        return ["", "Largest sample period: no sample period > 0 is stable at the nominal values"]
    if period["unbounded"]:
        return ["", "Largest sample period: stable for every longer sample period (exact)"]
    ivs = " U ".join(_interval(iv) for iv in period["exact_stable_periods"])
    value = period["value"]
    shown = period["approx"] if value is None or not math.isfinite(value) else f"{value:.12g}"
    return ["", f"Largest sample period: Ts = {period['exact']} (~{shown} s, exact); stable for Ts in {ivs}"]
