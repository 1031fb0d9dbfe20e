"""Every demo verdict, checked numerically by an independent route.

The reference here is python-control (closed-loop poles of `feedback`, `dcgain` of the
error transfer function, `stability_margins`), with the demo's expressions read by sympy
in the test itself: the demo files are trusted test data, and this route shares no code
with speclint's exact analysis. For every requirement and every admissible interval the
report gives, a gain inside the interval must be stable and meet each criterion; a gain
just outside an end that the loop (not the limits) sets must be unstable or fail one.
Dead time is replaced by a 12th-order Padé approximant (python-control `pade`), which
moves a stability boundary by far less than the 2 % probes used below.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import control
import numpy as np
import pytest
import sympy
import yaml

from conftest import REPO
from speclint.cli import main

PROBE = 0.02  # relative distance of the probes outside an interval's ends


@pytest.fixture(scope="module")
def report() -> dict:
    import io
    import os

    out = io.StringIO()
    cwd = Path.cwd()
    os.chdir(REPO)
    try:
        main(["check", "--no-cache", "--format", "json"], out, io.StringIO())
    finally:
        os.chdir(cwd)
    return json.loads(out.getvalue())


def _loops() -> dict[str, dict]:
    loops: dict[str, dict] = {}
    for path in sorted((REPO / "examples").glob("*.yaml")):
        data = yaml.safe_load(path.read_text(encoding="utf-8"))
        loops.update((data or {}).get("loops") or {})
    return loops


def _tf(text: str, symbol: str | None, gain: float, constants: dict) -> control.TransferFunction:
    s = sympy.Symbol("s")
    names = {"s": s}
    values = {}
    for name, value in constants.items():
        names[name] = sympy.Symbol(name)
        values[names[name]] = value["value"] if isinstance(value, dict) else value
    if symbol:
        names[symbol] = sympy.Symbol(symbol)
        values[names[symbol]] = gain
    expr = sympy.sympify(text.replace("^", "**"), locals=names).subs(values)
    num, den = sympy.fraction(sympy.together(expr))
    to = lambda p: [float(c) for c in sympy.Poly(p, s).all_coeffs()]  # noqa: E731
    return control.tf(to(num), to(den))


def _model(loop: dict, gain: float):
    symbol = (loop.get("gain") or {}).get("symbol")
    constants = loop.get("constants") or {}
    c = _tf(loop.get("controller", "1"), symbol, gain, constants)
    g = _tf(loop["plant"], symbol, gain, constants)
    h = _tf(loop.get("feedback", "1"), symbol, gain, constants)
    delay = float(loop.get("delay") or 0)
    if delay:
        g = g * control.tf(*control.pade(delay, 12))
    return c, g, h


def _stable(c, g, h) -> bool:
    closed = control.feedback(c * g, h)
    return bool(np.all(np.real(control.poles(closed)) < -1e-9))


def _error_tf(c, g, h):
    # e = r − y with y = CG/(1 + CGH) r
    return control.minreal(1 - control.feedback(c * g, h), verbose=False)


def _steady_error(c, g, h, reference: str, magnitude: float) -> float:
    order = {"step": 0, "ramp": 1, "parabola": 2}[reference]
    e = _error_tf(c, g, h)
    s = control.tf("s")
    for _ in range(order):
        e = control.minreal(e / s, verbose=False)
    return magnitude * float(np.real(control.dcgain(e)))


def _holds(criterion: dict, c, g, h) -> bool:
    kind = criterion["kind"]
    required = criterion["required"]
    if kind == "tracking":
        err = _steady_error(c, g, h, criterion["reference"], float(criterion["magnitude"]))
        return abs(err) <= required * (1 + 1e-9)
    if kind == "error_constants":
        ge = control.minreal(
            control.feedback(c * g, h) / (1 - control.feedback(c * g, h)), verbose=False
        )
        s = control.tf("s")
        order = {"kp": 0, "kv": 1, "ka": 2}[criterion["constant"]]
        value = float(np.real(control.dcgain(control.minreal(ge * s**order, verbose=False))))
        return value >= required * (1 - 1e-9)
    if kind == "margins":
        gm, pm, _, _, _, _ = control.stability_margins(c * g * h)
        name = criterion["margin"]
        if name == "gain_margin_db":
            return gm is None or math.isinf(gm) or abs(20 * math.log10(gm)) >= required - 1e-6
        if name == "phase_margin_deg":
            return math.isinf(pm) or abs(pm) >= required - 1e-6
    raise AssertionError(f"criterion kind {kind} not covered by this check")


def _cases(report: dict):
    loops = _loops()
    for req in report["requirements"]:
        if req["status"] in (None, "invalid") or not req["criteria"]:
            continue
        loop = loops[req["loop"]]
        if any(c["kind"] == "disturbance" for c in req["criteria"]):
            continue  # covered by tests/test_steady.py against sympy's limit
        yield req, loop


def test_demo_shows_every_status(report):
    statuses = {r["status"] for r in report["requirements"]}
    assert {"met", "retune", "unreachable", "conflict"} <= statuses


def test_every_demo_admissible_interval_is_right_by_python_control(report):
    checked = 0
    for req, loop in _cases(report):
        limits = (loop.get("gain") or {}).get("limits") or [0, math.inf]
        for lo, hi in req["admissible_gains"] or []:
            lo = 0.0 if lo in ("-inf",) else float(lo)
            hi = math.inf if hi == "inf" else float(hi)
            inside = (
                math.sqrt(lo * hi)
                if lo > 0 and math.isfinite(hi)
                else (lo + 1 if math.isinf(hi) else hi / 2)
            )
            model = _model(loop, inside)
            assert _stable(*model), (req["id"], inside)
            assert all(_holds(c, *model) for c in req["criteria"]), (req["id"], inside)
            for end, probe in ((lo, lo * (1 - PROBE)), (hi, hi * (1 + PROBE))):
                if not math.isfinite(end) or end <= 0 or any(math.isclose(end, x) for x in limits):
                    continue
                model = _model(loop, probe)
                fails = not _stable(*model) or not all(_holds(c, *model) for c in req["criteria"])
                assert fails, (req["id"], "probe outside", probe)
            checked += 1
    assert checked >= 5


def test_demo_nominal_verdicts_agree_with_python_control(report):
    loops = _loops()
    nominal_of = {loop["id"]: loop["gain"]["nominal"] for loop in report["loops"] if loop["gain"]}
    for req, loop in _cases(report):
        model = _model(loop, nominal_of[req["loop"]])
        stable = _stable(*model)
        holds = stable and all(_holds(c, *model) for c in req["criteria"])
        if req["status"] == "met":
            assert holds, req["id"]
        if req["status"] in ("retune", "unreachable"):
            assert not holds, req["id"]
        if req["status"] == "unstable":
            assert not stable, req["id"]
    assert loops
