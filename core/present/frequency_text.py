"""The frequency-response section of a text report (core.analysis.frequency)."""
from __future__ import annotations

import math

from core.analysis.frequency import MS_GUIDANCE, FrequencyAnalysis

__all__ = ["frequency_text"]


def frequency_text(a: FrequencyAnalysis) -> str:
    """Margins, crossovers and the sensitivity peak, one per line."""
    lines = ["Frequency response", f"  loop opened at {a.opened_at}: L(s) = {a.loop.text()}"]
    for m in a.gain_margins:
        where = "w -> infinity" if math.isinf(m.omega) else f"w = {m.omega:.6g} rad/s"
        lines.append(f"  gain margin ({m.direction}): factor {m.factor:.6g} ({m.db:.3g} dB) at {where}")
    if not a.gain_margins:
        lines.append("  gain margin: none (the phase never reaches -180 degrees)")
    for p in a.phase_margins:
        lines.append(f"  phase margin: {p.degrees:.4g} degrees at w = {p.omega:.6g} rad/s (extra delay {p.delay:.6g} s)")
    if not a.phase_margins:
        lines.append("  phase margin: none (|L| never crosses 1)")
    if a.delay_margin is not None:
        lines.append(f"  delay margin: {a.delay_margin:.6g} s")
    ms = a.sensitivity_peak
    value = "unbounded" if not math.isfinite(ms.value) else f"{ms.value:.4g}"
    at = f" at w = {ms.omega:.6g} rad/s" if ms.omega is not None else ""
    lines.append(f"  sensitivity peak Ms: {value}{at} ({ms.method}; {MS_GUIDANCE})")
    lines += [f"  note: {n}" for n in a.notes]
    return "\n".join(lines)
