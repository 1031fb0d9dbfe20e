"""The pipeline, end to end: discover, load, validate, build, analyse, judge, trace.

Each file goes through load, validate and build on its own; a problem in one never stops
the others. The analysis of loops and the trace checks run after every file is indexed,
so that links and loop names may cross files. Only this module and the stages at the
edges (discover, load, report) touch the outside world.
"""

from __future__ import annotations

import gc
import os
import signal
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager, suppress
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from speclint import trace
from speclint.build import build, buildable
from speclint.cache import Cache, file_key, loop_key
from speclint.discover import Config, display_path, spec_files
from speclint.findings import Finding, Location
from speclint.load import MAX_FILE_BYTES, read_spec, spec_text
from speclint.model import Loop, MarginLimits, Requirement, SpecFile
from speclint.results import LoopResult, RequirementResult, RunResult
from speclint.rules import finding
from speclint.validate import validate

if TYPE_CHECKING:  # multiprocessing itself only when workers are started
    from multiprocessing.context import BaseContext


@dataclass(frozen=True, slots=True)
class Options:
    use_cache: bool = True
    jobs: int = 0  # 0: decide from the number of loops to analyse


def run(config: Config, given: list[str], cwd: Path, options: Options | None = None) -> RunResult:
    """Check the spec files that `given` (or the configuration) names."""
    options = options or Options()
    cache = Cache(config.root / config.cache_dir) if options.use_cache else None
    fresh = FreshFiles(options.jobs, cache)
    result, specs, found = read_specs(config, given, cwd, cache, fresh)
    for loop_result, req_results, loop_findings in _analyse_all(found, config, options, fresh.keep):
        result.loops.append(loop_result)
        result.requirements.extend(req_results)
        result.findings.extend(loop_findings)
    fresh.keep()  # when no loop was analysed
    analysed = {r.id for r in result.requirements}
    for req in found.requirements:
        if req.id not in analysed:
            result.requirements.append(_unanalysed(req, found))
    for broken in found.broken_requirements:
        where = broken.location
        result.requirements.append(
            RequirementResult(
                broken.id,
                where.path,
                where.line or 0,
                broken.loop,
                "invalid",
                "has errors (see the findings)",
            )
        )
    checked = trace.check(specs, found, config)
    result.findings.extend(checked.findings)
    result.trace = checked.nodes
    result.findings.sort(key=Finding.sort_key)
    result.requirements.sort(key=lambda r: (r.path, r.line))
    return result


def read_specs(
    config: Config,
    given: list[str],
    cwd: Path,
    cache: Cache | None = None,
    fresh: FreshFiles | None = None,
) -> tuple[RunResult, list[SpecFile], trace.Index]:
    """Load, validate, build and index the spec files; nothing analysed yet.

    The result holds the files read and their findings so far. A file not in the cache
    is kept there at once, or handed to `fresh` (which keeps it later) where given.
    """
    files, empty = spec_files(config, given, cwd)
    result = RunResult(files=[], findings=[])
    for folder in empty:
        result.findings.append(finding("SL002", f"{folder}: no spec files here", Location(folder)))
    specs: list[SpecFile] = []
    for path in files:
        shown = display_path(path, cwd)
        result.files.append(shown)
        spec = _read_one(path, shown, result, cache, fresh)
        if spec is not None:
            specs.append(spec)
    return result, specs, trace.index(specs, result.findings)


def _read_one(
    path: Path,
    shown: str,
    result: RunResult,
    cache: Cache | None = None,
    fresh: FreshFiles | None = None,
) -> SpecFile | None:
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
        key = file_key(shown, raw) if cache is not None else None
        known = _known_file(raw, key, cache)
        found, spec, text = known if known is not None else _read_afresh(shown, raw)
        if known is None:
            if fresh is not None:
                fresh.add(key, found, spec)
            elif cache is not None and key is not None:
                cache.put_file(key, found, spec)
        result.findings.extend(found)
        if text is not None:
            result.sources[shown] = text
        return spec
    except Exception as exc:  # a bug of ours must not cost the user the other files
        result.findings.append(internal_error(shown, exc))
        return None


FileRead = tuple[list[Finding], SpecFile | None, str | None]


def _known_file(raw: bytes, key: str | None, cache: Cache | None) -> FileRead | None:
    """What loading, validating and building these very bytes gave before, if the cache
    has it: a warm run neither parses the YAML nor validates nor builds again."""
    if cache is None or key is None or len(raw) > MAX_FILE_BYTES:
        return None
    try:
        text = spec_text(raw)
    except UnicodeDecodeError:
        return None
    known = cache.get_file(key)
    if known is None:
        return None
    found, spec = known
    return found, spec, text


def _read_afresh(shown: str, raw: bytes) -> FileRead:
    """Load, validate and build one file's bytes."""
    loaded = read_spec(shown, raw)
    doc = loaded.document
    if doc is None:
        return loaded.findings, None, None
    found = loaded.findings + validate(doc)
    spec = None
    if buildable(doc):
        spec, built = build(doc)
        found += built
    return found, spec, doc.text


def internal_error(shown: str, exc: BaseException, where: Location | None = None) -> Finding:
    """SL001: a bug of ours met while checking `shown`; the run reports it and exits 2."""
    detail = str(exc)
    detail = detail if len(detail) <= 200 else detail[:200] + "…"
    message = f"internal error while checking {shown} ({type(exc).__name__}: {detail})"
    hint = "please report this as a bug, with the file if you can share it"
    return finding("SL001", message, where or Location(shown, 1, 1), hint)


Analysed = tuple[LoopResult, list[RequirementResult], list[Finding]]

# Wall-clock budget for one loop's analysis. Degree and size caps keep honest models far
# below it (milliseconds); it stops a pathological one from holding up CI.
LOOP_BUDGET_S = 20.0
# Once this many loops of one file have run out of their budget, the file's other loops are
# not analysed: a file of 2,000 slow loops then costs about a minute, not eleven hours.
MAX_EXPIRED_PER_FILE = 3


def _analyse_all(
    found: trace.Index,
    config: Config,
    options: Options,
    meanwhile: Callable[[], None] | None = None,
) -> list[Analysed]:
    """Every loop's figures and verdicts, from the cache where it has them, in loop order;
    `meanwhile` is called once the loops to analyse are under way."""
    cache = Cache(config.root / config.cache_dir) if options.use_cache else None
    work: list[tuple[int, Loop, list[Requirement], str | None]] = []
    out: list[Analysed | None] = []
    by_loop: dict[str, list[Requirement]] = {}
    for req in found.requirements:
        if req.loop is not None:
            by_loop.setdefault(req.loop, []).append(req)
    for loop in found.loops.values():
        mine = by_loop.get(loop.name, [])
        key = loop_key(loop, mine) if cache is not None else None
        hit = cache.get(key) if cache is not None and key is not None else None
        out.append(hit)
        if hit is None:
            work.append((len(out) - 1, loop, mine, key))
    jobs = options.jobs if options.jobs > 0 else default_jobs(len(work))
    # Absolute: a worker from the fork server has the working folder of when it started.
    folder = cache.folder.absolute() if cache is not None else None
    where = [(folder, key) if folder is not None and key is not None else None for *_, key in work]
    done = _run([(loop, mine) for _, loop, mine, _ in work], jobs, where, meanwhile)
    for (slot, _, _, _), analysed in zip(work, done, strict=True):
        out[slot] = analysed
    return [a for a in out if a is not None]


# Where a loop's analysis is kept: the cache folder and the entry's key.
Keep = tuple[Path, str] | None


def _run(
    tasks: list[tuple[Loop, list[Requirement]]],
    jobs: int,
    keep: list[Keep] | None = None,
    meanwhile: Callable[[], None] | None = None,
) -> list[Analysed]:
    """analyse_loop on every task, in worker processes when jobs > 1; a file whose loops keep
    running out of budget has its remaining loops skipped (see MAX_EXPIRED_PER_FILE).
    Each result is written to the cache as ``keep[i]`` says, by the process that made it;
    `meanwhile` is called while the workers are busy, or before the loops without them."""
    keep = keep if keep is not None else [None] * len(tasks)
    done: list[Analysed | None] = [None] * len(tasks)
    expired: dict[str, int] = {}

    def record(i: int, analysed: Analysed) -> bool:
        """Keep the result; True when its file has now used up its allowance."""
        done[i] = analysed
        if any(f.rule == "SL407" for f in analysed[2]):
            path = tasks[i][0].location.path
            expired[path] = expired.get(path, 0) + 1
            return expired[path] == MAX_EXPIRED_PER_FILE
        return False

    if jobs > 1 and len(tasks) > 1:
        from concurrent.futures import ProcessPoolExecutor, as_completed
        from concurrent.futures.process import BrokenProcessPool

        try:
            context = worker_context()
            _start_fork_server(context)
            # gc.freeze as each worker starts: the cycle collector then leaves the objects
            # inherited from the fork server alone, instead of writing to them and so
            # giving each worker its own copy of their pages (copy-on-write).
            pool = ProcessPoolExecutor(jobs, mp_context=context, initializer=gc.freeze)
            try:
                futures = {
                    pool.submit(analyse_chunk, [(tasks[i], keep[i]) for i in chunk]): chunk
                    for chunk in _chunks(tasks, jobs)
                }
                if meanwhile is not None:
                    meanwhile()
                for future in as_completed(futures):
                    if future.cancelled():
                        continue
                    chunk = futures[future]
                    used_up = [
                        record(i, analysed)
                        for i, analysed in zip(chunk, future.result(), strict=True)
                        if analysed is not None
                    ]
                    if any(used_up):
                        path = tasks[chunk[0]][0].location.path
                        for other, others in futures.items():
                            if tasks[others[0]][0].location.path == path:
                                other.cancel()  # only those not yet started; the rest finish
            except BaseException as exc:
                # The executor keeps its worker processes in `_processes` (nothing public
                # reaches them), and forgets them on shutdown.
                workers = list((getattr(pool, "_processes", None) or {}).values())
                # Interrupted (Ctrl-C) or broken: drop the loops not started instead of
                # waiting for all of them.
                pool.shutdown(wait=False, cancel_futures=True)
                if isinstance(exc, KeyboardInterrupt):
                    # The workers ignore Ctrl-C (see _start_fork_server): end them now
                    # rather than after the loops they hold.
                    for process in workers:
                        process.terminate()
                raise
            pool.shutdown()
        except (OSError, BrokenProcessPool):
            # No workers to be had (processes refused), or one died (killed, out of
            # memory): the loops without an answer yet are analysed below, in this process.
            pass
    if meanwhile is not None:
        meanwhile()  # again after workers: FreshFiles.keep writes each entry once
    for i, task in enumerate(tasks):
        if done[i] is None and expired.get(task[0].location.path, 0) < MAX_EXPIRED_PER_FILE:
            record(i, analyse_and_keep(task, keep[i]))
    return [d if d is not None else _skipped(*tasks[i]) for i, d in enumerate(done)]


# Loops sent to a worker at a time: each message to and from a worker costs the process
# collecting results about 0.4 ms, and a few loops keep the last ones from leaving one
# worker idle for long.
CHUNK = 4


def _chunks(tasks: list[tuple[Loop, list[Requirement]]], jobs: int) -> list[list[int]]:
    """Consecutive task numbers of one file each, CHUNK at most (one each when there are
    too few tasks to keep every worker busy with several chunks)."""
    size = max(1, min(CHUNK, len(tasks) // (jobs * 8)))
    chunks: list[list[int]] = []
    for i, (loop, _) in enumerate(tasks):
        last = chunks[-1] if chunks else None
        if (
            last is not None
            and len(last) < size
            and tasks[last[0]][0].location.path == loop.location.path
        ):
            last.append(i)
        else:
            chunks.append([i])
    return chunks


def analyse_chunk(
    items: list[tuple[tuple[Loop, list[Requirement]], Keep]],
) -> list[Analysed | None]:
    """analyse_and_keep on loops of one file; once MAX_EXPIRED_PER_FILE of them ran out of
    their budget, the rest are left (None), as the run leaves the file's other loops."""
    out: list[Analysed | None] = []
    expired = 0
    for task, keep in items:
        if expired >= MAX_EXPIRED_PER_FILE:
            out.append(None)
            continue
        analysed = analyse_and_keep(task, keep)
        expired += any(f.rule == "SL407" for f in analysed[2])
        out.append(analysed)
    return out


def _skipped(loop: Loop, requirements: list[Requirement]) -> Analysed:
    from speclint import judge

    msg = (
        f"loops.{loop.name}: not analysed: {MAX_EXPIRED_PER_FILE} loops of this file already "
        f"ran out of their {LOOP_BUDGET_S:g} s time budget"
    )
    hint = "simplify the slow loops first (lower degree, fewer constants)"
    stopped = finding("SL407", msg, loop.location, hint, subject=loop.name)
    why = "not analysed (time budget of the file)"
    return judge.unanalysed_loop(loop), [judge.invalid(r, why) for r in requirements], [stopped]


# Loops to analyse from which worker processes repay their start.
PARALLEL_FROM = 24


def default_jobs(loops_to_analyse: int) -> int:
    """Worker processes: one per core once there are enough loops to repay starting them."""
    return usable_cores() if loops_to_analyse >= PARALLEL_FROM else 1


# What the worker processes need, imported once by the fork server they are forked from
# (over a second: sympy, numpy, scipy), so that they start ready and share those pages.
_WORKER_PRELOAD = ["speclint.judge", "scipy.optimize"]


def worker_context() -> BaseContext:
    """How worker processes are made: forked from a fork server that has the analysis
    libraries loaded where the platform has one (POSIX); started afresh elsewhere."""
    import multiprocessing

    if "forkserver" not in multiprocessing.get_all_start_methods():
        return multiprocessing.get_context("spawn")
    context = multiprocessing.get_context("forkserver")
    context.set_forkserver_preload(_WORKER_PRELOAD)  # no effect once the server runs
    return context


class FreshFiles:
    """What a run does with the files it had to read afresh (not in the cache).

    It starts the fork server as soon as they hold enough loops to be analysed in parallel,
    so that its imports run on another core while this process goes on reading, parsing
    and validating: on a cold run over many loops that hides most of their cost (a guess
    made before the cache is asked about the loops: a wrong guess costs an idle process,
    not time). And it keeps their cache entries until `keep` is called, which the
    analysis does once its workers are busy: encoding a file's built model is a good part
    of reading it, and then it no longer holds the workers up.
    """

    def __init__(self, jobs: int, cache: Cache | None) -> None:
        self.jobs = jobs
        self.cache = cache
        self.loops = 0
        self.started = False
        self.pending: list[tuple[str, list[Finding], SpecFile | None]] = []

    def add(self, key: str | None, found: list[Finding], spec: SpecFile | None) -> None:
        """A file read afresh: its findings, its model (None when it has errors)."""
        if self.cache is not None and key is not None:
            self.pending.append((key, found, spec))
        if spec is not None:
            self._count(len(spec.loops))

    def keep(self) -> None:
        """Write the files' cache entries (those not written yet)."""
        pending, self.pending = self.pending, []
        if self.cache is not None:
            for key, found, spec in pending:
                self.cache.put_file(key, found, spec)

    def _count(self, loops: int) -> None:
        if self.started or self.jobs == 1:
            return
        self.loops += loops
        enough = self.loops >= (2 if self.jobs > 1 else PARALLEL_FROM)
        if enough and (self.jobs > 1 or usable_cores() > 1):
            self.started = True
            # Should it fail, the pool meets the same failure later and the loops are
            # analysed in this process (see _run): nothing to report here.
            with suppress(OSError):
                _start_fork_server(worker_context())


def _start_fork_server(context: BaseContext) -> None:
    """Start the fork server (once) with Ctrl-C ignored: the server and the workers forked
    from it inherit that, so an interrupted run ends in this process alone, with one line
    instead of a traceback from every process."""
    if context.get_start_method() != "forkserver":
        return
    from multiprocessing import forkserver

    in_main = threading.current_thread() is threading.main_thread()
    previous = signal.signal(signal.SIGINT, signal.SIG_IGN) if in_main else None
    try:
        forkserver.ensure_running()
    finally:
        if in_main:
            signal.signal(signal.SIGINT, previous)


def usable_cores() -> int:
    """The cores this process may run on: its affinity mask where the system has one (a
    container or `taskset` may allow fewer than the machine has)."""
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        return os.cpu_count() or 1


def _has_internal_error(analysed: Analysed) -> bool:
    return any(f.rule == "SL001" or f.rule == "SL407" for f in analysed[2])


def analyse_and_keep(task: tuple[Loop, list[Requirement]], keep: Keep) -> Analysed:
    """analyse_loop, and the result written to the cache (unless it failed): in a worker,
    so the process collecting results has nothing to encode or write."""
    analysed = analyse_loop(task)
    if keep is not None and not _has_internal_error(analysed):
        folder, key = keep
        Cache(folder).put(key, *analysed)
    return analysed


def analyse_loop(task: tuple[Loop, list[Requirement]]) -> Analysed:
    """One loop's analysis and verdicts; never raises (a failure becomes a finding)."""
    loop, requirements = task
    # Imported here: the analysis needs sympy and numpy, which a run that only validates
    # (or finds everything in the cache) must not pay for.
    from speclint import judge
    from speclint.analysis import forget

    if loop.delay is not None or any(
        isinstance(c, MarginLimits) for r in requirements for c in r.criteria
    ):
        # The frequency searches need scipy (half a second to import): loaded here, before
        # the budget's clock starts, so that its signal can never cut an import short.
        import scipy.optimize  # noqa: F401

    try:
        with time_budget(LOOP_BUDGET_S):
            outcome = judge.judge_loop(loop, requirements)
    except BudgetExceeded:
        msg = (
            f"loops.{loop.name}: the analysis took longer than {LOOP_BUDGET_S:g} s and was stopped"
        )
        hint = "simplify the model (lower degree, fewer constants) or report it if it is ordinary"
        stopped = finding("SL407", msg, loop.location, hint, subject=loop.name)
        why = "the loop's analysis was stopped (time budget)"
        return judge.unanalysed_loop(loop), [judge.invalid(r, why) for r in requirements], [stopped]
    except Exception as exc:  # a bug of ours: report it against the loop, go on with the rest
        bug = internal_error(loop.location.path, exc, loop.location)
        why = "internal error"
        return judge.unanalysed_loop(loop), [judge.invalid(r, why) for r in requirements], [bug]
    finally:
        forget()  # per-loop memo caches: a worker's memory stays that of one loop
    return outcome.loop, outcome.requirements, outcome.findings


class BudgetExceeded(BaseException):
    """A loop's analysis ran past its time budget.

    A BaseException, like KeyboardInterrupt, so that no ``except Exception`` inside the
    libraries the analysis calls can swallow it and carry on past the budget.
    """


@contextmanager
def time_budget(seconds: float) -> Iterator[None]:
    """Raise BudgetExceeded in this thread after `seconds` (POSIX main thread only; elsewhere
    no budget applies). Python handles the signal between bytecodes, so a single long call
    into C code ends first; the size caps on models keep such calls short."""
    usable = hasattr(signal, "setitimer") and threading.current_thread() is threading.main_thread()
    if not usable:
        yield
        return
    armed = [True]

    def expire(signum: int, frame: object) -> None:
        if armed[0]:  # a signal that lands after the budget closed is ignored
            raise BudgetExceeded

    previous = signal.signal(signal.SIGALRM, expire)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        armed[0] = False
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


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
