"""Plain-text rendering of a Report for the terminal (aligned Routh table, range, margins).

>>> from core.analysis.report import check_polynomial
>>> print(report_text(check_polynomial("s^2 + 3s + 2")).splitlines()[0])
Characteristic polynomial: s^2 + 3*s + 2
"""
from __future__ import annotations

from core.analysis.report import CAUTION, Report


def _fmt(x: float | None) -> str:
    return "unbounded" if x is None else f"{x:.12g}"


def _interval(iv) -> str:
    lo, hi = iv
    return f"({'-inf' if lo is None else f'{lo:.12g}'}, {'+inf' if hi is None else f'{hi:.12g}'})"


def routh_table(report: Report) -> list[str]:
    """The Routh array as aligned text rows, ``s^k |`` labels on the left."""
    rd = report.routh.to_dict()
    rows, powers = rd["rows"], rd["powers"]
    ncols = max((len(row) for row in rows), default=0)
    widths = [max((len(row[j]) for row in rows if j < len(row)), default=1) for j in range(ncols)]
    label_w = max(len(f"s^{p}") for p in powers) if powers else 3
    lines = []
    special = {s["row"]: s for s in rd.get("special", [])}
    for i, (power, row) in enumerate(zip(powers, rows)):
        cells = "  ".join(e.rjust(widths[j]) for j, e in enumerate(row)).rstrip()
        note = f"   <- {special[i]['note']}" if i in special else ""
        lines.append(f"  {f's^{power}'.rjust(label_w)} | {cells}{note}")
    return lines


def margins_lines(name: str, m: dict | None) -> list[str]:
    """How far the nominal value may move before instability, as factors (and dB) and distances."""
    if not m:
        return []
    if not m["stable"]:
        return [f"  the nominal {name} = {m['nominal']:.6g} is outside every stable interval"]
    lines = []
    for side, word, limit in (("rise", "rise", "high"), ("fall", "fall", "low")):
        factor, db, dist = m[f"{side}_factor"], m[f"{side}_db"], m[f"{side}_distance"]
        if factor is not None:
            lines.append(f"  {name} may {word} by a factor {factor:.6g} ({db:.3g} dB) to {m[limit]:.12g}")
        elif dist is not None:
            lines.append(f"  {name} may {word} by {dist:.6g} to {m[limit]:.12g}")
        else:
            lines.append(f"  {name} may {word} without limit")
    return lines


def report_text(report: Report) -> str:
    """A readable report: polynomial, Routh array, nominal verdict, stable range, margins, decay."""
    d = report.to_dict()
    out = [f"Characteristic polynomial: {d['polynomial']}"]
    if d["analysed_polynomial"] != d["polynomial"]:
        out.append(f"With other parameters at nominal: {d['analysed_polynomial']}")
    if d["transfer_function"]:
        transfer = d["transfer_function"]
        out.append(f"Closed-loop transfer function: ({transfer['num']}) / ({transfer['den']})")
    out.append(f"Tuning parameter: {d['parameter'] or 'none'}")
    out.append("")
    out.append("Routh array" + (f" (entries in {d['parameter']})" if d["parameter"] else "") + ":")
    out += routh_table(report)
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
                out.append(f"    {p['re']:+.6g} {'+' if p['im'] >= 0 else '-'} j{abs(p['im']):.6g}{mult}"
                           f"   damping {zeta}, natural frequency {p['natural_frequency']:.6g} rad/s")
    else:
        out.append(f"No nominal value for {d['parameter']}: verdict given as a range only.")
    rng = d["stable_range"]
    if rng is not None:
        out.append("")
        if rng["intervals"]:
            out.append(f"Stable for {d['parameter']} in: " + " U ".join(_interval(iv) for iv in rng["intervals"]))
        else:
            out.append(f"Stable for no value of {d['parameter']}.")
        for e in rng["endpoints"]:
            how = {"origin": "a real pole crosses s = 0",
                   "crossing": f"a complex pair crosses the imaginary axis at +-j{_fmt(e['omega'])} rad/s",
                   "infinity": "the leading coefficient vanishes (a pole goes to infinity)",
                   "singular": "the polynomial vanishes identically"}.get(e["kind"], e["kind"])
            out.append(f"  {d['parameter']} = {e['exact']} (~{e['value']:.12g}): {how}")
        out += margins_lines(d["parameter"], d["margins"])
    dec = d["decay"]
    if dec:
        out.append("")
        out.append(f"Decay requirement: sigma = {dec['sigma']:.6g} 1/s ({dec['note']})")
        if dec["intervals"] is not None:
            ivs = " U ".join(_interval(iv) for iv in dec["intervals"]) or "no value"
            out.append(f"  met for {d['parameter']} in: {ivs}")
        if dec["nominal_ok"] is not None:
            out.append(f"  at nominal: {'met' if dec['nominal_ok'] else 'NOT met'}")
    if d["hidden_mode_details"] or d["warnings"]:
        out.append("")
        for w in d["warnings"]:
            out.append(f"Warning: {w}")
    out.append("")
    out.append(f"Caution: {CAUTION}")
    return "\n".join(out)
