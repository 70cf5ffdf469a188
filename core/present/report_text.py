"""Plain-text rendering of a Report for the terminal (headline, aligned Routh table, range,
margins, requirements).

Entries longer than a screen line (:data:`SCREEN_LINE` characters: a polynomial, a Routh entry, an
exact endpoint) are abbreviated to their beginning and end with their length; the JSON output keeps
them whole.

>>> from core.analysis.report import check_polynomial
>>> print("\\n".join(report_text(check_polynomial("s^2 + 3s + 2")).splitlines()[:2]))
Verdict: STABLE; no requirements set
Characteristic polynomial: s^2 + 3*s + 2
>>> abbreviate("1" * 100, 40)
'1111111111111111 ... 1111111 (100 chars)'
"""
from __future__ import annotations

import math

from core.analysis.report import CAUTION, Report
from core.present.verdicts import RequirementsOutcome, headline

SCREEN_LINE = 80


def abbreviate(text: str, width: int = SCREEN_LINE) -> str:
    """``text`` when it fits in ``width`` characters, else its start and end around `` ... ``."""
    if len(text) <= width:
        return text
    tag = f" ({len(text)} chars)"
    room = max(width - len(tag) - 5, 2)
    head = (room * 2 + 2) // 3
    return f"{text[:head]} ... {text[len(text) - (room - head):]}{tag}"


def _fmt(x: float | None) -> str:
    return "unbounded" if x is None else f"{x:.12g}"


def _interval(iv) -> str:
    """``(lo, hi)`` from floats or from ready texts (None: unbounded)."""
    lo, hi = (None if x is None else x if isinstance(x, str) else f"{x:.12g}" for x in iv)
    return f"({'-inf' if lo is None else lo}, {'+inf' if hi is None else hi})"


def routh_table(report: Report, width: int | None = None) -> list[str]:
    """The Routh array as aligned text rows, ``s^k |`` labels on the left; entries longer than
    ``width`` abbreviated (None: kept whole)."""
    rd = report.routh.to_dict()
    rows, powers = rd["rows"], rd["powers"]
    ncols = max((len(row) for row in rows), default=0)
    if width is not None:
        rows = [[abbreviate(e, width) for e in row] for row in rows]
    widths = [max((len(row[j]) for row in rows if j < len(row)), default=1) for j in range(ncols)]
    label_w = max(len(f"s^{p}") for p in powers) if powers else 3
    lines = []
    special = {s["row"]: s for s in rd.get("special", [])}
    for i, (power, row) in enumerate(zip(powers, rows)):
        cells = "  ".join(e.rjust(widths[j]) for j, e in enumerate(row)).rstrip()
        note = f"   <- {special[i]['note']}" if i in special else ""
        lines.append(f"  {f's^{power}'.rjust(label_w)} | {cells}{note}")
    return lines


def distance_phrase(m: dict, side: str) -> str:
    """``to 0 (a change of -2)``: where the parameter may go on ``side`` ("rise" or "fall") and how
    far that is, worded so that it never reads as a factor (one wording for text, panel and report).

    >>> distance_phrase({"low": 0.0, "low_text": "0", "fall_distance": 2.0}, "fall")
    'to 0 (a change of -2)'
    """
    limit = "high" if side == "rise" else "low"
    end = m.get(f"{limit}_text") or f"{m[limit]:.12g}"
    return f"to {end} (a change of {'+' if side == 'rise' else '-'}{_big(m[f'{side}_distance'])})"


def margins_lines(name: str, m: dict | None) -> list[str]:
    """How far the nominal value may move before instability, as factors (and dB) and distances."""
    if not m:
        return []
    if not m["stable"]:
        return [f"  the nominal {name} = {m['nominal']:.6g} is outside every stable interval"]
    lines = []
    for side in ("rise", "fall"):
        factor, db, dist = m[f"{side}_factor"], m[f"{side}_db"], m[f"{side}_distance"]
        if factor is not None:
            lines.append(f"  {name} may {side} by a factor {_big(factor)} ({_big(db, 3)} dB), "
                         f"{distance_phrase(m, side)}")
        elif dist is not None:
            lines.append(f"  {name} may {side} {distance_phrase(m, side)}")
        else:
            lines.append(f"  {name} may {side} without limit")
    return lines


def pole_text(p: dict) -> str:
    """``-1 + j2``, ``+5e-101 - j1e+100`` from a pole's JSON fields (texts exact beyond floats)."""
    re, im = p["re_text"], p["im_text"]
    re = re if re.startswith("-") else "+" + re
    return f"{re} {'-' if im.startswith('-') else '+'} j{im.lstrip('-')}"


def _big(x: float, digits: int = 6) -> str:
    """A size in ``digits`` digits; beyond the float range, said so."""
    return f"{x:.{digits}g}" if math.isfinite(x) else "more than 1e308"


def _amount(x: float | None, unit: str) -> str:
    if x is None:
        return "unknown"
    if math.isinf(x):
        return "without limit"
    return f"{x:.4g}{'' if unit in ('', '×') else ' '}{unit}"


def requirements_lines(outcome: RequirementsOutcome, parameter: str | None) -> list[str]:
    """Each requirement with its value at the nominal value and its verdict; the range meeting all."""
    at = "" if outcome.value is None else f" (at {parameter} = {outcome.value:g})"
    out = [f"Requirements{at}:"]
    for v in outcome.verdicts:
        state = {True: "met", False: "NOT met", None: "not judged"}[v.passed]
        how = f" ({'exact' if v.exact else 'floating point'})" if v.passed is not None else f": {v.note}"
        out.append(f"  {v.label} {_amount(v.required, v.unit)}: {_amount(v.actual, v.unit)}, {state}{how}")
    joint = outcome.joint
    if joint is not None:
        kind = "exact" if joint.exact else "numeric"
        text = (f"{parameter} in {joint.text(short=True)}" if joint.intervals else f"no value of {parameter}")
        out.append(f"  stable and meeting all: {text} ({kind})")
    out += [f"  note: {n}" for n in outcome.notes]
    return out


ROBUST_WORDS = {"exact": "exact", "edge-theorem": "exact, edge theorem", "kharitonov": "exact, Kharitonov",
                "sampled": "ESTIMATED by sampling, not exact"}


def robust_lines(name: str | None, robust: dict | None, width: int = SCREEN_LINE) -> list[str]:
    """The robust-range section: intervals, method and why, each end with its worst case."""
    if robust is None:
        return []
    tolerances = ", ".join(f"{q} in [{lo}, {hi}]" for q, (lo, hi) in robust["tolerances"].items())
    out = ["", f"Robust range (every {tolerances or 'toleranced value'}; {ROBUST_WORDS[robust['method']]}):"]
    if robust["intervals"]:
        out.append(f"  stable for {name} in: " + " U ".join(_interval(iv) for iv in robust["approx_intervals"]))
    else:
        out.append(f"  stable for no value of {name} over the whole tolerance")
    out.append(f"  method: {abbreviate(robust['reason'], 4 * width)}")
    for e in robust["endpoints"]:
        worst = ("every toleranced value" if e["every_value"] else
                 ", ".join(f"{q} = {e['worst_case_exact'].get(q, f'{v:.6g}')}" for q, v in sorted(e["worst_case"].items())))
        out.append(f"  {name} = {abbreviate(e['exact'], width)} (~{e['approx']}): worst case {worst}")
    out += [f"  note: {note}" for note in robust["notes"]]
    return out


def report_text(report: Report, outcome: RequirementsOutcome | None = None, width: int = SCREEN_LINE) -> str:
    """A readable report: headline, polynomial, Routh array, nominal verdict, stable range, margins,
    decay, requirements (``outcome``, from :func:`core.present.verdicts.requirements_outcome`)."""
    d = report.to_dict()
    out = [f"Verdict: {headline(report, outcome)}"]
    out.append(f"Characteristic polynomial: {abbreviate(d['polynomial'], width)}")
    if d["analysed_polynomial"] != d["polynomial"]:
        out.append(f"With other parameters at nominal: {abbreviate(d['analysed_polynomial'], width)}")
    if d["transfer_function"]:
        transfer = d["transfer_function"]
        out.append(f"Closed-loop transfer function: ({abbreviate(transfer['num'], width)}) / "
                   f"({abbreviate(transfer['den'], width)})")
    out.append(f"Tuning parameter: {d['parameter'] or 'none'}")
    out.append("")
    out.append("Routh array" + (f" (entries in {d['parameter']})" if d["parameter"] else "") + ":")
    out += routh_table(report, width)
    nominal = d["nominal"]
    out.append("")
    if nominal:
        vals = ", ".join(f"{k} = {v:g}" for k, v in sorted(nominal["values"].items()))
        verdict = ("STABLE" if nominal["stable"] else "UNSTABLE" if nominal["rhp"]
                   else "NOT STABLE (marginal: roots on the imaginary axis)" if nominal["jw"] else "NOT STABLE")
        out.append(f"{'At ' + vals if vals else 'Verdict'}: {verdict} ({nominal['rhp']} right half plane, {nominal['jw']} on the "
                   f"imaginary axis, {nominal['lhp']} left half plane)")
        for note in nominal["notes"]:
            out.append(f"  note: {note}")
        if d["poles"]:
            out.append("  poles:")
            for p in d["poles"]:
                zeta = "-" if p["damping"] is None else f"{p['damping']:.4g}"
                mult = f" (x{p['multiplicity']})" if p["multiplicity"] > 1 else ""
                out.append(f"    {pole_text(p)}{mult}"
                           f"   damping {zeta}, natural frequency {p['natural_frequency_text']} rad/s")
    else:
        out.append(f"No nominal value for {d['parameter']}: verdict given as a range only.")
    rng = d["stable_range"]
    if rng is not None:
        out.append("")
        if rng["intervals"]:
            out.append(f"Stable for {d['parameter']} in: " + " U ".join(_interval(iv) for iv in rng["approx_intervals"]))
        else:
            out.append(f"Stable for no value of {d['parameter']}.")
        for e in rng["endpoints"]:
            how = {"origin": "a real pole crosses s = 0",
                   "crossing": f"a complex pair crosses the imaginary axis at +-j{_fmt(e['omega'])} rad/s",
                   "infinity": "the leading coefficient vanishes (a pole goes to infinity)",
                   "singular": "the polynomial vanishes identically"}.get(e["kind"], e["kind"])
            out.append(f"  {d['parameter']} = {abbreviate(e['exact'], width)} (~{e['approx']}): {how}")
        out += margins_lines(d["parameter"], d["margins"])
    out += robust_lines(d["parameter"], d.get("robust_range"), width)
    dec = d["decay"]
    if dec:
        out.append("")
        out.append(f"Decay requirement: sigma = {dec['sigma']:.6g} 1/s ({dec['note']})")
        if dec["intervals"] is not None:
            ivs = " U ".join(_interval(iv) for iv in dec["intervals"]) or "no value"
            out.append(f"  met for {d['parameter']} in: {ivs}")
        if dec["nominal_ok"] is not None:
            out.append(f"  at nominal: {'met' if dec['nominal_ok'] else 'NOT met'}")
    if outcome is not None:
        out.append("")
        out += requirements_lines(outcome, report.parameter)
    if d["hidden_mode_details"] or d["warnings"]:
        out.append("")
        for w in d["warnings"]:
            out.append(f"Warning: {abbreviate(w, 4 * width)}")
    out.append("")
    out.append(f"Caution: {CAUTION}")
    return "\n".join(out)
