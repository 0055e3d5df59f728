"""Rectifier and multiplier formulas (physics/circuits.py) against outside references."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

from stringcheck.physics.circuits import (
    capacitor_input_pulse,
    commutation_slope,
    multiplier_output,
    overlap_angle,
    secondary_peak,
)


def test_overlap_angle_and_slope_of_a_three_phase_bridge():
    # Mohan, Undeland and Robbins, Power Electronics, 3rd ed., 2003, ch. 5 (current commutation
    # with L_s): cos u = 1 - 2 omega L I_d / (sqrt(2) V_LL). 400 V, 100 uH, 50 Hz, 100 A:
    # 2 omega L I_d = 6.283 V, sqrt(2) V_LL = 565.7 V, cos u = 0.98889, u = 8.55 deg ("about 8.6").
    u = overlap_angle(400.0, 100e-6, 100.0, 50.0)
    assert math.degrees(u) == pytest.approx(8.5476, abs=1e-3)
    assert abs(math.degrees(u) - 8.6) < 0.1
    # The outgoing current falls at sqrt(2) V_LL sin(u) / (2 L) = 565.7 x 0.1486 / 2e-4 A/s at
    # the end of the overlap: about 0.42 A/us.
    slope = commutation_slope(400.0, 100e-6, u)
    assert slope / 1e6 == pytest.approx(0.42, abs=0.005)


def test_overlap_volt_seconds_against_solve_ivp():
    # Independent solver: integrate the commutation loop 2 L di/dt = sqrt(2) V sin(omega t) from
    # i = 0 until the incoming diode carries I_d; the phase reached is the overlap angle, and the
    # slope there the commutation slope.
    v, inductance, current, f = 400.0, 100e-6, 100.0, 50.0
    omega = 2 * math.pi * f

    def loop(t, y):
        return [math.sqrt(2) * v * math.sin(omega * t) / (2 * inductance)]

    def done(t, y):
        return y[0] - current
    done.terminal = True
    solution = solve_ivp(loop, (0.0, 0.5 / f), [0.0], events=done, rtol=1e-10, atol=1e-9)
    reached = solution.t_events[0][0] * omega
    assert overlap_angle(v, inductance, current, f) == pytest.approx(reached, rel=1e-6)
    assert commutation_slope(v, inductance, reached) == pytest.approx(
        loop(solution.t_events[0][0], None)[0], rel=1e-9)


def test_overlap_outside_the_model_is_nan():
    # 2 omega L I_d > 2 sqrt(2) V: no commutation completes within a half period.
    assert np.isnan(overlap_angle(100.0, 1.0, 100.0, 50.0))


def test_cockcroft_walton_ripple_drop_and_piv():
    # Kuffel, Zaengl and Kuffel, High Voltage Engineering Fundamentals, 2nd ed., 2000, ch. 2
    # (cascade circuits, from memory): ripple I n (n + 1) / (2 f C), drop
    # (I / (6 f C)) (4 n^3 + 3 n^2 - n); n = 10, 1 mA, 50 kHz, 1 nF: I / (f C) = 20 V, ripple
    # 20 x 110 / 2 = 1,100 V, drop 20 / 6 x 4,290 = 14,300 V; PIV 2 V_pk on every stack.
    out = multiplier_output(10e3, 10, 1e-3, 1e-9, 50e3)
    assert float(out.ripple) == pytest.approx(1100.0, rel=1e-12)
    assert float(out.drop) == pytest.approx(14300.0, rel=1e-12)
    assert float(out.diode_reverse_voltage) == pytest.approx(2 * 10e3)
    assert float(out.output_voltage) == pytest.approx(2 * 10 * 10e3 - 14300.0)


def test_secondary_peak():
    # The rms of a sinusoid is its peak over sqrt(2) (Nilsson and Riedel, Electric Circuits, ch. 10).
    assert secondary_peak(10e3) == pytest.approx(14142.1356, rel=1e-8)


def _simulated_conduction(v_pk, load, capacitance, f, periods=30):
    """The capacitor-input half-wave rectifier by solve_ivp: an ideal source, a diode of a small
    on-resistance (a stiff but smooth switch), a capacitor and a constant-current load. Returns
    the conduction angle [rad] and the ripple [V] over the last period."""
    omega = 2 * math.pi * f
    on = 1e-4 / (omega * capacitance)  # R C << 1 / omega: the diode is near ideal

    def circuit(t, y):
        drive = v_pk * math.sin(omega * t) - y[0]
        return [(max(drive, 0.0) / on - load) / capacitance]

    period = 1.0 / f
    last = np.linspace((periods - 1) * period, periods * period, 200_001)
    solution = solve_ivp(circuit, (0.0, periods * period), [v_pk], method="LSODA", t_eval=last,
                         rtol=1e-9, atol=1e-9 * v_pk, max_step=period / 2000)
    vc = solution.y[0]
    conducting = v_pk * np.sin(omega * last) > vc
    angle = conducting.mean() * 2 * math.pi
    return angle, vc.max() - vc.min()


@pytest.mark.parametrize("capacitance", [20e-6, 100e-6])
def test_capacitor_input_conduction_angle_against_solve_ivp(capacitance):
    # Independent solver on the same circuit (kind 4 of the style guide).
    v_pk, load, f = 1000.0, 0.05, 50.0
    pulse = capacitor_input_pulse(v_pk, load, capacitance, f)
    angle, ripple = _simulated_conduction(v_pk, load, capacitance, f)
    assert float(pulse.conduction_angle) == pytest.approx(angle, rel=0.02)
    assert float(pulse.ripple) == pytest.approx(ripple, rel=0.01)


def test_capacitor_input_small_ripple_limit_of_the_textbook():
    # Sedra and Smith, Microelectronic Circuits, 6th ed., 2010, ch. 4 (the peak rectifier):
    # V_r = I_L / (f C), omega dt = sqrt(2 V_r / V_p) before the crest,
    # i_D,max = I_L (1 + 2 pi sqrt(2 V_p / V_r)); valid for V_r << V_p.
    v_pk, load, c, f = 1000.0, 0.01, 1e-3, 50.0
    pulse = capacitor_input_pulse(v_pk, load, c, f)
    ripple = load / (f * c)
    assert float(pulse.ripple) == pytest.approx(ripple, rel=0.01)
    assert math.pi / 2 - float(pulse.start) == pytest.approx(math.sqrt(2 * ripple / v_pk), rel=0.01)
    assert float(pulse.peak_current) == pytest.approx(
        load * (1 + 2 * math.pi * math.sqrt(2 * v_pk / ripple)), rel=0.01)
    # Charge balance: one diode carries the whole load current on average.
    assert float(pulse.average_current) == pytest.approx(load)


def test_capacitor_input_full_wave_halves_the_ripple_and_the_diode_current():
    # Two pulses a period (center-tap, bridge): V_r = I_L / (2 f C) (Sedra and Smith, ch. 4).
    half = capacitor_input_pulse(1000.0, 0.01, 1e-3, 50.0)
    full = capacitor_input_pulse(1000.0, 0.01, 1e-3, 50.0, pulses=2)
    assert float(full.ripple) == pytest.approx(float(half.ripple) / 2, rel=0.02)
    assert float(full.average_current) == pytest.approx(0.005)


def test_capacitor_too_small_is_nan():
    pulse = capacitor_input_pulse(100.0, 1.0, 1e-6, 50.0)
    assert np.isnan(pulse.start)


@settings(max_examples=60, deadline=None)
@given(st.floats(1e-6, 1e-3), st.floats(1.1, 10.0))
def test_more_capacitance_narrows_the_pulse(capacitance, factor):
    # A larger reservoir ripples less and so conducts over a shorter angle at a higher peak.
    small = capacitor_input_pulse(1000.0, 0.01, capacitance, 50.0)
    large = capacitor_input_pulse(1000.0, 0.01, capacitance * factor, 50.0)
    if np.isnan(small.start):
        return
    assert float(large.ripple) < float(small.ripple)
    assert float(large.conduction_angle) < float(small.conduction_angle)
    assert float(large.peak_current) > float(small.peak_current)
    # The rms of a pulse of given average is at least its average (Cauchy-Schwarz).
    assert float(small.rms_current) >= float(small.average_current)
