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
from stringcheck.physics.charge_control_fit import lifetime_for_charge
from stringcheck.physics.charge_control_history import carry_recovery_charge
from stringcheck.report.export import json_text, result_to_dict
from stringcheck.studies.check import run_check
from stringcheck.checks.recovery_conditions import recovery_rescaling, rescale_charges
from stringcheck.report.wording import sentence, sentences

DEMO = (resources.files("stringcheck") / "data" / "demo.toml").read_text(encoding="utf-8")


def _with_duty(forward: str, di_dt: str, waveform: str = "dc") -> str:
    """The demo with another forward current and di/dt; dc by default, so that the current is
    steady before its fall as at the datasheet's test (the demo's half-sine has a history)."""
    return DEMO.replace('di_dt = "10 A/us"              #', f'di_dt = "{di_dt}" #').replace(
        'forward_current = "0.5 A"', f'forward_current = "{forward}"', 1).replace(
        'waveform = "half-sine"', f'waveform = "{waveform}"')


@pytest.mark.parametrize("forward,di_dt,waveform", [
    ("0.01 A", "10 A/us", "dc"), ("0.2 A", "1 A/us", "dc"), ("5 A", "100 A/us", "dc"),
    ("0.5 A", "10 A/us", "half-sine"), ("5 A", "1 A/us", "square")])
def test_interpolated_map_equals_the_exact_model(forward, di_dt, waveform):
    # The grid interpolation must reproduce physics.charge_control_history.carry_recovery_charge
    # (the model itself) to 1e-6 relative, in regimes where the map is far from a power law.
    design = parse_design_text(_with_duty(forward, di_dt, waveform))
    rescaling, _ = recovery_rescaling(design)
    assert rescaling is not None
    grid = design.string.part_grid()
    rng = np.random.default_rng(4)
    charge = rng.lognormal(np.log(80e-9), 0.3, size=(2000, 1, grid.shape[1]))
    fit = rescaling.fits["FR2K"]
    exact = carry_recovery_charge(charge, fit.transit_time, fit.test_current, fit.test_rate,
                                  rescaling.forward_current, rescaling.di_dt, rescaling.waveform,
                                  frequency=rescaling.frequency)
    if waveform == "dc":
        np.testing.assert_allclose(exact, rescale_recovery_charge(
            charge, fit.transit_time, fit.test_current, fit.test_rate, rescaling.forward_current,
            rescaling.di_dt), rtol=1e-12)
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
    assert check.turn_off_current.di_dt_source == "di_dt"
    data = json.loads(json_text(result_to_dict(result)))
    for name in ("dynamic", "thermal"):
        turn_off = data["checks"][name]["turn_off_current"]
        parts = turn_off.pop("parts")
        assert turn_off == {
            "value": 20.0, "unit": "A", "per": "branch", "basis": "square_peak",
            "di_dt": 100e6, "di_dt_unit": "A/s", "di_dt_source": "di_dt", "natural_di_dt": None,
            "steady_equivalent": turn_off["steady_equivalent"]}
        # Held 25 us (half of 20 kHz), many lifetimes: the square pulse is steady at its fall.
        assert turn_off["steady_equivalent"] == pytest.approx(20.0, rel=1e-6)
        assert [p["part"] for p in parts] == ["A", "B"]
        assert parts[1]["q_rr_datasheet_typ"] == 1.5e-6 and parts[1]["q_rr_datasheet_max"] is None
        assert parts[1]["q_rr_carried_typ"] == pytest.approx(second, rel=1e-6)
    assert "turn_off_current" not in data["checks"]["static"]


def test_half_sine_follows_its_sine_and_dc_keeps_the_average():
    # Issue 17 item 1: a 20 kHz half-sine of 10 A average turns off from its crest pi 10 A along
    # the sine; the stored charge it leaves at the zero (physics.charge_control_history, checked
    # against solve_ivp in tests/physics/test_waveforms.py) then meets the 100 A/us fall.
    result = run_check(_square_design(waveform="half-sine"), only=("dynamic",))
    half_sine = result.checks["dynamic"]
    assert half_sine.turn_off_current.current == pytest.approx(10.0 * np.pi)
    assert half_sine.turn_off_current.basis == "half_sine_history"
    # Natural slope by hand: omega I_pk = 2 pi 20e3 x 10 pi = 3.95 A/us; 100 A/us was typed.
    assert half_sine.turn_off_current.natural_di_dt == pytest.approx(
        2 * np.pi * 20e3 * 10 * np.pi, rel=1e-12)
    carried = {item.part: item.carried_typ for item in half_sine.turn_off_current.parts}
    for name, charge in (("A", 1e-6), ("B", 1.5e-6)):
        peak = peak_current_from_recovery_time(charge, 0.3e-6, 50e6)
        transit = fit_charge_control(charge, peak, 5.0, 50e6).transit_time
        expected = carry_recovery_charge(charge, transit, 5.0, 50e6, 10 * np.pi, 100e6,
                                         "half-sine", frequency=20e3)
        assert carried[name] == pytest.approx(float(expected), rel=1e-9)
        # Bounds: a steady crest current falling at 100 A/us stores more (the sine has already
        # recombined on its way down, its own slope 25 x slower); the typed fall is faster than
        # the sine's, so less than the steady crest but not nothing.
        assert 0.05 * _carried(charge, 10 * np.pi) < carried[name] < _carried(charge, 10 * np.pi)
    first, second = carried["A"], carried["B"]
    assert half_sine.worst_voltage == pytest.approx(500.0 + (second - first) / (2 * 10e-9),
                                                    rel=1e-6)
    dc = run_check(_square_design(waveform="dc"), only=("dynamic",)).checks["dynamic"]
    assert (dc.turn_off_current.current, dc.turn_off_current.basis) == (10.0, "dc")


@pytest.mark.parametrize("di_dt, stray, source, expected", [
    ('di_dt = "100 A/us"', None, "di_dt", 100e6),
    ("", '"20 uH"', "stray_inductance", 1e3 / 20e-6),        # V_s / L = 1 kV / 20 uH = 50 A/us
    ('di_dt = "100 A/us"', '"20 uH"', "di_dt", 100e6),      # di_dt wins over the inductance
    ("", None, "natural", 2 * np.pi * 20e3 * np.pi * 10.0),  # omega I_pk, by hand
])
def test_commutation_slope_choice_and_which_decided(di_dt, stray, source, expected):
    text = _SQUARE.format(current="10 A", waveform="half-sine", part=_PART).replace(
        'di_dt = "100 A/us"', di_dt)
    if stray:
        text = text.replace('ambient = "40 degC"', f'ambient = "40 degC"\nstray_inductance = {stray}')
    rescaling, note = recovery_rescaling(parse_design_text(text))
    assert rescaling.di_dt == pytest.approx(expected, rel=1e-12)
    assert rescaling.turn_off.di_dt_source == source
    assert note.values["source"].number == source
    words = {"di_dt": "from duty.di_dt", "stray_inductance": "from V_s / duty.stray_inductance",
             "natural": "from the waveform's natural slope at its zero"}
    assert words[source] in sentence(note)


def test_half_sine_without_frequency_turns_off_from_its_crest_held():
    # No duty.frequency: the sine's duration is unknown, so its crest is taken as steady before
    # the fall (an upper bound on the stored charge); the carried charge is then the steady ramp's.
    text = _SQUARE.format(current="10 A", waveform="half-sine", part=_PART).replace(
        'frequency = "20 kHz"\n', "").replace("[thermal]", "[thermal_unused]").replace(
        'heatsink = "separate"\nr_th_sa = "0.5 K/W"\n', "")
    text = text.replace("[thermal_unused]\n", "")
    rescaling, note = recovery_rescaling(parse_design_text(text))
    assert rescaling.turn_off.basis == "half_sine_crest" and note.code.endswith("half_sine_crest")
    carried = {item.part: item.carried_typ for item in rescaling.turn_off.parts}
    assert carried["A"] == pytest.approx(_carried(1e-6, 10 * np.pi), rel=1e-9)


def test_square_wave_has_no_natural_slope():
    text = _SQUARE.format(current="10 A", waveform="square", part=_PART).replace(
        'di_dt = "100 A/us"', "")
    rescaling, note = recovery_rescaling(parse_design_text(text))
    assert rescaling is None and note.code == "recovery.not_rescaled"


def test_offset_sine_is_a_half_sine_pulse_with_its_own_reverse_voltage():
    result = run_check(_square_design(waveform="offset-sine"), only=("dynamic",))
    assert result.checks["dynamic"].turn_off_current.basis == "half_sine_history"
    assert "model.offset_sine_current" in [f.code for f in result.assumptions]


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
    text = (_SQUARE.format(current="30 A", waveform="dc", part=_PART)
            .replace(', at_forward_current = "5 A"', "")
            .replace('di_dt = "100 A/us"', 'di_dt = "50 A/us"')
            .replace("series = 2", "series = 2\nparallel = 3"))
    design = parse_design_text(text)
    rescaling, note = recovery_rescaling(design)
    assert rescaling.turn_off.current == pytest.approx(10.0)  # 30 A over 3 branches, dc
    for fit in rescaling.fits.values():
        assert fit.test_current == pytest.approx(10.0)
    grid = design.string.part_grid()
    # Fixed parts (typ only): A's 1 uC and B's 1.5 uC, as drawn.
    charge = np.broadcast_to(np.where(grid == "A", 1e-6, 1.5e-6), (4,) + grid.shape)
    np.testing.assert_allclose(rescale_charges(charge, grid, rescaling), charge, rtol=1e-6)
    assert "no q_rr.at_forward_current" in sentence(note) and \
        "not rescaled in current" in sentence(note)
