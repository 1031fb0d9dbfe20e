"""Degenerate loop models through `speclint check --format json`: a clear finding or the right
figures, never an internal error, a division by zero or an overflow.

References: python-control's ``stability_margins`` (a reference library) for margins, sympy's
``limit`` for error constants, numpy's polynomial roots for closed-loop poles, and the
Routh-Hurwitz necessary condition (every coefficient of a stable polynomial is present and of
one sign; common practice).
"""

from __future__ import annotations

import math
import warnings

import control
import numpy as np
import pytest
import sympy

from conftest import findings_of

S = sympy.Symbol("s")


def spec(
    plant: str,
    controller: str | None = '"K"',
    gain: str | None = "{symbol: K, nominal: 1}",
    criterion: str = "error_constants: {min_kv: 0.1}",
) -> str:
    lines = [
        "speclint: 1",
        "loops:",
        "  feed:",
        f"    plant: {plant}",
    ]
    if controller is not None:
        lines.append(f"    controller: {controller}")
    if gain is not None:
        lines.append(f"    gain: {gain}")
    lines += [
        "requirements:",
        "  - id: D-1",
        "    loop: feed",
        "    origin: degenerate models",
        f"    {criterion}",
        "    verification: {method: analysis}",
        "",
    ]
    return "\n".join(lines)


def analyse(speclint, text: str):
    run = speclint({"spec.yaml": text})
    assert "SL001" not in run.codes, findings_of(run)
    assert run.err == ""
    assert run.code in (0, 1)
    return run


def margins_of(num: list[float], den: list[float]) -> tuple[float, float, float, float]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        gm, pm, _sm, wpc, wgc, _wms = control.stability_margins(control.tf(num, den))
    return float(gm), float(pm), float(wpc), float(wgc)


def db(x: float) -> float:
    return 20 * math.log10(x) if math.isfinite(x) else math.inf


def figure(value: object) -> float:
    return math.inf if value == "inf" else float(value)  # type: ignore[arg-type]


# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("plant", "controller", "column"),
    [('"0/(s + 1)"', '"K"', 13), ('"1/(s + 1)"', '"0*K"', 18), ('"0*s/(s*(s + 2))"', '"K"', 13)],
)
def test_zero_numerator_is_a_clear_finding(speclint, plant, controller, column) -> None:
    run = analyse(speclint, spec(plant, controller))
    zero = [f for f in run.report["findings"] if f["rule"] == "SL305"]
    assert zero and zero[0]["column"] == column, findings_of(run)
    assert run.report["requirements"][0]["status"] == "invalid"


def test_leading_zero_coefficients_are_dropped(speclint) -> None:
    run = analyse(speclint, spec('"(0*s^2 + s + 1)/(0*s^3 + s^2 + 2*s)"'))
    loop = run.report["loops"][0]
    # Reference: sympy's limit of s·L(s) with the zero terms removed by hand.
    kv = sympy.limit(S * (S + 1) / (S**2 + 2 * S), S, 0)
    assert loop["type"] == 1 and loop["kv"] == pytest.approx(float(kv), rel=1e-12)
    gm, pm, _wpc, wgc = margins_of([0, 0, 1, 1], [0, 1, 2, 0])
    assert figure(loop["margins"]["gain_margin_db"]) == db(gm)
    assert loop["margins"]["phase_margin_deg"] == pytest.approx(pm, rel=1e-9)
    assert loop["margins"]["gain_crossover_rad_s"] == pytest.approx(wgc, rel=1e-9)
    assert loop["stable"] is True


def test_exact_pole_zero_cancellation_keeps_the_mode(speclint) -> None:
    run = analyse(speclint, spec('"(s + 1)/((s + 1)*(s + 2))"', '"K/s"'))
    assert "SL306" in run.codes  # the shared factor is named
    loop = run.report["loops"][0]
    # Reference: L = K/(s(s + 2)) once cancelled; its frequency response is the same.
    gm, pm, _wpc, wgc = margins_of([1], [1, 2, 0])
    assert figure(loop["margins"]["gain_margin_db"]) == db(gm)
    assert loop["margins"]["phase_margin_deg"] == pytest.approx(pm, rel=1e-9)
    assert loop["margins"]["gain_crossover_rad_s"] == pytest.approx(wgc, rel=1e-9)
    assert loop["kv"] == pytest.approx(float(sympy.limit(S / (S * (S + 2)), S, 0)), rel=1e-12)
    # The cancelled root s = -1 is a closed-loop root: (s + 1)(s² + 2s + K) for every K > 0.
    for k in (0.5, 1.0, 50.0):
        roots = np.roots(np.polymul([1, 1], [1, 2, k]))
        assert max(roots.real) < 0
    assert loop["stable"] is True and loop["stable_gains"] == [[0, "inf"]]


def test_cancelled_unstable_pole_makes_the_loop_unstable(speclint) -> None:
    run = analyse(speclint, spec('"(s - 1)/((s - 1)*(s + 2))"', '"K/s"'))
    # (s - 1) stays a closed-loop root whatever the gain: internally unstable.
    assert "SL405" in run.codes, findings_of(run)
    assert run.report["loops"][0]["stable"] is False


def test_coefficients_from_1e_minus_12_to_1e12(speclint) -> None:
    plant = '"1e12/((s + 1e-12)*(s + 1)*(s + 1e12))"'
    run = analyse(speclint, spec(plant, criterion="margins: {min_phase_margin_deg: 30}"))
    loop = run.report["loops"][0]
    den = np.polymul(np.polymul([1, 1e-12], [1, 1]), [1, 1e12])
    gm, pm, wpc, wgc = margins_of([1e12], list(den))
    assert figure(loop["margins"]["gain_margin_db"]) == pytest.approx(db(gm), rel=1e-6)
    assert loop["margins"]["phase_margin_deg"] == pytest.approx(pm, rel=1e-6)
    assert loop["margins"]["phase_crossover_rad_s"] == pytest.approx(wpc, rel=1e-6)
    assert loop["margins"]["gain_crossover_rad_s"] == pytest.approx(wgc, rel=1e-6)
    # Type 0 with Kp = L(0) = 1e12 / (1e-12·1·1e12) = 1e12, exactly.
    assert loop["type"] == 0 and loop["kp"] == pytest.approx(1e12, rel=1e-12)
    assert run.report["requirements"][0]["status"] == "met"


def test_pure_integrator_chain_is_unstable_for_every_gain(speclint) -> None:
    run = analyse(speclint, spec('"1/s^5"'))
    loop = run.report["loops"][0]
    # s⁵ + K lacks four coefficients: unstable for every K (Routh-Hurwitz, necessary condition).
    assert max(np.roots([1, 0, 0, 0, 0, 1.0]).real) > 0
    assert loop["type"] == 5 and (loop["kp"], loop["kv"], loop["ka"]) == ("inf", "inf", "inf")
    assert loop["stable"] is False and loop["stable_gains"] == []
    assert "SL404" in run.codes
    assert run.report["requirements"][0]["status"] in ("unstable", "unreachable")


def test_loop_without_a_gain_symbol(speclint) -> None:
    run = analyse(
        speclint,
        spec(
            '"10/(s*(s + 2))"', controller=None, gain=None, criterion="error_constants: {min_kv: 4}"
        ),
    )
    loop = run.report["loops"][0]
    assert loop["gain"] is None and loop["stable_gains"] is None
    assert loop["kv"] == pytest.approx(float(sympy.limit(S * 10 / (S * (S + 2)), S, 0)))
    assert max(np.roots([1, 2, 10]).real) < 0 and loop["stable"] is True
    gm, pm, _wpc, wgc = margins_of([10], [1, 2, 0])
    assert figure(loop["margins"]["gain_margin_db"]) == db(gm)
    assert loop["margins"]["phase_margin_deg"] == pytest.approx(pm, rel=1e-9)
    assert loop["margins"]["gain_crossover_rad_s"] == pytest.approx(wgc, rel=1e-9)
    assert run.report["requirements"][0]["status"] == "met"


def test_gain_only_in_a_denominator(speclint) -> None:
    # L = 1/(K·s + 1): the gain is no factor of L. Closed loop: K·s + 2 = 0, one root at -2/K,
    # stable for every K > 0; Kp = L(0) = 1 whatever K.
    text = spec('"1/(K*s + 1)"', controller=None, criterion="error_constants: {min_kp: 0.5}")
    run = analyse(speclint, text)
    loop = run.report["loops"][0]
    for k in (0.01, 1.0, 100.0):
        assert np.roots([k, 2]).real.max() < 0
    assert loop["type"] == 0 and loop["kp"] == pytest.approx(1.0)
    assert loop["stable"] is True and loop["stable_gains"] == [[0, "inf"]]
    assert run.report["requirements"][0]["status"] == "met"


def test_ill_posed_static_loop(speclint) -> None:
    # L = -K: at K = 1, 1 + L ≡ 0 and no closed loop exists (an algebraic loop of gain -1;
    # common practice). Found by the fuzz tests as an internal error (1/0 in the sensitivity).
    run = analyse(speclint, spec('"-1"', criterion="margins: {max_sensitivity_peak: 2}"))
    loop = run.report["loops"][0]
    assert loop["stable"] is False
    assert loop["margins"]["sensitivity_peak"] == "inf"
    assert any("ill-posed" in f["message"] for f in run.report["findings"])
