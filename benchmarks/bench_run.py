"""Measure speclint end to end, and its analysis against the naive route.

    python benchmarks/bench_run.py [--sizes 10 100 1000] [--repeat 3] [--naive-loops 200]

1. For each size, a synthetic spec repository (benchmarks/make_specs.py, seeded) is checked
   by a fresh `python -m speclint check --format json` process: cold (empty cache), warm
   (everything cached) and after one file changed (one loop's nominal gain edited). Each
   wall time is the median of --repeat runs (with their range). Peak memory is given
   twice: the largest single process (its peak resident set, from getrusage of every
   process of the runs, the fork server and its workers included) and all processes of
   the run together (their proportional set sizes summed, which counts a shared page once;
   sampled every 20 ms, so a shorter peak can be missed). The sampling costs CPU, so it
   runs in one extra run of each kind whose wall time is not counted.
2. On --naive-loops loops, speclint's full analysis (judge.judge_loop: figures, gain sets,
   verdicts) is timed against the naive route: sympy's `limit` for Kp, Kv, Ka at the
   nominal gain, python-control's `stability_margins` for the margins (with an 8th-order
   Padé approximant where there is dead time), and a dense gain sweep with numpy's
   polynomial roots for the stable range (a Padé approximant of the dead time). The
   answers are compared: the constants exactly, the margins and range ends to the naive
   route's own accuracy.

The machine it ran on is printed first. Timings on a machine shared with other work vary:
compare the load average printed with each section.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from fractions import Fraction
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(HERE))

import make_specs  # noqa: E402

TARGETS = {
    "demo warm": 0.3,
    "1000 cold": 10.0,
    "1000 cold MB": 300.0,
    "1000 warm": 1.0,
    "full ratio": 30.0,
    "steady ratio": 20.0,
}


def machine() -> str:
    model = platform.processor() or "unknown CPU"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    try:
        cores = len(os.sched_getaffinity(0))
    except AttributeError:
        cores = os.cpu_count() or 1
    import numpy
    import sympy
    from sympy.external.gmpy import GROUND_TYPES

    return (
        f"machine: {cores} cores ({os.cpu_count()} online), {model}\n"
        f"python {platform.python_version()} ({platform.python_implementation()}), "
        f"sympy {sympy.__version__} (ground types {GROUND_TYPES}), numpy {numpy.__version__}, "
        f"{platform.system()} {platform.release()}"
    )


def load() -> str:
    one, five, _ = os.getloadavg()
    return f"load average {one:.2f} (1 min), {five:.2f} (5 min)"


# -- end to end -----------------------------------------------------------------------------


def _pss(pid: int) -> int:
    """Proportional set size of a process in bytes: its private memory plus its share of
    pages it shares with others (libraries), so that a sum over processes counts each
    page once."""
    try:
        for line in Path(f"/proc/{pid}/smaps_rollup").read_text().splitlines():
            if line.startswith("Pss:"):
                return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    return 0


def _tree_rss(pid: int) -> int:
    """Memory of all descendants of a process (not itself), in bytes: their proportional
    set sizes summed (Linux /proc)."""
    children: dict[int, list[int]] = {}
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
            parent = int(stat[stat.rindex(")") + 2 :].split()[1])
        except (OSError, ValueError, IndexError):
            continue
        children.setdefault(parent, []).append(int(entry.name))
    total, todo = 0, list(children.get(pid, []))
    while todo:
        p = todo.pop()
        total += _pss(p)
        todo += children.get(p, [])
    return total


# The child that runs one check. It adopts the run's orphans (the fork server outlives the
# speclint process by a moment and is nobody's child then) and reaps every one of them, so
# that getrusage of its children covers every process of the run.
PROBE = """\
import ctypes, json, os, resource, subprocess, sys
ctypes.CDLL(None, use_errno=True).prctl(36, 1, 0, 0, 0)  # PR_SET_CHILD_SUBREAPER (Linux)
code = subprocess.run(json.loads(sys.argv[1]), stdout=subprocess.DEVNULL).returncode
while True:
    try:
        os.wait()
    except ChildProcessError:
        break
print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss, code)
"""


def timed_run(cwd: Path, *args: str, memory: bool = False) -> tuple[float, float, float, int]:
    """(wall s, largest process MB, all processes MB, exit code) of one speclint check.

    The sum over all processes needs /proc sampled every 20 ms, which costs a few ms of
    CPU each time on a 2-core machine; it is taken only when `memory` is set (0 otherwise),
    and such a run's wall time is not used."""
    command = [sys.executable, "-m", "speclint", "check", "--format", "json", *args]
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    env.pop("PYTHONDONTWRITEBYTECODE", None)  # an installed speclint has its bytecode
    start = time.perf_counter()
    helper = subprocess.Popen(
        [sys.executable, "-c", PROBE, json.dumps(command)],
        cwd=cwd,
        env=env,
        stdout=subprocess.PIPE,
        text=True,
    )
    peak = 0
    stop = threading.Event()

    def sample() -> None:
        nonlocal peak
        while not stop.is_set():
            peak = max(peak, _tree_rss(helper.pid))
            stop.wait(0.02)

    sampler = threading.Thread(target=sample, daemon=True)
    if memory:
        sampler.start()
    out, _ = helper.communicate()
    wall = time.perf_counter() - start
    stop.set()
    if memory:
        sampler.join()
    largest_kb, code = (int(x) for x in out.split())
    return wall, largest_kb / 1024, peak / 2**20, code


def _median_runs(
    runs: list[tuple[float, float, float, int]], sampled: tuple[float, float, float, int]
) -> tuple[float, float, float, float, float]:
    """(median wall, fastest, slowest, largest process MB, all processes MB)."""
    walls = [r[0] for r in runs]
    return (
        statistics.median(walls),
        min(walls),
        max(walls),
        max(r[1] for r in [*runs, sampled]),
        sampled[2],
    )


def _change_one_file(repo: Path, step: int) -> None:
    """Edit the nominal gain of the first loop in the first line file (a new value each time)."""
    path = sorted((repo / "specs").glob("line-*.yaml"))[0]
    text = path.read_text()
    match = re.search(r"nominal: ([0-9.]+)", text)
    assert match is not None
    value = Fraction(match.group(1)) * Fraction(1000 + step, 1000)
    new = make_specs.sig(float(value), 4)
    path.write_text(text[: match.start(1)] + new + text[match.end(1) :])


def end_to_end(size: int, repeat: int, seed: int, work: Path) -> dict[str, tuple[float, ...]]:
    """Each kind of run `repeat` times for the wall time, and once more with the memory
    sampler for the memory of all processes together."""
    repo = work / f"repo-{size}"
    make_specs.write_repository(repo, size, seed)
    cache = repo / ".speclint_cache"
    out: dict[str, tuple[float, ...]] = {}
    cold = []
    for _ in range(repeat + 1):
        shutil.rmtree(cache, ignore_errors=True)
        cold.append(timed_run(repo, memory=len(cold) == repeat))
    out["cold"] = _median_runs(cold[:-1], cold[-1])
    warm = [timed_run(repo, memory=i == repeat) for i in range(repeat + 1)]
    out["warm"] = _median_runs(warm[:-1], warm[-1])
    changed = []
    for step in range(repeat + 1):
        _change_one_file(repo, step + 1)
        changed.append(timed_run(repo, memory=step == repeat))
    out["one file changed"] = _median_runs(changed[:-1], changed[-1])
    codes = {r[3] for r in cold + warm + changed}
    if not codes <= {0, 1}:
        raise SystemExit(f"speclint exited with {codes} on the {size}-loop repository")
    return out


def demo_warm(repeat: int) -> float:
    work = Path(tempfile.mkdtemp(prefix="speclint-demo-"))
    shutil.copytree(ROOT / "examples", work / "examples")
    (work / "pyproject.toml").write_text('[tool.speclint]\npaths = ["examples"]\n')
    timed_run(work)  # fills the cache
    timed_run(work)  # and the bytecode
    runs = [timed_run(work, "--format", "console") for _ in range(max(repeat, 5))]
    shutil.rmtree(work)
    return statistics.median(r[0] for r in runs)


# -- against the naive route ----------------------------------------------------------------


def _models(repo: Path) -> list[tuple[object, object, list[object]]]:
    from speclint import judge, trace
    from speclint.discover import display_path, find_config, spec_files
    from speclint.pipeline import _read_one
    from speclint.results import RunResult

    config = find_config(repo, None)
    files, _ = spec_files(config, [], repo)
    result = RunResult(files=[], findings=[])
    specs = [s for p in files if (s := _read_one(p, display_path(p, repo), result)) is not None]
    found = trace.index(specs, [])
    out = []
    for loop in found.loops.values():
        model = judge.read_model(loop, [])
        reqs = [r for r in found.requirements if r.loop == loop.name]
        out.append((loop, model, reqs))
    return out


def _naive_constants(model: object) -> tuple[object, ...]:
    import sympy

    from speclint.analysis.algebra import K, S

    gain = sympy.Rational(model.nominal.numerator, model.nominal.denominator)  # type: ignore[attr-defined]
    c, g, h = (
        (b.num.as_expr() / b.den.as_expr()).subs(K, gain)
        for b in (model.controller, model.plant, model.feedback)  # type: ignore[attr-defined]
    )
    delay = model.delay  # type: ignore[attr-defined]
    if delay:
        c = c * sympy.exp(-S * sympy.Rational(delay.numerator, delay.denominator))
    ge = c * g / (1 + c * g * (h - 1))
    out = []
    for n in range(3):
        expr = S**n * ge
        value = sympy.limit(expr if delay else sympy.cancel(expr), S, 0, "+")
        out.append(sympy.oo if value in (sympy.oo, -sympy.oo, sympy.zoo) else value)
    return tuple(out)


def _float_poly(p: object) -> list[float]:
    return [float(x) for x in p.all_coeffs()]  # type: ignore[attr-defined]


def _naive_margins(model: object) -> tuple[float, float]:
    """(gain margin, phase margin in degrees) from python-control at the nominal gain."""
    import control

    from speclint.analysis.algebra import K, loop_transfer

    lt = loop_transfer(model)  # type: ignore[arg-type]
    k = model.nominal  # type: ignore[attr-defined]
    num = [float(c) for c in lt.num.eval(K, k).all_coeffs()]
    den = [float(c) for c in lt.den.eval(K, k).all_coeffs()]
    delay = float(model.delay or 0)  # type: ignore[attr-defined]
    system = control.tf(num, den)
    if delay:
        # An 8th-order Padé approximant of the dead time, as a designer would use with
        # python-control (its margins on a dense frequency response took minutes a loop).
        system = system * control.tf(*control.pade(delay, 8))
    gm, pm, _sm, _wpc, _wgc, _wms = control.stability_margins(system)
    return float(gm), float(pm)


def _naive_stable_range(model: object, points: int = 2000) -> list[tuple[float, float]]:
    """Stable gain intervals within the limits from a dense sweep of numpy roots."""
    import control
    import numpy as np

    from speclint.analysis.algebra import K

    lo, hi = (float(x) for x in model.limits.as_floats()[0])  # type: ignore[attr-defined]
    gains = np.geomspace(lo, hi, points)
    delay = float(model.delay or 0)  # type: ignore[attr-defined]
    c, g, h = model.controller, model.plant, model.feedback  # type: ignore[attr-defined]
    dens = c.den * g.den * h.den
    nums = c.num * g.num * h.num
    pade_num, pade_den = control.pade(delay, 8) if delay else ([1.0], [1.0])
    stable = []
    for k in gains:
        kq = Fraction(float(k))
        d = np.array(_float_poly(dens.eval(K, kq)))
        n = np.array(_float_poly(nums.eval(K, kq)))
        poly = np.polyadd(np.polymul(d, pade_den), np.polymul(n, pade_num))
        roots = np.roots(poly)
        stable.append(bool(np.all(roots.real < 0)))
    out: list[tuple[float, float]] = []
    start: float | None = None
    for i, ok in enumerate(stable):
        if ok and start is None:
            start = float(gains[i])
        if not ok and start is not None:
            out.append((start, float(gains[i - 1])))
            start = None
    if start is not None:
        out.append((start, float(gains[-1])))
    return out


def _close(a: float, b: float, rel: float) -> bool:
    if a == b:
        return True
    if not (abs(a) < float("inf") and abs(b) < float("inf")):
        return False
    return abs(a - b) <= rel * max(abs(a), abs(b))


def against_naive(count: int, seed: int, work: Path) -> dict[str, object]:
    import sympy  # noqa: F401  (imports out of the timings)

    from speclint import judge
    from speclint.analysis import steady

    repo = work / "naive"
    make_specs.write_repository(repo, count, seed)
    loops = _models(repo)

    start = time.perf_counter()
    ours = [judge.judge_loop(loop, reqs) for loop, _m, reqs in loops]  # type: ignore[arg-type]
    t_full = time.perf_counter() - start
    start = time.perf_counter()
    ours_steady = [steady.steady_state(m) for _l, m, _r in loops]  # type: ignore[arg-type]
    t_steady = time.perf_counter() - start

    start = time.perf_counter()
    constants = [_naive_constants(m) for _l, m, _r in loops]
    t_limit = time.perf_counter() - start
    start = time.perf_counter()
    margins = [_naive_margins(m) for _l, m, _r in loops]
    t_control = time.perf_counter() - start
    start = time.perf_counter()
    ranges = [_naive_stable_range(m) for _l, m, _r in loops]
    t_sweep = time.perf_counter() - start

    same_constants = sum(
        (ss.kp, ss.kv, ss.ka) == c for ss, c in zip(ours_steady, constants, strict=True)
    )
    gm_ok = pm_ok = range_ok = 0
    disagree: list[str] = []
    step = 0.0
    for (loop, model, _r), outcome, (gm, pm), naive_range in zip(
        loops, ours, margins, ranges, strict=True
    ):
        m = outcome.loop.margins or {}
        rel = 1e-6 if not model.delay else 1e-3  # type: ignore[attr-defined]
        ours_gm = m.get("gain_margin")
        if ours_gm is not None and _close(float(ours_gm), gm, rel):
            gm_ok += 1
        else:
            disagree.append(f"{loop.name}: gain margin {ours_gm} vs {gm}")  # type: ignore[attr-defined]
        ours_pm = m.get("phase_margin_deg")
        if ours_pm is not None and _close(float(ours_pm), pm, rel):
            pm_ok += 1
        else:
            disagree.append(f"{loop.name}: phase margin {ours_pm} vs {pm}")  # type: ignore[attr-defined]
        lo, hi = model.limits.as_floats()[0]  # type: ignore[attr-defined]
        step = (hi / lo) ** (1 / 1999) - 1
        # A sweep end lies within one grid step inside the true end (two with dead time,
        # where the Padé approximant moves the boundary a little).
        tol = 2.5 * step if model.delay else 1.01 * step  # type: ignore[attr-defined]
        exact = outcome.loop.stable_gains or []
        if len(exact) == len(naive_range) and all(
            _close(a, c, tol) and _close(b, d, tol)
            for (a, b), (c, d) in zip(exact, naive_range, strict=True)
        ):
            range_ok += 1
        else:
            disagree.append(f"{loop.name}: stable gains {exact} vs sweep {naive_range}")  # type: ignore[attr-defined]
    naive_total = t_limit + t_control + t_sweep
    return {
        "loops": len(loops),
        "delayed": sum(1 for _l, m, _r in loops if m.delay),  # type: ignore[attr-defined]
        "full": t_full,
        "steady": t_steady,
        "limit": t_limit,
        "control": t_control,
        "sweep": t_sweep,
        "naive": naive_total,
        "same_constants": same_constants,
        "gm_ok": gm_ok,
        "pm_ok": pm_ok,
        "range_ok": range_ok,
        "disagree": disagree,
        "step": step,
    }


# -- report -----------------------------------------------------------------------------


def _mark(ok: bool) -> str:
    return "meets" if ok else "MISSES"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="*", default=[10, 100, 1000])
    parser.add_argument("--repeat", type=int, default=3, help="runs per figure (median)")
    parser.add_argument("--naive-loops", type=int, default=200, help="0 skips the comparison")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--json", type=Path, help="also write the figures to this file")
    args = parser.parse_args(argv)

    print(machine())
    print(f"started with {load()}\n")
    work = Path(tempfile.mkdtemp(prefix="speclint-bench-"))
    figures: dict[str, object] = {}
    try:
        demo = demo_warm(args.repeat)
        figures["demo warm"] = demo
        print(f"demo (examples/), warm run, console report: {demo:.3f} s wall (median)")
        print(f"  target ≤ {TARGETS['demo warm']} s: {_mark(demo <= TARGETS['demo warm'])}\n")

        print(
            "size   run               wall s (median, range)   largest process MB"
            "   all processes MB (PSS)"
        )
        for size in args.sizes:
            rows = end_to_end(size, args.repeat, args.seed, work)
            figures[str(size)] = rows
            for name, (wall, fastest, slowest, largest, total) in rows.items():
                spread = f"{wall:6.2f} ({fastest:.2f}-{slowest:.2f})"
                print(f"{size:>5}  {name:<17} {spread:<24} {largest:18.0f}   {total:16.0f}")
            print(f"       ({load()})")
        if 1000 in args.sizes:
            rows = figures["1000"]
            assert isinstance(rows, dict)
            cold, warm = rows["cold"], rows["warm"]
            print(
                f"  1000 cold ≤ {TARGETS['1000 cold']} s: {_mark(cold[0] <= TARGETS['1000 cold'])};"
                f" peak ≤ {TARGETS['1000 cold MB']:.0f} MB (all processes): "
                f"{_mark(cold[4] <= TARGETS['1000 cold MB'])};"
                f" 1000 warm ≤ {TARGETS['1000 warm']} s: {_mark(warm[0] <= TARGETS['1000 warm'])}"
            )

        if args.naive_loops:
            print(
                f"\nfull analysis against the naive route, {args.naive_loops} loops (in process):"
            )
            cmp = against_naive(args.naive_loops, args.seed + 1, work)
            figures["naive"] = {k: v for k, v in cmp.items() if k != "disagree"}
            n = cmp["loops"]
            full, naive = float(cmp["full"]), float(cmp["naive"])  # type: ignore[arg-type]
            steady_t, limit_t = float(cmp["steady"]), float(cmp["limit"])  # type: ignore[arg-type]
            print(f"  loops: {n}, {cmp['delayed']} with dead time")
            print(f"  speclint, full analysis and verdicts : {full:8.2f} s")
            print(
                f"  naive route                          : {naive:8.2f} s "
                f"(limit {cmp['limit']:.2f}, python-control {cmp['control']:.2f}, "
                f"gain sweep {cmp['sweep']:.2f})"
            )
            ratio = naive / full
            print(
                f"  ratio {ratio:.1f}x (target ≥ {TARGETS['full ratio']:.0f}x: "
                f"{_mark(ratio >= TARGETS['full ratio'])})"
            )
            s_ratio = limit_t / steady_t
            print(
                f"  steady state: speclint {steady_t:.3f} s, sympy limit {limit_t:.2f} s, "
                f"ratio {s_ratio:.0f}x (target ≥ {TARGETS['steady ratio']:.0f}x: "
                f"{_mark(s_ratio >= TARGETS['steady ratio'])})"
            )
            print(f"  Kp, Kv, Ka identical to sympy limit: {cmp['same_constants']}/{n} loops")
            print(f"  gain margin agrees with python-control: {cmp['gm_ok']}/{n}")
            print(f"  phase margin agrees with python-control: {cmp['pm_ok']}/{n}")
            print(
                f"  stable range agrees with the sweep (2000 gains, ends within a step): "
                f"{cmp['range_ok']}/{n}"
            )
            for line in list(cmp["disagree"])[:10]:  # type: ignore[call-overload]
                print(f"    {line}")
            print(f"  ({load()})")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    if args.json:
        args.json.write_text(json.dumps(figures, indent=2, default=str))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
