"""Command line: ``speclint check``, ``explain``, ``rules``, ``schema``, ``stamp``, ``matrix``.

``main(argv, stdout, stderr) -> int`` does all the work and never exits, so tests call it
directly; exit codes are decided in one place:

* 0: no finding at or above the failing severity;
* 1: findings at or above it;
* 2: a usage or configuration error, or an internal error (with a bug-report message).
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
from pathlib import Path
from typing import NoReturn, TextIO

from speclint import __version__
from speclint.discover import ConfigError, find_config, parse_severity
from speclint.findings import Severity
from speclint.report import REPORTERS, Settings
from speclint.rules import RULES

EXIT_CLEAN, EXIT_FINDINGS, EXIT_USAGE = 0, 1, 2
EXIT_INTERNAL = 2  # shares the code of a usage error: either way the run proved nothing
EXIT_INTERRUPTED = 130  # Ctrl-C, as shells report a command ended by SIGINT (128 + 2)


class UsageError(Exception):
    """A command line that cannot be carried out."""


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> NoReturn:
        raise UsageError(f"{self.prog}: {message}")

    def exit(self, status: int = 0, message: str | None = None) -> NoReturn:
        if message:
            raise UsageError(message.strip())
        raise _Done(status)


class _Done(Exception):
    def __init__(self, status: int) -> None:
        self.status = status


def _parser(stdout: TextIO) -> argparse.ArgumentParser:
    parser = _Parser(
        prog="speclint",
        description="Check feedback-loop requirement specs: structure, exact loop figures, verdicts, trace.",
    )
    parser.add_argument("--version", action="version", version=f"speclint {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    check = sub.add_parser("check", help="check spec files and report what each loop achieves")
    check.add_argument(
        "paths", nargs="*", help="spec files or folders (default: the configured paths)"
    )
    check.add_argument(
        "--format", choices=sorted(REPORTERS), default="console", help="report format"
    )
    check.add_argument(
        "--output", "-o", metavar="FILE", help="write the report to FILE instead of standard output"
    )
    check.add_argument("--config", metavar="FILE", help="use this speclint.toml or pyproject.toml")
    check.add_argument(
        "--fail-on", choices=[s.value for s in Severity], help="lowest severity that fails the run"
    )
    check.add_argument(
        "--color",
        choices=["auto", "always", "never"],
        default="auto",
        help="colour in the console report",
    )
    check.add_argument("--no-cache", action="store_true", help="analyse every loop afresh")
    check.add_argument(
        "--jobs",
        "-j",
        type=int,
        default=0,
        metavar="N",
        help="worker processes for the analysis (default: one per core when many loops need it)",
    )
    check.add_argument(
        "--focus",
        action="store_true",
        help="check the whole configured spec set but report only on the given files "
        "(and on what their changes reach in other files); for pre-commit hooks",
    )

    explain = sub.add_parser(
        "explain", help="show how one loop's figures and verdicts are derived, step by step"
    )
    explain.add_argument("name", metavar="NAME", help="a loop name or a requirement ID")
    explain.add_argument(
        "paths", nargs="*", help="spec files or folders (default: the configured paths)"
    )
    explain.add_argument("--format", choices=["console", "json"], default="console")
    explain.add_argument(
        "--config", metavar="FILE", help="use this speclint.toml or pyproject.toml"
    )

    rules = sub.add_parser("rules", help="list the finding codes")
    rules.add_argument("--format", choices=["text", "json"], default="text")

    schema = sub.add_parser("schema", help="print the spec JSON Schema (or its path)")
    schema.add_argument(
        "--path", action="store_true", help="print where the schema file is instead"
    )

    stamp = sub.add_parser("stamp", help="record a review of requirements in their spec files")
    stamp.add_argument("ids", nargs="+", metavar="ID", help="requirement IDs to stamp")
    stamp.add_argument("--by", required=True, metavar="NAME", help="who reviewed them")
    stamp.add_argument("--date", metavar="YYYY-MM-DD", help="when (default: today)")
    stamp.add_argument("--config", metavar="FILE", help="use this speclint.toml or pyproject.toml")

    matrix = sub.add_parser("matrix", help="write the traceability matrix in Markdown")
    matrix.add_argument(
        "paths", nargs="*", help="spec files or folders (default: the configured paths)"
    )
    matrix.add_argument("--output", "-o", metavar="FILE", help="write it to FILE")
    matrix.add_argument(
        "--check",
        action="store_true",
        help="compare with the --output file instead of writing it; exit 1 when out of date",
    )
    matrix.add_argument("--config", metavar="FILE", help="use this speclint.toml or pyproject.toml")
    matrix.add_argument("--no-cache", action="store_true", help="analyse every loop afresh")
    parser.set_defaults(stdout=stdout)
    return parser


def main(
    argv: list[str] | None = None, stdout: TextIO | None = None, stderr: TextIO | None = None
) -> int:
    """Run speclint with `argv`; return the exit code."""
    stdout = stdout or sys.stdout
    stderr = stderr or sys.stderr
    try:
        args, extra = _parser(stdout).parse_known_args(argv)
        # Paths may come after options (`check --format json a.yaml b.yaml`): argparse
        # leaves the later ones over; anything else left over is a real mistake.
        positional = {"check": "paths", "explain": "paths", "matrix": "paths", "stamp": "ids"}.get(
            args.command
        )
        stray = [e for e in extra if e.startswith("-") or positional is None]
        if stray:
            raise UsageError(f"unrecognised arguments: {' '.join(stray)}")
        if extra and positional is not None:
            setattr(args, positional, [*getattr(args, positional), *extra])
        if args.command == "check":
            return _check(args, stdout)
        if args.command == "explain":
            return _explain(args, stdout)
        if args.command == "rules":
            return _rules(args, stdout)
        if args.command == "schema":
            return _schema(args, stdout)
        if args.command == "stamp":
            return _stamp(args, stdout, stderr)
        if args.command == "matrix":
            return _matrix(args, stdout)
        _parser(stdout).print_help(stdout)
        return EXIT_USAGE
    except _Done as done:
        return done.status
    except KeyboardInterrupt:
        print("speclint: interrupted", file=stderr)
        return EXIT_INTERRUPTED
    except (UsageError, ConfigError) as exc:
        print(f"speclint: {exc}", file=stderr)
        return EXIT_USAGE
    except Exception as exc:  # our bug: say so plainly, without a traceback
        print(
            f"speclint: internal error ({type(exc).__name__}: {exc}); "
            "please report it as a bug with the command line and the spec files involved",
            file=stderr,
        )
        return EXIT_INTERNAL


def entry() -> NoReturn:
    """Console-script entry point."""
    sys.exit(main())


def _check(args: argparse.Namespace, stdout: TextIO) -> int:
    from speclint.pipeline import Options, run

    cwd = Path.cwd()
    config = find_config(cwd, Path(args.config) if args.config else None)
    fail_on = parse_severity(args.fail_on, "--fail-on") if args.fail_on else config.fail_on
    options = Options(use_cache=not args.no_cache, jobs=max(args.jobs, 0))
    if args.focus:
        from speclint.focus import narrow, selector

        if not args.paths:
            raise UsageError("--focus needs the files to report on")
        chosen = selector(args.paths, cwd)
        result = narrow(run(config, [], cwd, options), chosen)
    else:
        result = run(config, args.paths, cwd, options)
    to_terminal = args.output is None and stdout.isatty()
    color = args.color == "always" or (
        args.color == "auto" and to_terminal and "NO_COLOR" not in os.environ
    )
    width = _terminal_width() if to_terminal else None
    settings = Settings(__version__, color=color, width=width, fail_on=fail_on)
    text = REPORTERS[args.format](result, settings)
    if args.output:
        write_atomically(Path(args.output), text)
    else:
        stdout.write(text)
    if any(f.rule == "SL001" for f in result.findings):
        return EXIT_INTERNAL  # the report is written, but a bug of ours fails the run
    failing = any(f.severity.rank >= fail_on.rank for f in result.findings)
    return EXIT_FINDINGS if failing else EXIT_CLEAN


def _terminal_width() -> int:
    try:
        return os.get_terminal_size().columns
    except OSError:
        return 100


def write_atomically(path: Path, text: str) -> None:
    """Write `text` to `path` through a temporary file in the same folder and a rename, so a
    reader never sees half a report and a failed write leaves the old file whole."""
    folder = path.parent if str(path.parent) else Path()
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise UsageError(f"cannot write {path}: {exc.strerror}") from None
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as handle:
            handle.write(text)
        Path(tmp).replace(path)
    except OSError as exc:
        Path(tmp).unlink(missing_ok=True)
        raise UsageError(f"cannot write {path}: {exc.strerror}") from None


def _explain(args: argparse.Namespace, stdout: TextIO) -> int:
    import json

    from speclint.explain import Refusal, as_json, explain
    from speclint.report import CAUTION
    from speclint.report.console import safe
    from speclint.report.explain_console import render

    cwd = Path.cwd()
    config = find_config(cwd, Path(args.config) if args.config else None)
    item = explain(config, args.name, args.paths, cwd)
    if isinstance(item, Refusal) and item.usage:
        raise UsageError(f"explain: {safe(item.message)}")
    if args.format == "json":
        document = as_json(item, __version__, CAUTION)
        stdout.write(json.dumps(document, indent=2, ensure_ascii=False, allow_nan=False) + "\n")
    else:
        width = _terminal_width() if stdout.isatty() else None
        stdout.write(render(item, Settings(__version__, width=width)))
    return EXIT_FINDINGS if isinstance(item, Refusal) else EXIT_CLEAN


def _rules(args: argparse.Namespace, stdout: TextIO) -> int:
    if args.format == "json":
        import json

        rows = [
            {"code": r.code, "name": r.name, "severity": r.severity.value, "summary": r.summary}
            for r in RULES.values()
        ]
        stdout.write(json.dumps(rows, indent=2) + "\n")
        return EXIT_CLEAN
    width = max(len(r.name) for r in RULES.values())
    for rule in RULES.values():
        stdout.write(
            f"{rule.code}  {rule.name:<{width}}  {rule.severity.value:<7}  {rule.summary}\n"
        )
    return EXIT_CLEAN


def _schema(args: argparse.Namespace, stdout: TextIO) -> int:
    from importlib.resources import as_file, files

    from speclint.validate import SPEC_SCHEMA, schema_text

    if args.path:
        with as_file(files("speclint") / "schemas" / SPEC_SCHEMA) as path:
            stdout.write(f"{path}\n")
        return EXIT_CLEAN
    stdout.write(schema_text())
    return EXIT_CLEAN


def _stamp(args: argparse.Namespace, stdout: TextIO, stderr: TextIO) -> int:
    import datetime

    from speclint.stamp import check_date, check_name, stamp

    try:
        by = check_name(args.by)
        date = check_date(args.date) if args.date else datetime.date.today().isoformat()
    except ValueError as exc:
        raise UsageError(f"stamp: {exc}") from None
    cwd = Path.cwd()
    config = find_config(cwd, Path(args.config) if args.config else None)
    outcomes = stamp(config, cwd, args.ids, by, date)
    for outcome in outcomes:
        if outcome.done:
            stdout.write(f"{outcome.id}: stamped at {outcome.message}\n")
        else:
            stderr.write(f"speclint: {outcome.id}: not stamped: {outcome.message}\n")
    return EXIT_CLEAN if all(o.done for o in outcomes) else EXIT_FINDINGS


# A diff longer than this helps nobody in a CI log; regenerating shows the rest.
MAX_DIFF_LINES = 40


def _matrix(args: argparse.Namespace, stdout: TextIO) -> int:
    import difflib

    from speclint.pipeline import Options, run

    if args.check and not args.output:
        raise UsageError("matrix: --check compares with a file; name it with --output FILE")
    cwd = Path.cwd()
    config = find_config(cwd, Path(args.config) if args.config else None)
    result = run(config, args.paths, cwd, Options(use_cache=not args.no_cache))
    text = REPORTERS["markdown"](result, Settings(__version__))
    if not args.output:
        stdout.write(text)
        return EXIT_CLEAN
    target = Path(args.output)
    if not args.check:
        write_atomically(target, text)
        return EXIT_CLEAN
    try:
        # CRLF is tolerated: a checkout may convert line endings.
        current = target.read_bytes().decode("utf-8").replace("\r\n", "\n")
    except FileNotFoundError:
        current = None
    except (OSError, UnicodeDecodeError) as exc:
        raise UsageError(f"matrix: cannot read {args.output}: {exc}") from None
    if current == text:
        return EXIT_CLEAN
    redo = f"speclint matrix --output {args.output}"
    if current is None:
        stdout.write(f"{args.output} does not exist; write it with: {redo}\n")
        return EXIT_FINDINGS
    stdout.write(f"{args.output} is out of date; write it again with: {redo}\n")
    diff = list(
        difflib.unified_diff(
            current.splitlines(keepends=True),
            text.splitlines(keepends=True),
            fromfile=f"{args.output} (on disk)",
            tofile=f"{args.output} (now)",
            n=1,
        )
    )
    for line in diff[:MAX_DIFF_LINES]:
        stdout.write(line if line.endswith("\n") else line + "\n")
    if len(diff) > MAX_DIFF_LINES:
        stdout.write(f"... and {len(diff) - MAX_DIFF_LINES} more diff lines\n")
    return EXIT_FINDINGS
