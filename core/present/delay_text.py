"""The terminal report of a loop with dead time (a typed quasi-polynomial).

>>> from core.analysis.delay_report import check_quasi_polynomial
>>> text = delay_report_text(check_quasi_polynomial("s + 1 + K*exp(-s)", "K", {"K": 1}))
>>> print("\\n".join(text.splitlines()[1:5]))
Quasi-polynomial: s + 1 + K*exp(-s)
Stable range of K (certified): (-1, 2.26182633411)
  -1: a real root through s = 0
  2.26182633411: a pair on the imaginary axis at ω = 2.02876 rad/s
"""
from __future__ import annotations

from core.analysis.delay_report import DelayReport
from core.analysis.report import CAUTION

KIND_WORDS = {"origin": "a real root through s = 0", "crossing": "a pair on the imaginary axis",
              "zero_delay": "no delay"}


def _interval(lo, hi, closed_at_zero: bool = False) -> str:
    """``(a, b)``; ``[0, b)`` when the lower end is a delay of zero (a delay below it does not exist)."""
    left = "[" if closed_at_zero else "("
    return f"{left}{'-inf' if lo is None else lo}, {'inf' if hi is None else hi})"


def delay_headline(report: DelayReport) -> str:
    """One line a hurried reader can act on: the verdict at the given values, certified, with the
    delay margin; or the stable range when no value of the tuning parameter was given.

    >>> from core.analysis.delay_report import check_quasi_polynomial
    >>> delay_headline(check_quasi_polynomial("s + 1 + K*exp(-s)", "K", {"K": "1/2"}))  # |K| < 1
    'STABLE at K = 1/2 (certified); delay margin unbounded; no requirements set'
    >>> delay_headline(check_quasi_polynomial("s + 1 + K*exp(-s)", "K", {"K": "2"}))  # 2pi/(3 sqrt 3) - 1
    'STABLE at K = 2 (certified); delay margin 0.209199576156 s; no requirements set'
    """
    return _verdict(report) + "; no requirements set"  # requirement options are refused for delay loops (E445)


def _verdict(report: DelayReport) -> str:
    d = report.to_dict()
    rng = d["stable_range"]
    ranged = ""
    if rng is not None and report.stable_range is not None:
        closed = [lo is not None and lo.kind == "zero_delay" for lo, _ in report.stable_range.intervals]
        ranged = ", ".join(_interval(lo, hi, c) for (lo, hi), c in zip(rng["approx_intervals"], closed)) or "no value"
    if d["nominal"] is None:
        return f"No nominal value of {report.parameter}: stable for {report.parameter} in {ranged} (certified)" \
            if ranged else "No verdict: give every parameter a value"
    values = ", ".join(f"{k} = {v}" for k, v in d["nominal"]["exact_values"].items()) or "the given values"
    if not d["nominal"]["stable"]:
        rhp = d["nominal"]["rhp"]
        count = "" if rhp is None else f": {rhp} root{'s' if rhp != 1 else ''} in the right half plane"
        return f"NOT STABLE at {values} (certified){count}"
    margin = d["delay_margin"]
    if margin is None or not margin["stable"]:
        return f"STABLE at {values} (certified)"
    extra = "unbounded" if margin["unbounded"] else f"{margin['approx']} s"
    return f"STABLE at {values} (certified); delay margin {extra}"


def delay_report_text(report: DelayReport) -> str:
    """The headline, the quasi-polynomial, the certified stable range with each end's cause, the
    nominal verdict, the delay margin, the Padé cross-checks and the caution."""
    d = report.to_dict()
    out = [f"Verdict: {delay_headline(report)}", f"Quasi-polynomial: {report.quasi.text()}"]
    rng = d["stable_range"]
    if rng is not None and report.stable_range is not None:
        closed = [lo is not None and lo.kind == "zero_delay" for lo, _ in report.stable_range.intervals]
        shown = ", ".join(_interval(lo, hi, c) for (lo, hi), c in zip(rng["approx_intervals"], closed)) or "none"
        out.append(f"Stable range of {report.parameter} (certified): {shown}")
        for end in rng["endpoints"]:
            where = f" at ω = {end['omega']:.6g} rad/s" if end["omega"] is not None else ""
            out.append(f"  {end['approx']}: {KIND_WORDS.get(end['kind'], end['kind'])}{where}")
        for switch in rng["switches"]:
            out.append(f"  switch at {report.parameter} = {switch['approx']}: becomes {switch['becomes']}")
    if d["nominal"] is not None:
        values = ", ".join(f"{k} = {v}" for k, v in d["nominal"]["exact_values"].items()) or "the given values"
        verdict = "STABLE" if d["nominal"]["stable"] else "NOT STABLE"
        rhp = d["nominal"]["rhp"]
        count = "" if rhp is None else f" ({rhp} root{'s' if rhp != 1 else ''} in the right half plane)"
        out.append(f"At {values}: {verdict}{count}")
    margin = d["delay_margin"]
    if margin is not None and margin["stable"]:
        out.append("Delay margin: unbounded (stable for any extra delay)" if margin["unbounded"] else
                   f"Delay margin: {margin['approx']} s of extra delay (certified), a pair reaching "
                   f"ω = {margin['omega']:.6g} rad/s")
    for c in d["crossings"]:
        out.append(f"  crossing at ω = {c['omega_text']} rad/s, {c['direction']} as the delay grows, "
                   f"first at {c['first_delay']:.6g} s extra, every {c['period']:.6g} s")
    if d["pade_check"]:
        out.append("Padé cross-check (rational loops, exact):")
        for p in d["pade_check"]:
            shown = "" if p["approx_intervals"] is None else \
                " " + (", ".join(_interval(lo, hi, report.stable_range is not None and report.stable_range.window[0] == 0
                                           and lo == "0") for lo, hi in p["approx_intervals"]) or "none")
            flag = "" if p["agrees"] is not False else "  <- WRONG verdict at the nominal value"
            out.append(f"  order {p['order']}:{shown}{flag}")
    if d["rightmost_roots"]:
        out.append("Rightmost roots: " + ", ".join(_root(r) for r in d["rightmost_roots"]["roots"][:10]))
    out += [f"Warning: {w}" for w in d["warnings"]]
    out.append(f"Caution: {CAUTION}")
    return "\n".join(out)


def _root(r: list[float]) -> str:
    re, im = r
    return f"{re:.6g}" if im == 0 else f"{re:.6g} {'+' if im > 0 else '-'} j{abs(im):.6g}"
