"""The GitHub Actions report: workflow-command annotations, and a Markdown job summary.

Each finding becomes one line ``::error file=…,line=…,col=…,title=…::message`` (``warning``
and ``notice`` for the lower severities), which the runner turns into an annotation on the
file. The format has its own escaping: in the message ``%``, CR and LF become ``%25``,
``%0D``, ``%0A``; in property values ``:`` and ``,`` also become ``%3A`` and ``%2C``. Since a
message cannot span lines after escaping, text from a spec cannot start a workflow command
of its own.

The runner shows only the first few annotations of each level per step (10, as GitHub
documents it at the time of writing, from memory), so the output ends with a notice that
says so and points to the SARIF report for the full list.

When ``$GITHUB_STEP_SUMMARY`` names a file, a Markdown summary (counts by severity and
status, the findings as a table, the caution) is appended to it; the runner shows it on the
run's page. Appended, never truncated: other steps write to the same file.
"""

from __future__ import annotations

import os
import re
from collections import Counter
from pathlib import Path

from speclint.discover import ConfigError
from speclint.findings import Finding, Severity
from speclint.report import CAUTION, Settings
from speclint.report.json_report import summary
from speclint.report.places import repository_path, repository_root
from speclint.results import RunResult
from speclint.rules import RULES

COMMAND = {Severity.ERROR: "error", Severity.WARNING: "warning", Severity.NOTE: "notice"}
SHOWN_PER_LEVEL = 10
# The summary file of a step holds at most 1 MiB (from memory of GitHub's documentation);
# a table of this many rows stays well inside it.
TABLE_ROWS = 300
SARIF_HINT = "speclint check --format sarif --output speclint.sarif"

# Control characters other than CR and LF (which the escaping handles) carry no meaning in
# an annotation and could confuse the log viewer; so do Unicode line separators (a line
# break to some viewers) and bidirectional overrides.
_CONTROL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u2028\u2029\u202a-\u202e\u2066-\u2069]")


def escape_data(text: str) -> str:
    """A message as a workflow command carries it (after ``::``)."""
    text = _CONTROL.sub("", text)
    return text.replace("%", "%25").replace("\r", "%0D").replace("\n", "%0A")


def escape_property(text: str) -> str:
    """A property value (``file=…``, ``title=…``) as a workflow command carries it."""
    return escape_data(text).replace(":", "%3A").replace(",", "%2C")


def annotation(item: Finding, cwd: Path, root: Path | None) -> str:
    """The workflow command for one finding."""
    loc = item.location
    props: list[tuple[str, str]] = []
    message = item.message
    path = repository_path(loc.path, cwd, root)
    if path is None:
        message = f"{loc.path}: {message}"  # outside the repository: no file to attach it to
    else:
        props.append(("file", path))
        if loc.line is not None:
            props.append(("line", str(loc.line)))
            if loc.column is not None:
                props.append(("col", str(loc.column)))
    props.append(("title", f"{item.rule} {RULES[item.rule].name}"))
    if item.hint:
        message += f"\nhint: {item.hint}"
    joined = ",".join(f"{key}={escape_property(value)}" for key, value in props)
    return f"::{COMMAND[item.severity]} {joined}::{escape_data(message)}"


def _plural(n: int, word: str) -> str:
    return f"{n} {word}" if n == 1 else f"{n} {word}s"


def closing_notice(result: RunResult) -> str:
    """The last line: the counts, the runner's display limit, and where the full list is."""
    s = summary(result)
    counts = ", ".join(
        [
            _plural(s["errors"], "error"),
            _plural(s["warnings"], "warning"),
            _plural(s["notes"], "note"),
        ]
    )
    text = (
        f"{counts} in {_plural(s['files'], 'file')}. The runner shows only the first "
        f"{SHOWN_PER_LEVEL} annotations of each level per step; for the full list write a "
        f"SARIF report ({SARIF_HINT}) and upload it."
    )
    return f"::notice title={escape_property('speclint summary')}::{escape_data(text)}"


def render(result: RunResult, settings: Settings, cwd: Path | None = None) -> str:
    """The annotations, one per line, and the closing notice."""
    cwd = cwd or Path.cwd()
    root = repository_root(cwd)
    lines = [annotation(item, cwd, root) for item in result.findings]
    lines.append(closing_notice(result))
    return "\n".join(lines) + "\n"


_MD_SPECIAL = re.compile(r"([\\`*_\[\]|~#])")


def md(text: str) -> str:
    """User text made inert inside a Markdown table cell: one line, no markup, no HTML."""
    text = _CONTROL.sub("", text).replace("\r\n", " ").replace("\r", " ").replace("\n", " ")
    text = text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    return _MD_SPECIAL.sub(r"\\\1", text)


def step_summary(result: RunResult, settings: Settings) -> str:
    """The Markdown job summary."""
    s = summary(result)
    out = [
        f"## speclint {md(settings.version)}",
        "",
        f"{_plural(s['files'], 'file')}, {_plural(s['loops'], 'loop')}, "
        f"{_plural(s['requirements'], 'requirement')}.",
        "",
        "| severity | findings |",
        "|---|---:|",
        f"| error | {s['errors']} |",
        f"| warning | {s['warnings']} |",
        f"| note | {s['notes']} |",
        "",
    ]
    statuses: Counter[str] = Counter(s["statuses"])
    if statuses:
        out += ["| requirement status | count |", "|---|---:|"]
        out += [f"| {md(word)} | {n} |" for word, n in sorted(statuses.items())]
        out.append("")
    if result.findings:
        out += ["| where | severity | rule | message |", "|---|---|---|---|"]
        for item in result.findings[:TABLE_ROWS]:
            loc = item.location
            where = ":".join([loc.path] + [str(n) for n in (loc.line, loc.column) if n])
            message = item.message + (f" (hint: {item.hint})" if item.hint else "")
            rule = f"{item.rule} {RULES[item.rule].name}"
            out.append(f"| {md(where)} | {item.severity.value} | {md(rule)} | {md(message)} |")
        left = len(result.findings) - TABLE_ROWS
        if left > 0:
            out += ["", f"… and {left} more findings: the SARIF report has them all."]
        out.append("")
    else:
        out += ["No findings.", ""]
    out += [f"> **Caution.** {md(CAUTION)}", ""]
    return "\n".join(out) + "\n"


def append_step_summary(path: Path, text: str) -> None:
    """Append `text` to the step summary file (created when missing, never truncated)."""
    try:
        with path.open("a", encoding="utf-8") as handle:
            handle.write(text)
    except OSError as exc:
        raise ConfigError(f"cannot append the job summary to {path}: {exc.strerror}") from None


def report(result: RunResult, settings: Settings) -> str:
    """The annotations; also the job summary, when ``$GITHUB_STEP_SUMMARY`` names a file."""
    target = os.environ.get("GITHUB_STEP_SUMMARY")
    if target:
        append_step_summary(Path(target), step_summary(result, settings))
    return render(result, settings)
