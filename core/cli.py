"""Command line: ``python -m core check`` (also installed as ``loopwright-check``).

Exit status: 0 when analysed (whatever the verdict); 1 with ``--fail-unstable`` when the nominal
loop is not stable (or, without a nominal value, stable for no value of the tuning parameter),
and with ``--fail-requirements`` when a requirement is not met or cannot be judged; 2 for bad
input, with one line on stderr and no traceback. docs/command-line.md has the details.

>>> main(["check", "--poly", "s^2 + 3s + 2", "--json"])  # doctest: +ELLIPSIS
{...
0
"""
from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from fractions import Fraction

from core.errors import ExpressionError, LoopwrightError, ModelError, UsageError

PROGRAM = "loopwright-check"
# the options that take a value; a value starting with '-' (``--poly -s^2-1``) is kept as the value
VALUE_OPTIONS = ("--poly", "--param", "--at", "--decay", "--time-to-half", "--settling",
                 "--min-damping", "--max-overshoot", "--min-gain-margin", "--tolerance", "--plane",
                 "--variable", "--sample-period")
FLAG_OPTIONS = ("--json", "--fail-unstable", "--fail-requirements", "--frequency", "--help")
DECAY_OPTIONS = {"--decay": ("sigma", "a decay rate", "1/s"), "--time-to-half": ("half_time", "a time to half", "s"),
                 "--settling": ("settling", "a settling time", "s")}


class _Parser(argparse.ArgumentParser):
    """argparse that reports a usage problem as one catalogued line instead of exiting."""

    def error(self, message: str):
        raise UsageError("E501", message, where="command line")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (exposed for the documentation and tests)."""
    parser = _Parser(prog="python -m core", description="Exact stability analysis of a feedback loop.")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    check = sub.add_parser("check", help="analyse a project file or a typed characteristic polynomial")
    check.add_argument("project", nargs="?", help="a project file (.loop.json)")
    check.add_argument("--poly", metavar="TEXT", help="a characteristic polynomial in s, e.g. 's^3+3s^2+2s+K'")
    check.add_argument("--param", metavar="NAME", help="the tuning parameter (with --poly)")
    check.add_argument("--at", metavar="NAME=VALUE", action="append", default=[],
                       help="a parameter value, exact (2.5, 1/3, 1e-3; repeatable; with a project it "
                            "overrides the nominal)")
    group = check.add_mutually_exclusive_group()
    group.add_argument("--decay", metavar="SIGMA", help="decay requirement: minimum decay rate sigma in 1/s")
    group.add_argument("--time-to-half", metavar="T", help="decay requirement: time to half amplitude in s")
    group.add_argument("--settling", metavar="TS", help="decay requirement: 2%% settling time in s (sigma ~ 4/Ts)")
    check.add_argument("--min-damping", metavar="ZETA", help="requirement: minimum damping ratio of every pole, in (0, 1]")
    check.add_argument("--max-overshoot", metavar="PERCENT", help="requirement: maximum step overshoot in %% (projects)")
    check.add_argument("--min-gain-margin", metavar="FACTOR",
                       help="requirement: minimum factor the tuning parameter may rise by (or e.g. 6dB)")
    check.add_argument("--tolerance", metavar="NAME=LO..HI", action="append", default=[],
                       help="a parameter's tolerance, exact (T=0.08..0.12; repeatable; with a project it "
                            "replaces the file's): adds the robust range of the tuning parameter")
    check.add_argument("--plane", metavar="X=LO..HI,Y=LO..HI",
                       help="the stability plane of two parameters (ranges optional for a project: "
                            "from its parameter table)")
    _add_sampled_options(check)
    check.add_argument("--frequency", action="store_true",
                       help="add the frequency response with the loop opened at the tuning gain (with --poly): "
                            "gain and phase margins, crossovers, delay margin, sensitivity peak")
    check.add_argument("--json", action="store_true", help="print the report as JSON")
    check.add_argument("--fail-unstable", action="store_true", help="exit 1 when the nominal loop is not stable")
    check.add_argument("--fail-requirements", action="store_true",
                       help="exit 1 when a requirement is not met (or cannot be judged)")
    return parser


def _add_sampled_options(check: argparse.ArgumentParser) -> None:
    """``--variable`` and ``--sample-period`` (polynomials in z)."""
    check.add_argument("--variable", metavar="s|z", help="the variable of --poly: s (default) or z (sampled loop)")
    check.add_argument("--sample-period", metavar="TS",
                       help="the sample period in s (with --variable z): adds times and frequencies; the "
                            "value of a parameter named Ts")


def keep_dash_values(argv: Sequence[str]) -> list[str]:
    """``--poly -s^2-1`` as ``--poly=-s^2-1``: after an option that takes a value, the next word is
    its value even when it starts with '-' (unless it is itself an option such as ``--json``).

    >>> keep_dash_values(["check", "--poly", "-s^2-1", "--json"])
    ['check', '--poly=-s^2-1', '--json']
    """
    out: list[str] = []
    words = list(argv)
    i = 0
    while i < len(words):
        word = words[i]
        if word == "--":
            return out + words[i:]
        nxt = words[i + 1] if i + 1 < len(words) else None
        if (_value_option(word) and nxt is not None and nxt.startswith("-") and not nxt.startswith("--")
                and nxt not in ("-h",)):
            out.append(f"{word}={nxt}")
            i += 2
            continue
        out.append(word)
        i += 1
    return out


def _value_option(word: str) -> bool:
    """An option taking a value, written whole or as an unambiguous prefix (as argparse allows)."""
    if not word.startswith("--") or "=" in word:
        return False
    matches = [o for o in (*VALUE_OPTIONS, *FLAG_OPTIONS) if o.startswith(word)]
    return word in VALUE_OPTIONS or (len(matches) == 1 and matches[0] in VALUE_OPTIONS)


# -- values read from the command line --------------------------------------------------------------
def exact_value(text: str, where: str):
    """A typed value as an exact rational (flint fmpq): a number as a parameter field accepts it
    (:func:`core.algebra.numbers.read_value`: magnitude checked before any number is built) or a
    ratio of two, ``p/q``. E105 out of range, E110 a zero denominator, E112 not a number.

    >>> exact_value("1/3", "--at K"), exact_value("2.5e-3", "--at K"), exact_value("\u22120,5", "--at K")
    (1/3, 1/400, -1/2)
    """
    from flint import fmpq

    from core.algebra.numbers import read_value

    parts = text.split("/")
    if len(parts) > 2:
        raise ExpressionError("E112", f"'{text[:30]}' is not a number (one '/' at most: 1/3)", where=where)
    exact = []
    for part in parts:
        exact.append(Fraction(0) if read_value(part, where) == 0 else
                     Fraction(part.strip().replace("\u2212", "-").replace(",", ".")))
    value = exact[0] / exact[1] if len(exact) == 2 and exact[1] != 0 else exact[0]
    if len(exact) == 2 and exact[1] == 0:
        raise ExpressionError("E110", f"'{text[:30]}' divides by zero", where=where)
    if value != 0 and not Fraction(1, 10 ** 300) <= abs(value) <= 10 ** 300:
        raise ExpressionError("E105", f"'{text[:30]}' is out of range (magnitude 1e-300 to 1e300)", where=where)
    return fmpq(value.numerator, value.denominator)


def _parse_at(items: Sequence[str]) -> dict[str, object]:
    values = {}
    for item in items:
        name, sep, value = item.partition("=")
        if not sep or not name.strip() or not value.strip():
            raise UsageError("E501", f"--at wants NAME=VALUE, got '{item[:40]}'", where="--at")
        values[name.strip()] = exact_value(value, where=f"--at {name.strip()[:40]}")
    return values


def _parse_tolerances(items: Sequence[str]) -> dict[str, tuple]:
    """``--tolerance NAME=LO..HI`` values as exact (lo, hi) pairs (the analysis checks lo < hi).

    >>> _parse_tolerances(["T=0.08..0.12", "a=-1..1/2"])
    {'T': (2/25, 3/25), 'a': (-1, 1/2)}
    """
    tolerances = {}
    for item in items:
        name, sep, rest = item.partition("=")
        ends = rest.split("..")
        if not sep or not name.strip() or len(ends) != 2 or not all(e.strip() for e in ends):
            raise UsageError("E501", f"--tolerance wants NAME=LO..HI, got '{item[:40]}'", where="--tolerance")
        where = f"--tolerance {name.strip()[:40]}"
        tolerances[name.strip()] = (exact_value(ends[0], where), exact_value(ends[1], where))
    return tolerances


def _decay(args) -> tuple[str, float] | None:
    """The decay requirement given on the command line: (mode, value), checked; None if none."""
    from core.algebra.numbers import read_value
    from core.io.project_file import DECAY_VALUE_LIMITS

    for option, (mode, what, unit) in DECAY_OPTIONS.items():
        text = getattr(args, option[2:].replace("-", "_"))
        if text is None:
            continue
        value = read_value(text, where=option)
        low, high = DECAY_VALUE_LIMITS
        if not low <= value <= high:
            why = (f"0 sets no requirement (leave {option} out for none)" if value == 0 else
                   f"'{text.strip()[:30]}' is negative" if value < 0 else f"'{text.strip()[:30]}' is out of range")
            raise UsageError("E501", f"{why}: give {what} from {_sci(low)} to {_sci(high)} {unit}", where=option)
        return mode, value
    return None


def _sci(x: float) -> str:
    """``1e12``, not ``1e+12``."""
    return f"{x:g}".replace("e+", "e")


def _requirements(args, base):
    """The project's requirements (or none) with the ones given on the command line put in, each
    checked (E501 naming the option)."""
    from core.algebra.numbers import read_value

    requirements = base
    for option in ("--min-damping", "--max-overshoot", "--min-gain-margin"):
        text = getattr(args, option[2:].replace("-", "_"))
        if text is None:
            continue
        text = text.strip()
        in_db = option == "--min-gain-margin" and text.lower().endswith("db")
        changes: dict[str, object] = {option[2:].replace("-", "_"): read_value(text[:-2] if in_db else text, where=option)}
        if option == "--min-gain-margin":
            changes["gain_margin_unit"] = "db" if in_db else "factor"
        try:
            requirements = requirements.with_changes(**changes)
        except ModelError as exc:
            raise UsageError("E501", exc.message, where=option) from None
    return requirements


# -- running ----------------------------------------------------------------------------------------
def run(args) -> int:
    """Analyse as the parsed arguments say; print the report; return the exit status."""
    from core.analysis.report import check_polynomial
    from core.model.requirements import Requirements
    from core.present import plane_option
    from core.present.verdicts import requirements_outcome, search_span

    at = _parse_at(args.at)
    tolerances = _parse_tolerances(args.tolerance)
    decay = _decay(args)
    if _sampled(args):
        return _run_sampled(args, at, decay)
    if (args.poly is None) == (args.project is None):
        raise UsageError("E501", "give either a project file or --poly TEXT", where="command line")
    axes = plane_option.read_plane_option(args.plane, args.poly is not None, exact_value) if args.plane is not None else None
    if args.poly is not None and _has_delay(args.poly):
        return _run_delay(args, at)
    if args.poly is not None:
        requirements = _requirements(args, Requirements())
        mode, value = decay or ("sigma", 0.0)
        values, notes = plane_option.values_for_polynomial(args.poly, axes, at) if axes is not None else (at, [])
        report = check_polynomial(args.poly, parameter=args.param, at=values, decay=value, decay_mode=mode,
                                  tolerances=tolerances)
        report.warnings += notes
        outcome = requirements_outcome(report, requirements, span=search_span(report))
        plane = plane_option.plane_of_polynomial(args.poly, axes, report.values) if axes is not None else None
        frequency = _frequency(args, at)
    else:
        if args.param:
            raise UsageError("E501", "--param goes with --poly; a project names its tuning parameter",
                             where="--param")
        project, report = _check_project_with_values(args.project, at, decay, tolerances)
        requirements = _requirements(args, project.requirements)
        outcome = requirements_outcome(report, requirements, project, span=_span(project, report))
        plane = plane_option.plane_of_project(project, report, axes) if axes is not None else None
        frequency = _project_frequency(project, report) if args.frequency else None
    _emit(_output(report, outcome, args.json, plane, frequency))
    return 1 if (args.fail_unstable and not _stable_enough(report)) or (
        args.fail_requirements and not _requirements_pass(outcome)) else 0


def _sampled(args) -> bool:
    """Whether the polynomial is typed in z (E451 for a variable other than s or z; E457 for a
    sample period without --variable z)."""
    from core.errors import AnalysisError
    from core.present.discrete_option import read_variable

    if read_variable(args.variable) == "z":
        return True
    if args.sample_period is not None:
        raise AnalysisError("E457", "--sample-period goes with --variable z", where="--sample-period")
    return False


def _run_sampled(args, at: dict[str, object], decay) -> int:
    """``--poly TEXT --variable z``: the report on a polynomial in z, printed; the exit status."""
    from core.present.discrete_option import discrete_output, z_report

    if args.project is not None:
        raise UsageError("E501", "give either a project file or --poly TEXT", where="command line")
    report = z_report(args, at, decay, exact_value)
    _emit(discrete_output(report, args.json))
    return 1 if args.fail_unstable and not _stable_enough(report) else 0


DELAY_OPTIONS_REFUSED = ("decay", "time_to_half", "settling", "min_damping", "max_overshoot",
                         "min_gain_margin", "tolerance", "plane")


def _has_delay(text: str) -> bool:
    """Whether a typed polynomial carries a delay factor (a text that cannot be read goes the
    polynomial way, which names its error; an error in a delay factor itself is raised here)."""
    from core.algebra.expression import parse_quasi_polynomial

    try:
        return parse_quasi_polynomial(text, where="polynomial").delayed
    except ExpressionError as err:
        if err.code.startswith("E44"):
            raise
        return False


def _run_delay(args, at) -> int:
    """A quasi-polynomial: the certified delay analysis (core.analysis.delay_report)."""
    from core.analysis.delay_report import check_quasi_polynomial
    from core.present.delay_text import delay_headline, delay_report_text
    from core.present.report_json import json_text

    for name in DELAY_OPTIONS_REFUSED:
        if getattr(args, name) not in (None, []):
            option = "--" + name.replace("_", "-")
            raise UsageError("E445", f"{option} is not available for a loop with dead time", where=option)
    report = check_quasi_polynomial(args.poly, parameter=args.param, at=at)
    frequency = _frequency(args, at)
    data = {**report.to_dict(), "headline": delay_headline(report)}
    _emit(json_text(_with_frequency(data, frequency)) if args.json
          else _with_frequency_text(delay_report_text(report), frequency))
    return 1 if args.fail_unstable and not _delay_stable_enough(report) else 0


def _delay_stable_enough(report) -> bool:
    if report.nominal_stable is not None:
        return report.nominal_stable
    return report.stable_range is not None and bool(report.stable_range.intervals)


def _frequency(args, at):
    """The frequency response asked for with ``--frequency`` (None without it)."""
    if not args.frequency:
        return None
    from core.algebra.expression import parse_quasi_polynomial
    from core.analysis.frequency import analyse, loop_of_quasi_polynomial

    declared = set(at) | ({args.param} if args.param else set())
    quasi = parse_quasi_polynomial(args.poly, where="polynomial", declared=declared)
    return analyse(loop_of_quasi_polynomial(quasi, args.param, at))


def _project_frequency(project, report):
    """The frequency response of a project, opened at its default wire, at the analysed values."""
    from core.analysis.frequency import analyse, loop_of_project

    loop, wire = loop_of_project(project, report.values)
    out = analyse(loop)
    out.opened_at = f"the wire {wire}"
    return out


def _with_frequency(data: dict, frequency) -> dict:
    """The report's keys with the frequency response's added where not already there."""
    if frequency is None:
        return data
    return {**data, **{k: v for k, v in frequency.to_dict().items() if k not in data}}


def _with_frequency_text(text: str, frequency) -> str:
    from core.present.frequency_text import frequency_text

    if frequency is None:
        return text
    body, mark, caution = text.rpartition("\nCaution: ")  # the caution stays last
    return f"{body}\n\n{frequency_text(frequency)}\n{mark}{caution}" if mark else f"{text}\n\n{frequency_text(frequency)}"


def _output(report, outcome, as_json: bool, plane=None, frequency=None) -> str:
    from core.present.plane_text import with_plane_section
    from core.present.report_json import json_text
    from core.present.report_text import report_text
    from core.present.verdicts import headline

    if not as_json:
        text = report_text(report, outcome)
        return _with_frequency_text(text if plane is None else with_plane_section(text, plane), frequency)
    data = report.to_dict()
    data["headline"] = headline(report, outcome)
    data["requirements"] = outcome.to_dict() if outcome is not None else None
    data["plane"] = plane.to_dict() if plane is not None else None
    return json_text(_with_frequency(data, frequency))


def _emit(text: str) -> None:
    """Print, escaping what the terminal's encoding cannot show rather than failing."""
    try:
        print(text)
    except UnicodeEncodeError:
        encoding = getattr(sys.stdout, "encoding", None) or "ascii"
        print(text.encode(encoding, "backslashreplace").decode(encoding))


def _stable_enough(report) -> bool:
    """The nominal loop is stable; without a nominal value, some value of the tuning parameter is."""
    if report.nominal is not None:
        return report.nominal.stable
    return report.stable_range is not None and bool(report.stable_range.intervals)


def _requirements_pass(outcome) -> bool:
    """Every requirement met at the nominal value; without one, some value meets them all."""
    if outcome is None:
        return True
    if outcome.verdicts:
        return outcome.all_met is True
    return outcome.joint is not None and bool(outcome.joint.intervals)


def _span(project, report) -> tuple[float, float] | None:
    param = project.parameters.get(report.parameter) if report.parameter else None
    return (param.minimum, param.maximum) if param is not None else None


def _check_project_with_values(path: str, at: dict[str, object], decay, tolerances=None):
    from core.analysis.report import check_project
    from core.errors import AnalysisError
    from core.io.project_file import load_project

    project = load_project(path)
    for name in at:
        if name not in project.parameters:
            raise AnalysisError("E405", f"the project has no parameter '{name[:40]}'", where=f"--at {name[:40]}")
    report = check_project(project, decay, values=at, tolerances=tolerances)  # exact: --at K=1/3 stays 1/3
    report.source = path
    return project, report


def with_command(argv: Sequence[str]) -> list[str]:
    """The arguments with the ``check`` command put first when it was left out (the first argument
    is an option or a path), so that ``loopwright-check PROJECT`` works like ``loopwright-check
    check PROJECT``; any other first word is left for argparse to refuse by name.

    >>> with_command(["p.loop.json", "--json"]), with_command(["--poly", "s+1"]), with_command(["frob"])
    (['check', 'p.loop.json', '--json'], ['check', '--poly', 's+1'], ['frob'])
    """
    argv = list(argv)
    if not argv or argv[0] in ("check", "-h", "--help"):
        return argv
    first = argv[0]
    looks_like_check = first.startswith("-") or first.endswith(".json") or "/" in first or "\\" in first
    return ["check", *argv] if looks_like_check else argv  # another word: argparse names the commands


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point; never lets a traceback reach the user."""
    try:
        args = build_parser().parse_args(keep_dash_values(with_command(sys.argv[1:] if argv is None else argv)))
        return run(args)
    except LoopwrightError as err:
        print(f"{PROGRAM}: {err}", file=sys.stderr)
        return 2
    except RecursionError:
        print(f"{PROGRAM}: E109: input nested too deeply", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:  # the reader went away (e.g. piped into head): nothing more to say
        sys.stderr.close()
        return 0
    except Exception as err:
        print(f"{PROGRAM}: internal error ({type(err).__name__}: {err}); please report it", file=sys.stderr)
        return 70


if __name__ == "__main__":
    sys.exit(main())
