"""Review fingerprints: a short hash of what a requirement demands, in three parts.

A review vouches for the requirement's normative content, so the fingerprint covers
exactly that, in three parts hashed apart:

* ``text``: the requirement's `text`, with runs of white space made one space (re-wrapping
  a paragraph or switching between a folded and a plain scalar changes nothing);
* ``criteria``: each criterion's kind and limits, numbers as exact fractions ("1/2"), a
  percentage limit as the absolute limit it stands for;
* ``loop model``: the name of the loop it constrains and that loop's model: plant,
  controller and feedback as written with all white space removed (an absent controller
  or feedback path counts as "1", which is what it means), output unit, gain symbol,
  nominal and limits, dead time, and each constant's value, tolerance and unit.

Title, rationale, origin, traces_to, verification and the loop's description are left
out on purpose: they say why and how a requirement is checked, not what it demands, and
the trace checks watch them. Each part is canonical JSON (sorted keys, no spaces), so
YAML formatting, comments, key order and number spelling (`0.5`, `.50`, `5e-1`) cannot
change it.

The fingerprint is the three part hashes side by side, 8 hex digits each (24 in all): a
stored fingerprint then says by itself which part changed since the review. Eight hex
digits per part (32 bits of SHA-256) make an edit that goes unnoticed a one in four
billion chance per part; this guards against honest drift, not against someone forging
a review on purpose (a reviewer's signature would be the tool for that).
"""

from __future__ import annotations

import hashlib
import json
import re
from fractions import Fraction
from typing import Any

from speclint.model import (
    Criterion,
    Disturbance,
    ErrorConstants,
    Loop,
    MarginLimits,
    Requirement,
    Tracking,
)

PARTS = ("text", "criteria", "loop model")
PART_HEX = 8
LENGTH = PART_HEX * len(PARTS)
# Bumped if the canonical forms ever change, so that old fingerprints read as changed.
_DOMAIN = "speclint-fingerprint-1"
_SPACE = re.compile(r"\s+")


def fingerprint(req: Requirement, loop: Loop | None) -> str:
    """The fingerprint of `req` with the model of `loop` (None: it names no loop)."""
    return "".join(part_hashes(req, loop))


def part_hashes(req: Requirement, loop: Loop | None) -> tuple[str, str, str]:
    """The hashes of the text, criteria and loop-model parts, in that order."""
    text, criteria, model = canonical_parts(req, loop)
    return (_hash("text", text), _hash("criteria", criteria), _hash("loop model", model))


def canonical_parts(req: Requirement, loop: Loop | None) -> tuple[str, str, str]:
    """The canonical JSON of each part: what the hashes are taken over."""
    text = None if req.text is None else _SPACE.sub(" ", req.text).strip()
    criteria = [_criterion(c) for c in req.criteria]
    model = None
    if req.loop is not None:
        model = {"name": req.loop, **(_loop(loop) if loop is not None else {})}
    return _canonical(text), _canonical(criteria), _canonical(model)


def changed_parts(stored: str, current: str) -> tuple[str, ...] | None:
    """Which parts differ between a stored and the current fingerprint; None if it cannot tell.

    It can tell when the stored fingerprint has the three-part form this module writes.
    """
    if len(stored) != LENGTH or len(current) != LENGTH:
        return None
    return tuple(
        name
        for i, name in enumerate(PARTS)
        if stored[i * PART_HEX : (i + 1) * PART_HEX] != current[i * PART_HEX : (i + 1) * PART_HEX]
    )


def _hash(part: str, canonical: str) -> str:
    data = f"{_DOMAIN}\n{part}\n{canonical}".encode()
    return hashlib.sha256(data).hexdigest()[:PART_HEX]


def _canonical(value: Any) -> str:
    return json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False)


def _number(x: Fraction | int | None) -> str | None:
    # Exact: "1/10", never a float; an integer-valued number is written without "/1".
    return None if x is None else str(Fraction(x))


def _criterion(c: Criterion) -> dict[str, Any]:
    if isinstance(c, Tracking):
        return {
            "kind": c.kind,
            "reference": c.reference,
            "magnitude": _number(c.magnitude),
            "max_error": _number(c.max_error),
        }
    if isinstance(c, ErrorConstants):
        limits = {"min_kp": c.min_kp, "min_kv": c.min_kv, "min_ka": c.min_ka}
    elif isinstance(c, Disturbance):
        limits = {"magnitude": c.magnitude, "max_error": c.max_error}
        return {"kind": c.kind, "input": c.input, **{k: _number(v) for k, v in limits.items()}}
    elif isinstance(c, MarginLimits):
        limits = {
            "min_gain_margin_db": c.min_gain_margin_db,
            "min_phase_margin_deg": c.min_phase_margin_deg,
            "min_delay_margin_s": c.min_delay_margin_s,
            "max_sensitivity_peak": c.max_sensitivity_peak,
        }
    else:  # pragma: no cover - a new kind must be added here and in its tests
        raise TypeError(f"no canonical form for criterion {c!r}")
    return {"kind": c.kind, **{k: _number(v) for k, v in limits.items() if v is not None}}


def _expression(text: str | None) -> str:
    return "1" if text is None else _SPACE.sub("", text)


def _loop(loop: Loop) -> dict[str, Any]:
    gain = None
    if loop.gain is not None:
        limits = None if loop.gain.limits is None else [_number(x) for x in loop.gain.limits]
        gain = {"symbol": loop.gain.symbol, "nominal": _number(loop.gain.nominal), "limits": limits}
    constants = {
        c.name: {
            "value": _number(c.value),
            "tolerance": _number(c.tolerance),
            "tolerance_percent": _number(c.tolerance_percent),
            "unit": c.unit,
        }
        for c in loop.constants
    }
    return {
        "plant": _expression(loop.plant.text),
        "controller": _expression(loop.controller.text if loop.controller else None),
        "feedback": _expression(loop.feedback.text if loop.feedback else None),
        "output_unit": loop.output_unit,
        "gain": gain,
        "delay": _number(loop.delay or 0),
        "constants": constants,
    }
