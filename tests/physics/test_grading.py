"""Tests of stringcheck.physics.grading."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.integrate import quad
from scipy.optimize import brentq

from stringcheck.errors import StringcheckError
from stringcheck.physics.grading import (
    discharge_time,
    resistor_power,
    stored_energy,
    worst_case_dynamic_capacitance,
    worst_case_static_resistance,
)


def test_worst_case_static_resistance_formula_and_corner():
    # Rashid, Power Electronics, 3rd ed., ch. 2: R = (n V_DM - V_s) / ((n - 1) dI_R).
    # Operating point of our own: 10 devices, V_DM = 1 kV, V_s = 8 kV, dI_R = 4 uA.
    resistance = worst_case_static_resistance(10, 1000.0, 8000.0, 4e-6)
    assert math.isclose(resistance, 2000.0 / (9 * 4e-6), rel_tol=1e-15)
    # The corner it comes from: the low-leakage device takes V_s / n + (n - 1) R dI_R / n.
    assert math.isclose(800.0 + 9 * resistance * 4e-6 / 10, 1000.0, rel_tol=1e-14)


def test_worst_case_dynamic_capacitance_formula_and_corner():
    # Rashid, Power Electronics, 3rd ed., ch. 2: C = (n - 1) dQ_rr / (n V_DM - V_s).
    capacitance = worst_case_dynamic_capacitance(10, 1000.0, 8000.0, 2e-6)
    assert math.isclose(capacitance, 9 * 2e-6 / 2000.0, rel_tol=1e-15)
    # The fast device takes V_s / n + (n - 1) dQ_rr / (n C).
    assert math.isclose(800.0 + 9 * 2e-6 / (10 * capacitance), 1000.0, rel_tol=1e-14)


def test_sizing_rules_broadcast():
    counts = np.array([[4], [8]])
    result = worst_case_static_resistance(counts, 1000.0, 600.0 * counts, [1e-6, 2e-6, 4e-6])
    assert result.shape == (2, 3)


def test_resistor_power_mean_square_of_each_waveform():
    # Mean square over one period T = 1 by numerical integration (scipy quad), divided by R
    # (Joule heating, average power; Nilsson & Riedel, Electric Circuits, ch. 10).
    peak, resistance = 1000.0, 1e6
    half_sine, _ = quad(lambda t: (peak * math.sin(2 * math.pi * t)) ** 2, 0.0, 0.5)
    square = peak**2 * 0.5
    assert math.isclose(resistor_power(peak, resistance), peak**2 / resistance, rel_tol=1e-15)
    assert math.isclose(
        resistor_power(peak, resistance, waveform="half-sine"), half_sine / resistance, rel_tol=1e-12
    )
    assert math.isclose(
        resistor_power(peak, resistance, waveform="square"), square / resistance, rel_tol=1e-15
    )
    assert resistor_power(peak, np.inf) == 0.0


def test_unknown_waveform_names_the_argument_and_the_choices():
    with pytest.raises(StringcheckError, match="waveform.*'dc', 'half-sine', 'square'"):
        resistor_power(1.0, 1.0, waveform="sine")
    assert issubclass(StringcheckError, ValueError)


def test_stored_energy_is_the_work_to_charge_the_capacitor():
    # W = integral of v dq = integral_0^V C v dv (Nilsson & Riedel, ch. 6), by scipy quad.
    capacitance, voltage = 2.2e-9, 1500.0
    work, _ = quad(lambda v: capacitance * v, 0.0, voltage)
    assert math.isclose(stored_energy(capacitance, voltage), work, rel_tol=1e-12)


def test_equal_stages_discharge_in_rc_ln_of_the_voltage_ratio():
    # Closed form: n equal stages V_0 e^(-t / RC) sum to n V_0 e^(-t / RC) = 60 V at
    # t = RC ln(n V_0 / 60) (natural response of an RC circuit, Nilsson & Riedel, ch. 7).
    resistance, capacitance, count, voltage = 4.7e6, 2.2e-9, 12, 800.0
    time = discharge_time(np.full(count, voltage), resistance, capacitance)
    expected = resistance * capacitance * math.log(count * voltage / 60.0)
    assert math.isclose(time, expected, rel_tol=1e-13)


def test_five_second_rule_for_machinery():
    # IEC 60204-1 clause 6.2.4 (from memory): 60 V or less within 5 s. A string of 20 stages at
    # 1 kV with RC = 5 s / ln(20000 / 60) meets it exactly.
    time_constant = 5.0 / math.log(20000.0 / 60.0)
    time = discharge_time(np.full(20, 1000.0), 1e6, time_constant / 1e6)
    assert math.isclose(time, 5.0, rel_tol=1e-13)


def test_unequal_stages_match_brentq():
    # Independent solver: scipy brentq on sum_k V_k0 e^(-t / (R_k C_k)) = threshold.
    rng = np.random.default_rng(2)
    voltages = rng.uniform(100.0, 2000.0, size=(50, 6))
    resistances = 10.0 ** rng.uniform(5.0, 8.0, size=(50, 6))
    capacitances = 10.0 ** rng.uniform(-10.0, -7.0, size=(50, 6))
    thresholds = rng.uniform(20.0, 80.0, size=50)
    times = discharge_time(voltages, resistances, capacitances, threshold=thresholds)
    assert times.shape == (50,)
    for row in range(50):
        tau = resistances[row] * capacitances[row]

        def excess(time, row=row, tau=tau):
            return np.sum(voltages[row] * np.exp(-time / tau)) - thresholds[row]

        expected = brentq(excess, 0.0, 100.0 * tau.max(), xtol=1e-300, rtol=1e-15)
        assert math.isclose(times[row], expected, rel_tol=1e-12)


def test_already_safe_never_safe_and_instant_stages():
    # Below the threshold at once: 0. A stage without a bleed resistor (R = inf) holding more than
    # the threshold: never. A stage with R C = 0 is empty at t = 0+.
    assert discharge_time([20.0, 30.0], 1e6, 1e-9) == 0.0
    assert discharge_time([1000.0, 70.0], [1e6, np.inf], 1e-9) == np.inf
    assert discharge_time([1000.0, 60.0], [1e6, np.inf], 1e-9) == np.inf
    # The floating stage holds 30 V: the other must fall to 30 V, at RC ln(1000 / 30).
    assert math.isclose(
        discharge_time([1000.0, 30.0], [1e6, np.inf], 1e-9), 1e-3 * math.log(1000 / 30), rel_tol=1e-13
    )
    assert math.isclose(
        discharge_time([5000.0, 1000.0], [0.0, 1e6], 1e-9), 1e-3 * math.log(1000 / 60), rel_tol=1e-13
    )
    assert discharge_time([5000.0, 50.0], [0.0, 1e6], 1e-9) == 0.0


def test_discharge_broadcasts_and_propagates_nan():
    times = discharge_time(np.full((3, 2, 4), 500.0), 1e6, [[1e-9], [2e-9]])
    assert times.shape == (3, 2)
    assert math.isclose(times[0, 1], 2 * times[0, 0], rel_tol=1e-13)
    times = discharge_time([[500.0, np.nan], [500.0, 500.0]], 1e6, 1e-9)
    assert np.isnan(times[0]) and np.isfinite(times[1])


stages = st.integers(min_value=1, max_value=8).flatmap(
    lambda count: st.tuples(
        arrays(float, count, elements=st.floats(min_value=0.0, max_value=5e3)),
        arrays(float, count, elements=st.floats(min_value=1e4, max_value=1e9)),
        arrays(float, count, elements=st.floats(min_value=1e-11, max_value=1e-6)),
    )
)


@settings(max_examples=100, deadline=None)
@given(stages)
def test_terminal_voltage_is_the_threshold_at_the_returned_time(chain):
    voltages, resistances, capacitances = chain
    time = discharge_time(voltages, resistances, capacitances)
    remaining = np.sum(voltages * np.exp(-time / (resistances * capacitances)))
    if voltages.sum() <= 60.0:
        assert time == 0.0
    else:
        assert time > 0.0
        assert math.isclose(remaining, 60.0, rel_tol=1e-10)


@settings(max_examples=100, deadline=None)
@given(stages, st.floats(min_value=1.0, max_value=10.0))
def test_more_bleed_resistance_never_discharges_faster(chain, factor):
    # Each term V_k0 e^(-t / (R_k C_k)) grows with R_k, so the sum reaches 60 V no sooner.
    voltages, resistances, capacitances = chain
    base = discharge_time(voltages, resistances, capacitances)
    slower = discharge_time(voltages, factor * resistances, capacitances)
    assert slower >= base * (1 - 1e-12)
