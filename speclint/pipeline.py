"""The pipeline, end to end: discover, load, validate, build, analyse, judge, trace.

Each file goes through load, validate and build on its own; a problem in one never stops
the others. The analysis of loops and the trace checks run after every file is indexed,
so that links and loop names may cross files. Only this module and the stages at the
edges (discover, load, report) touch the outside world.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from speclint import trace
from speclint.build import build, buildable
from speclint.discover import Config, display_path, spec_files
from speclint.findings import Finding, Location
from speclint.load import MAX_FILE_BYTES, read_spec
from speclint.model import Loop, Requirement, SpecFile
from speclint.results import LoopResult, RequirementResult, RunResult
from speclint.rules import finding
from speclint.validate import validate


@dataclass(frozen=True, slots=True)
class Options:
    use_cache: bool = True
    jobs: int = 1


def run(config: Config, given: list[str], cwd: Path, options: Options | None = None) -> RunResult:
    """Check the spec files that `given` (or the configuration) names."""
    options = options or Options()
    files, empty = spec_files(config, given, cwd)
    result = RunResult(files=[], findings=[])
    for folder in empty:
        result.findings.append(finding("SL002", f"{folder}: no spec files here", Location(folder)))
    specs: list[SpecFile] = []
    for path in files:
        shown = display_path(path, cwd)
        result.files.append(shown)
        spec = _read_one(path, shown, result)
        if spec is not None:
            specs.append(spec)
    found = trace.index(specs, result.findings)
    for loop in found.loops.values():
        mine = [r for r in found.requirements if r.loop == loop.name]
        loop_result, req_results = _analyse(loop, mine, result.findings)
        result.loops.append(loop_result)
        result.requirements.extend(req_results)
    analysed = {r.id for r in result.requirements}
    for req in found.requirements:
        if req.id not in analysed:
            result.requirements.append(_unanalysed(req, found))
    for rid, where in found.broken_requirements:
        result.requirements.append(
            RequirementResult(
                rid, where.path, where.line or 0, None, "invalid", "has errors (see the findings)"
            )
        )
    checked = trace.check(specs, found, config)
    result.findings.extend(checked.findings)
    result.trace = checked.nodes
    result.findings.sort(key=Finding.sort_key)
    result.requirements.sort(key=lambda r: (r.path, r.line))
    return result


def _read_one(path: Path, shown: str, result: RunResult) -> SpecFile | None:
    try:
        size = path.stat().st_size
        # Refuse before reading: a multi-gigabyte file must not be pulled into memory.
        raw = path.read_bytes() if size <= MAX_FILE_BYTES else b"\0" * (MAX_FILE_BYTES + 1)
    except OSError as exc:
        result.findings.append(
            finding("SL101", f"cannot read the file: {exc.strerror}", Location(shown))
        )
        return None
    try:
        loaded = read_spec(shown, raw)
        result.findings.extend(loaded.findings)
        doc = loaded.document
        if doc is None:
            return None
        result.sources[shown] = doc.text
        result.findings.extend(validate(doc))
        if not buildable(doc):
            return None
        spec, built = build(doc)
        result.findings.extend(built)
        return spec
    except Exception as exc:  # a bug of ours must not cost the user the other files
        result.findings.append(internal_error(shown, exc))
        return None


def internal_error(shown: str, exc: BaseException) -> Finding:
    message = f"internal error while checking this file ({type(exc).__name__}: {exc})"
    hint = "please report this as a bug, with the file if you can share it"
    return finding("SL001", message, Location(shown, 1, 1), hint)


def _analyse(
    loop: Loop, requirements: list[Requirement], findings: list[Finding]
) -> tuple[LoopResult, list[RequirementResult]]:
    # Imported here: the analysis needs sympy and numpy, which a run that only validates
    # (or finds everything in the cache) must not pay for.
    from speclint import judge

    try:
        outcome = judge.judge_loop(loop, requirements)
    except Exception as exc:
        findings.append(internal_error(loop.location.path, exc))
        return judge.unanalysed_loop(loop), [
            judge.invalid(r, "internal error") for r in requirements
        ]
    findings.extend(outcome.findings)
    return outcome.loop, outcome.requirements


def _unanalysed(req: Requirement, found: trace.Index) -> RequirementResult:
    status = None
    message = None
    if req.criteria:
        status = "invalid"
        if req.loop is None:
            message = "criteria without a loop to apply them to"
        elif req.loop in found.broken_loops:
            message = f"loop {req.loop!r} has errors (see the findings)"
        else:
            message = f"loop {req.loop!r} is not defined"
    return RequirementResult(
        req.id, req.location.path, req.location.line or 0, req.loop, status, message
    )
