"""Time `speclint check` on every case of the hostile corpus against the 2-second target.

The cases are those of tests/test_hostile.py: the files in tests/hostile/ and the big ones
generated there. Each is checked in-process (after one warm-up run, so module imports are
not counted), best of --repeat runs; then the whole committed corpus is checked once by a
real process, start-up included. Cases slower than the target are marked and make the
exit status 1.

Run from the worktree root: python benchmarks/hostile_corpus.py [--repeat 3] [--target 2]
"""

from __future__ import annotations

import argparse
import io
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from test_hostile import BASE, CORPUS, cases  # noqa: E402

from speclint.cli import main  # noqa: E402


def check_once(folder: Path, name: str) -> tuple[float, int]:
    out, err = io.StringIO(), io.StringIO()
    start = time.perf_counter()
    code = main(["check", f"{name}.yaml", "--no-cache", "--format", "json"], out, err)
    return time.perf_counter() - start, code


def main_(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3, help="runs per case; the best counts")
    parser.add_argument("--target", type=float, default=2.0, help="seconds allowed per case")
    args = parser.parse_args(argv)

    all_cases = cases()
    slow: list[str] = []
    total = 0.0
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        os.chdir(folder)
        for name, make, _rule, _line, _column in all_cases:
            (folder / f"{name}.yaml").write_bytes(make())
        # Warm-up: a clean spec whose loop is analysed, so that every module is imported.
        (folder / "warm-up.yaml").write_text(BASE, encoding="utf-8")
        check_once(folder, "warm-up")
        print(f"{'case':<28} {'seconds':>8}  exit")
        for name, *_ in all_cases:
            best, code = min(check_once(folder, name) for _ in range(args.repeat))
            total += best
            mark = "  SLOW" if best > args.target else ""
            if mark:
                slow.append(name)
            print(f"{name:<28} {best:8.3f}  {code}{mark}")

        files = sorted(p.name for p in CORPUS.glob("*.yaml"))
        for i, name in enumerate(files):
            raw = (CORPUS / name).read_bytes().replace(b"feed", b"feed-%d" % i)
            (folder / name).write_bytes(raw.replace(b"H-1", b"H-1-%d" % i))
        env = {**os.environ, "PYTHONPATH": str(ROOT)}
        start = time.perf_counter()
        done = subprocess.run(
            [sys.executable, "-m", "speclint", "check", "--no-cache", "--format", "json", *files],
            capture_output=True,
            env=env,
            check=False,
        )
        whole = time.perf_counter() - start
    print(f"\n{len(all_cases)} cases, {total:.2f} s in all (in-process, best of {args.repeat})")
    print(
        f"the {len(files)} committed files in one real process: {whole:.2f} s, exit {done.returncode}"
    )
    if slow:
        print(f"over the {args.target:g} s target: {', '.join(slow)}")
        return 1
    print(f"every case within {args.target:g} s")
    return 0


if __name__ == "__main__":
    sys.exit(main_())
