"""Command line: ``python -m core check`` (also installed as ``loopwright-check``).

Exit status: 0 when analysed (whatever the verdict); 1 only with ``--fail-unstable`` when the
nominal loop is unstable; 2 for bad input, with one line on stderr and no traceback.

>>> main(["check", "--poly", "s^2 + 3s + 2", "--json"])  # doctest: +ELLIPSIS
{...
0
"""
from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence

from core.errors import LoopwrightError, UsageError

PROGRAM = "loopwright-check"


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
                       help="a parameter value (repeatable; with a project it overrides the nominal)")
    group = check.add_mutually_exclusive_group()
    group.add_argument("--decay", type=float, metavar="SIGMA", help="minimum decay rate sigma in 1/s")
    group.add_argument("--time-to-half", type=float, metavar="T", help="time to half amplitude in s")
    group.add_argument("--settling", type=float, metavar="TS", help="2%% settling time in s (sigma ~ 4/Ts)")
    check.add_argument("--json", action="store_true", help="print the report as JSON")
    check.add_argument("--fail-unstable", action="store_true", help="exit 1 when the nominal loop is unstable")
    return parser


def _parse_at(items: Sequence[str]) -> dict[str, str]:
    values = {}
    for item in items:
        name, sep, value = item.partition("=")
        if not sep or not name.strip() or not value.strip():
            raise UsageError("E501", f"--at wants NAME=VALUE, got '{item}'", where="--at")
        values[name.strip()] = value.strip()
    return values


def _decay(args) -> tuple[str, float] | None:
    for mode, value in (("sigma", args.decay), ("half_time", args.time_to_half), ("settling", args.settling)):
        if value is not None:
            return mode, value
    return None


def run(args) -> int:
    """Analyse as the parsed arguments say; print the report; return the exit status."""
    from core.analysis.report import check_polynomial
    from core.present.report_text import report_text

    at = _parse_at(args.at)
    decay = _decay(args)
    if (args.poly is None) == (args.project is None):
        raise UsageError("E501", "give either a project file or --poly TEXT", where="command line")
    if args.poly is not None:
        mode, value = decay or ("sigma", 0.0)
        report = check_polynomial(args.poly, parameter=args.param, at=at, decay=value, decay_mode=mode)
    else:
        if args.param:
            raise UsageError("E501", "--param goes with --poly; a project names its tuning parameter",
                             where="--param")
        report = _check_project_with_values(args.project, at, decay)
    if args.json:
        print(json.dumps(report.to_dict(), indent=2))
    else:
        print(report_text(report))
    if args.fail_unstable and report.nominal is not None and not report.nominal.stable:
        return 1
    return 0


def _check_project_with_values(path: str, at: dict[str, str], decay):
    from core.algebra.polynomial import to_fmpq
    from core.analysis.report import check_project
    from core.errors import AnalysisError
    from core.io.project_file import load_project

    project = load_project(path)
    for name, text in at.items():
        if name not in project.parameters:
            raise AnalysisError("E405", f"the project has no parameter '{name}'", where=f"--at {name}")
        try:
            value = float(to_fmpq(text))
        except (ValueError, ZeroDivisionError):
            raise UsageError("E501", f"'{text}' is not a number", where=f"--at {name}") from None
        param = project.parameters[name]
        param.nominal = value
    report = check_project(project, decay)
    report.source = path
    return report


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point; never lets a traceback reach the user."""
    try:
        args = build_parser().parse_args(argv)
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
