"""Build stage: schema-valid data to the typed model, with the places of the keys.

Runs only on documents the schema accepted, so shapes and types are known here; what the
schema cannot say (a nominal gain outside its limits, a constant named like the gain, a
percentage) is checked here and reported at its place.
"""

from __future__ import annotations

from collections.abc import Callable
from fractions import Fraction
from typing import Any

from speclint.findings import Finding, Location
from speclint.load import Document, Path
from speclint.model import (
    BrokenRequirement,
    Constant,
    Criterion,
    Disturbance,
    ErrorConstants,
    Expression,
    Gain,
    Loop,
    MarginLimits,
    Requirement,
    Review,
    SpecFile,
    Tracking,
    Verification,
)
from speclint.rules import finding

RESERVED_NAMES = frozenset({"s"})


def build(doc: Document) -> tuple[SpecFile, list[Finding]]:
    """The typed model of one schema-valid document, and findings for what the schema cannot see."""
    found: list[Finding] = []
    data = doc.data
    loops, broken_loops = [], []
    for name, raw in (data.get("loops") or {}).items():
        if _broken(doc, ("loops", name)):
            broken_loops.append(name)
        else:
            loops.append(_loop(doc, name, raw, found))
    requirements, broken_reqs = [], []
    for i, raw in enumerate(data.get("requirements") or []):
        if not _broken(doc, ("requirements", i)):
            requirements.append(_requirement(doc, i, raw))
        elif isinstance(raw, dict) and isinstance(raw.get("id"), str):
            loop = raw.get("loop")
            sound = isinstance(loop, str) and not _broken(doc, ("requirements", i, "loop"))
            where = doc.location(("requirements", i))
            broken_reqs.append(BrokenRequirement(raw["id"], where, loop if sound else None))
    spec = SpecFile(
        doc.path,
        data.get("title"),
        tuple(loops),
        tuple(requirements),
        tuple(broken_loops),
        tuple(broken_reqs),
    )
    return spec, found


def buildable(doc: Document) -> bool:
    """Whether the errors found so far leave any loop or requirement intact to build."""
    return not any(len(path) < 2 for path in doc.flagged)


def _broken(doc: Document, prefix: Path) -> bool:
    n = len(prefix)
    return any(path[:n] == prefix for path in doc.flagged)


def _expression(doc: Document, path: Path, text: str | None) -> Expression | None:
    if text is None:
        return None
    location = doc.location(path)
    line0 = (location.line or 1) - 1
    col0 = (location.column or 1) - 1
    source = doc.line(line0)[col0:]
    if source.startswith(text):
        return Expression(text, location)
    quote = source[:1]
    if quote in "'\"" and source[1:].startswith(text):
        # Quoted and written without escapes: offsets map onto columns one past the quote.
        return Expression(text, location.shifted(1))
    return Expression(text, location, column_exact=False)


def _loop(doc: Document, name: str, raw: dict[str, Any], found: list[Finding]) -> Loop:
    base: Path = ("loops", name)
    places = {key: doc.location((*base, key), key=True) for key in raw}
    gain = None
    if "gain" in raw:
        g = raw["gain"]
        limits = tuple(g["limits"]) if "limits" in g else None
        gain = Gain(g["symbol"], g["nominal"], limits)
        places["gain.nominal"] = doc.location((*base, "gain", "nominal"))
        places["gain.symbol"] = doc.location((*base, "gain", "symbol"))
        if limits is not None:
            places["gain.limits"] = doc.location((*base, "gain", "limits"))
            found.extend(_check_gain(gain, name, places))
    constants = []
    for cname, value in (raw.get("constants") or {}).items():
        constants.append(_constant(cname, value))
        where = doc.location((*base, "constants", cname), key=True)
        places[f"constants.{cname}"] = where
        if cname in RESERVED_NAMES or (gain is not None and cname == gain.symbol):
            what = "the Laplace variable" if cname in RESERVED_NAMES else "the gain symbol"
            found.append(
                finding(
                    "SL309",
                    f"loops.{name}: constant {cname!r} reuses the name of {what}",
                    where,
                    subject=name,
                )
            )
    if gain is not None and gain.symbol in RESERVED_NAMES:
        msg = (
            f"loops.{name}.gain.symbol: {gain.symbol!r} is the Laplace variable; pick another name"
        )
        found.append(finding("SL309", msg, places["gain.symbol"], subject=name))
    return Loop(
        name=name,
        location=doc.location(base, key=True),
        plant=_expression(doc, (*base, "plant"), raw["plant"]),  # type: ignore[arg-type]
        controller=_expression(doc, (*base, "controller"), raw.get("controller")),
        feedback=_expression(doc, (*base, "feedback"), raw.get("feedback")),
        gain=gain,
        delay=raw.get("delay") or None,
        constants=tuple(constants),
        description=raw.get("description"),
        output_unit=raw.get("output_unit"),
        places=places,
    )


def _check_gain(gain: Gain, name: str, places: dict[str, Location]) -> list[Finding]:
    assert gain.limits is not None
    lo, hi = gain.limits
    out = []
    if lo > hi:
        msg = (
            f"loops.{name}.gain.limits: the lowest gain {_num(lo)} is above the highest {_num(hi)}"
        )
        out.append(finding("SL204", msg, places["gain.limits"], subject=name))
    elif not lo <= gain.nominal <= hi:
        msg = (
            f"loops.{name}.gain.nominal: {gain.symbol} = {_num(gain.nominal)} lies outside "
            f"the limits [{_num(lo)}, {_num(hi)}]"
        )
        out.append(finding("SL310", msg, places["gain.nominal"], subject=name))
    return out


def _num(x: Fraction) -> str:
    return str(x.numerator) if x.denominator == 1 else f"{float(x):g}"


def percent_of(text: str) -> Fraction:
    """'0.25%' to Fraction(1, 400): the fraction the percentage stands for, exactly."""
    return Fraction(text.rstrip("%").strip()) / 100


def _constant(name: str, value: Any) -> Constant:
    if not isinstance(value, dict):
        return Constant(name, value)
    tol = value.get("tolerance")
    if isinstance(tol, str):
        return Constant(name, value["value"], None, percent_of(tol) * 100, value.get("unit"))
    return Constant(name, value["value"], tol, None, value.get("unit"))


def _tracking(raw: dict[str, Any]) -> Tracking:
    limit = raw["max_error"]
    if isinstance(limit, str):
        share = percent_of(limit)
        return Tracking(raw["reference"], raw["magnitude"], share * raw["magnitude"], share * 100)
    return Tracking(raw["reference"], raw["magnitude"], limit)


def _error_constants(raw: dict[str, Any]) -> ErrorConstants:
    return ErrorConstants(raw.get("min_kp"), raw.get("min_kv"), raw.get("min_ka"))


def _disturbance(raw: dict[str, Any]) -> Disturbance:
    return Disturbance(raw["magnitude"], raw["max_error"], raw.get("input", "plant_input"))


def _margins(raw: dict[str, Any]) -> MarginLimits:
    return MarginLimits(
        raw.get("min_gain_margin_db"),
        raw.get("min_phase_margin_deg"),
        raw.get("min_delay_margin_s"),
        raw.get("max_sensitivity_peak"),
    )


# The criterion kinds, by their key in a requirement. Adding a kind: a model record, a
# builder here, a schema property, and its analysis in judge.
CRITERIA: dict[str, Callable[[dict[str, Any]], Criterion]] = {
    "tracking": _tracking,
    "error_constants": _error_constants,
    "disturbance": _disturbance,
    "margins": _margins,
}


def _requirement(doc: Document, index: int, raw: dict[str, Any]) -> Requirement:
    base: Path = ("requirements", index)
    places = {key: doc.location((*base, key), key=True) for key in raw}
    for i, _ in enumerate(raw.get("traces_to", [])):
        places[f"traces_to[{i}]"] = doc.location((*base, "traces_to", i))
    if "loop" in raw:
        places["loop"] = doc.location((*base, "loop"))
    for i, _ in enumerate((raw.get("verification") or {}).get("evidence", [])):
        places[f"evidence[{i}]"] = doc.location((*base, "verification", "evidence", i))
    criteria = tuple(make(raw[key]) for key, make in CRITERIA.items() if key in raw)
    verification = None
    if "verification" in raw:
        v = raw["verification"]
        verification = Verification(v["method"], tuple(v.get("evidence", ())))
    reviewed = None
    if "reviewed" in raw:
        r = raw["reviewed"]
        reviewed = Review(r["fingerprint"], r["by"], r["date"])
    return Requirement(
        id=raw["id"],
        location=doc.location(base),
        title=raw.get("title"),
        text=raw.get("text"),
        rationale=raw.get("rationale"),
        origin=raw.get("origin"),
        traces_to=tuple(raw.get("traces_to", ())),
        loop=raw.get("loop"),
        criteria=criteria,
        verification=verification,
        reviewed=reviewed,
        places=places,
    )
