"""`speclint explain`: the derivation of a loop or a requirement, checked against hand and
textbook results. Lines of the console layout are compared whole where they are the
interface."""

from __future__ import annotations

import io
import json
import math
import textwrap
from pathlib import Path

import pytest
from scipy.optimize import brentq

from speclint.cli import main

SPECS = """\
    speclint: 1
    loops:
      classic:
        plant: "1/(s*(s + 1)*(s + 2))"
        controller: "K"
        gain: {symbol: K, nominal: 1}
      sensor:
        plant: "1/(s + 1)"
        controller: "K"
        feedback: "2"
        gain: {symbol: K, nominal: 3}
      hot-plate:
        plant: "2/(10*s + 1)"
        controller: "Kh"
        gain: {symbol: Kh, nominal: 1}
        delay: 0.5
      edge:
        plant: "1/(s*(s + 1)*(s + 2))"
        controller: "K"
        gain: {symbol: K, nominal: 6}
      cancelled:
        plant: "1/((s - 1)*(s + 4))"
        controller: "K*(s - 1)/s"
        gain: {symbol: K, nominal: 2}
      typo:
        plant: "1/(s*(s + q))"
        controller: "K"
        gain: {symbol: K, nominal: 1}
    requirements:
      - id: R-RAMP
        title: Follows a unit ramp
        origin: invented for the test
        loop: classic
        tracking: {reference: ramp, magnitude: 1, max_error: 0.5}
        verification: {method: analysis}
      - id: R-TEXT
        origin: invented for the test
    """


class Out:
    def __init__(self, code: int, out: str, err: str) -> None:
        self.code, self.out, self.err = code, out, err

    @property
    def lines(self) -> list[str]:
        return self.out.splitlines()

    @property
    def json(self) -> dict:
        return json.loads(self.out)


@pytest.fixture
def explain(tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "loops.yaml").write_text(textwrap.dedent(SPECS), encoding="utf-8")
    (tmp_path / "speclint.toml").write_text('paths = ["loops.yaml"]\n', encoding="utf-8")

    def run(*args: str) -> Out:
        out, err = io.StringIO(), io.StringIO()
        code = main(["explain", *args], out, err)
        return Out(code, out.getvalue(), err.getvalue())

    return run


def section(lines: list[str], number: int) -> list[str]:
    """The lines of one numbered step, heading included."""
    start = next(i for i, line in enumerate(lines) if line.startswith(f"{number}. "))
    end = next(
        (i for i, line in enumerate(lines[start + 1 :], start + 1) if line[:1].isdigit()),
        len(lines),
    )
    return lines[start:end]


def test_classic_loop_characteristic_polynomial_first_column_and_stable_set(explain) -> None:
    run = explain("classic")
    assert run.code == 0, run.err
    step3 = section(run.lines, 3)
    # Common practice: unity feedback around K/(s(s+1)(s+2)) gives s(s+1)(s+2) + K.
    assert "    P(s) = s^3 + 3*s^2 + 2*s + K" in step3
    # Ogata, Modern Control Engineering, Routh's stability criterion (from memory): the first
    # column is 1, 3, (6 − K)/3, K, so the loop is stable for 0 < K < 6.
    column = step3[step3.index("  first column as functions of K:") + 1 :][:4]
    assert column == ["    s^3: 1", "    s^2: 3", "    s^1: (6 - K)/3", "    s^0: K"]
    assert "  stable gain set: 0 < K < 6" in step3
    # Common practice: at K = 6 the auxiliary polynomial 3s² + 6 gives roots s = ±j·√2.
    assert (
        "    K = 6: a pair of roots crosses the imaginary axis at s = ±j·ω0, "
        "ω0 = sqrt(2) ≈ 1.41421 rad/s"
    ) in step3
    assert "  closed loop at the nominal gain K = 1: stable" in step3


def test_classic_loop_routh_table_at_the_nominal_gain(explain) -> None:
    step3 = section(explain("classic").lines, 3)
    start = step3.index("  Routh table at K = 1, for P(s) = s^3 + 3*s^2 + 2*s + 1:")
    rows = [" ".join(line.split()) for line in step3[start + 1 : start + 5]]
    # By hand with Routh's recurrence (common practice): b1 = (3·2 − 1·1)/3 = 5/3, c1 = 1.
    assert rows == ["s^3 │ 1 2", "s^2 │ 3 1", "s^1 │ 5/3 0", "s^0 │ 1 0"]
    assert "    special cases: none" in step3


def test_routh_row_of_zeros_is_named(explain) -> None:
    step3 = section(explain("edge").lines, 3)
    # Common practice: at K = 6 row s^1 of the table vanishes; the auxiliary polynomial
    # from row s^2 is 3s² + 6, whose roots ±j·√2 sit on the imaginary axis.
    cases = next(line for line in step3 if line.startswith("    special cases:"))
    assert "row s^1 all zeros" in cases
    assert "A(s) = 3*s^2 + 6" in cases
    assert step3[step3.index(cases) + 1].endswith(
        "roots in the right half plane 0, on the imaginary axis 2"
    )
    assert "  closed loop at the nominal gain K = 6: UNSTABLE" in step3


def test_classic_loop_steady_state_and_margins(explain) -> None:
    lines = explain("classic").lines
    step2 = section(lines, 2)
    # Common practice: type 1, Kv = lim s·K/(s(s+1)(s+2)) = K/2, Kp infinite, Ka zero.
    assert "  system type 1 at K = 1: Ge has 1 pole at s = 0" in step2
    assert "  Kv = lim s→0 s·Ge(s)   = K/2; at K = 1: 1/2 (0.5)" in step2
    assert "  Kp = lim s→0 Ge(s)     = ∞" in step2
    step4 = section(lines, 4)
    # Common practice: at K = 1 the phase crossover is ω = √2 and the gain margin 6 (15.56 dB).
    assert (
        "  gain margin 6 (15.563 dB), governed by the phase crossover at ω = 1.41421 rad/s"
    ) in step4


def test_non_unity_feedback_shows_the_equivalent_unity_path(explain) -> None:
    lines = explain("sensor").lines
    step1 = section(lines, 1)
    # Ogata, Modern Control Engineering, non-unity feedback systems (from memory):
    # Ge = G/(1 + G(H − 1)); with L = K/(s + 1) and H = 2 that is K/(s + K + 1).
    assert "  Ge(s) = L/(1 + L·(H − 1)) = K/(s + K + 1)" in step1
    assert "  loop transfer C·G·H = 2*K/(s + 1)  (the margins are taken on it)" in step1
    # Kp of Ge is K/(K + 1): at K = 3, 3/4 (hand computation).
    assert "  Kp = lim s→0 Ge(s)     = K/(K + 1); at K = 3: 3/4 (0.75)" in section(lines, 2)


def test_unity_feedback_says_so(explain) -> None:
    step1 = section(explain("classic").lines, 1)
    assert "  unity feedback (H = 1): the error e = r − y is the error of L itself" in step1
    assert not any(line.startswith("  Ge(s)") for line in step1)


def test_requirement_name_prints_its_criteria(explain) -> None:
    run = explain("R-RAMP")
    assert run.code == 0, run.err
    assert run.lines[0] == "How speclint judges R-RAMP on loop classic  (loops.yaml:3)"
    step5 = section(run.lines, 5)
    # By hand: the ramp error of a type 1 loop is R/Kv = 2/K, ≤ 0.5 for K ≥ 4; with
    # stability (0 < K < 6, above) the admissible gains are 4 ≤ K < 6.
    assert step5[1 : step5.index("")] == [
        "  R-RAMP  Follows a unit ramp  (loops.yaml:30)",
        "    ramp error ≤ 0.5  (R = 1)",
        "      at the nominal gain: 2 (not met)",
        "      holds for K ≥ 4 (stability aside)",
        "      admissible (∩ stable gains): 4 ≤ K < 6",
        "    status retune: not met at K = 1; met for 4 ≤ K < 6",
        "  all together: the one requirement holds for 4 ≤ K < 6; the nominal gain K = 1 is outside",
    ]
    # The loop's derivation comes first.
    assert section(run.lines, 3)


def test_unknown_name_exits_2_with_a_suggestion(explain) -> None:
    run = explain("clasic")
    assert run.code == 2
    assert run.out == ""
    assert run.err == (
        "speclint: explain: no loop or requirement named 'clasic' in the spec set; "
        "did you mean classic?\n"
    )


def test_unknown_name_without_close_match_lists_the_loops(explain) -> None:
    run = explain("zzzz")
    assert run.code == 2
    assert run.err.endswith("the loops are cancelled, classic, edge, hot-plate, sensor, typo\n"), (
        run.err
    )


def test_textual_requirement_has_nothing_to_derive(explain) -> None:
    run = explain("R-TEXT")
    assert run.code == 2
    assert "R-TEXT is a textual requirement" in run.err


def test_a_model_with_errors_prints_its_findings_and_exits_1(explain) -> None:
    run = explain("typo")
    assert run.code == 1
    assert run.lines[:2] == [
        "loop 'typo' cannot be analysed",
        "loops.yaml:26:23: error SL302 loops.typo.plant: unknown name 'q'; known names are s, K",
    ]
    data = explain("typo", "--format", "json").json
    assert data["explained"] is False
    assert [f["rule"] for f in data["findings"]] == ["SL302"]


def test_hidden_unstable_mode_is_shown(explain) -> None:
    step3 = section(explain("cancelled").lines, 3)
    # Common practice (internal stability): a controller zero cancelling the unstable plant
    # pole at s = 1 leaves that pole in the closed loop for every gain.
    assert (
        "  hidden mode: controller zero at s = 1 cancels an unstable plant pole: "
        "the loop is internally unstable for every gain"
    ) in step3
    assert "  stable gain set: no gain" in step3


def test_dead_time_is_decided_by_nyquist(explain) -> None:
    run = explain("hot-plate")
    assert run.code == 0, run.err
    step3 = section(run.lines, 3)
    assert step3[0] == "3. Closed-loop stability (Nyquist)"
    assert "    A(s) = 10*s + 1" in step3
    assert "    B(s) = 2*Kh" in step3
    assert any("the Nyquist criterion decides it" in line for line in step3)
    # Outside check with scipy: the loop 2·Kh·e^(−s/2)/(10s + 1) reaches −180° where
    # atan(10ω) + ω/2 = π, and is stable up to the gain that puts |L| = 1 there.
    omega = brentq(lambda w: math.atan(10 * w) + 0.5 * w - math.pi, 0.1, 10, xtol=1e-14)
    limit = math.sqrt(1 + 100 * omega**2) / 2
    data = explain("hot-plate", "--format", "json").json
    assert data["stability"]["method"] == "Nyquist"
    ((lo, hi),) = data["stability"]["stable_gains"]["intervals"]
    assert lo == 0
    assert hi == pytest.approx(limit, rel=1e-9)


def test_json_has_the_main_keys(explain) -> None:
    data = explain("classic", "--format", "json").json
    assert set(data) >= {
        "format",
        "version",
        "explained",
        "head",
        "paths",
        "steady",
        "stability",
        "margins",
        "requirements",
        "together",
        "findings",
        "caution",
    }
    assert data["head"]["gain_symbol"] == "K"
    assert data["paths"]["forward_path"] == "K/(s*(s + 1)*(s + 2))"
    assert data["paths"]["equivalent_forward_path"] is None
    assert data["steady"]["type"] == 1
    kv = next(c for c in data["steady"]["constants"] if c["name"] == "Kv")
    # Common practice: Kv = K/2, 0.5 at K = 1.
    assert kv["in_gain"] == "K/2"
    assert kv["at_nominal"] == {"exact": "1/2", "value": 0.5}
    stability = data["stability"]
    assert stability["characteristic"] == "s^3 + 3*s^2 + 2*s + K"
    # Ogata (Routh chapter, from memory): first column 1, 3, (6 − K)/3, K; stable 0 < K < 6.
    assert [e["entry"] for e in stability["first_column"]] == ["1", "3", "(6 - K)/3", "K"]
    assert stability["stable_gains"]["intervals"] == [[0, 6]]
    assert stability["stable_gains"]["exact"] == "0 < K < 6"
    (boundary,) = stability["boundaries"]
    assert boundary["gain"] == {"exact": "6", "value": 6.0}
    assert boundary["crossing"] == "imaginary"
    assert boundary["omega"]["value"] == pytest.approx(math.sqrt(2), rel=1e-15)
    assert stability["routh"]["rows"][2] == {"power": 1, "entries": ["5/3", "0"]}
    # Common practice: K/(s(s+1)(s+2)) at K = 1 has gain margin 6 at ω = √2.
    assert data["margins"]["gain_margin"] == pytest.approx(6, rel=1e-12)
    assert data["margins"]["phase_crossover_rad_s"] == pytest.approx(math.sqrt(2), rel=1e-12)
    (req,) = data["requirements"]
    assert req["status"] == "retune"
    assert req["criteria"][0]["admissible"]["intervals"] == [[4, 6]]
    assert data["caution"].startswith("speclint's figures come from linear time-invariant models")


def test_console_ends_with_the_caution(explain) -> None:
    from speclint.report.console import SHORT_CAUTION

    run = explain("classic")
    assert run.lines[-1] == SHORT_CAUTION


def test_piped_output_is_not_wrapped(explain) -> None:
    # A StringIO is not a terminal: lines longer than any terminal stay whole.
    lines = explain("classic").lines
    long = [line for line in lines if len(line) > 120]
    assert long, "expected some long lines in the derivation"
    assert any(line.startswith("  all together:") for line in lines)


def test_explain_and_check_agree_on_the_demo() -> None:
    # One computation behind both commands: the figures explain shows are those check reports.
    repo = Path(__file__).resolve().parent.parent
    out, err = io.StringIO(), io.StringIO()
    code = main(["explain", "film-feed", str(repo / "examples"), "--format", "json"], out, err)
    assert code == 0, err.getvalue()
    shown = json.loads(out.getvalue())
    out = io.StringIO()
    main(["check", str(repo / "examples"), "--no-cache", "--format", "json"], out, io.StringIO())
    report = json.loads(out.getvalue())
    (loop,) = [x for x in report["loops"] if x["id"] == "film-feed"]
    assert shown["stability"]["stable_gains"]["intervals"] == loop["stable_gains"]
    assert shown["margins"]["phase_margin_deg"] == loop["margins"]["phase_margin_deg"]
    statuses = {r["id"]: r["status"] for r in report["requirements"] if r["loop"] == "film-feed"}
    assert {r["id"]: r["status"] for r in shown["requirements"]} == statuses


def test_exact_forms_carry_a_sign_into_a_sum() -> None:
    import sympy

    from speclint.analysis.algebra import K, S, poly
    from speclint.explain import ratio_text, rational_text

    # By hand: with L = K(s + 2)/(s + 1) and H = 3/(s + 3), 1 + L(H − 1) has numerator
    # (1 − K)s² + (4 − 2K)s + 3, so Ge = K(s + 2)(s + 3)/((1 − K)s² + (4 − 2K)s + 3).
    num = poly(K * (S + 2) * (S + 3))
    den = poly((1 - K) * S**2 + (4 - 2 * K) * S + 3)
    assert ratio_text(num, den, "K") == "K*(s + 2)*(s + 3)/((1 - K)*s^2 + (4 - 2*K)*s + 3)"
    assert rational_text(-54000 * K / (27 * K - 20), "K") == "54000*K/(20 - 27*K)"
    assert rational_text(sympy.Integer(2) - K / 3, "Kc") == "(6 - Kc)/3"
