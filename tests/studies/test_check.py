"""The series check end to end, against closed forms and its own invariants."""

from __future__ import annotations

import pytest

from stringcheck.checks.findings import Value
from stringcheck.design.reading import parse_design_text
from stringcheck.errors import DesignError
from stringcheck.physics.grading import worst_case_dynamic_capacitance, worst_case_static_resistance
import stringcheck.studies.check as check_study
from stringcheck.report.export import result_to_dict
from stringcheck.studies.check import run_check
from stringcheck.report.wording import sentences
from stringcheck.report.wording import sentence
from tests.designs import corner_design, design_text


def test_static_textbook_corner_reaches_the_limit_exactly():
    # Series-connected diodes, static equalisation: R <= (n V_DM - V_s) / ((n - 1) dI_R)
    # (M. H. Rashid, Power Electronics, chapter on power diodes; N. Mohan et al., Power Electronics).
    # At that R, the device with the least leakage blocks exactly V_DM. Operating point our own.
    n, v_s, v_rrm, derating = 8, 9000.0, 1400.0, 0.9
    v_dm = derating * v_rrm
    resistance = float(worst_case_static_resistance(n, v_dm, v_s, 12e-6 - 2e-6))
    design = parse_design_text(corner_design(resistor=resistance, capacitor=1e-6))
    result = run_check(design)
    static = result.checks["static"]
    assert static.positions[0].max_voltage == pytest.approx(v_dm, rel=1e-9)
    assert static.worst_voltage == pytest.approx(v_dm, rel=1e-9)
    assert static.dc_worst_voltage == pytest.approx(v_dm, rel=1e-9)
    assert static.decided_by == "dc"
    # The dc solution shares V_s exactly; at 50 Hz the 1 uF capacitors (tau = R C of seconds,
    # far longer than the 10 ms reverse half) hold every stage near the capacitive split V_s / n
    # (the recovery's offset (1.0 - 0.4) uC / 1 uF = 0.6 V aside), above the slow devices' dc
    # share (V_s - V_DM) / (n - 1): each device is judged by the worse of the two.
    for position in static.positions[1:]:
        assert position.max_voltage == pytest.approx(v_s / n, rel=5e-3)
        assert position.max_voltage > (v_s - v_dm) / (n - 1)


def test_static_corner_just_above_textbook_resistance_fails():
    n, v_s, v_dm = 8, 9000.0, 0.9 * 1400.0
    resistance = float(worst_case_static_resistance(n, v_dm, v_s, 10e-6)) * 1.01
    result = run_check(parse_design_text(corner_design(resistor=resistance, capacitor=1e-6)))
    assert not result.checks["static"].passed
    assert result.verdict == "fail"


def test_dynamic_textbook_corner_reaches_the_limit_exactly():
    # Dynamic equalisation: C >= (n - 1) dQ_rr / (n V_DM - V_s) (same textbooks). With that C and
    # no junction capacitance, the device with the least Q_rr recovers first and takes exactly V_DM.
    n, v_s, v_dm = 8, 9000.0, 0.9 * 1400.0
    capacitance = float(worst_case_dynamic_capacitance(n, v_dm, v_s, 1.0e-6 - 0.4e-6))
    result = run_check(parse_design_text(corner_design(resistor=1e5, capacitor=capacitance)))
    dynamic = result.checks["dynamic"]
    assert dynamic.positions[0].max_voltage == pytest.approx(v_dm, rel=1e-9)
    # The slower devices share the rest equally.
    for position in dynamic.positions[1:]:
        assert position.max_voltage == pytest.approx((v_s - v_dm) / (n - 1), rel=1e-9)


def test_dynamic_corner_with_smaller_capacitor_fails():
    n, v_s, v_dm = 8, 9000.0, 0.9 * 1400.0
    capacitance = float(worst_case_dynamic_capacitance(n, v_dm, v_s, 0.6e-6)) * 0.98
    result = run_check(parse_design_text(corner_design(resistor=1e5, capacitor=capacitance)))
    assert not result.checks["dynamic"].passed
    assert result.checks["dynamic"].estimate.failures == result.trials


def test_no_failure_reports_the_upper_bound_not_zero():
    result = run_check(parse_design_text(corner_design(resistor=1e5, capacitor=1e-6, trials=3000)))
    estimate = result.checks["static"].estimate
    assert estimate.failures == 0
    # Clopper-Pearson with no failures: upper = 1 - (alpha/2)^(1/n) (Clopper & Pearson 1934).
    assert estimate.ci_high == pytest.approx(1 - 0.025 ** (1 / 3000), rel=1e-9)


SCATTER = design_text("scatter")


def test_result_does_not_depend_on_chunk_size():
    # docs/methods/monte-carlo.md: chunk c uses its own stream, so chunking never changes the answer.
    design = parse_design_text(SCATTER)
    one = run_check(design, chunk_trials=100_000)
    many = run_check(design, chunk_trials=4096)
    for name in ("static", "dynamic"):
        a, b = one.checks[name], many.checks[name]
        assert a.worst_voltage == b.worst_voltage
        assert a.worst_trial == b.worst_trial
        assert a.estimate == b.estimate
        # Sums are kept per sampling block and added in block order: identical, not just close.
        assert a.positions == b.positions


def test_same_seed_same_answer_and_other_seed_differs():
    design = parse_design_text(SCATTER)
    a, b = run_check(design, trials=3000), run_check(design, trials=3000)
    assert a.checks["static"].worst_voltage == b.checks["static"].worst_voltage
    c = run_check(design, trials=3000, seed=6)
    assert c.checks["static"].worst_voltage != a.checks["static"].worst_voltage


def test_mean_static_voltage_sums_to_string_voltage_per_branch():
    # Conservation: the voltages of every drawn string sum to V_s, so their means do too.
    result = run_check(parse_design_text(SCATTER), trials=2000)
    for name in ("static", "dynamic"):
        positions = result.checks[name].positions
        for branch in (1, 2):
            total = sum(p.mean_voltage for p in positions if p.branch == branch)
            assert total == pytest.approx(20e3, rel=1e-9)


def test_hot_position_leaks_more_and_takes_less_static_voltage():
    # Leakage doubles every 10 K (common practice): the hotter device carries more leakage, so at
    # the same string current it blocks less voltage on average.
    positions = run_check(parse_design_text(SCATTER), trials=3000).checks["static"].positions
    hot = [p.mean_voltage for p in positions if p.index == 3]
    others = [p.mean_voltage for p in positions if p.index != 3]
    assert max(hot) < min(others)


def test_dc_duty_without_turn_off_skips_the_dynamic_check_and_says_why():
    text = SCATTER.replace('di_dt = "20 A/us"', 'waveform = "dc"')
    result = run_check(parse_design_text(text), trials=1000)
    assert not result.checks["dynamic"].ran
    assert result.checks["dynamic"].reason.code == "not_run.no_turn_off"
    assert "di_dt" in sentence(result.checks["dynamic"].reason)


def test_impossible_string_is_reported_and_fails():
    text = SCATTER.replace('reverse_voltage = "20 kV"', 'reverse_voltage = "30 kV"')
    result = run_check(parse_design_text(text), trials=1000)
    assert [finding.code for finding in result.impossible] == ["impossible.string_voltage"]
    assert result.impossible[0].values["voltage"] == Value(30e3, "V")
    assert "perfect sharing" in result_to_dict(result)["impossible"]
    assert result.verdict == "fail"


def test_dynamic_without_any_capacitance_is_a_clear_error():
    text = SCATTER.replace('capacitor = "4.7 nF"', "").replace('c_j = "50 pF"', 'c_j = 0')
    with pytest.raises(DesignError, match="grading.capacitor"):
        run_check(parse_design_text(text), trials=100)


def test_recovery_charge_derived_from_peak_current_and_time():
    # Q_rr = 1/2 I_RM t_rr (triangular recovery; Rashid, chapter on power diodes).
    text = corner_design(resistor=1e5, capacitor=1e-6).replace(
        "q_rr = { typ = 1e-06 }", "i_rm = { typ = 2.0 }\nt_rr = { typ = 1e-6 }")
    result = run_check(parse_design_text(text))
    assert any("1/2 I_RM t_rr" in note for note in sentences(result.assumptions))
    # All SLOW devices now have Q_rr = 1 uC: the same as the corner written directly.
    direct = run_check(parse_design_text(corner_design(resistor=1e5, capacitor=1e-6)))
    assert result.checks["dynamic"].worst_voltage == pytest.approx(
        direct.checks["dynamic"].worst_voltage, rel=1e-12)


def test_positions_without_scatter_report_zero_spread_and_the_exact_voltage():
    # A corner without scatter: every trial gives the same string, so each position's standard
    # deviation is 0 (numpy.std of identical values) and its mean is its one voltage, bit for bit
    # the maximum. A sum of squares shifted by the limit gave 5.7e-5 V on the dynamic check here.
    design = parse_design_text(corner_design(string_voltage=9001.7, leak_low=2.3e-6,
                                             resistor=1.234e7, capacitor=1.1e-8, trials=20000))
    result = run_check(design)
    for name in ("static", "dynamic"):
        for position in result.checks[name].positions:
            assert position.std_voltage == 0.0, (name, position)
            assert position.mean_voltage == position.max_voltage, (name, position)


def test_the_tcr_reference_temperature_is_the_studys():
    from stringcheck import constants as design
    from stringcheck.checks import preconditions

    assert design.RESISTOR_TCR_REFERENCE == preconditions.RESISTOR_TCR_REFERENCE


# Found by the fuzzing of tests/checks/test_fuzz.py (fixed).
_STALLED_DESIGN = """
[duty]
reverse_voltage = "1 kV"
[string]
series = 2
part = "COLD"
[[string.position]]
index = 1
part = "HOT"
[parts.HOT]
v_rrm = "1 kV"
i_r = { typ = "125 nA", at_voltage = "1 kV", at_temperature = "25 degC" }
leakage_voltage_exponent = 0.01
[parts.COLD]
v_rrm = "1 kV"
i_r = { typ = "0.125 nA", at_voltage = "1 kV", at_temperature = "25 degC" }
leakage_voltage_exponent = 0.01
"""


@pytest.mark.filterwarnings("ignore::RuntimeWarning")  # the overflow this bug causes
def test_check_counts_a_trial_the_static_solver_could_not_solve():
    result = check_study.run_check(parse_design_text(_STALLED_DESIGN), trials=3, seed=1)
    static = result.checks["static"]
    assert static.unsolved == 3 or sum(p.mean_voltage for p in static.positions) == \
        pytest.approx(1000.0, rel=1e-9), [p.mean_voltage for p in static.positions]
