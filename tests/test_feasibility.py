"""Requirement statuses and messages over exact gain sets.

The loop is the classic K/(s(s+1)(s+2)) (common practice; Ogata, Modern Control
Engineering, Routh's criterion and steady-state errors, from memory): stable exactly for
0 < K < 6, velocity constant Kv = K/2, so the error to a unit ramp is 2/K; its gain margin
is 6/K (the gain may grow by that factor before the loop becomes unstable); as a type 1
loop its error to a parabola is infinite for every gain. The criteria's gain sets below
follow from those textbook formulas; the stable set comes from stable_gains.
"""

from __future__ import annotations

from fractions import Fraction

import pytest
import sympy

from speclint.analysis import feasibility
from speclint.analysis.algebra import K, LoopAlgebra, Ratio, S, poly
from speclint.analysis.feasibility import Criterion, RequirementGains, judge_loop
from speclint.analysis.gainset import ZERO, GainSet, Interval
from speclint.analysis.stability import stable_gains


def classic_stable_set() -> GainSet:
    loop = LoopAlgebra(
        controller=Ratio(poly(K), poly(1)),
        plant=Ratio(poly(1), poly(S * (S + 1) * (S + 2))),
        feedback=Ratio.one(),
        delay=None,
        nominal=Fraction(5),
        limits=GainSet.positive(),
        gain_symbol="K",
    )
    stable = stable_gains(loop).gains
    assert stable.describe() == "0 < K < 6"
    return stable


def ramp_error_at_most(max_error: Fraction) -> Criterion:
    # 2/K ≤ e  ⟺  K ≥ 2/e for K > 0 (limit inclusive)
    return Criterion(f"ramp error ≤ {float(max_error):g}", GainSet.between(2 / max_error, None))


def gain_margin_at_least(factor: int) -> Criterion:
    # 6/K ≥ factor  ⟺  0 < K ≤ 6/factor
    upper = sympy.Rational(6, factor)
    return Criterion(f"gain margin ≥ {factor}", GainSet.of([Interval(ZERO, upper, False, True)]))


PARABOLA = Criterion(
    "parabola error ≤ 0.1",
    GainSet.empty(),
    "type 1 loop: the parabola error is infinite for every gain; add an integrator",
)

STEP = Criterion("step error ≤ 0.01", GainSet.positive())  # type 1: zero step error


def test_met_and_retune() -> None:
    stable = classic_stable_set()
    req = RequirementGains("TS-FEED-010", (ramp_error_at_most(Fraction(1, 2)),))
    met = judge_loop(Fraction(5), stable, [req]).verdicts[0]
    assert met.status == "met"
    assert met.message == "met at K = 5; it holds for 4 ≤ K < 6"
    assert met.admissible.contains(Fraction(4)) and not met.admissible.contains(Fraction(6))
    retune = judge_loop(Fraction(1), stable, [req]).verdicts[0]
    assert retune.status == "retune"
    assert retune.message == "not met at K = 1; met for 4 ≤ K < 6"
    assert retune.criteria_admissible == (retune.admissible,)


def test_unreachable_because_the_needed_gain_destabilises() -> None:
    stable = classic_stable_set()
    req = RequirementGains("TS-FEED-011", (ramp_error_at_most(Fraction(1, 4)),))
    verdict = judge_loop(Fraction(5), stable, [req]).verdicts[0]
    assert verdict.status == "unreachable"
    assert verdict.admissible.is_empty()
    assert verdict.message == (
        "met by no stabilising gain: needs K ≥ 8, but the loop is stable only for 0 < K < 6"
    )


def test_unreachable_for_the_criterions_own_reason() -> None:
    stable = classic_stable_set()
    req = RequirementGains("TS-FEED-012", (STEP, PARABOLA))
    verdict = judge_loop(Fraction(5), stable, [req]).verdicts[0]
    assert verdict.status == "unreachable"
    assert verdict.message == (
        "met by no stabilising gain: type 1 loop: the parabola error is infinite for every "
        "gain; add an integrator"
    )
    bare = RequirementGains("TS-FEED-013", (Criterion("parabola error ≤ 0.1", GainSet.empty()),))
    assert judge_loop(Fraction(5), stable, [bare]).verdicts[0].message == (
        "met by no stabilising gain: parabola error ≤ 0.1 holds for no gain"
    )


def test_unreachable_because_criteria_clash() -> None:
    stable = classic_stable_set()
    req = RequirementGains(
        "TS-FEED-014", (ramp_error_at_most(Fraction(1, 2)), gain_margin_at_least(2))
    )
    verdict = judge_loop(Fraction(5), stable, [req]).verdicts[0]
    assert verdict.status == "unreachable"
    assert verdict.message == (
        "met by no stabilising gain: its criteria hold for no common gain: "
        "ramp error ≤ 0.5 needs K ≥ 4; gain margin ≥ 2 needs 0 < K ≤ 3"
    )


def test_conflict_names_a_minimal_pair_out_of_three() -> None:
    stable = classic_stable_set()
    reqs = [
        RequirementGains("TS-FEED-020", (ramp_error_at_most(Fraction(1, 2)),)),
        RequirementGains("TS-FEED-021", (gain_margin_at_least(2),)),
        RequirementGains("TS-FEED-022", (STEP,)),
    ]
    result = judge_loop(Fraction(5), stable, reqs)
    statuses = [v.status for v in result.verdicts]
    assert statuses == ["conflict", "conflict", "met"]
    assert result.together.is_empty()
    conflict = result.conflict
    assert conflict is not None
    assert conflict.ids == ("TS-FEED-020", "TS-FEED-021")
    assert conflict.best_ids == ("TS-FEED-020", "TS-FEED-022")
    assert conflict.best_gains.describe() == "4 ≤ K < 6"
    assert conflict.exhaustive
    assert conflict.message == (
        "TS-FEED-020 and TS-FEED-021 cannot hold together: TS-FEED-020 needs 4 ≤ K < 6; "
        "TS-FEED-021 needs 0 < K ≤ 3; the most requirements that hold together are "
        "TS-FEED-020 and TS-FEED-022, for 4 ≤ K < 6"
    )
    assert result.verdicts[0].message == (
        "met at K = 5; met for 4 ≤ K < 6, but never together with TS-FEED-021: "
        "TS-FEED-021 needs 0 < K ≤ 3"
    )
    assert result.verdicts[1].message == (
        "not met at K = 5; met for 0 < K ≤ 3, but never together with TS-FEED-020: "
        "TS-FEED-020 needs 4 ≤ K < 6"
    )
    assert result.verdicts[2].message == "met at K = 5; it holds for 0 < K < 6"


def test_conflict_best_group_without_nominal_goes_to_the_lowest_gains() -> None:
    stable = classic_stable_set()
    reqs = [
        RequirementGains("A", (ramp_error_at_most(Fraction(1, 2)),)),
        RequirementGains("B", (gain_margin_at_least(2),)),
        RequirementGains("C", (STEP,)),
    ]
    # K = 7 is unstable: statuses stay "unstable", the conflict is still reported
    result = judge_loop(Fraction(7), stable, reqs)
    assert [v.status for v in result.verdicts] == ["unstable"] * 3
    assert result.conflict is not None
    assert result.conflict.best_ids == ("B", "C")


def test_conflict_search_cap_is_reported(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(feasibility, "MAX_SUBSETS", 1)
    stable = classic_stable_set()
    reqs = [
        RequirementGains("C", (STEP,)),
        RequirementGains("A", (ramp_error_at_most(Fraction(1, 2)),)),
        RequirementGains("B", (gain_margin_at_least(2),)),
    ]
    conflict = judge_loop(Fraction(5), stable, reqs).conflict
    assert conflict is not None and not conflict.exhaustive
    assert conflict.ids == ("C", "A", "B")
    assert conflict.message.endswith(
        " (search stopped after 1 subsets: a smaller conflicting set may exist)"
    )


def test_unstable_nominal_still_names_admissible_gains() -> None:
    stable = classic_stable_set()
    reqs = [
        RequirementGains("TS-FEED-030", (ramp_error_at_most(Fraction(1, 2)),)),
        RequirementGains("TS-FEED-031", (ramp_error_at_most(Fraction(1, 4)),)),
    ]
    result = judge_loop(Fraction(7), stable, reqs)
    assert [v.status for v in result.verdicts] == ["unstable", "unstable"]
    assert result.verdicts[0].message == "the loop is unstable at K = 7; met for 4 ≤ K < 6"
    assert result.verdicts[1].message == (
        "the loop is unstable at K = 7; met by no stabilising gain: "
        "needs K ≥ 8, but the loop is stable only for 0 < K < 6"
    )
    assert result.conflict is None


def test_limits_are_inclusive() -> None:
    # An error exactly at its maximum meets it: 2/K = 1/2 at K = 4 (common practice).
    stable = classic_stable_set()
    req = RequirementGains("TS-FEED-040", (ramp_error_at_most(Fraction(1, 2)),))
    assert judge_loop(Fraction(4), stable, [req]).verdicts[0].status == "met"


def test_loop_without_gain() -> None:
    # 1/(s+1) in unity feedback: stable, a step error of 1/2 (Kp = 1, common practice).
    stable_loop = LoopAlgebra(
        controller=Ratio.one(),
        plant=Ratio(poly(1), poly(S + 1)),
        feedback=Ratio.one(),
        delay=None,
        nominal=None,
        limits=GainSet.positive(),
        gain_symbol=None,
    )
    stable = stable_gains(stable_loop).gains
    ok = RequirementGains("R1", (Criterion("step error ≤ 0.5", GainSet.positive()),))
    too_tight = RequirementGains(
        "R2", (Criterion("step error ≤ 0.1", GainSet.empty(), "step error is 0.5"),)
    )
    result = judge_loop(None, stable, [ok, too_tight], symbol="K")
    assert [v.message for v in result.verdicts] == [
        "met (the loop has no tunable gain)",
        "met by no stabilising gain: step error is 0.5",
    ]
    unstable = judge_loop(None, GainSet.empty(), [ok, too_tight])
    assert [v.message for v in unstable.verdicts] == [
        "the loop is unstable (it has no tunable gain)",
        "the loop is unstable (it has no tunable gain); step error is 0.5",
    ]
    assert [v.status for v in unstable.verdicts] == ["unstable", "unstable"]


def test_display_name_of_the_gain_is_used() -> None:
    stable = classic_stable_set()
    req = RequirementGains("TS-FEED-050", (ramp_error_at_most(Fraction(1, 2)),))
    verdict = judge_loop(Fraction(1), stable, [req], symbol="Kp").verdicts[0]
    assert verdict.message == "not met at Kp = 1; met for 4 ≤ Kp < 6"
    assert sympy.Integer(4) in [iv.lo for iv in verdict.admissible.intervals]
