"""Margins, delayed stability and margin gain sets, checked against outside references.

References: python-control's ``stability_margins``/``margin`` (a reference library),
scipy.signal's ``freqresp``, numpy's polynomial roots for closed-loop poles, mpmath's
``findroot``, textbook facts (named beside each check), and a brute-force argument-principle
count for loops with dead time, written here independently of the code under test.
"""

from __future__ import annotations

import math
import warnings
from fractions import Fraction

import control
import mpmath
import numpy as np
import pytest
import scipy.signal
import sympy
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from speclint.analysis.algebra import K, LoopAlgebra, Ratio, S, poly
from speclint.analysis.gainset import GainSet
from speclint.analysis.margins import (
    Margins,
    MarginsUnsupported,
    margin_gains,
    margins_at,
    stable_at_delayed,
    stable_gains_delayed,
)

# --------------------------------------------------------------------------------------------
# Helpers


def make_loop(
    num: sympy.Expr | int,
    den: sympy.Expr | int,
    delay: Fraction | None = None,
    nominal: Fraction = Fraction(1),
) -> LoopAlgebra:
    """L = K·num/den·e^{-s·delay}, the gain in the controller, unity plant and feedback."""
    return LoopAlgebra(
        controller=Ratio(poly(K * num), poly(1)),
        plant=Ratio(poly(1), poly(den)),
        feedback=Ratio.one(),
        delay=delay,
        nominal=nominal,
        limits=GainSet.positive(),
        gain_symbol="K",
    )


def coeffs(expr: sympy.Expr | int) -> np.ndarray:
    return np.array([float(c) for c in sympy.Poly(expr, S).all_coeffs()])


def reference_margins(num: sympy.Expr, den: sympy.Expr, k: float) -> tuple[float, ...]:
    """python-control's (gm, pm, sm, wpc, wgc, wms) for k·num/den."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return tuple(control.stability_margins(control.tf(k * coeffs(num), coeffs(den))))


def rhp_closed_loop_roots(num: sympy.Expr, den: sympy.Expr, k: float, delay: float) -> float:
    """Closed-loop right-half-plane roots of D(s) + k·N(s)·e^{-sT}, by brute force.

    F(s) = D(s) + k·N(s)e^{-sT} is entire and its zeros are the closed-loop poles. The
    argument principle on the right half-plane (F ≈ D on the big arc, deg N < deg D) gives
    Z = n/2 - Δarg F(jω)|_{0}^{∞} / π. The phase is unwrapped by numpy on a grid finer than
    1/64 of the period of e^{-jωT}, out to where |kL| < 1e-2; the rest of the way F ≈ D and
    its phase change is read off D's roots. Returns a float so callers can see how close to
    an integer the count came out.
    """
    nc, dc = coeffs(num), coeffs(den)
    w_max = 50.0
    while k * abs(np.polyval(nc, 1j * w_max) / np.polyval(dc, 1j * w_max)) > 1e-2:
        w_max *= 2.0
    step = min(2.0 * math.pi / delay / 64.0 if delay > 0 else math.inf, w_max / 200_000)
    w = np.arange(0.0, w_max + step, step)
    s = 1j * w
    f = np.polyval(dc, s) + k * np.polyval(nc, s) * np.exp(-s * delay)
    phase = np.unwrap(np.angle(f))
    tail = sum(math.pi / 2 - np.angle(1j * w[-1] - r) for r in np.roots(dc))
    return float((len(dc) - 1) / 2 - (phase[-1] - phase[0] + tail) / math.pi)


def closed_loop_stable(num: sympy.Expr, den: sympy.Expr, k: float) -> bool:
    """Delay-free closed-loop poles from numpy all in the open left half-plane."""
    return bool(np.max(np.roots(np.polyadd(coeffs(den), k * coeffs(num))).real) < 0.0)


def bisect_boundary(num: sympy.Expr, den: sympy.Expr, lo: float, hi: float) -> float:
    """The gain in (lo, hi) where closed-loop stability from numpy changes, to 1e-9 relative."""
    s_lo = closed_loop_stable(num, den, lo)
    assert closed_loop_stable(num, den, hi) != s_lo
    while hi - lo > 1e-9 * hi:
        mid = (lo + hi) / 2.0
        if closed_loop_stable(num, den, mid) == s_lo:
            lo = mid
        else:
            hi = mid
    return (lo + hi) / 2.0


def loop_response(num: sympy.Expr, den: sympy.Expr, k: float, w: np.ndarray) -> np.ndarray:
    """k·N(jω)/D(jω) by scipy.signal.freqresp (an evaluation independent of ours)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        _w, h = scipy.signal.freqresp(scipy.signal.lti(k * coeffs(num), coeffs(den)), w)
    return np.asarray(h)


def ends(gains: GainSet) -> list[float]:
    return [e for pair in gains.as_floats() for e in pair if 0.0 < e < math.inf]


THIRD_ORDER = (sympy.Integer(1), S * (S + 1) * (S + 2))


# --------------------------------------------------------------------------------------------
# Textbook facts


def test_third_order_type_one_loop_textbook_margins() -> None:
    # K/(s(s+1)(s+2)) at K = 1: phase crossover at ω = √2, |L| = 1/6 there, so the gain
    # margin is 6 (20·log10 6 = 15.56 dB), and the loop is stable for 0 < K < 6
    # (common practice; any introductory textbook).
    m = margins_at(make_loop(*THIRD_ORDER), Fraction(1))
    assert m.phase_crossovers == pytest.approx((math.sqrt(2),), rel=1e-14)
    assert m.phase_crossover_rad_s == pytest.approx(math.sqrt(2), rel=1e-14)
    assert m.gain_margin == pytest.approx(6.0, rel=1e-13)
    assert m.gain_margin_db == pytest.approx(15.563025007672874, rel=1e-12)
    assert round(m.gain_margin_db, 2) == 15.56
    # The gain crossover solves ω²(ω² + 1)(ω² + 4) = 1 (common practice: |L| = 1).
    (wgc,) = m.gain_crossovers
    assert wgc**2 * (wgc**2 + 1) * (wgc**2 + 4) == pytest.approx(1.0, rel=1e-13)
    # The phase margin is 180° - 90° - atan(ω) - atan(ω/2) at that frequency.
    expected_pm = 90.0 - math.degrees(math.atan(wgc) + math.atan(wgc / 2))
    assert m.phase_margin_deg == pytest.approx(expected_pm, abs=1e-11)
    # Delay margin: phase margin in radians over the crossover (single crossover).
    assert m.delay_margin_s == pytest.approx(math.radians(expected_pm) / wgc, rel=1e-12)
    assert m.notes == ()
    stable = stable_gains_delayed(make_loop(*THIRD_ORDER))
    assert stable.gains is not None
    assert stable.gains.as_floats() == [[0.0, pytest.approx(6.0, rel=1e-12)]]


# --------------------------------------------------------------------------------------------
# python-control and scipy on many loops


@st.composite
def random_loops(draw: st.DrawFn) -> tuple[sympy.Expr, sympy.Expr, Fraction]:
    """Loops with real and complex poles and zeros on either side, integrators, any gain.

    Poles and zeros on the imaginary axis (other than an integrator) and factors common to
    numerator and denominator are left to dedicated tests: there a floating-point reference
    evaluates 0/0 or passes through infinity, and the conventions differ (see below).
    """
    nonzero = st.integers(-8, 40).filter(lambda v: v != 0)

    def factor() -> sympy.Expr:
        if draw(st.booleans()):
            a = Fraction(draw(nonzero), draw(st.integers(1, 6)))
            return S + sympy.Rational(a.numerator, a.denominator)
        re = Fraction(draw(nonzero), draw(st.integers(1, 6)))
        im = Fraction(draw(st.integers(1, 30)), draw(st.integers(1, 3)))
        r, i = (sympy.Rational(x.numerator, x.denominator) for x in (re, im))
        return S**2 + 2 * r * S + r**2 + i**2

    den = sympy.Integer(1)
    for _ in range(draw(st.integers(1, 3))):
        den *= factor()
    den *= S ** draw(st.integers(0, 1))
    num = sympy.Integer(draw(st.sampled_from([1, -1])))
    for _ in range(draw(st.integers(0, 2))):
        num *= factor()
    n_deg, d_deg = sympy.Poly(num, S).degree(), sympy.Poly(den, S).degree()
    assume(n_deg < d_deg)
    assume(sympy.gcd(sympy.Poly(num, S), sympy.Poly(den, S)).degree() == 0)
    gain = Fraction(draw(st.integers(1, 2000)), draw(st.integers(1, 20)))
    return sympy.expand(num), sympy.expand(den), gain


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])
@given(random_loops())
def test_margins_agree_with_python_control(case: tuple[sympy.Expr, sympy.Expr, Fraction]) -> None:
    # python-control's stability_margins (a reference library) picks the gain margin closest
    # to 0 dB and the phase margin smallest in magnitude, as we do. Known differences, kept
    # out of the comparison on purpose:
    # * python-control drops a gain crossover at ω = 0 (it keeps ω > 0 only) while we keep
    #   it; random rational loops essentially never have |L(0)| = 1 (assumed away below).
    # * it wraps the phase margin into [-180°, 180°), we into (-180°, 180°].
    # * its roots come from numpy in floating point, ours are isolated exactly: agreement is
    #   asked to 1e-6 relative, which its root finder meets on these well-spread roots.
    # * its "stability margin" sm is min |1 + L| over interior stationary points only; our
    #   sensitivity peak also takes the limits at ω = 0 and ω → ∞.
    num, den, gain = case
    k = float(gain)
    l0 = abs(np.polyval(k * coeffs(num), 0) / np.polyval(coeffs(den), 0)) if den.subs(S, 0) else 0
    assume(abs(l0 - 1.0) > 1e-6)
    m = margins_at(make_loop(num, den), gain)
    gm, pm, sm, wpc, wgc, _wms = reference_margins(num, den, k)
    assert isinstance(m, Margins)
    if math.isinf(gm):
        assert m.gain_margin == math.inf and m.phase_crossover_rad_s is None
    else:
        assert m.gain_margin == pytest.approx(gm, rel=1e-6)
        assert m.phase_crossover_rad_s == pytest.approx(wpc, rel=1e-6, abs=1e-9)
    if math.isinf(pm):
        assert m.phase_margin_deg == math.inf and m.gain_crossovers == ()
    else:
        # Where |L| only touches 1 (a double root of |N|² - |D|², found from scipy's
        # response staying on one side of 1 around the crossover), numpy's roots are only
        # about √eps accurate, so python-control's phase margin is too: 1e-4° there.
        w0 = m.gain_crossover_rad_s
        assert w0 is not None
        around = np.abs(loop_response(num, den, k, np.array([w0 * (1 - 1e-4), w0 * (1 + 1e-4)])))
        touch = bool(np.all(around <= 1.0) or np.all(around >= 1.0))
        assert m.phase_margin_deg == pytest.approx(pm, abs=1e-4 if touch else 1e-6) or (
            m.phase_margin_deg == 180.0 and pm == -180.0
        )
        assert m.gain_crossover_rad_s == pytest.approx(wgc, rel=1e-6)
    if not math.isnan(sm) and not math.isinf(sm):
        if 0.0 < m.sensitivity_peak_rad_s < math.inf:
            assert m.sensitivity_peak == pytest.approx(1.0 / sm, rel=1e-6)
        else:
            assert 1.0 / sm <= m.sensitivity_peak * (1 + 1e-9)

    # scipy.signal.freqresp: every crossover we report is one, and a dense scan finds no
    # crossover we missed (a grid may miss some; it must never find more).
    if m.gain_crossovers:
        h = loop_response(num, den, k, np.array(m.gain_crossovers))
        assert np.abs(h) == pytest.approx(1.0, rel=1e-9)
    if m.phase_crossovers:
        h = loop_response(num, den, k, np.array(m.phase_crossovers))
        assert np.all(h.real < 0) and np.all(np.abs(h.imag) <= 1e-9 * np.abs(h))
    w = np.geomspace(1e-3, 1e4, 20_000)
    h = loop_response(num, den, k, w)
    sign = np.sign(np.abs(h) - 1.0)
    mag_changes = np.count_nonzero(np.diff(sign[sign != 0]))
    assert mag_changes <= len(m.gain_crossovers)
    im = np.sign(h.imag)
    negative_axis = np.count_nonzero((im[:-1] * im[1:] < 0) & (h.real[:-1] < 0) & (h.real[1:] < 0))
    assert negative_axis <= len([x for x in m.phase_crossovers if x > 0])
    # The sensitivity peak is a supremum: no grid point exceeds it.
    assert np.max(1.0 / np.abs(1.0 + h)) <= m.sensitivity_peak * (1 + 1e-9)


HAND_PICKED = [
    # (num, den, gain, what it exercises)
    (sympy.Integer(1), S * (S + 1) * (S + 2), Fraction(1), "type 1, third order"),
    (10 * (S + 1), S * (S**2 + S / 5 + 100), Fraction(1, 2), "lightly damped resonance"),
    (1 - S, (S + 1) * (S + 3), Fraction(2), "non-minimum-phase zero"),
    (S + 2, S * (S - 1), Fraction(3), "open-loop unstable, stable in closed loop"),
    ((S + 1) ** 2, S**3 * (S + 10) * (S + 20), Fraction(1000), "conditionally stable"),
    (S + 5, (S + 1) ** 4, Fraction(1, 3), "quadruple pole"),
    ((S + 3) * (S + Fraction(1, 5)), S * (S + 2) * (S**2 + S + 25) * (S + 40), Fraction(90), "six"),
]


@pytest.mark.parametrize(("num", "den", "gain", "what"), HAND_PICKED)
def test_hand_picked_loops_against_python_control(
    num: sympy.Expr, den: sympy.Expr, gain: Fraction, what: str
) -> None:
    # python-control's margin() (a reference library), same conventions on several
    # crossovers; tolerance 1e-7 relative for its floating-point root finding. The
    # quadruple pole is the hard case for numpy's roots (error ~ eps^(1/4) on the poles), but
    # the crossover polynomials themselves are well conditioned there.
    num, den = sympy.expand(num), sympy.expand(den)
    m = margins_at(make_loop(num, den), gain)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        gm, pm, wcg, wcp = control.margin(control.tf(float(gain) * coeffs(num), coeffs(den)))
    assert m.gain_margin == pytest.approx(gm, rel=1e-7), what
    assert m.phase_margin_deg == pytest.approx(pm, abs=1e-7), what
    if math.isfinite(gm):
        assert m.phase_crossover_rad_s == pytest.approx(wcg, rel=1e-7), what
    if math.isfinite(pm):
        assert m.gain_crossover_rad_s == pytest.approx(wcp, rel=1e-7), what


# --------------------------------------------------------------------------------------------
# The hard cases


def test_conditionally_stable_loop() -> None:
    # K(s+1)²/(s³(s+10)(s+20)) is stable only for K in a middle band. Closed-loop poles from
    # numpy, bisected to 1e-9, give the two ends (reference: numpy's roots).
    num, den = (S + 1) ** 2, S**3 * (S + 10) * (S + 20)
    lo = bisect_boundary(num, den, 50.0, 500.0)
    hi = bisect_boundary(num, den, 1000.0, 10_000.0)
    result = stable_gains_delayed(make_loop(num, den))
    assert result.gains is not None
    assert result.gains.as_floats() == [[pytest.approx(lo, rel=2e-9), pytest.approx(hi, rel=2e-9)]]
    # At K = 1000 both phase crossovers bound the band: the one closer to 0 dB governs
    # (DESIGN.md), positive as the gain may grow until the upper end; python-control agrees.
    m = margins_at(make_loop(num, den), Fraction(1000))
    assert len(m.phase_crossovers) == 2
    assert m.gain_margin_db == pytest.approx(20 * math.log10(hi / 1000), rel=1e-8)
    gm, *_ = reference_margins(sympy.expand(num), sympy.expand(den), 1000.0)
    assert m.gain_margin == pytest.approx(gm, rel=1e-7)
    # Nearer the lower end the governing margin turns negative: the gain may only fall.
    m_low = margins_at(make_loop(num, den), Fraction(200))
    assert m_low.gain_margin_db == pytest.approx(-20 * math.log10(200 / lo), rel=1e-8)
    assert m_low.gain_margin_db < 0


def test_loop_with_no_crossover() -> None:
    # 0.5/(s+1): |L| < 1 and phase above -90° everywhere (common practice): no crossover,
    # margins infinite; python-control returns infinite margins as well.
    loop = make_loop(sympy.Integer(1), S + 1, nominal=Fraction(1, 2))
    m = margins_at(loop, None)
    assert (m.gain_margin, m.gain_margin_db, m.phase_margin_deg) == (math.inf,) * 3
    assert m.delay_margin_s == math.inf
    assert m.gain_crossovers == () and m.phase_crossovers == ()
    gm, pm, *_ = reference_margins(sympy.Integer(1), S + 1, 0.5)
    assert math.isinf(gm) and math.isinf(pm)


def test_double_integrator_has_no_gain_margin() -> None:
    # 1/s²: phase exactly -180° at every frequency (common practice), so L(jω) is real and
    # negative over the whole axis and no gain margin exists; the closed loop s² + K is
    # undamped for every K, never stable (common practice).
    loop = make_loop(sympy.Integer(1), S**2)
    m = margins_at(loop, Fraction(4))
    assert m.gain_margin is None and m.gain_margin_db is None
    assert "L(jω) is real over a band: gain margin undefined" in m.notes
    assert m.gain_crossovers == pytest.approx((2.0,), rel=1e-15)  # |4/(jω)²| = 1 at ω = 2
    assert m.phase_margin_deg == pytest.approx(0.0, abs=1e-12)
    result = stable_gains_delayed(loop)
    assert result.gains is not None and result.gains.is_empty()


def test_undamped_mode_is_not_a_phase_crossover() -> None:
    # ±K/(s(s² + 49)) at K = 1: L(jω) = ∓j/(ω(49 - ω²)) is purely imaginary except at ω = 7,
    # where it passes through infinity. By our convention (module docstring) a phase
    # crossover needs a finite L, so the gain margin is infinite for either sign.
    # python-control agrees for +1; for -1 it reports a gain margin of about 0 at ω = 7 (its
    # crossing polynomial keeps the pole itself as a root, where its response is infinite
    # and, rounded, on the negative side). Neither decides stability: s³ + 49s ± K lacks the
    # s² term, so the closed loop is unstable for every K (Routh, common practice).
    den = S * (S**2 + 49)
    for sign in (1, -1):
        num = sympy.Integer(sign)
        m = margins_at(make_loop(num, den), Fraction(1))
        assert m.gain_margin == math.inf and m.phase_crossovers == ()
        gm, *_ = reference_margins(num, sympy.expand(den), 1.0)
        assert gm == math.inf if sign > 0 else gm < 1e-6
        result = stable_gains_delayed(make_loop(num, den))
        assert result.gains is not None and result.gains.is_empty()
        assert not any(closed_loop_stable(num, sympy.expand(den), k) for k in (0.1, 1.0, 100.0))


def test_biproper_loop_tolerates_no_added_delay() -> None:
    # 2(s+1)/(s+3): |L(∞)| = 2 ≥ 1, so the delay margin is 0 (DESIGN.md convention).
    loop = make_loop(2 * (S + 1), S + 3)
    m = margins_at(loop, Fraction(1))
    assert m.delay_margin_s == 0.0
    # Why: (s+3) + 2(s+1)e^{-sT} = 0 has roots near e^{-sT} = -1/2 for large |s|, i.e.
    # Re s ≈ ln 2 / T > 0, for every T > 0 (common practice for neutral delay equations).
    # mpmath's findroot finds such a root for T = 0.01 (reference: mpmath).
    t = 0.01
    guess = (math.log(2) + 1j * math.pi * 201) / t
    root = mpmath.findroot(lambda s: (s + 3) + 2 * (s + 1) * mpmath.exp(-s * t), guess)
    assert float(mpmath.re(root)) > 0
    assert abs(complex((root + 3) + 2 * (root + 1) * mpmath.exp(-root * t))) < 1e-8
    # The delayed stable set stops below 1/|L0(∞)| = 1/2 (here L0 = 2(s+1)/(s+3)).
    delayed = stable_gains_delayed(make_loop(2 * (S + 1), S + 3, delay=Fraction(1, 100)))
    assert delayed.gains is not None
    assert all(e <= 0.5 for e in ends(delayed.gains))
    assert not stable_at_delayed(make_loop(2 * (S + 1), S + 3, delay=Fraction(1, 100)), Fraction(1))


def test_negative_static_gain_is_a_phase_crossover_at_zero() -> None:
    # (s-2)/((s+1)(s+3)) at K = 1: L(0) = -2/3 is finite and negative, so ω = 0 is a phase
    # crossover and the gain margin is 3/2 (3.52 dB); the closed loop s² + (4 + K)s + 3 - 2K
    # is stable for K < 3/2 (Routh, common practice). python-control counts ω = 0 the same
    # way.
    num, den = S - 2, (S + 1) * (S + 3)
    m = margins_at(make_loop(num, den), Fraction(1))
    assert m.phase_crossovers == (0.0,)
    assert m.gain_margin == pytest.approx(1.5, rel=1e-15)
    gm, _pm, _sm, wpc, *_ = reference_margins(num, sympy.expand(den), 1.0)
    assert (m.gain_margin, m.phase_crossover_rad_s) == (pytest.approx(gm), wpc)
    # |S(0)| = 1/(1 - 2/3) = 3 is the peak (L(jω) moves away from -1 as ω grows).
    assert (m.sensitivity_peak, m.sensitivity_peak_rad_s) == (pytest.approx(3.0), 0.0)
    stable = stable_gains_delayed(make_loop(num, den))
    assert stable.gains is not None
    assert stable.gains.as_floats() == [[0.0, pytest.approx(1.5, rel=1e-12)]]


def test_sensitivity_peak_as_a_limit() -> None:
    # 1/s: |S(jω)| = ω/√(ω² + 1) rises to 1 as ω → ∞ and never reaches it (common practice).
    m = margins_at(make_loop(sympy.Integer(1), S), Fraction(1))
    assert (m.sensitivity_peak, m.sensitivity_peak_rad_s) == (1.0, math.inf)
    assert m.phase_margin_deg == pytest.approx(90.0, abs=1e-12)
    # K(1-s)/(s+2) at K = 1/2: L(∞) = -1/2, so |S| → 1/(1 - 1/2) = 2 as ω → ∞ (common
    # practice: S(∞) = 1/(1 + L(∞))); scipy's response on a dense grid stays below it and
    # approaches it.
    num, den = 1 - S, S + 2
    m = margins_at(make_loop(num, den), Fraction(1, 2))
    assert (m.sensitivity_peak, m.sensitivity_peak_rad_s) == (
        pytest.approx(2.0, rel=1e-15),
        math.inf,
    )
    h = loop_response(num, den, 0.5, np.geomspace(1e-3, 1e6, 5000))
    peak_on_grid = np.max(1.0 / np.abs(1.0 + h))
    assert 2.0 * (1 - 1e-6) < peak_on_grid < 2.0


def test_open_loop_unstable_and_hidden_cancellation_are_noted() -> None:
    # K(s+2)/(s(s-1)): one right-half-plane pole, stable for K > 1 (closed loop
    # s² + (K-1)s + 2K, Routh, common practice): margins carry the caution.
    m = margins_at(make_loop(S + 2, S * (S - 1)), Fraction(3))
    assert any(n.startswith("open-loop unstable (1 right-half-plane pole)") for n in m.notes)
    # With 0.05 s of dead time it is still stable at K = 3 and not at K = 1/2, by the
    # brute-force count (helper above).
    delayed = make_loop(S + 2, S * (S - 1), delay=Fraction(1, 20))
    stable = stable_gains_delayed(delayed)
    assert stable.gains is not None
    for k, z in ((3.0, 0), (0.5, 2)):
        assert rhp_closed_loop_roots(S + 2, sympy.expand(S * (S - 1)), k, 0.05) == pytest.approx(
            z, abs=0.05
        )
        assert stable.gains.contains(sympy.Float(k)) == (z == 0)
    # A controller zero cancelling the plant's unstable pole: the loop is internally
    # unstable for every gain although L = K/s looks harmless (common practice).
    loop = LoopAlgebra(
        controller=Ratio(poly(K * (S - 1)), poly(S)),
        plant=Ratio(poly(1), poly(S - 1)),
        feedback=Ratio.one(),
        delay=Fraction(1, 10),
        nominal=Fraction(1),
        limits=GainSet.positive(),
        gain_symbol="K",
    )
    result = stable_gains_delayed(loop)
    assert result.gains is not None and result.gains.is_empty()
    assert any("internally unstable" in n for n in result.notes)
    assert not stable_at_delayed(loop, Fraction(1))
    assert any("internally unstable" in n for n in margins_at(loop, Fraction(1)).notes)


small_rational = st.fractions(min_value=Fraction(1, 20), max_value=50, max_denominator=20)


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.tuples(small_rational, st.booleans()), max_size=4),
    st.lists(st.tuples(small_rational, small_rational, st.sampled_from([-1, 0, 1])), max_size=2),
    st.integers(min_value=0, max_value=2),
)
def test_open_loop_unstable_pole_count_matches_the_poles_built_in(
    reals: list[tuple[Fraction, bool]],
    pairs: list[tuple[Fraction, Fraction, int]],
    integrators: int,
) -> None:
    # The denominator is built from its roots: real ones ±r, pairs a ± jb with a of either
    # sign or zero (undamped), and integrators; its right-half-plane poles are known by
    # construction (common practice: the roots of a product are those of its factors).
    def q(x: Fraction) -> sympy.Rational:
        return sympy.Rational(x.numerator, x.denominator)

    den = S**integrators
    expected = 0
    for r, right in reals:
        den *= S - q(r) if right else S + q(r)
        expected += right
    for a, b, side in pairs:
        den *= (S - side * q(a)) ** 2 + q(b) ** 2
        expected += 2 * (side > 0)
    m = margins_at(make_loop(S + 3, sympy.expand(den)), Fraction(1))
    counted = [n for n in m.notes if n.startswith("open-loop unstable")]
    if expected == 0:
        assert counted == []
    else:
        plural = "s" if expected > 1 else ""
        assert counted == [
            f"open-loop unstable ({expected} right-half-plane pole{plural}): margins alone do "
            "not decide stability; see the closed-loop verdict"
        ]


# --------------------------------------------------------------------------------------------
# Dead time


def test_delay_margin_is_where_the_delayed_loop_becomes_unstable() -> None:
    # 4(s+2)/(s(s+1)(s+5)) with 0.05 s dead time already in the loop. The brute-force
    # argument-principle count (helper above) must find the closed loop stable just below
    # the extra delay margin and unstable just above it.
    num, den = 4 * (S + 2), sympy.expand(S * (S + 1) * (S + 5))
    t0 = Fraction(1, 20)
    m = margins_at(make_loop(num, den, delay=t0), Fraction(1))
    dm = m.delay_margin_s
    assert dm is not None and 0 < dm < math.inf
    below = rhp_closed_loop_roots(num, den, 1.0, float(t0) + dm * (1 - 1e-3))
    above = rhp_closed_loop_roots(num, den, 1.0, float(t0) + dm * (1 + 1e-3))
    assert below == pytest.approx(0.0, abs=0.05)
    assert above == pytest.approx(2.0, abs=0.05)
    # Same loop without the built-in delay: the margin grows by exactly that delay (a
    # delay only rotates the phase, so the crossover frequency stays put).
    m0 = margins_at(make_loop(num, den), Fraction(1))
    assert m0.delay_margin_s == pytest.approx(dm + float(t0), rel=1e-12)
    assert m0.gain_crossovers == m.gain_crossovers


def test_first_order_lag_with_dead_time_stable_set() -> None:
    # K·e^{-sT}/(s+1): the Nyquist plot first meets the negative real axis where
    # ωT + atan ω = π, with |L| = K/√(1 + ω²) there, so the loop is stable for
    # K < √(1 + ω²) (Franklin, Powell & Emami-Naeini, Feedback Control of Dynamic Systems,
    # on dead time; from memory). The equation is solved here by scipy's brentq.
    for t in (Fraction(1), Fraction(1, 10)):
        w = brentq(lambda x, t=float(t): x * t + math.atan(x) - math.pi, 1e-9, math.pi / float(t))
        bound = math.sqrt(1 + w * w)
        result = stable_gains_delayed(make_loop(sympy.Integer(1), S + 1, delay=t))
        assert result.gains is not None
        assert result.gains.as_floats() == [[0.0, pytest.approx(bound, rel=1e-12)]]
        # Numeric check: brute-force root count just inside and outside.
        assert rhp_closed_loop_roots(sympy.Integer(1), S + 1, bound * 0.99, float(t)) < 0.05
        assert rhp_closed_loop_roots(sympy.Integer(1), S + 1, bound * 1.01, float(t)) > 1.95
        loop = make_loop(sympy.Integer(1), S + 1, delay=t)
        assert stable_at_delayed(loop, Fraction(bound * 0.99))
        assert not stable_at_delayed(loop, Fraction(bound * 1.01))


def test_integrator_with_dead_time_stable_set() -> None:
    # K·e^{-sT}/s is stable for K < π/(2T) (common practice): phase -90° - ωT reaches -180°
    # at ω = π/(2T), where |L| = K/ω.
    t = Fraction(1, 2)
    result = stable_gains_delayed(make_loop(sympy.Integer(1), S, delay=t))
    assert result.gains is not None
    assert result.gains.as_floats() == [[0.0, pytest.approx(math.pi / (2 * float(t)), rel=1e-13)]]
    assert rhp_closed_loop_roots(sympy.Integer(1), S, math.pi * 0.99, float(t)) < 0.05
    assert rhp_closed_loop_roots(sympy.Integer(1), S, math.pi * 1.01, float(t)) > 1.95


DELAYED = [
    (sympy.Integer(3), sympy.expand((S + 1) * (S + 2)), Fraction(1, 2)),
    (S + 4, sympy.expand(S * (S + 2) * (S + 6)), Fraction(1, 5)),
    (sympy.Integer(1), sympy.expand((S - 1) * (S + 5)), Fraction(1, 10)),
    (sympy.Integer(1), sympy.expand((S**2 + S / 2 + 4) * (S + 1)), Fraction(3, 10)),
]


@pytest.mark.parametrize(("num", "den", "t"), DELAYED)
def test_delayed_stable_sets_against_brute_force(
    num: sympy.Expr, den: sympy.Expr, t: Fraction
) -> None:
    # The brute-force argument-principle count (helper above) at gains 2% inside and outside
    # every end of the stable set, and on a coarse grid of gains; an open-loop unstable and
    # a lightly damped loop among them.
    result = stable_gains_delayed(make_loop(num, den, delay=t))
    assert result.gains is not None and not result.gains.is_empty()
    probes = [e * f for e in ends(result.gains) for f in (0.98, 1.02)]
    probes += list(np.geomspace(0.05, 50.0, 7))
    for k in probes:
        z = rhp_closed_loop_roots(num, den, k, float(t))
        assert abs(z - round(z)) < 0.05
        assert (round(z) == 0) == result.gains.contains(sympy.Float(k)), k
        assert stable_at_delayed(make_loop(num, den, delay=t), Fraction(k)) == (round(z) == 0)


def test_margins_with_dead_time_against_python_control_on_the_delay_free_part() -> None:
    # A delay leaves |L| alone (gain crossovers and their count unchanged) and rotates the
    # phase by -ωT: python-control's phase margin for the delay-free loop minus ωT (in
    # degrees) must equal ours; phase crossovers must satisfy ∠L0(jω) - ωT ≡ -180° as
    # evaluated by scipy's freqresp. Sensitivity peak: a dense scan with scipy stays below
    # ours and comes within 1e-6 of it.
    num, den, t = 2 * (S + 3), sympy.expand(S * (S + 1) * (S + 4)), Fraction(1, 10)
    m = margins_at(make_loop(num, den, delay=t), Fraction(1))
    _gm, pm, _sm, _wpc, wgc, _ = reference_margins(num, den, 1.0)
    assert m.gain_crossover_rad_s == pytest.approx(wgc, rel=1e-8)
    assert m.phase_margin_deg == pytest.approx(pm - math.degrees(wgc * float(t)), abs=1e-7)
    h = loop_response(num, den, 1.0, np.array(m.phase_crossovers))
    rotated = h * np.exp(-1j * np.array(m.phase_crossovers) * float(t))
    assert np.all(rotated.real < 0)
    assert np.all(np.abs(rotated.imag) < 1e-10 * np.abs(rotated))
    w = np.linspace(1e-4, 200.0, 400_000)
    hd = loop_response(num, den, 1.0, w) * np.exp(-1j * w * float(t))
    scan = float(np.max(1.0 / np.abs(1.0 + hd)))
    assert scan <= m.sensitivity_peak * (1 + 1e-12)
    assert scan >= m.sensitivity_peak * (1 - 1e-6)


# --------------------------------------------------------------------------------------------
# Margin criteria as gain sets


def _criterion_holds(m: Margins, name: str, value: float) -> bool:
    if name == "min_gain_margin_db":
        return m.gain_margin_db is not None and abs(m.gain_margin_db) >= value
    if name == "min_phase_margin_deg":
        return m.phase_margin_deg is not None and abs(m.phase_margin_deg) >= value
    if name == "min_delay_margin_s":
        return m.delay_margin_s is not None and m.delay_margin_s >= value
    return m.sensitivity_peak <= value


SWEEPS = [
    (*THIRD_ORDER, None, "min_gain_margin_db", 6, 8.0),
    (*THIRD_ORDER, None, "min_phase_margin_deg", 45, 8.0),
    (*THIRD_ORDER, None, "min_delay_margin_s", Fraction(1, 2), 8.0),
    (*THIRD_ORDER, None, "max_sensitivity_peak", 2, 8.0),
    (sympy.Integer(1), S + 1, Fraction(1), "min_phase_margin_deg", 45, 2.26),
    (sympy.Integer(1), S + 1, Fraction(1), "max_sensitivity_peak", 2, 2.26),
]


@pytest.mark.parametrize(("num", "den", "t", "name", "value", "k_max"), SWEEPS)
def test_margin_gain_sets_against_a_dense_sweep(
    num: sympy.Expr, den: sympy.Expr, t: Fraction | None, name: str, value: float, k_max: float
) -> None:
    # A dense gain sweep of margins_at decides the criterion point by point (the reference
    # here is the sweep, which cannot miss a wide interval but can miss a narrow one; the
    # exact ends are checked against hand results in the next test).
    loop = make_loop(num, den, delay=t)
    gains = margin_gains(loop, **{name: value})
    edges = ends(gains)
    for k in np.geomspace(0.02, k_max, 60):
        if any(abs(k - e) < 1e-6 * e for e in edges):
            continue
        m = margins_at(loop, Fraction(float(k)))
        assert gains.contains(sympy.Float(k)) == _criterion_holds(m, name, float(value)), k


def test_margin_gain_sets_by_hand_and_the_conflict_they_feed() -> None:
    # K/(s(s+1)(s+2)) has its phase crossover at √2 with |L0| = 1/6 (common practice), so
    # "at least 6 dB" holds for K ≤ 6·10^{-6/20} or K ≥ 6·10^{6/20} (the |gain margin|
    # reading; the upper piece is unstable and drops out when intersected with 0 < K < 6).
    gains = margin_gains(make_loop(*THIRD_ORDER), min_gain_margin_db=6)
    assert ends(gains) == [
        pytest.approx(6 * 10 ** (-6 / 20), rel=1e-12),
        pytest.approx(6 * 10 ** (6 / 20), rel=1e-12),
    ]
    # Phase margin 45° where the crossover ω has 90° + atan ω + atan(ω/2) = 135° (solved by
    # scipy's brentq), at the gain K = ω·√(1+ω²)·√(4+ω²) that makes |L(jω)| = 1.
    w = brentq(lambda x: math.atan(x) + math.atan(x / 2) - math.pi / 4, 1e-6, 10.0)
    k45 = w * math.sqrt(1 + w * w) * math.sqrt(4 + w * w)
    pm_set = margin_gains(make_loop(*THIRD_ORDER), min_phase_margin_deg=45)
    assert ends(pm_set)[0] == pytest.approx(k45, rel=1e-11)
    # A ramp requirement needing Kv = K/2 ≥ 1 (K ≥ 2) against PM ≥ 45° (K ≤ 1.338): no gain
    # meets both, which the feasibility logic reports as a conflict (common practice: the
    # classic gain-versus-margin trade-off of a type 1 loop).
    ramp = GainSet.between(Fraction(2), None)
    assert not pm_set.intersect(ramp).intersect(stable_set(make_loop(*THIRD_ORDER))).intervals


def stable_set(loop: LoopAlgebra) -> GainSet:
    result = stable_gains_delayed(loop)
    assert result.gains is not None
    return result.gains


def test_margin_gains_within_limits_and_unsupported_forms() -> None:
    # Limits [0.1, 5] cut (0, 3.007] ∪ [11.97, ∞) (by hand, as above); the closed limit end
    # stays closed.
    loop = LoopAlgebra(
        controller=Ratio(poly(K), poly(1)),
        plant=Ratio(poly(1), poly(S * (S + 1) * (S + 2))),
        feedback=Ratio.one(),
        delay=None,
        nominal=Fraction(1),
        limits=GainSet.between(Fraction(1, 10), Fraction(5)),
        gain_symbol="K",
    )
    gains = margin_gains(loop, min_gain_margin_db=6)
    assert gains.as_floats() == [[0.1, pytest.approx(6 * 10 ** (-6 / 20), rel=1e-12)]]
    assert gains.intervals[0].lo_closed
    # The gain inside the feedback path, 1/(Ks + 1): not a plain factor of L.
    odd = LoopAlgebra(
        controller=Ratio.one(),
        plant=Ratio(poly(1), poly(S * (S + 1))),
        feedback=Ratio(poly(1), poly(K * S + 1)),
        delay=Fraction(1, 10),
        nominal=Fraction(1, 2),
        limits=GainSet.positive(),
        gain_symbol="K",
    )
    result = stable_gains_delayed(odd)
    assert result.gains is None and result.unsupported is not None
    assert "plain factor" in result.unsupported
    with pytest.raises(MarginsUnsupported, match="plain factor"):
        margin_gains(odd, min_phase_margin_deg=30)
    # Margins at a fixed gain still work: compare with python-control on 1/(s(s+1)(s/2+1)).
    m = margins_at(odd, None)
    no_delay = LoopAlgebra(
        odd.controller, odd.plant, odd.feedback, None, odd.nominal, odd.limits, "K"
    )
    m0 = margins_at(no_delay, None)
    gm, pm, *_ = reference_margins(sympy.Integer(2), sympy.expand(S * (S + 1) * (S + 2)), 1.0)
    assert (m0.gain_margin, m0.phase_margin_deg) == (pytest.approx(gm), pytest.approx(pm))
    assert m.gain_crossovers == m0.gain_crossovers
    # Stability at a fixed gain works for any form: at K the loop is
    # (1/K)e^{-0.1s}/(s(s+1)(s+1/K)), and the brute-force count (helper above) agrees.
    verdicts = []
    for k in (Fraction(1, 2), Fraction(1, 20), Fraction(10)):
        den = sympy.expand(S * (S + 1) * (S + sympy.Rational(k.denominator, k.numerator)))
        z = rhp_closed_loop_roots(sympy.Integer(1), den, float(1 / k), 0.1)
        assert abs(z - round(z)) < 0.05
        verdicts.append(round(z) == 0)
        assert stable_at_delayed(odd, k) == (round(z) == 0)
    assert True in verdicts and False in verdicts


def test_slow_undamped_pole_pair_is_not_counted_as_unstable() -> None:
    # K(s+3)/(s² + 1/400): poles ±j/20 on the imaginary axis, none with Re > 0 (common
    # practice), so no open-loop-unstable caution; with dead time the Nyquist count must
    # start from P = 0 as well: the stable set agrees with the brute-force count.
    m = margins_at(make_loop(S + 3, S**2 + sympy.Rational(1, 400)), Fraction(1))
    assert not any(n.startswith("open-loop unstable") for n in m.notes)
    delayed = stable_gains_delayed(make_loop(S + 3, S**2 + sympy.Rational(1, 400), Fraction(1, 10)))
    assert delayed.gains is not None
    for k in (0.1, 1.0, 10.0, 20.0):
        z = rhp_closed_loop_roots(S + 3, S**2 + sympy.Rational(1, 400), k, 0.1)
        assert z == pytest.approx(round(z), abs=0.05)
        assert delayed.gains.contains(sympy.Float(k)) == (round(z) == 0)


# The discriminant behind the sensitivity-peak gain set: a resultant computed by evaluation and
# interpolation, checked against sympy's own resultant of the same bivariate polynomials.
_ROW = st.lists(st.integers(-(10**12), 10**12), min_size=3, max_size=3)


@settings(max_examples=60, deadline=None)
@given(st.lists(_ROW, min_size=2, max_size=8))
def test_resultant_in_x_matches_sympy(rows: list[list[int]]) -> None:
    from speclint.analysis.margins import _resultant_in_x

    assume(any(rows[0]))
    x, k = sympy.symbols("x k")
    n = len(rows) - 1
    f = sum((a * k**2 + b * k + c) * x ** (n - i) for i, (a, b, c) in enumerate(rows))
    # sympy's resultant over the integers (a reference library): the Sylvester determinant
    # of F and dF/dx in x, a polynomial in k.
    ref = sympy.Poly(sympy.resultant(f, sympy.diff(f, x), x), k)
    expected = [int(c) for c in ref.all_coeffs()] if not ref.is_zero else []
    assert _resultant_in_x(rows) == expected


@pytest.mark.parametrize(("num", "den", "t", "name", "value", "k_max"), SWEEPS)
def test_margin_gain_sets_within_limits_against_a_dense_sweep(
    num: sympy.Expr, den: sympy.Expr, t: Fraction | None, name: str, value: float, k_max: float
) -> None:
    # The same sweep with limits on the gain (a band inside the swept range, closed at both
    # ends): inside it the set is the criterion point by point, outside it there is no gain.
    import dataclasses

    lo, hi = Fraction(1, 10), Fraction(k_max) / 3
    loop = dataclasses.replace(make_loop(num, den, delay=t), limits=GainSet.between(lo, hi))
    gains = margin_gains(loop, **{name: value})
    edges = ends(gains)
    for k in np.geomspace(0.02, k_max, 60):
        if any(abs(k - e) < 1e-6 * e for e in edges):
            continue
        inside = lo <= Fraction(float(k)) <= hi
        m = margins_at(loop, Fraction(float(k)))
        expected = inside and _criterion_holds(m, name, float(value))
        assert gains.contains(sympy.Float(k)) == expected, k


@settings(max_examples=50, deadline=None)
@given(st.dictionaries(st.integers(0, 12), st.fractions().filter(bool), max_size=8))
def test_polynomials_in_s_are_sympys(terms: dict[int, Fraction]) -> None:
    # Reference: sympy's Poly.from_dict over the rationals; the same polynomial (equal, with
    # the same hash, so the per-loop caches keyed on it still meet).
    from speclint.analysis.margins import _poly_s

    given_terms = {(i,): sympy.Rational(c.numerator, c.denominator) for i, c in terms.items()}
    ours = _poly_s(dict(given_terms))
    theirs = sympy.Poly.from_dict(dict(given_terms) or {(0,): 0}, S, domain=sympy.QQ)
    assert ours == theirs and hash(ours) == hash(theirs)
    assert ours.rep.to_list() == theirs.rep.to_list()


_SMALL_POLY = st.lists(st.integers(-(10**30), 10**30), min_size=1, max_size=10).filter(
    lambda c: c[0] != 0
)


@settings(max_examples=80, deadline=None)
@given(_SMALL_POLY, _SMALL_POLY, st.fractions(min_value=-(10**6), max_value=10**6))
def test_exact_ratio_of_polynomials_is_rounded_once(
    a: list[int], b: list[int], x: Fraction
) -> None:
    # Reference: sympy's exact evaluation of both polynomials and its correctly rounded float
    # of the quotient (Rational.__float__ rounds to nearest).
    from speclint.analysis.margins import _int_poly, _ratio

    pa = sympy.Poly([sympy.Rational(c, 7) for c in a], S, domain=sympy.QQ)
    pb = sympy.Poly([sympy.Rational(c, 3) for c in b], S, domain=sympy.QQ)
    xs = sympy.Rational(x.numerator, x.denominator)
    assume(pb.eval(xs) != 0)
    expected = float(pa.eval(xs) / pb.eval(xs))
    # repr: the same double, the sign of a zero included.
    assert repr(_ratio(_int_poly(pa), _int_poly(pb), x)) == repr(expected)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.integers(-(10**6), 10**6), min_size=1, max_size=9), st.integers(0, 2))
def test_largest_nonnegative_root_is_sympys(coeffs: list[int], zeros: int) -> None:
    # Reference: sympy's Poly.real_roots, evaluated to 60 digits; the largest root x ≥ 0
    # within 1e-20 of its size (or none), and the same rational as the full list's last.
    from speclint.analysis.margins import _largest_root_x, _roots_x

    p = [*coeffs, *([0] * zeros)]
    while p and p[0] == 0:
        p.pop(0)
    ours = _largest_root_x(p)
    if len(p) < 2:
        assert ours is None
        return
    poly = sympy.Poly(p, S)
    nonneg = [sympy.N(r, 60) for r in poly.real_roots() if r >= 0]
    if not nonneg:
        assert ours is None
        return
    assert ours is not None
    top = max(nonneg)
    assert abs(sympy.Rational(ours.numerator, ours.denominator) - top) <= abs(top) * 1e-20
    assert ours == _roots_x(p, include_zero=True)[-1]
