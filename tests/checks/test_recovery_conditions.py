"""Q_rr carried from datasheet test conditions to the application (checks.recovery_conditions)."""

from __future__ import annotations

import json
from importlib import resources

import numpy as np
import pytest

from stringcheck.design.reading import parse_design_text
from stringcheck.physics.charge_control_fit import (
    rescale_recovery_charge,
)
from stringcheck.physics.charge_control_fit import (
    fit_charge_control,
    peak_current_from_recovery_time,
)
from stringcheck.report.export import json_text, result_to_dict
from stringcheck.studies.check import run_check
from stringcheck.checks.recovery_conditions import recovery_rescaling, rescale_charges
from stringcheck.report.wording import sentence, sentences

DEMO = (resources.files("stringcheck") / "data" / "demo.toml").read_text(encoding="utf-8")


def _with_duty(forward: str, di_dt: str) -> str:
    return DEMO.replace('di_dt = "10 A/us"              #', f'di_dt = "{di_dt}" #').replace(
        'forward_current = "0.5 A"', f'forward_current = "{forward}"', 1)


@pytest.mark.parametrize("forward,di_dt", [("0.01 A", "10 A/us"), ("0.2 A", "1 A/us"),
                                           ("5 A", "100 A/us")])
def test_interpolated_map_equals_the_exact_model(forward, di_dt):
    # The grid interpolation must reproduce physics.charge_control_fit.rescale_recovery_charge (the
    # model itself) to 1e-6 relative, in regimes where the map is far from a power law.
    design = parse_design_text(_with_duty(forward, di_dt))
    rescaling, _ = recovery_rescaling(design)
    assert rescaling is not None
    grid = design.string.part_grid()
    rng = np.random.default_rng(4)
    charge = rng.lognormal(np.log(80e-9), 0.3, size=(2000, 1, grid.shape[1]))
    fit = rescaling.fits["FR2K"]
    exact = rescale_recovery_charge(charge, fit.transit_time, fit.test_current, fit.test_rate,
                                    rescaling.forward_current, rescaling.di_dt)
    np.testing.assert_allclose(rescale_charges(charge, grid, rescaling), exact, rtol=1e-6)


def test_application_at_the_test_conditions_leaves_q_rr_unchanged():
    # Round trip through the fitted model: tau from Q_rr at the test point, then Q_rr at the same
    # point, is the identity (the demo part is tested at 0.5 A, 10 A/us).
    design = parse_design_text(_with_duty("0.5 A", "10 A/us"))
    rescaling, note = recovery_rescaling(design)
    grid = design.string.part_grid()
    charge = np.random.default_rng(1).lognormal(np.log(80e-9), 0.3, size=(500, 1, grid.shape[1]))
    np.testing.assert_allclose(rescale_charges(charge, grid, rescaling), charge, rtol=1e-6)
    assert "carried" in sentence(note)


def test_faster_turn_off_means_more_recovery_charge_and_a_harder_dynamic_check():
    # Less time for recombination during a faster current fall leaves more stored charge at the
    # zero crossing (charge-control model; Q_rr -> a tau^2 / 2 for long lifetimes), so the dynamic
    # worst voltage cannot fall when di/dt rises (same draws).
    slow = run_check(parse_design_text(_with_duty("0.5 A", "5 A/us")), trials=2000)
    fast = run_check(parse_design_text(_with_duty("0.5 A", "40 A/us")), trials=2000)
    assert fast.checks["dynamic"].worst_voltage > slow.checks["dynamic"].worst_voltage
    assert any("carried" in line for line in sentences(fast.assumptions))


def test_without_recovery_data_the_report_says_q_rr_is_not_rescaled():
    # Without a class the part inherits nothing: no t_rr, no i_rm, so no recovery waveform to fit.
    text = DEMO.replace('t_rr = { typ = "0.2 us", max = "0.3 us", at_di_dt = "10 A/us" }\n', "")
    text = "\n".join(line for line in text.splitlines() if not line.startswith("class ="))
    result = run_check(parse_design_text(text), trials=200)
    assert any("not rescaled" in line for line in sentences(result.assumptions))


# Two devices in series, one branch, fixed values ({typ} alone), a square current: part A recovers
# 1 uC and part B 1.5 uC at their datasheet test point (5 A, 50 A/us); the application turns off
# 10 A average (20 A peak) at 100 A/us, 20 kHz. Leakage 1 pA (its loss below 1e-7 W), no forward
# tempcos: every loss is known by hand. Invented values.
_SQUARE = """
[duty]
reverse_voltage = "1 kV"
forward_current = "{current}"
waveform = "{waveform}"
frequency = "20 kHz"
di_dt = "100 A/us"
ambient = "40 degC"
[string]
series = 2
derating = 0.9
part = "A"
[[string.position]]
index = 2
part = "B"
[parts.A]
{part}
q_rr = {{ typ = "1 uC", at_forward_current = "5 A", at_di_dt = "50 A/us" }}
[parts.B]
{part}
q_rr = {{ typ = "1.5 uC", at_forward_current = "5 A", at_di_dt = "50 A/us" }}
[grading]
resistor = "10 MOhm"
capacitor = "10 nF"
[thermal]
heatsink = "separate"
r_th_sa = "0.5 K/W"
[monte_carlo]
trials = 100
"""
_PART = """v_rrm = "1.2 kV"
i_fav = "40 A"
i_r = { typ = "1 pA", at_temperature = "25 degC", at_voltage = "1 kV" }
t_rr = { typ = "0.3 us", at_di_dt = "50 A/us" }
v_t0 = { typ = "1.0 V", at_temperature = "25 degC" }
r_t = { typ = "10 mOhm", at_temperature = "25 degC" }
tempco_v_t0 = "0 V/K"
tempco_r_t = "0 1/K"
c_j = "0 pF"
r_th_jc = "0.8 K/W"
r_th_cs = "0.2 K/W"
t_j_max = "175 degC"
leakage_voltage_exponent = 0"""


def _square_design(current="10 A", waveform="square"):
    return parse_design_text(_SQUARE.format(current=current, waveform=waveform, part=_PART))


def _carried(charge, turn_off_current):
    """Q_rr of a fixed part at the application, from the charge-control model itself
    (physics.charge_control_fit; checked against solve_ivp of Lauritzen and Ma's equations in
    tests/physics/test_charge_control.py): T_M fitted to (Q_rr, I_RM from t_rr) at the test
    point, then the model's Q_rr at (turn_off_current, 100 A/us)."""
    peak = peak_current_from_recovery_time(charge, 0.3e-6, 50e6)
    transit = fit_charge_control(charge, peak, 5.0, 50e6).transit_time
    return float(rescale_recovery_charge(charge, transit, 5.0, 50e6, turn_off_current, 100e6))


def test_square_wave_turns_off_from_its_peak_in_the_dynamic_check():
    # Issue 14 item 4: a square wave commutates from I_pk = 2 I_F(AV) (physics.forward.peak_factor).
    # Charge balance of two stages (docs/methods/, by hand): (2 Q - Q_A - Q_B) / C = V_s, so the
    # stage that recovers first holds V_A = V_s / 2 + (Q_B - Q_A) / (2 C), with the Q_rr carried
    # to 20 A.
    result = run_check(_square_design())
    check = result.checks["dynamic"]
    first, second = _carried(1e-6, 20.0), _carried(1.5e-6, 20.0)
    expected = 500.0 + (second - first) / (2 * 10e-9)
    assert check.worst_voltage == pytest.approx(expected, rel=1e-6)
    # ... which the average current (10 A) would not give: the test tells the two apart.
    wrong = 500.0 + (_carried(1.5e-6, 10.0) - _carried(1e-6, 10.0)) / (2 * 10e-9)
    assert abs(wrong - expected) > 1e-3 * expected
    assert check.turn_off_current.current == 20.0
    assert check.turn_off_current.basis == "square_peak"
    data = json.loads(json_text(result_to_dict(result)))
    for name in ("dynamic", "thermal"):
        assert data["checks"][name]["turn_off_current"] == {
            "value": 20.0, "unit": "A", "per": "branch", "basis": "square_peak"}
    assert "turn_off_current" not in data["checks"]["static"]


def test_half_sine_and_dc_keep_the_average_and_say_so():
    half_sine = run_check(_square_design(waveform="half-sine"), only=("dynamic",)).checks["dynamic"]
    assert half_sine.turn_off_current.current == 10.0
    assert half_sine.turn_off_current.basis == "half_sine_average"
    dc = run_check(_square_design(waveform="dc"), only=("dynamic",)).checks["dynamic"]
    assert (dc.turn_off_current.current, dc.turn_off_current.basis) == (10.0, "dc")


def test_thermal_recovery_loss_takes_the_carried_charge():
    # Issue 14 item 3: the recovery loss P_rr = Q_rr V_R f (physics.forward.recovery_loss, tail
    # fraction 1) with the same carried Q_rr as the dynamic check, V_R = V_s / n = 500 V,
    # f = 20 kHz; conduction V_T0 I_AV + r_T I_RMS^2 with I_AV = 10 A and I_RMS^2 = I_pk^2 / 2
    # = 200 A^2 for the square wave; separate sinks: T_j = T_a + P (R_jc + R_cs + R_sa)
    # (hand computation; leakage below 1e-7 W).
    result = run_check(_square_design())
    check = result.checks["thermal"]
    conduction = 1.0 * 10.0 + 10e-3 * 200.0
    temperatures = []
    for charge in (1e-6, 1.5e-6):
        power = conduction + _carried(charge, 20.0) * 500.0 * 20e3
        temperatures.append(40.0 + power * (0.8 + 0.2 + 0.5))
    np.testing.assert_allclose([p.max_temperature for p in check.positions], temperatures,
                               atol=1e-5)
    assert check.worst_tj == pytest.approx(max(temperatures), abs=1e-5)
    total = sum(conduction + _carried(q, 20.0) * 500.0 * 20e3 for q in (1e-6, 1.5e-6))
    assert check.total_power_mean == pytest.approx(total, abs=1e-5)
    # The datasheet's Q_rr (at 5 A, 50 A/us) would give another loss: the test tells them apart.
    assert abs(_carried(1.5e-6, 20.0) - 1.5e-6) * 500.0 * 20e3 > 0.5
    assert check.turn_off_current.current == 20.0


def test_without_a_test_current_q_rr_is_taken_at_the_turn_off_current_of_a_branch():
    # No q_rr.at_forward_current: the datasheet charge is taken as given at the current each branch
    # turns off from (no rescaling in current), never at the group's total forward current, which
    # would scale a 3-branch group's charge down by a factor of 3 on no datasheet basis. At the
    # test di/dt the round trip of the fitted model is the identity (the charge-control closed form
    # of physics.charge_control_fit, checked against solve_ivp in tests/physics/), so the carried
    # charge is the datasheet's.
    text = (_SQUARE.format(current="30 A", waveform="half-sine", part=_PART)
            .replace(', at_forward_current = "5 A"', "")
            .replace('di_dt = "100 A/us"', 'di_dt = "50 A/us"')
            .replace("series = 2", "series = 2\nparallel = 3"))
    design = parse_design_text(text)
    rescaling, note = recovery_rescaling(design)
    assert rescaling.turn_off.current == pytest.approx(10.0)  # 30 A over 3 branches, half-sine
    for fit in rescaling.fits.values():
        assert fit.test_current == pytest.approx(10.0)
    grid = design.string.part_grid()
    # Fixed parts (typ only): A's 1 uC and B's 1.5 uC, as drawn.
    charge = np.broadcast_to(np.where(grid == "A", 1e-6, 1.5e-6), (4,) + grid.shape)
    np.testing.assert_allclose(rescale_charges(charge, grid, rescaling), charge, rtol=1e-6)
    assert "no q_rr.at_forward_current" in sentence(note) and \
        "not rescaled in current" in sentence(note)
