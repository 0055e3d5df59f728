"""The parallel and thermal checks of ``run_check`` against hand solutions and closed forms.

Designs are invented; fixed spreads ({typ} alone) make the answers exact.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy.optimize import brentq

from stringcheck.checks.findings import Value
from stringcheck.design.reading import parse_design_text
from stringcheck.report.export import json_text, result_to_dict
from stringcheck.studies.check import run_check
from stringcheck.report.wording import sentence


def design(*, parallel=2, series=1, current="10 A", waveform="dc", v_t0=("1.0 V", "1.0 V"),
           r_t=("10 mOhm", "10 mOhm"), tempco_v="0 V/K", tempco_r="0 1/K", i_fav="20 A",
           thermal=True, r_th_sa="0.5 K/W", heatsink="separate", extra_part="", trials=4000,
           spread_v=None, r_t_at="25 degC") -> str:
    """Part A in branch 1, part B in branch 2 (fixed values unless ``spread_v`` is given)."""
    v_a = spread_v or f'{{ typ = "{v_t0[0]}", at_temperature = "25 degC" }}'
    thermal_table = f'[thermal]\nheatsink = "{heatsink}"\nr_th_sa = "{r_th_sa}"\n' if thermal \
        else ""
    part = """
v_rrm = "1 kV"
i_fav = "{i_fav}"
i_r = {{ typ = "1 nA", at_temperature = "25 degC" }}
q_rr = {{ typ = "10 nC" }}
v_t0 = {v}
r_t = {{ typ = "{r}", at_temperature = "{r_at}" }}
r_th_jc = "0.8 K/W"
r_th_cs = "0.2 K/W"
t_j_max = "175 degC"
tempco_v_t0 = "{tv}"
tempco_r_t = "{tr}"
leakage_voltage_exponent = 0
{extra}
"""
    branch_b = "" if parallel < 2 else """
[[string.position]]
index = 1
branch = 2
part = "B"
"""
    return f"""
[duty]
reverse_voltage = "400 V"
forward_current = "{current}"
waveform = "{waveform}"
frequency = "50 Hz"
ambient = "40 degC"
[string]
series = {series}
parallel = {parallel}
derating = 0.8
part = "A"
{branch_b}
[parts.A]
{part.format(i_fav=i_fav, v=v_a, r=r_t[0], tv=tempco_v, tr=tempco_r, extra=extra_part,
             r_at=r_t_at)}
[parts.B]
{part.format(i_fav=i_fav, v=f'{{ typ = "{v_t0[1]}", at_temperature = "25 degC" }}', r=r_t[1],
             tv=tempco_v, tr=tempco_r, extra=extra_part, r_at=r_t_at)}
[grading]
resistor = "1 MOhm"
{thermal_table}
[monte_carlo]
trials = {trials}
"""


def test_two_branches_split_as_the_hand_solution():
    # v = V1 + r1 i1 = V2 + r2 i2, i1 + i2 = I (Kirchhoff, by hand):
    # i1 = (I r2 + V2 - V1) / (r1 + r2) = (10 * 0.02 + 0.05) / 0.03 = 8.333 A, i2 = 1.667 A.
    result = run_check(parse_design_text(design(v_t0=("1.00 V", "1.05 V"),
                                                r_t=("10 mOhm", "20 mOhm"), thermal=False)))
    check = result.checks["parallel"]
    assert check.ran and not check.electro_thermal
    currents = [b.mean_current for b in check.branches]
    np.testing.assert_allclose(currents, [25.0 / 3.0, 5.0 / 3.0], rtol=1e-12)
    # share = max / mean = 8.333 / 5
    assert check.worst_share == pytest.approx(5.0 / 3.0, rel=1e-12)
    assert check.required_derating == pytest.approx(0.6, rel=1e-12)


def _water_level_split(thresholds, resistances, total):
    """Independent reference: brentq on sum_k max((v - V_k) / r_k, 0) = I for the common v."""
    thresholds, resistances = np.asarray(thresholds), np.asarray(resistances)

    def excess(voltage):
        return np.sum(np.maximum(voltage - thresholds, 0.0) / resistances) - total

    voltage = brentq(excess, thresholds.min(), thresholds.max() + total * resistances.max(),
                     xtol=1e-15, rtol=1e-15)
    return np.maximum(voltage - thresholds, 0.0) / resistances


def test_slope_resistance_is_referred_from_its_own_row_temperature():
    # Issue 14 item 2: V_T0 given at 25 degC, r_T at 125 degC. At T = 40 degC (ambient, no rise),
    # V_k(T) = V_k + a (T - 25) and r_k(T) = r_k (1 + b (T - 125)) (docs/methods/, forward sharing),
    # and two conducting lines share I by Kirchhoff (hand closed form):
    # i_1 = (I r_2(T) + V_2(T) - V_1(T)) / (r_1(T) + r_2(T)).
    text = design(current="40 A", v_t0=("1.00 V", "1.05 V"), r_t=("10 mOhm", "15 mOhm"),
                  tempco_v="-2 mV/K", tempco_r="0.004 1/K", r_t_at="125 degC", thermal=False,
                  i_fav="50 A")
    check = run_check(parse_design_text(text), trials=100).checks["parallel"]
    a, b, temperature = -2e-3, 4e-3, 40.0
    threshold = np.array([1.00, 1.05]) + a * (temperature - 25.0)
    resistance = np.array([10e-3, 15e-3]) * (1.0 + b * (temperature - 125.0))
    first = (40.0 * resistance[1] + threshold[1] - threshold[0]) / resistance.sum()
    np.testing.assert_allclose([c.mean_current for c in check.branches], [first, 40.0 - first],
                               rtol=1e-12)
    np.testing.assert_allclose([c.mean_current for c in check.branches],
                               _water_level_split(threshold, resistance, 40.0), rtol=1e-10)
    assert check.worst_share == pytest.approx(first / 20.0, rel=1e-12)
    # Referred from the V_T0 row (25 degC) instead, r_T(40) would be 1.06 r_T, not 0.66 r_T:
    # a different split, so the check above can tell the two apart.
    wrong = np.array([10e-3, 15e-3]) * (1.0 + b * (temperature - 25.0))
    assert abs((40.0 * wrong[1] + 0.05) / wrong.sum() - first) > 1.0


@pytest.mark.parametrize("r_t_at", ["25 degC", "125 degC"])
def test_single_device_temperature_with_rows_at_their_own_temperatures(r_t_at):
    # One device, dc, V_T0 at T_v = 25 degC and r_T at T_r: P = (V0 + a (T - T_v)) I +
    # r0 (1 + b (T - T_r)) I^2 and T = T_a + R P, linear in T (hand closed form):
    # T = (T_a + R (V0 I - a T_v I + r0 I^2 - b r0 I^2 T_r)) / (1 - R (a I + b r0 I^2)).
    text = design(parallel=1, current="20 A", v_t0=("0.9 V", "0.9 V"), r_t=("15 mOhm", "15 mOhm"),
                  tempco_v="-2 mV/K", tempco_r="0.004 1/K", r_th_sa="0.5 K/W", r_t_at=r_t_at)
    check = run_check(parse_design_text(text), trials=100).checks["thermal"]
    current, v0, r0, a, b, ta = 20.0, 0.9, 0.015, -2e-3, 4e-3, 40.0
    tv, tr = 25.0, float(r_t_at.split()[0])
    resistance = 0.8 + 0.2 + 0.5
    slope = a * current + b * r0 * current ** 2
    expected = (ta + resistance * (v0 * current - a * tv * current + r0 * current ** 2
                                   - b * r0 * current ** 2 * tr)) / (1 - resistance * slope)
    assert check.worst_tj == pytest.approx(expected, abs=1e-6)


def test_identical_branches_share_exactly():
    check = run_check(parse_design_text(design(thermal=False))).checks["parallel"]
    assert check.worst_share == pytest.approx(1.0, rel=1e-12)
    assert check.estimate.failures == 0 and check.passed


def test_a_branch_above_its_rated_current_fails_every_trial():
    # 8.33 A in branch 1 against i_fav = 5 A: every built group has a device over its rating.
    result = run_check(parse_design_text(design(v_t0=("1.00 V", "1.05 V"),
                                                r_t=("10 mOhm", "20 mOhm"), i_fav="5 A",
                                                thermal=False)))
    check = result.checks["parallel"]
    assert check.estimate.failures == result.trials
    assert not check.passed and result.verdict == "fail"
    assert check.worst_ratio == pytest.approx(25.0 / 3.0 / 5.0, rel=1e-12)


def test_single_device_temperature_is_the_linear_fixed_point():
    # One device, dc: P = (V0 + a (T - T0)) I + r0 (1 + b (T - T0)) I^2 and
    # T = T_a + R P with R = R_th(j-c) + R_th(c-s) + R_th(s-a): linear in T, so
    # T = (T_a + R (V0 I + r0 I^2 - (a I + b r0 I^2) T0)) / (1 - R (a I + b r0 I^2)).
    text = design(parallel=1, current="20 A", v_t0=("0.9 V", "0.9 V"), r_t=("15 mOhm", "15 mOhm"),
                  tempco_v="-2 mV/K", tempco_r="0.004 1/K", r_th_sa="0.5 K/W")
    result = run_check(parse_design_text(text))
    check = result.checks["thermal"]
    current, v0, r0, a, b, t0, ta = 20.0, 0.9, 0.015, -2e-3, 4e-3, 25.0, 40.0
    resistance = 0.8 + 0.2 + 0.5
    slope = a * current + b * r0 * current ** 2
    expected = (ta + resistance * (v0 * current + r0 * current ** 2 - slope * t0)) / \
        (1 - resistance * slope)
    assert check.ran and check.passed
    assert check.worst_tj == pytest.approx(expected, abs=1e-6)
    assert result.checks["parallel"].reason.code == "not_run.one_branch"
    assert sentence(result.checks["parallel"].reason).startswith("one branch")


def test_thermal_runaway_fails_and_is_counted():
    # Leakage loss grows as 2^(T / 10 K); with a huge heatsink resistance there is no equilibrium
    # (Semenov's criterion, as in solvers.electrothermal): every trial runs away.
    text = design(parallel=1, waveform="half-sine", current="1 A", r_th_sa="400 K/W",
                  v_t0=("0.9 V", "0.9 V"), extra_part='c_j = "50 pF"').replace('i_r = { typ = "1 nA"', 'i_r = { typ = "1 mA"')
    result = run_check(parse_design_text(text))
    check = result.checks["thermal"]
    assert check.runaway.failures == result.trials
    assert not check.passed and result.verdict == "fail"
    data = json.loads(json_text(result_to_dict(result)))
    assert data["checks"]["thermal"]["runaway_trials"] == result.trials
    assert data["checks"]["thermal"]["worst_tj"] is None  # runaway: no finite temperature
    assert data["checks"]["thermal"]["mean_total_power"] is None  # nor a steady loss


def test_json_holds_the_forward_keys():
    # docs/commands.md and docs/json.md: checks.parallel.worst_share; checks.thermal with its own figures.
    text = design(spread_v='{ typ = "1.0 V", max = "1.1 V", at_temperature = "25 degC" }',
                  tempco_v="-2 mV/K", trials=500)
    data = json.loads(json_text(result_to_dict(run_check(parse_design_text(text)))))
    parallel, thermal = data["checks"]["parallel"], data["checks"]["thermal"]
    for key in ("passed", "worst_share", "p99_share", "worst_ratio", "p_fail", "p_fail_ci",
                "required_derating", "branches", "ballast"):
        assert key in parallel, key
    for key in ("passed", "worst_tj", "worst_ratio", "p_fail", "p_fail_ci", "p_runaway",
                "p_runaway_ci", "runaway_ambient", "positions"):
        assert key in thermal, key
    assert parallel["worst_share"] > 1.0


def test_forward_checks_skip_without_a_forward_current():
    text = design().replace('forward_current = "10 A"\n', "")
    result = run_check(parse_design_text(text))
    for name in ("parallel", "thermal"):
        assert not result.checks[name].ran
        assert result.checks[name].reason.code == "not_run.no_forward_current"
        assert "forward_current" in sentence(result.checks[name].reason)


def test_a_group_that_cannot_carry_the_current_is_impossible():
    # 2 branches x 20 A rated = 40 A at perfect sharing < 50 A asked: impossible, with the sum.
    result = run_check(parse_design_text(design(current="50 A", thermal=False)), trials=200)
    assert result.verdict == "fail"
    (finding,) = result.impossible
    assert finding.code == "impossible.group_current"
    assert finding.values["current"] == Value(50.0, "A") and finding.limit == Value(40.0, "A")
    text = result_to_dict(result)["impossible"]
    assert "cannot carry 50 A" in text and "40 A" in text
