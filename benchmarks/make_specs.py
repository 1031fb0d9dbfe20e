"""Write a synthetic spec repository: N loops of degree 2-8, three requirements each.

The loops are meant to look like the drive and process loops a machine builder keeps:
speed loops (motor and inertia, current-loop lag, PI controller, sensor filter), position
loops (integrating plant, proportional or lead controller), process loops (a chain of lags
with dead time, PI controller) and loops with a lightly damped mechanical resonance above
the bandwidth. Each loop's nominal gain is set for a phase margin of 40-65° (found
numerically on the frequency response, then rounded to three significant digits) and the
generator keeps only loops that are stable at that gain with a gain margin of at least
4 dB, so the analysis runs the paths real specs take, not the unusual ones.

Each loop gets three requirements: a tracking limit (step, ramp or parabola by the loop's
type), an error-constant minimum and stability margins (gain and phase always; delay
margin or sensitivity peak on some). Limits sit between half and three times what the
loop achieves, so most are met and some need a retune or cannot be met. Ten loops and
their thirty requirements go in one file; a system file holds the roots they trace to.

The data is invented for benchmarking; the floating-point design work here never touches
speclint's exact analysis, which reads only the rounded decimals written to YAML.

    python benchmarks/make_specs.py OUT_DIR --loops 100 [--seed 1] [--per-file 10]
"""

from __future__ import annotations

import argparse
import math
import random
from dataclasses import dataclass
from pathlib import Path

import numpy as np

ROOTS = (
    ("BM-SYS-001", "Products are handled at the rated pace"),
    ("BM-SYS-002", "Motion follows the machine profile"),
    ("BM-SYS-003", "Process values are held at their set points"),
    ("BM-SAF-001", "Loops keep stability margins"),
)


@dataclass(frozen=True)
class Design:
    """One loop as written to YAML, with what the generator computed for its limits."""

    kind: str
    plant: str
    controller: str
    feedback: str | None
    constants: dict[str, str]
    delay: str | None
    nominal: str
    loop_type: int
    constant: float  # Kp, Kv or Ka by the type, at the nominal gain (H(0) = 1 throughout)
    delay_margin: float


def sig(x: float, digits: int = 3) -> str:
    """x rounded to `digits` significant digits, written as a plain decimal."""
    if x == 0:
        return "0"
    exponent = math.floor(math.log10(abs(x)))
    decimals = max(digits - 1 - exponent, 0)
    text = f"{round(x, decimals):.{decimals}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text


def _lag(tau: float) -> tuple[str, np.ndarray]:
    return f"1/({sig(tau)}*s + 1)", np.array([float(sig(tau)), 1.0])


def _poly_mul(polys: list[np.ndarray]) -> np.ndarray:
    out = np.array([1.0])
    for p in polys:
        out = np.polymul(out, p)
    return out


def _response(num: np.ndarray, den: np.ndarray, delay: float, w: np.ndarray) -> np.ndarray:
    s = 1j * w
    return np.asarray(np.polyval(num, s) / np.polyval(den, s) * np.exp(-s * delay))


def _tune(
    num: np.ndarray, den: np.ndarray, delay: float, rng: random.Random
) -> tuple[float, float] | None:
    """A gain for a phase margin of 40-65° and the delay margin there, or None."""
    w = np.geomspace(1e-3, 1e6, 40000)
    resp = _response(num, den, delay, w)
    phase = np.unwrap(np.angle(resp))
    target = math.radians(-180 + rng.uniform(40, 65))
    # The highest frequency where the phase falls through the target: the bandwidth a
    # commissioning engineer would aim for (a PI zero or a lead lifts the phase after a dip;
    # for a type-2 loop the phase first rises from -180°).
    falling = np.nonzero((phase[:-1] > target) & (phase[1:] <= target))[0]
    if len(falling) == 0:
        return None
    i = int(falling[-1]) + 1
    k = 1.0 / abs(resp[i])
    k = float(sig(k))
    mag = k * np.abs(resp)
    # Stable with margins: one gain crossover, and |L| at least 4 dB below 1 wherever the
    # phase passes -180° (a Nyquist check on the grid; the loops are open-loop stable).
    crossing = np.nonzero(np.diff(np.sign(mag - 1.0)))[0]
    if len(crossing) != 1:
        return None
    wrapped = np.angle(resp * np.exp(1j * math.pi))  # 0 where the phase is -180°
    at_180 = np.nonzero(np.diff(np.sign(wrapped)) != 0)[0]
    for j in at_180:
        if abs(wrapped[j]) < 1.0 and mag[j] > 10 ** (-4 / 20):
            return None
    if delay == 0.0:
        closed = np.polyadd(den, k * num)
        if np.any(np.roots(closed).real >= 0):
            return None
    wc = float(w[crossing[0]])
    pm = math.pi + float(phase[crossing[0]])
    return k, pm / wc if wc > 0 else math.inf


def design(rng: random.Random, index: int) -> Design:
    """One realistic loop of loop degree 2-8, stable at its nominal gain."""
    while True:
        made = _attempt(rng, index)
        if made is not None:
            return made


def _attempt(rng: random.Random, index: int) -> Design | None:
    degree = rng.randint(2, 8)
    kind = rng.choice(("speed", "position", "process", "resonant"))
    constants: dict[str, str] = {}
    dens: list[np.ndarray] = []
    nums: list[np.ndarray] = [np.array([1.0])]
    plant_parts: list[str] = []
    controller = "K"
    feedback: str | None = None
    delay = 0.0
    ctrl_den: list[np.ndarray] = []
    ctrl_num: list[np.ndarray] = [np.array([1.0])]
    used = 0
    if kind == "speed":
        kt, inertia, b = rng.uniform(0.2, 2), rng.uniform(0.0005, 0.05), rng.uniform(0.001, 0.02)
        constants = {"kt": sig(kt), "J": sig(inertia), "b": sig(b)}
        plant_parts.append("kt/(J*s + b)")
        nums.append(np.array([float(sig(kt))]))
        dens.append(np.array([float(sig(inertia)), float(sig(b))]))
        zero = rng.uniform(2, 30)
        controller = f"K*(s + {sig(zero)})/s"
        ctrl_num.append(np.array([1.0, float(sig(zero))]))
        ctrl_den.append(np.array([1.0, 0.0]))
        used = 2
        degree = max(degree, 3)  # a current-loop lag at least: PI on a bare lag has no bandwidth
    elif kind == "position":
        gain = rng.uniform(5, 80)
        tau = rng.uniform(0.01, 0.2)
        plant_parts.append(f"{sig(gain)}/(s*({sig(tau)}*s + 1))")
        nums.append(np.array([float(sig(gain))]))
        dens += [np.array([1.0, 0.0]), np.array([float(sig(tau)), 1.0])]
        used = 2
        style = rng.random()
        if degree >= 3 and style < 0.25:
            # type 2: PI on an integrating plant, for tracking ramps without error
            zero = rng.uniform(0.05, 0.2) / tau
            controller = f"K*(s + {sig(zero)})/s"
            ctrl_num.append(np.array([1.0, float(sig(zero))]))
            ctrl_den.append(np.array([1.0, 0.0]))
            used = 3
        elif degree >= 3 and style < 0.6:
            zero, pole = rng.uniform(2, 10), rng.uniform(30, 120)
            controller = f"K*(s + {sig(zero)})/(s + {sig(pole)})"
            ctrl_num.append(np.array([1.0, float(sig(zero))]))
            ctrl_den.append(np.array([1.0, float(sig(pole))]))
            used = 3
    elif kind == "process":
        gain = rng.uniform(0.5, 5)
        tau = rng.uniform(2, 60)
        plant_parts.append(f"{sig(gain)}/({sig(tau)}*s + 1)")
        nums.append(np.array([float(sig(gain))]))
        dens.append(np.array([float(sig(tau)), 1.0]))
        delay = float(sig(rng.uniform(0.05, 0.3) * tau)) if rng.random() < 0.6 else 0.0
        used = 1
        if rng.random() < 0.7:
            zero = 1.0 / (tau * rng.uniform(0.5, 1.5))
            controller = f"K*(s + {sig(zero)})/s"
            ctrl_num.append(np.array([1.0, float(sig(zero))]))
            ctrl_den.append(np.array([1.0, 0.0]))
            used = 2
    else:  # resonant: a two-mass drive, PI speed control, resonance above the bandwidth
        gain, pole = rng.uniform(10, 200), rng.uniform(0.5, 5)
        plant_parts.append(f"{sig(gain)}/(s + {sig(pole)})")
        nums.append(np.array([float(sig(gain))]))
        dens.append(np.array([1.0, float(sig(pole))]))
        wn, zeta = rng.uniform(200, 1500), rng.uniform(0.05, 0.3)
        wn_s, two_zw = sig(wn * wn), sig(2 * zeta * wn)
        plant_parts.append(f"{wn_s}/(s^2 + {two_zw}*s + {wn_s})")
        nums.append(np.array([float(wn_s)]))
        dens.append(np.array([1.0, float(two_zw), float(wn_s)]))
        zero = rng.uniform(5, 30)
        controller = f"K*(s + {sig(zero)})/s"
        ctrl_num.append(np.array([1.0, float(sig(zero))]))
        ctrl_den.append(np.array([1.0, 0.0]))
        used = 4
        if degree < 4:
            degree = 4
    # Fill up to the degree with fast lags: amplifier, filters, a sensor lag on the feedback.
    fastest = 0.0005 if kind != "process" else 0.2
    while used < degree:
        if feedback is None and rng.random() < 0.4:
            tau = rng.uniform(1, 4) * fastest
            feedback, den = _lag(tau)
            dens.append(den)
        else:
            tau = rng.uniform(1, 10) * fastest
            text, den = _lag(tau)
            plant_parts.append(text)
            dens.append(den)
        used += 1
    if kind != "process" and rng.random() < 0.2:
        delay = float(sig(rng.uniform(0.5, 3) * fastest))
    num = _poly_mul(nums + ctrl_num)
    den = _poly_mul(dens + ctrl_den)
    tuned = _tune(num, den, delay, rng)
    if tuned is None:
        return None
    k, delay_margin = tuned
    loop_type = sum(1 for d in dens + ctrl_den if d[-1] == 0.0)
    # The matching error constant at the nominal gain: lim s^type·K·N/D at s = 0.
    stripped = _poly_mul([d for d in dens + ctrl_den if d[-1] != 0.0] or [np.array([1.0])])
    constant = k * float(np.polyval(num, 0.0)) / float(np.polyval(stripped, 0.0))
    return Design(
        kind=kind,
        plant=" * ".join(plant_parts),
        controller=controller,
        feedback=feedback,
        constants=constants,
        delay=sig(delay) if delay else None,
        nominal=sig(k),
        loop_type=loop_type,
        constant=constant,
        delay_margin=delay_margin,
    )


def _loop_yaml(name: str, d: Design) -> str:
    k = float(d.nominal)
    lines = [
        f"  {name}:",
        f"    description: Synthetic {d.kind} loop for benchmarking.",
        f'    plant: "{d.plant}"',
        f'    controller: "{d.controller}"',
    ]
    if d.feedback:
        lines.append(f'    feedback: "{d.feedback}"')
    lines.append(
        f"    gain: {{symbol: K, nominal: {d.nominal}, limits: [{sig(k / 20)}, {sig(k * 20)}]}}"
    )
    if d.delay:
        lines.append(f"    delay: {d.delay}")
    if d.constants:
        lines.append("    constants:")
        lines += [f"      {key}: {value}" for key, value in d.constants.items()]
    return "\n".join(lines) + "\n"


def _requirements_yaml(name: str, number: int, d: Design, rng: random.Random) -> str:
    reference = ("step", "ramp", "parabola")[min(d.loop_type, 2)]
    which = ("kp", "kv", "ka")[min(d.loop_type, 2)]
    constant = d.constant if d.loop_type <= 2 else 1e6
    magnitude = rng.choice((1, 10, 50, 100, 200))
    if reference == "step":
        achieved = magnitude / (1 + constant)
    else:
        achieved = magnitude / constant
    max_error = sig(achieved * rng.uniform(0.5, 3), 2)
    min_constant = sig(constant / rng.uniform(0.5, 3), 2)
    margins = [f"min_gain_margin_db: {rng.choice((4, 6, 8))}"]
    margins.append(f"min_phase_margin_deg: {rng.choice((30, 35, 40, 45))}")
    extra = rng.random()
    if extra < 0.25 and math.isfinite(d.delay_margin):
        margins.append(f"min_delay_margin_s: {sig(d.delay_margin * rng.uniform(0.3, 1.2), 2)}")
    elif extra < 0.5:
        margins.append(f"max_sensitivity_peak: {rng.choice((1.6, 2, 2.5))}")
    root = {"speed": "BM-SYS-001", "position": "BM-SYS-002", "process": "BM-SYS-003"}
    parent = root.get(d.kind, "BM-SYS-002")
    ident = f"BM-L{number:04d}"
    return (
        f"  - id: {ident}-010\n"
        f"    title: {name} follows its {reference} references\n"
        f"    traces_to: [{parent}]\n"
        f"    loop: {name}\n"
        f"    tracking: {{reference: {reference}, magnitude: {magnitude}, max_error: {max_error}}}\n"
        f"    verification: {{method: analysis}}\n"
        f"  - id: {ident}-011\n"
        f"    title: {name} error constant\n"
        f"    traces_to: [{parent}]\n"
        f"    loop: {name}\n"
        f"    error_constants: {{min_{which}: {min_constant}}}\n"
        f"    verification: {{method: analysis}}\n"
        f"  - id: {ident}-012\n"
        f"    title: {name} stability margins\n"
        f"    traces_to: [BM-SAF-001]\n"
        f"    loop: {name}\n"
        f"    margins: {{{', '.join(margins)}}}\n"
        f"    verification: {{method: analysis}}\n"
    )


def write_repository(out: Path, loops: int, seed: int = 1, per_file: int = 10) -> list[Path]:
    """Write the repository under `out` (created; existing spec files are replaced)."""
    rng = random.Random(seed)
    specs = out / "specs"
    specs.mkdir(parents=True, exist_ok=True)
    for old in specs.glob("*.yaml"):
        old.unlink()
    (out / "pyproject.toml").write_text(
        '[tool.speclint]\npaths = ["specs"]\ninclude = ["*.yaml"]\n', encoding="utf-8"
    )
    roots = "".join(
        f"  - id: {rid}\n    title: {title}\n    origin: benchmark data, invented\n"
        f"    verification: {{method: inspection}}\n"
        for rid, title in ROOTS
    )
    written = [specs / "system.yaml"]
    written[0].write_text(
        f"speclint: 1\ntitle: Benchmark machine — system requirements\nrequirements:\n{roots}",
        encoding="utf-8",
    )
    for start in range(0, loops, per_file):
        count = min(per_file, loops - start)
        loop_text, req_text = [], []
        for number in range(start + 1, start + count + 1):
            d = design(rng, number)
            name = f"loop-{number:04d}-{d.kind}"
            loop_text.append(_loop_yaml(name, d))
            req_text.append(_requirements_yaml(name, number, d, rng))
        path = specs / f"line-{start // per_file + 1:03d}.yaml"
        path.write_text(
            f"speclint: 1\ntitle: Benchmark line {start // per_file + 1}\n"
            f"loops:\n{''.join(loop_text)}requirements:\n{''.join(req_text)}",
            encoding="utf-8",
        )
        written.append(path)
    return written


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path, help="folder to write the repository into")
    parser.add_argument("--loops", type=int, default=100)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--per-file", type=int, default=10)
    args = parser.parse_args()
    files = write_repository(args.out, args.loops, args.seed, args.per_file)
    print(f"wrote {len(files)} files, {args.loops} loops, under {args.out}")


if __name__ == "__main__":
    main()
