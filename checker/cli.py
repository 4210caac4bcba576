"""The command line: argument parsing and exit codes, nothing else.

Exit codes (README.md, docs/ci.md): 0 every error-severity limit holds, 1 a limit fails or a
waiver expired, 2 the input cannot be checked, 3 an internal error (a bug).

Inputs come from pull requests, so a file system refusal (no space, no permission, a
name too long) is an input error like any other, and `check` runs under a deadline
(`--timeout`) so no input can hold a CI runner indefinitely.
"""

from __future__ import annotations

import argparse
import contextlib
import datetime
import math
import os
import signal
import sys
import threading
from pathlib import Path
from typing import Sequence

from checker import __version__
from checker.errors import NodegateError, render

EXIT_OK, EXIT_FAIL, EXIT_INPUT, EXIT_BUG = 0, 1, 2, 3
EXIT_BROKEN_PIPE = 141  # 128 + SIGPIPE, as shells report a pipe closed early
REPORT_FORMATS = ("md", "html", "json", "junit", "sarif", "annotations")
BUG_REPORT = "please report it with the command and the input files to the nodegate maintainers"
DEFAULT_TIMEOUT = 1800.0  # s: generous for any repository the work caps (checker.pipeline) let through
# The stage a run is in when its deadline passes, told by the outermost of these packages on the stack.
STAGES = (("checker.repo.git", "checking out the base revision"), ("checker.repo.config", "reading the configuration"),
          ("checker.language", "reading the circuits"), ("checker.limits", "reading and compiling the limits"),
          ("checker.analysis", "solving the circuits"), ("checker.repo.baseline", "comparing with the base revision"),
          ("checker.report", "writing the reports"))


class _Parser(argparse.ArgumentParser):
    """argparse that raises instead of exiting, so `main` alone decides the exit code."""

    def error(self, message: str) -> None:  # type: ignore[override]
        raise _UsageError(f"{self.prog}: error: {message}\n{self.format_usage().rstrip()}")


class _UsageError(Exception):
    pass


def _formats(text: str) -> tuple[str, ...]:
    chosen = tuple(item.strip() for item in text.split(",") if item.strip())
    unknown = [item for item in chosen if item not in REPORT_FORMATS]
    if unknown or not chosen:
        raise argparse.ArgumentTypeError(
            f"unknown format {', '.join(unknown) or '(none)'}; choose from {','.join(REPORT_FORMATS)}")
    return chosen


def _date(text: str) -> datetime.date:
    try:
        return datetime.date.fromisoformat(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"`{text}` is not a date like 2027-06-30") from None


def _revision(text: str) -> str:
    """A `--base` revision; an empty one (an unset CI variable) is refused, not taken as "no base",
    so a comparison the workflow asked for is never silently skipped."""
    if not text.strip():
        raise argparse.ArgumentTypeError("is empty; name a git revision, or leave --base out")
    return text


def _seconds(text: str) -> float:
    try:
        seconds = float(text)
    except ValueError:
        seconds = math.nan
    if not 0 < seconds < math.inf:
        raise argparse.ArgumentTypeError(f"`{text}` is not a number of seconds above 0")
    return seconds


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="nodegate", description=(
        "Checks the DC operating points of circuit designs against the limits a hardware team writes."))
    parser.add_argument("--version", action="version", version=f"nodegate {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    check = commands.add_parser("check", help="solve every circuit in every case, evaluate the limits, write reports")
    check.add_argument("directory", nargs="?", default=".", help="the hardware repository (default: .)")
    check.add_argument("--config", type=Path, help="the configuration file (default: the nearest nodegate.yaml in DIR or above)")
    check.add_argument("--base", type=_revision, metavar="GIT_REF", help="compare against the same check on this git revision")
    check.add_argument("--fail-on", choices=("new", "any"), default="any",
                       help="with --base: fail on any failing limit (default) or only on those this change introduces")
    check.add_argument("--format", type=_formats, default=None, metavar="LIST",
                       help=f"reports to write, comma-separated from {','.join(REPORT_FORMATS)} "
                            "(default: md,html,json; `annotations` prints CI workflow commands)")
    check.add_argument("--out", type=Path, help="folder for the reports (default: the configuration's report paths)")
    check.add_argument("--strict", action="store_true", help="warnings and unused waivers fail too")
    check.add_argument("--as-of", type=_date, metavar="YYYY-MM-DD",
                       help="judge waiver expiry as of this date (default: today), to reproduce an old run")
    check.add_argument("--no-remedies", action="store_true",
                       help="do not search part changes that fix failing and warning limits (docs/remedies.md)")
    check.add_argument("--timeout", type=_seconds, default=DEFAULT_TIMEOUT, metavar="SECONDS",
                       help=f"stop with exit code 2 when the check takes longer (default: {DEFAULT_TIMEOUT:g})")

    solve = commands.add_parser("solve", help="print the operating point of a circuit file")
    solve.add_argument("file", type=Path, help="a .circuit file")
    solve.add_argument("--case", help="only this case")
    solve.add_argument("--at", metavar="POINT",
                       help="solve with values moved from their declared values, e.g. \"R1=+5%%,U1.vout=-2.5%%\": "
                            "a part's name for its primary value, PART.vout for a regulator's output voltage; "
                            "reports print the POINT of each worst case")
    solve.add_argument("--format", choices=("table", "json"), default="table")
    solve.add_argument("--equations", action="store_true",
                       help="print the nodal equations at the solution (linearised for nonlinear parts)")
    solve.add_argument("--equations-out", type=Path, metavar="FILE",
                       help="write the equations of one case as a Matrix Market file: [matrix | right-hand side]")

    init = commands.add_parser("init", help="write a starter configuration, example circuit, limits and CI workflow")
    init.add_argument("directory", nargs="?", default=".", type=Path)

    explain = commands.add_parser("explain", help="show one limit: its check, each case's value and margin")
    explain.add_argument("limit_id", metavar="LIMIT_ID")
    explain.add_argument("directory", nargs="?", default=".", metavar="DIR",
                         help="a folder of the hardware repository (default: .), as for check")
    explain.add_argument("--config", type=Path,
                         help="the configuration file (default: the nearest nodegate.yaml in DIR or above)")
    explain.add_argument("--no-remedies", action="store_true",
                         help="do not search part changes that fix the limit where it fails")

    fmt = commands.add_parser("fmt", help="rewrite .circuit files in the canonical layout")
    fmt.add_argument("files", nargs="+", type=Path, metavar="FILE")
    fmt.add_argument("--check", action="store_true", help="change nothing; exit 1 if a file would change")
    return parser


def _dispatch(args: argparse.Namespace) -> int:
    # Imported here so `nodegate --help` stays fast and a broken stage cannot break the others.
    if args.command == "check":
        from checker.commands import check
        with _deadline(args.timeout):
            return check.run(args)
    if args.command == "solve":
        from checker.commands import solve
        return solve.run(args)
    if args.command == "init":
        from checker.commands import init
        return init.run(args)
    if args.command == "explain":
        from checker.commands import explain
        return explain.run(args)
    if args.command == "fmt":
        from checker.commands import fmt
        return fmt.run(args)
    build_parser().print_help()
    return EXIT_INPUT


class _TimedOut(BaseException):
    """The deadline passed. A BaseException, so that no `except Exception` on the way (the base
    revision's check swallows input errors) carries on; `finally` blocks still clean up."""

    def __init__(self, seconds: float, stage: str):
        super().__init__(stage)
        self.message = f"the check took longer than --timeout {seconds:g} s; it was {stage}"


@contextlib.contextmanager
def _deadline(seconds: float):
    """Raise `_TimedOut` in the main thread after `seconds` (SIGALRM); where no alarm exists
    (Windows, a thread other than the main one) the run has no deadline."""
    if not hasattr(signal, "setitimer") or threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.signal(signal.SIGALRM, lambda signum, frame: _ring(seconds, frame))
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def _ring(seconds: float, frame) -> None:
    """The alarm: stop the run, unless files are being written or removed with stop signals held
    (`checker.report.writer.signals_held`): cutting those would leave half a report set or a base
    tree behind, so the alarm rings again a moment after."""
    from checker.report import writer
    if writer._Held.depth:  # noqa: SLF001 - the writer's own record of a block that must not be cut
        signal.setitimer(signal.ITIMER_REAL, 0.05)
        return
    raise _TimedOut(seconds, _stage(frame))


def _stage(frame) -> str:
    """What the run was doing: the outermost frame of a stage's package (`STAGES`) among those the
    command's own code called (below its innermost frame: wrappers around it do not count)."""
    modules = []
    while frame is not None:
        modules.append(frame.f_globals.get("__name__", ""))
        frame = frame.f_back
    command = next((i for i, module in enumerate(modules) if module.startswith("checker.commands.")), len(modules))
    for module in reversed(modules[:command]):
        for package, stage in STAGES:
            if module == package or module.startswith(package + "."):
                return stage
    return "finishing"


def _refused(error: OSError) -> NodegateError:
    """The file system's refusal (no space left, no permission, a name too long) as an input error."""
    name = f" `{error.filename}`" if error.filename else ""
    return NodegateError(f"the file system refused{name}: {error.strerror or error}")


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command; return its exit code. The only place that turns errors into codes."""
    try:
        args = build_parser().parse_args(argv)
        return _dispatch(args)
    except _UsageError as usage:
        print(usage, file=sys.stderr)
        return EXIT_INPUT
    except SystemExit as done:  # --help and --version
        return done.code if isinstance(done.code, int) else EXIT_OK
    except NodegateError as error:
        print(render(error), file=sys.stderr)
        return EXIT_INPUT
    except _TimedOut as late:
        print(render(NodegateError(late.message, notes=(
            "raise --timeout, or ask for less work: fewer circuits, lower `samples` or `vertex_values`",))),
              file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("nodegate: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # the reader went away (`nodegate solve ... | head`): stop quietly
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return EXIT_BROKEN_PIPE
    except OSError as error:
        print(render(_refused(error)), file=sys.stderr)
        return EXIT_INPUT
    except Exception as bug:  # noqa: BLE001 - the last line of defence: never a traceback
        print(f"nodegate: internal error ({type(bug).__name__}: {bug}); this is a bug, {BUG_REPORT}.",
              file=sys.stderr)
        return EXIT_BUG


def main_exit() -> None:
    """Console-script entry point."""
    sys.exit(main())
