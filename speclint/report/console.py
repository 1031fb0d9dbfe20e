"""The console report: findings first (each line starts with path:line:column so editors
jump there), then each loop's figures with its requirements' verdicts, then a summary.

User text never passes through rich's markup parser (``[...]`` in a requirement title is
text, not a style), control characters are shown as escapes so a spec cannot forge
terminal or CI log output, and piped output is never wrapped.
"""

from __future__ import annotations

import io
import re
from collections import Counter
from itertools import groupby
from typing import Any

from rich.console import Console
from rich.text import Text

from speclint.findings import Finding, Severity
from speclint.report import Settings
from speclint.report.json_report import summary
from speclint.results import CriterionResult, LoopResult, RequirementResult, RunResult

SEVERITY_STYLE = {Severity.ERROR: "bold red", Severity.WARNING: "yellow", Severity.NOTE: "cyan"}
STATUS_STYLE = {
    "met": "green",
    "retune": "yellow",
    "unreachable": "bold red",
    "conflict": "bold red",
    "unstable": "bold red",
    "invalid": "magenta",
}
SHORT_CAUTION = (
    "Figures from linear models are design aids; they do not replace verification under "
    "IEC 61800-5-2, IEC 61508 or ISO 13849-1, nor qualified review."
)

# Controls (ESC would drive the terminal, CR rewrite the line, LF start a line of its own that
# a CI log reader takes for ours), Unicode line separators, bidirectional overrides and a
# stray byte-order mark. The load stage refuses them in specs; this is the last line of
# defence for anything else that reaches the console (paths, cached messages).
_UNSAFE = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029\u202a-\u202e\u2066-\u2069\ufeff]")


def _escape(char: str) -> str:
    code = ord(char)
    return f"\\x{code:02x}" if code <= 0xFF else f"\\u{code:04x}"


def safe(text: str) -> str:
    """User text with control characters shown as escapes, so it stays on its line, inert."""
    return _UNSAFE.sub(lambda m: _escape(m.group()), text)


def plural(n: int, word: str) -> str:
    """'1 file', '2 files'."""
    return f"{n} {word}" if n == 1 else f"{n} {word}s"


def number(x: float | None, unit: str = "") -> str:
    if x is None:
        return "—"
    if x == float("inf"):
        return "∞"
    if x == float("-inf"):
        return "-∞"
    text = f"{x:.6g}"
    return f"{text} {unit}".rstrip() if unit else text


def render(result: RunResult, settings: Settings) -> str:
    buffer = io.StringIO()
    console = _Batched(
        plain=not settings.color and settings.width is None,
        file=buffer,
        force_terminal=settings.color,
        no_color=not settings.color,
        color_system="standard" if settings.color else None,
        width=settings.width or 100_000,
        soft_wrap=settings.width is None,
        highlight=False,
        markup=False,
        emoji=False,
    )
    _findings(console, result)
    _loops(console, result)
    _summary(console, result)
    console.flush_lines()
    return buffer.getvalue()


class _Batched(Console):
    """A Console that keeps the lines printed to it and renders them in one call.

    rich's print costs about 0.2 ms a call whatever it prints; a report over 1,000 loops
    prints some 14,000 lines, so one print of the lines joined saves seconds. Each line is
    still laid out on its own (a Text is wrapped and styled line by line), so the output is
    the same.
    """

    def __init__(self, plain: bool = False, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self._lines: list[Text] = []
        # No colour and no width (piped output): rich would write each line's plain text
        # as it is, so it is written directly, unless a tab needs rich's expansion.
        self._plain = plain

    def print(self, *objects: Any, **kwargs: Any) -> None:
        if kwargs or len(objects) > 1 or (objects and not isinstance(objects[0], Text)):
            self.flush_lines()
            super().print(*objects, **kwargs)
            return
        self._lines.append(objects[0] if objects else Text(""))

    def flush_lines(self) -> None:
        if self._lines:
            lines, self._lines = self._lines, []
            texts = [line.plain for line in lines]
            if self._plain and not any("\t" in text for text in texts):
                self.file.write("\n".join(texts) + "\n")
                return
            super().print(Text("\n").join(lines))


def _findings(console: Console, result: RunResult) -> None:
    for path, group in groupby(result.findings, key=lambda f: f.location.path):
        console.print(Text(safe(path), style="bold underline"))
        lines = result.sources.get(path, "").splitlines()
        for item in group:
            console.print(_finding_line(item))
            excerpt = _excerpt(item, lines)
            if excerpt is not None:
                console.print(excerpt)
            if item.hint:
                console.print(Text("    hint: ", style="dim") + Text(safe(item.hint)))
        console.print()


def _finding_line(item: Finding) -> Text:
    loc = item.location
    where = safe(loc.path)
    if loc.line is not None:
        where += f":{loc.line}"
        if loc.column is not None:
            where += f":{loc.column}"
    line = Text(where + ": ")
    line.append(item.severity.value, style=SEVERITY_STYLE[item.severity])
    line.append(f" {item.rule} ", style="dim")
    line.append(safe(item.message))
    return line


def _excerpt(item: Finding, lines: list[str]) -> Text | None:
    loc = item.location
    if loc.line is None or not 0 < loc.line <= len(lines):
        return None
    source = lines[loc.line - 1]
    if len(source) > 200:
        return None  # a very long line helps nobody; the column is in the location
    gutter = f"{loc.line:>6} │ "
    text = Text(gutter, style="dim") + Text(safe(source.replace("\t", " ")))
    if loc.column is not None:
        text.append("\n" + " " * (len(gutter) - 2) + "│ ", style="dim")
        text.append(" " * (loc.column - 1) + "^", style=SEVERITY_STYLE[item.severity])
    return text


def _loops(console: Console, result: RunResult) -> None:
    by_loop: dict[str | None, list[RequirementResult]] = {}
    for req in result.requirements:
        by_loop.setdefault(req.loop, []).append(req)
    for loop in result.loops:
        console.print(_loop_header(loop))
        for line in _loop_figures(loop):
            console.print(Text("  ") + line)
        for req in by_loop.pop(loop.id, []):
            _requirement(console, req)
        console.print()
    rest = [r for reqs in by_loop.values() for r in reqs if r.status is not None]
    if rest:
        console.print(Text("Requirements on no analysed loop", style="bold"))
        for req in rest:
            _requirement(console, req)
        console.print()


def _loop_header(loop: LoopResult) -> Text:
    text = Text("Loop ", style="bold") + Text(safe(loop.id), style="bold")
    text.append(f"  {safe(loop.path)}:{loop.line}", style="dim")
    if loop.gain_symbol is not None:
        text.append(f"  nominal {loop.gain_symbol} = {number(loop.nominal)}")
    return text


def _loop_figures(loop: LoopResult) -> list[Text]:
    if not loop.analysed:
        return [Text("not analysed (see the findings above)", style="dim")]
    out = []
    ex = loop.exact
    parts = [f"type {loop.type}"]
    for key, label in (("kp", "Kp"), ("kv", "Kv"), ("ka", "Ka")):
        value = getattr(loop, key)
        shown = f"{label} {number(value)}"
        formula = ex.get(f"{key}(gain)")
        if formula is not None and loop.gain_symbol is not None and loop.gain_symbol in formula:
            shown += f" (= {formula})"
        parts.append(shown)
    out.append(Text("   ".join(parts)))
    if loop.stable is None:
        out.append(
            Text(
                "closed-loop stability not decided"
                + (f": {ex['stability']}" if "stability" in ex else "")
            )
        )
    else:
        verdict = Text(
            "stable" if loop.stable else "UNSTABLE", style="green" if loop.stable else "bold red"
        )
        line = Text("closed loop ") + verdict + Text(" at the nominal gain")
        if "stable_gains" in ex:
            line.append(f"; stable for {ex['stable_gains']}")
        out.append(line)
    if loop.margins is not None:
        m = loop.margins
        out.append(
            Text(
                f"margins: gain {number(m.get('gain_margin_db'), 'dB')}, "
                f"phase {number(m.get('phase_margin_deg'))}°, "
                f"delay {number(m.get('delay_margin_s'), 's')}, "
                f"sensitivity peak {number(m.get('sensitivity_peak'))}"
            )
        )
    return out


def _requirement(console: Console, req: RequirementResult) -> None:
    status = req.status or "text"
    line = Text("  ") + Text(f"{safe(req.id):<14}", style="bold")
    line.append(f" {status:<12}", style=STATUS_STYLE.get(status, "dim"))
    if req.message:
        line.append(safe(req.message))
    console.print(line)
    for crit in req.criteria:
        console.print(Text("      ") + _criterion(crit))


def _criterion(c: CriterionResult) -> Text:
    label = c.detail.get("label") or c.kind.replace("_", " ")
    mark = "✓" if c.met else ("✗" if c.met is False else "·")
    style = "green" if c.met else ("red" if c.met is False else "dim")
    achieved = number(c.achieved)
    exact = c.detail.get("achieved_exact")
    if exact and exact not in (achieved, "∞") and len(exact) <= 24:
        achieved = f"{safe(exact)} ≈ {achieved}"
    text = Text(mark, style=style) + Text(f" {safe(label)}: achieved {achieved}")
    if "admissible_text" in c.detail:
        text.append(f"; holds, stably, for {safe(c.detail['admissible_text'])}", style="dim")
    return text


def _summary(console: Console, result: RunResult) -> None:
    s = summary(result)
    statuses: Counter[str] = Counter(s["statuses"])
    status_text = ", ".join(f"{n} {word}" for word, n in statuses.items()) or "no verdicts"
    counts = ", ".join(plural(s[key], key[:-1]) for key in ("files", "loops", "requirements"))
    severities = ", ".join(plural(s[key], key[:-1]) for key in ("errors", "warnings", "notes"))
    console.print(Text(f"{counts} ({status_text}); {severities}", style="bold"))
    console.print(Text(SHORT_CAUTION, style="dim"))
