"""The command line's ``--variable s|z`` and ``--sample-period TS``: reading them and producing the
report on a polynomial in z (text or JSON).

>>> read_variable(None), read_variable(" z ")
('s', 'z')
>>> read_variable("x")
Traceback (most recent call last):
...
core.errors.UsageError: E451 at --variable: the polynomial's variable is s or z, not 'x'
"""
from __future__ import annotations

from collections.abc import Callable

from flint import fmpq

from core.analysis.discrete_report import DiscreteReport, check_z_polynomial
from core.analysis.zoh import check_sample_period
from core.errors import AnalysisError, UsageError
from core.present.discrete_text import discrete_headline, discrete_text
from core.present.report_json import json_text

__all__ = ["NOT_FOR_Z", "discrete_output", "read_sample_period", "read_variable", "z_report"]

NOT_FOR_Z = ("plane", "tolerance", "min_damping", "max_overshoot", "min_gain_margin", "frequency")


def read_variable(text: str | None) -> str:
    """``s`` (the default) or ``z``; E451 otherwise."""
    if text is None:
        return "s"
    word = text.strip()
    if word not in ("s", "z"):
        raise UsageError("E451", f"the polynomial's variable is s or z, not '{word[:20]}'", where="--variable")
    return word


def read_sample_period(text: str | None, read_value: Callable[[str, str], fmpq]) -> fmpq | None:
    """The sample period, exact and > 0 (E450), read by the command line's exact reader."""
    if text is None:
        return None
    if text.strip().lower() in ("inf", "+inf", "-inf", "nan", "infinity"):
        raise AnalysisError("E450", f"the sample period must be a finite number > 0, not '{text.strip()[:20]}'",
                            where="--sample-period")
    return check_sample_period(read_value(text, "--sample-period"), where="--sample-period")


def z_report(args, at: dict, decay: tuple[str, float] | None, read_value: Callable[[str, str], fmpq]) -> DiscreteReport:
    """The report asked for by ``--poly TEXT --variable z`` (E457 for an option not available here,
    E450 for a bad sample period)."""
    if args.poly is None:
        raise AnalysisError("E457", "--variable z goes with --poly (a polynomial typed in z)", where="--variable")
    used = [name for name in NOT_FOR_Z if getattr(args, name, None) not in (None, [], False)]
    if used:
        raise AnalysisError("E457", f"--{used[0].replace('_', '-')} is not available for a polynomial in z",
                            where=f"--{used[0].replace('_', '-')}")
    mode, value = decay or ("sigma", 0.0)
    return check_z_polynomial(args.poly, parameter=args.param, at=at,
                              sample_period=read_sample_period(args.sample_period, read_value),
                              decay=value, decay_mode=mode)


def discrete_output(report: DiscreteReport, as_json: bool) -> str:
    """The report as text, or as strict JSON with its headline."""
    if not as_json:
        return discrete_text(report)
    return json_text({**report.to_dict(), "headline": discrete_headline(report), "requirements": None,
                      "plane": None})
