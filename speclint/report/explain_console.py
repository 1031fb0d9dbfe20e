"""The console layout of `speclint explain`: five numbered steps, as on a worked sheet.

Plain text through rich (no markup: user text stays text; control characters shown as
escapes by :func:`speclint.report.console.safe`); piped output is never wrapped. Numbers
in prose have 6 significant digits; the exact forms stand beside them.
"""

from __future__ import annotations

import io

from rich.console import Console
from rich.text import Text

from speclint.explain import (
    CriterionView,
    Explanation,
    Gains,
    MarginsView,
    Number,
    Paths,
    Refusal,
    RequirementView,
    RouthView,
    Stability,
    Steady,
)
from speclint.report import Settings
from speclint.report.console import SHORT_CAUTION, number, safe

_SIGN = {1: "+", -1: "−", 0: "0"}


def render(item: Explanation | Refusal, settings: Settings) -> str:
    """The explanation (or the findings that prevent one) as console text."""
    buffer = io.StringIO()
    console = Console(
        file=buffer,
        force_terminal=False,
        no_color=True,
        color_system=None,
        width=settings.width or 100_000,
        soft_wrap=settings.width is None,
        highlight=False,
        markup=False,
        emoji=False,
    )
    lines = _refusal(item) if isinstance(item, Refusal) else _explanation(item)
    for line in [*lines, "", SHORT_CAUTION]:
        console.print(Text(line))
    return buffer.getvalue()


def _refusal(item: Refusal) -> list[str]:
    out = [safe(item.message)]
    for f in item.findings:
        loc = f.location
        where = safe(loc.path)
        if loc.line is not None:
            where += f":{loc.line}" + (f":{loc.column}" if loc.column is not None else "")
        out.append(f"{where}: {f.severity.value} {f.rule} {safe(f.message)}")
        if f.hint:
            out.append(f"    hint: {safe(f.hint)}")
    return out


def _explanation(x: Explanation) -> list[str]:
    h = x.head
    k = h.gain_symbol or "K"
    out = [f"How speclint derives loop {safe(h.loop)}  ({safe(h.path)}:{h.line})"]
    if h.subject == "requirement":
        out[0] = (
            f"How speclint judges {safe(h.name)} on loop {safe(h.loop)}  ({safe(h.path)}:{h.line})"
        )
    if h.description:
        out.append(f"  {safe(h.description)}")
    facts = []
    if h.nominal is not None:
        facts.append(f"gain {safe(k)}, nominal {_both(h.nominal)}")
        if h.limits is not None:
            facts.append(f"limits {h.limits[0].exact} ≤ {safe(k)} ≤ {h.limits[1].exact}")
    else:
        facts.append("no tunable gain")
    facts.append(f"dead time {h.delay.exact} s" if h.delay is not None else "no dead time")
    if h.output_unit:
        facts.append(f"output in {safe(h.output_unit)}")
    out.append("  " + "; ".join(facts))
    out += _paths(x.paths)
    out += _steady(x.steady, k, h.nominal)
    out += _stability(x.stability, k, h.nominal)
    out += _margins(x.margins, k)
    out += _requirements(x, k)
    if x.findings:
        out += ["", "Findings on this loop"]
        out += _refusal(Refusal("", usage=False, findings=x.findings))[1:]
    return out


def _both(n: Number) -> str:
    """'7/20 (0.35)', or just '6' when the exact form is the short decimal already."""
    short = number(n.value)
    return n.exact if short == n.exact else f"{n.exact} ({short})"


def _paths(p: Paths) -> list[str]:
    out = ["", "1. Blocks and paths (constants substituted exactly; nothing cancelled)"]
    if p.constants:
        out.append("  constants: " + ", ".join(f"{safe(n)} = {v}" for n, v in p.constants))
    for b in p.blocks:
        if b.written is None:
            out.append(f"  {b.symbol} = 1  ({b.role}: none given)")
            continue
        written = " ".join(safe(b.written).split())
        out.append(f"  {b.symbol} = {written}  ({b.role})")
        if written.replace(" ", "") != b.exact.replace(" ", ""):
            out.append(f"  {' ' * len(b.symbol)} = {b.exact}")
    if p.dead_time:
        out.append(f"  dead time in the forward path: {p.dead_time}")
    out.append(f"  forward path  L(s) = C·G{'·e^(-sT)' if p.dead_time else ''} = {p.forward_path}")
    if p.equivalent_forward_path is None:
        out.append("  unity feedback (H = 1): the error e = r − y is the error of L itself")
    else:
        out.append(f"  loop transfer C·G·H = {p.loop_transfer}  (the margins are taken on it)")
        out.append("  H ≠ 1, so e = r − y is the error of the equivalent unity-feedback path")
        out.append(f"  Ge(s) = L/(1 + L·(H − 1)) = {p.equivalent_forward_path}")
    return out


def _steady(s: Steady, k: str, nominal: Number | None) -> list[str]:
    out = ["", "2. Steady state of Ge: system type and error constants"]
    at = f" at {safe(k)} = {nominal.exact}" if nominal is not None else ""
    if s.degenerate:
        out.append(
            "  1 + L·(H − 1) = 0 identically: the output equals the reference, every error is 0"
        )
        return out
    poles = "pole" if s.type == 1 else "poles"
    out.append(f"  system type {s.type}{at}: Ge has {s.type} {poles} at s = 0")
    width = max(len(c.definition) for c in s.constants)
    for c in s.constants:
        line = f"  {c.name} = {c.definition:<{width}}"
        if c.in_gain is not None and c.in_gain != c.at_nominal.exact:
            line += f" = {c.in_gain};{at}: {_both(c.at_nominal)}"
        else:
            line += f" = {_both(c.at_nominal)}"
        out.append(line)
    if k in {c.name for c in s.constants}:
        out.append(
            f"  (here the gain is also called {safe(k)}; inside the formulas, {safe(k)} is the gain)"
        )
    errors = ", ".join(f"{name} {_both(value)}" for name, value in s.unit_errors)
    out.append(f"  final error e(∞) for a unit reference{at}: {errors}")
    out.append("  (error figures hold only where the closed loop is stable)")
    return out


def _stability(s: Stability, k: str, nominal: Number | None) -> list[str]:
    out = ["", f"3. Closed-loop stability ({s.method})"]
    if s.characteristic is not None:
        out.append(
            "  characteristic polynomial P(s) = Dc·Dg·Dh + Nc·Ng·Nh, from the blocks as written:"
        )
        out.append(f"    P(s) = {s.characteristic}")
    else:
        out.append("  with dead time the characteristic equation is not a polynomial:")
        out.append("    A(s) + B(s)·e^(-sT) = 0, A = Dc·Dg·Dh, B = Nc·Ng·Nh")
        out.append(f"    A(s) = {s.delay_free_part}")
        out.append(f"    B(s) = {s.delayed_part}")
        out.append(
            "  so the Nyquist criterion decides it: the boundaries are the gains 1/|L(jω)| at the "
            "phase crossovers, each interval between them settled by an encirclement count"
        )
    if s.routh is not None:
        out += _routh(s.routh, k)
    if s.first_column:
        out.append(f"  first column as functions of {safe(k)}:")
        for e in s.first_column:
            out.append(f"    s^{e.power}: {e.entry}")
        out.append(
            "  the loop is stable where every entry has the sign of the first; a boundary is a "
            "gain where an entry is zero or undefined"
        )
    if s.boundaries:
        out.append("  stability boundaries:")
        for b in s.boundaries:
            out.append(f"    {safe(k)} = {_both(b.gain)}: {b.text}")
    elif s.first_column:
        out.append("  stability boundaries: none inside the gains considered")
    for note in s.notes:
        out.append(f"  note: {note}")
    if s.undecided is not None:
        out.append(f"  not decided: {s.undecided}")
    if s.stable_gains is not None:
        where = f" (within the limits {s.within_limits})" if s.within_limits else ""
        out.append(f"  stable gain set{where}: {_gains(s.stable_gains)}")
    if s.nominal_stable is not None:
        at = f" at the nominal gain {safe(k)} = {nominal.exact}" if nominal is not None else ""
        out.append(f"  closed loop{at}: {'stable' if s.nominal_stable else 'UNSTABLE'}")
    if s.hidden_modes:
        for mode in s.hidden_modes:
            out.append(f"  hidden mode: {mode}")
    else:
        out.append(
            "  hidden unstable modes: none (no block cancels a closed right-half-plane pole)"
        )
    return out


def _routh(r: RouthView, k: str) -> list[str]:
    where = f" at {safe(k)} = {r.gain.exact}" if r.gain is not None else ""
    out = [f"  Routh table{where}, for P(s) = {r.polynomial}:"]
    label = [f"s^{row.power}" for row in r.rows]
    lw = max(len(x) for x in label)
    columns = max(len(row.entries) for row in r.rows)
    widths = [
        max(len(row.entries[i]) for row in r.rows if i < len(row.entries)) for i in range(columns)
    ]
    for name, row in zip(label, r.rows, strict=True):
        cells = "  ".join(f"{e:<{widths[i]}}" for i, e in enumerate(row.entries))
        out.append(f"    {name:<{lw}} │ {cells}".rstrip())
    cases = "; ".join(r.special_cases) if r.special_cases else "none"
    out.append(f"    special cases: {cases}")
    signs = " ".join(_SIGN[x] for x in r.signs)
    changes = "sign change" if r.sign_changes == 1 else "sign changes"
    out.append(
        f"    first-column signs {signs}: {r.sign_changes} {changes}; roots in the right half "
        f"plane {r.right_half_plane_roots}, on the imaginary axis {r.imaginary_axis_roots}"
    )
    return out


def _margins(m: MarginsView, k: str) -> list[str]:
    at = f" at {safe(k)} = {m.gain.exact}" if m.gain is not None else ""
    out = ["", f"4. Margins{at} (loop broken at the summing junction)"]
    if m.unsupported is not None:
        out.append(f"  not computed: {m.unsupported}")
        return out
    out.append(f"  gain crossovers (|L| = 1): {_frequencies(m.gain_crossovers_rad_s)}")
    out.append(f"  phase crossovers (∠L = −180°): {_frequencies(m.phase_crossovers_rad_s)}")
    gm = number(m.gain_margin)
    if m.gain_margin_db is not None:
        gm += f" ({number(m.gain_margin_db)} dB)"
    out.append(f"  gain margin {gm}{_governed('phase', m.phase_crossover_rad_s)}")
    out.append(
        f"  phase margin {number(m.phase_margin_deg)}°{_governed('gain', m.gain_crossover_rad_s)}"
    )
    out.append(f"  delay margin {number(m.delay_margin_s, 's')}")
    out.append(
        f"  sensitivity peak max |1/(1 + L)| = {number(m.sensitivity_peak)}"
        f"{_at(m.sensitivity_peak_rad_s)}"
    )
    out += [f"  note: {note}" for note in m.notes]
    out.append("  (margins describe robustness; the stability verdict is the one in step 3)")
    return out


def _frequencies(values: tuple[float, ...]) -> str:
    return ", ".join(number(v, "rad/s") for v in values) if values else "none"


def _governed(kind: str, omega: float | None) -> str:
    if omega is None:
        return ""
    return f", governed by the {kind} crossover at ω = {number(omega, 'rad/s')}"


def _at(omega: float | None) -> str:
    return f" at ω = {number(omega, 'rad/s')}" if omega is not None else ""


def _gains(g: Gains) -> str:
    floats = ", ".join(f"[{_float(lo)}, {_float(hi)}]" for lo, hi in g.intervals) or "none"
    exact = "" if g.exact == g.text else f"\n    exactly {g.exact}"
    return f"{g.text}{exact}\n    as floats {floats}"


def _float(x: float) -> str:
    return "∞" if x == float("inf") else repr(x)


def _requirements(x: Explanation, k: str) -> list[str]:
    title = "5. Requirements of the loop" if x.head.subject == "loop" else "5. The requirement"
    out = ["", title]
    if not x.requirements:
        out.append("  no requirement names this loop")
    for r in x.requirements:
        out += _requirement(r)
    out.append(f"  all together: {safe(x.together.text)}")
    return out


def _requirement(r: RequirementView) -> list[str]:
    out = [
        f"  {safe(r.id)}"
        + (f"  {safe(r.title)}" if r.title else "")
        + f"  ({safe(r.path)}:{r.line})"
    ]
    if r.text:
        out.append(f"    “{safe(' '.join(r.text.split()))}”")
    if r.traces_to:
        out.append("    traces to " + ", ".join(safe(t) for t in r.traces_to))
    if not r.criteria:
        out.append("    no criteria: nothing to compute")
        return out
    for c in r.criteria:
        out += _criterion(c)
    if r.admissible is not None and len(r.criteria) > 1:
        out.append(f"    every criterion, stably: {r.admissible.text}")
    out.append(f"    status {r.status}: {safe(r.message or '')}")
    return out


def _criterion(c: CriterionView) -> list[str]:
    d = c.detail
    facts = []
    if "magnitude" in d:
        facts.append(("R" if c.kind == "tracking" else "step") + f" = {safe(d['magnitude'])}")
    if "limit" in d:
        facts.append(f"limit {safe(d['limit'])}")
    if d.get("input") == "plant_input":
        facts.append("at the plant input")
    head = f"    {safe(c.label)}" + (f"  ({', '.join(facts)})" if facts else "")
    met = {True: "met", False: "not met", None: "not judged"}[c.met_at_nominal]
    out = [head, f"      at the nominal gain: {number(c.achieved)} ({met})"]
    out.append(f"      holds for {c.holds.text} (stability aside)")
    if c.reason:
        out.append(f"      why none: {safe(c.reason)}")
    if c.admissible is not None:
        exactly = (
            "" if c.admissible.exact == c.admissible.text else f" (exactly {c.admissible.exact})"
        )
        out.append(f"      admissible (∩ stable gains): {c.admissible.text}{exactly}")
    return out
