"""The rule catalogue: every kind of finding, with its stable code, name and severity.

Codes are ours and never change meaning once released: SL0xx the run itself, SL1xx
reading files, SL2xx the spec's structure, SL3xx loop models, SL4xx requirement
verdicts, SL5xx stability margins, SL6xx the trace. `speclint rules`, the SARIF rules
array and docs/rules.md all come from this one table.
"""

from __future__ import annotations

from dataclasses import dataclass

from speclint.findings import Finding, Location, Severity

E, W, N = Severity.ERROR, Severity.WARNING, Severity.NOTE


@dataclass(frozen=True, slots=True)
class Rule:
    code: str
    name: str
    severity: Severity
    summary: str


def _catalogue(*rules: Rule) -> dict[str, Rule]:
    return {rule.code: rule for rule in rules}


RULES: dict[str, Rule] = _catalogue(
    # -- the run itself
    Rule("SL001", "internal-error", E, "speclint failed on this file; please report it as a bug"),
    Rule("SL002", "no-spec-files", W, "a configured or given path holds no spec file"),
    # -- reading files
    Rule("SL101", "unreadable-file", E, "the file cannot be read"),
    Rule("SL102", "bad-encoding", E, "the file is not valid UTF-8"),
    Rule("SL103", "yaml-syntax", E, "the file is not well-formed YAML"),
    Rule("SL104", "empty-file", E, "the file holds no YAML document"),
    Rule(
        "SL105",
        "duplicate-key",
        E,
        "a mapping repeats a key; YAML would silently keep only the last",
    ),
    Rule("SL106", "alias-refused", E, "anchors and aliases are not accepted in spec files"),
    Rule("SL107", "file-too-large", E, "the file exceeds the size limit"),
    Rule("SL108", "nesting-too-deep", E, "the file nests collections deeper than the limit"),
    Rule("SL109", "tag-refused", E, "explicit YAML tags other than standard ones are not accepted"),
    Rule("SL110", "not-a-mapping", E, "the top level of a spec file must be a mapping"),
    Rule("SL111", "bad-key", E, "a mapping key is not a plain string"),
    Rule("SL112", "bad-number", E, "a number is not finite or is too long to be a measurement"),
    Rule(
        "SL113",
        "control-character",
        E,
        "the text holds a control character or a stray byte-order mark",
    ),
    Rule("SL114", "too-many-nodes", E, "the file holds more YAML nodes than the limit"),
    Rule("SL115", "multiple-documents", E, "a spec file holds exactly one YAML document"),
    # -- the spec's structure (JSON Schema)
    Rule("SL201", "unknown-key", E, "a key the spec format does not define (often a typo)"),
    Rule("SL202", "missing-key", E, "a required key is absent"),
    Rule("SL203", "wrong-type", E, "a value has the wrong type"),
    Rule("SL204", "bad-value", E, "a value is outside what the spec format allows"),
    Rule(
        "SL205",
        "format-version",
        E,
        "the file declares a spec format version this speclint does not read",
    ),
    # -- loop models
    Rule("SL301", "expression-syntax", E, "a transfer-function expression cannot be read"),
    Rule(
        "SL302",
        "unknown-name",
        E,
        "an expression names something that is neither s, the gain nor a constant",
    ),
    Rule(
        "SL303", "expression-too-large", E, "an expression exceeds a size, exponent or degree limit"
    ),
    Rule("SL304", "division-by-zero", E, "an expression divides by zero"),
    Rule("SL305", "zero-block", E, "a block is identically zero"),
    Rule("SL306", "common-factor", W, "a block's numerator and denominator share a factor"),
    Rule("SL307", "improper-model", E, "a block or the loop has more zeros than poles"),
    Rule("SL308", "gain-unused", W, "the loop declares a gain symbol that no expression uses"),
    Rule("SL309", "name-clash", E, "a constant or the gain reuses a reserved or taken name"),
    Rule("SL310", "nominal-outside-limits", E, "the nominal gain lies outside the gain limits"),
    Rule("SL311", "unknown-loop", E, "a requirement names a loop the spec set does not define"),
    Rule("SL312", "duplicate-loop", E, "two files define a loop of the same name"),
    # -- requirement verdicts
    Rule(
        "SL401",
        "retune-needed",
        E,
        "the requirement is not met at the nominal gain, but other gains meet it",
    ),
    Rule("SL402", "unreachable", E, "no stabilising gain meets the requirement"),
    Rule("SL403", "conflict", E, "requirements of one loop cannot all hold at any one gain"),
    Rule("SL404", "unstable-loop", E, "the closed loop is unstable at the nominal gain"),
    Rule(
        "SL405",
        "hidden-unstable-mode",
        E,
        "a cancellation between blocks hides an unstable closed-loop mode",
    ),
    Rule("SL406", "not-analysed", W, "part of the analysis could not be carried out for this loop"),
    Rule("SL407", "analysis-budget", E, "a loop's analysis exceeded its time budget"),
    # -- stability margins
    Rule("SL501", "margin-caveat", N, "a convention or caveat applied to the reported margins"),
    # -- the trace
    Rule("SL601", "duplicate-id", E, "two requirements of the spec set share one ID"),
    Rule("SL602", "id-off-pattern", E, "a requirement ID does not match the configured id_pattern"),
    Rule("SL603", "dangling-link", E, "traces_to names a requirement the spec set does not define"),
    Rule("SL604", "orphan", E, "a requirement states neither an origin nor a traces_to link"),
    Rule("SL605", "link-cycle", E, "traces_to links lead from a requirement back to itself"),
    Rule("SL606", "unrefined-parent", W, "a textual requirement that nothing refines or verifies"),
    Rule("SL607", "idle-loop", W, "a loop that no requirement names"),
    Rule("SL608", "unverified", W, "a requirement with criteria states no verification method"),
    Rule("SL609", "missing-evidence", E, "an evidence path does not exist in the repository"),
    Rule(
        "SL610",
        "evidence-outside",
        E,
        "an evidence path is absolute or leads out of the repository",
    ),
    Rule("SL611", "stale-review", W, "the requirement has changed since its recorded review"),
)


def finding(
    code: str,
    message: str,
    location: Location,
    hint: str | None = None,
    subject: str | None = None,
) -> Finding:
    """Build a finding with the catalogue's severity for `code`."""
    return Finding(code, RULES[code].severity, message, location, hint, subject)
