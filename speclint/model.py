"""The typed spec model: plain frozen records that the build stage fills from valid data.

Numbers are exact ``Fraction``s throughout. Expressions are still text here: reading them
needs the algebra library, which only the analyse stage imports (a run that only validates
never pays for it).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import Literal

from speclint.findings import Location

Reference = Literal["step", "ramp", "parabola"]
VerificationMethod = Literal["analysis", "test", "inspection", "demonstration"]


@dataclass(frozen=True, slots=True)
class Expression:
    """A transfer function as written, and where its text starts in the file.

    ``column_exact`` says whether a character offset inside the text maps one-to-one onto
    file columns (a one-line plain or quoted scalar without escapes); when it does not, a
    problem inside the expression is reported at the scalar's start.
    """

    text: str
    location: Location
    column_exact: bool = True

    def location_of(self, offset: int) -> Location:
        return self.location.shifted(offset) if self.column_exact else self.location


@dataclass(frozen=True, slots=True)
class Constant:
    name: str
    value: Fraction
    tolerance: Fraction | None = None  # absolute, in the constant's unit
    tolerance_percent: Fraction | None = None
    unit: str | None = None


@dataclass(frozen=True, slots=True)
class Gain:
    symbol: str
    nominal: Fraction
    limits: tuple[Fraction, Fraction] | None = None


@dataclass(frozen=True, slots=True)
class Loop:
    name: str
    location: Location
    plant: Expression
    controller: Expression | None = None
    feedback: Expression | None = None
    gain: Gain | None = None
    delay: Fraction | None = None
    constants: tuple[Constant, ...] = ()
    description: str | None = None
    output_unit: str | None = None
    # Places of keys worth pointing at: "gain", "gain.nominal", "gain.limits", "delay", …
    places: dict[str, Location] = field(default_factory=dict, compare=False, hash=False)


@dataclass(frozen=True, slots=True)
class Tracking:
    reference: Reference
    magnitude: Fraction
    max_error: Fraction  # absolute, in output units
    percent: Fraction | None = None  # the percentage of R as written, when given so
    kind: str = "tracking"


@dataclass(frozen=True, slots=True)
class ErrorConstants:
    min_kp: Fraction | None = None
    min_kv: Fraction | None = None
    min_ka: Fraction | None = None
    kind: str = "error_constants"


@dataclass(frozen=True, slots=True)
class Disturbance:
    magnitude: Fraction
    max_error: Fraction
    input: str = "plant_input"
    kind: str = "disturbance"


@dataclass(frozen=True, slots=True)
class MarginLimits:
    min_gain_margin_db: Fraction | None = None
    min_phase_margin_deg: Fraction | None = None
    min_delay_margin_s: Fraction | None = None
    max_sensitivity_peak: Fraction | None = None
    kind: str = "margins"


Criterion = Tracking | ErrorConstants | Disturbance | MarginLimits


@dataclass(frozen=True, slots=True)
class Verification:
    method: VerificationMethod
    evidence: tuple[str, ...] = ()


@dataclass(frozen=True, slots=True)
class Review:
    fingerprint: str
    by: str
    date: str


@dataclass(frozen=True, slots=True)
class Requirement:
    id: str
    location: Location
    title: str | None = None
    text: str | None = None
    rationale: str | None = None
    origin: str | None = None
    traces_to: tuple[str, ...] = ()
    loop: str | None = None
    criteria: tuple[Criterion, ...] = ()
    verification: Verification | None = None
    reviewed: Review | None = None
    # Places of keys worth pointing at: "loop", "traces_to[0]", "tracking", "verification", …
    places: dict[str, Location] = field(default_factory=dict, compare=False, hash=False)

    def place(self, key: str) -> Location:
        return self.places.get(key, self.location)


@dataclass(frozen=True, slots=True)
class BrokenRequirement:
    """A requirement left out because of errors already reported: its ID, its place, and
    the loop it names when that much of it is sound (so reports can show it there)."""

    id: str
    location: Location
    loop: str | None = None


@dataclass(frozen=True, slots=True)
class SpecFile:
    path: str
    title: str | None = None
    loops: tuple[Loop, ...] = ()
    requirements: tuple[Requirement, ...] = ()
    # Left out because of errors already reported: loop names, and requirement IDs with
    # their places, so that nothing refers to them as if they did not exist.
    broken_loops: tuple[str, ...] = ()
    broken_requirements: tuple[BrokenRequirement, ...] = ()
