"""Tests of stringcheck.solvers.series_dynamic (charge balance at turn-off)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.optimize import brentq

from stringcheck.physics.grading import worst_case_dynamic_capacitance
from stringcheck.solvers.series_dynamic import DynamicSharing, solve_dynamic_sharing


@pytest.mark.parametrize("count", [2, 5, 12, 40])
def test_textbook_worst_corner_puts_exactly_the_limit_on_the_fast_device(count):
    # Rashid, Power Electronics, 3rd ed., ch. 2 (series-connected diodes): with one device at the
    # minimum Q_rr and n - 1 at the maximum, C = (n - 1) dQ_rr / (n V_DM - V_s) puts V_DM on the
    # fast device. Operating point of our own: 1.2 kV parts derated to 1 kV, 0.8 kV per device.
    limit, string_voltage = 1000.0, 800.0 * count
    low, high = 4e-6, 6.5e-6
    capacitance = worst_case_dynamic_capacitance(count, limit, string_voltage, high - low)
    charges = np.full(count, high)
    charges[count // 2] = low
    sharing = solve_dynamic_sharing(string_voltage, charges, capacitance)
    assert math.isclose(sharing.voltages[count // 2], limit, rel_tol=1e-12)
    assert math.isclose(sharing.voltages.sum(), string_voltage, rel_tol=1e-12)
    # Slow devices share the rest equally.
    slow = np.delete(sharing.voltages, count // 2)
    np.testing.assert_allclose(slow, (string_voltage - limit) / (count - 1), rtol=1e-12)


def test_two_equal_capacitors_closed_form():
    # Charge balance with both blocking: C V_1 - C V_2 = dQ, V_1 + V_2 = V_s, so
    # V_1 = V_s / 2 + dQ / (2 C) (closed form of the same equations).
    sharing = solve_dynamic_sharing(2000.0, [1e-6, 1.5e-6], 1e-9)
    np.testing.assert_allclose(sharing.voltages, [1000.0 + 250.0, 1000.0 - 250.0], rtol=1e-12)
    assert math.isclose(sharing.extracted_charge, 1e-6 + 1e-9 * 1250.0, rel_tol=1e-12)


def test_a_device_still_recovering_takes_no_voltage():
    # dQ / C = 1 uC / 100 pF = 10 kV > V_s: the slow device is still recovering, so the fast one
    # takes the whole string voltage (V_k = max(Q - Q_rr,k, 0) / C_k).
    sharing = solve_dynamic_sharing(2000.0, [1e-6, 2e-6], 100e-12)
    np.testing.assert_allclose(sharing.voltages, [2000.0, 0.0], rtol=1e-14)


def _brentq_voltages(string_voltage, charges, capacitances):
    """Independent solution of sum_k max(Q - Q_rr,k, 0) / C_k = V_s by scipy's brentq."""

    def excess(charge):
        return np.sum(np.maximum(charge - charges, 0.0) / capacitances) - string_voltage

    high = charges.max() + string_voltage * capacitances.max()
    extracted = brentq(excess, charges.min(), high, xtol=1e-300, rtol=4 * np.finfo(float).eps)
    return np.maximum(extracted - charges, 0.0) / capacitances


def test_matches_brentq_on_random_strings():
    # Independent solver: scipy.optimize.brentq on the charge-balance equation.
    rng = np.random.default_rng(7)
    charges = np.exp(rng.normal(np.log(5e-6), 0.2, size=(100, 9)))
    capacitances = 2.2e-9 * rng.uniform(0.9, 1.1, size=(100, 9)) + 50e-12
    voltages = rng.uniform(3e3, 9e3, size=100)
    sharing = solve_dynamic_sharing(voltages, charges, capacitances)
    assert isinstance(sharing, DynamicSharing)
    assert sharing.voltages.shape == (100, 9) and sharing.extracted_charge.shape == (100,)
    expected = np.array([_brentq_voltages(*row) for row in zip(voltages, charges, capacitances)])
    np.testing.assert_allclose(sharing.voltages, expected, rtol=1e-9, atol=1e-9 * voltages.max())


def test_scaling_unequal_capacitors_by_a_common_factor_can_raise_the_worst_voltage():
    # Why the capacitance property below adds a common amount (or scales equal capacitors) rather
    # than scaling unequal ones: a small capacitor on a slow (high-Q_rr) device. Closed form,
    # both blocking: (Q - 1) / 0.1 + Q / 1 = 11 gives Q = 21 / 11, V = (100 / 11, 21 / 11);
    # doubling both capacitors: (Q - 1) / 0.2 + Q / 2 = 11 gives Q = 32 / 11, V = (105 / 11, 16 / 11).
    before = solve_dynamic_sharing(11.0, [1.0, 0.0], [0.1, 1.0]).voltages
    after = solve_dynamic_sharing(11.0, [1.0, 0.0], [0.2, 2.0]).voltages
    np.testing.assert_allclose(before, [100 / 11, 21 / 11], rtol=1e-13)
    np.testing.assert_allclose(after, [105 / 11, 16 / 11], rtol=1e-13)
    assert after.max() > before.max()


def test_nan_propagates_per_trial():
    sharing = solve_dynamic_sharing(1000.0, [[1e-6, np.nan], [1e-6, 2e-6]], 1e-9)
    assert np.isnan(sharing.voltages[0]).all()
    assert np.isfinite(sharing.voltages[1]).all()


strings = st.integers(min_value=2, max_value=10).flatmap(
    lambda count: st.tuples(
        st.floats(min_value=100.0, max_value=1e5),
        arrays(float, count, elements=st.floats(min_value=1e-7, max_value=1e-4)),
        arrays(float, count, elements=st.floats(min_value=1e-11, max_value=1e-7)),
    )
)


@settings(max_examples=100, deadline=None)
@given(strings)
def test_voltages_sum_to_the_string_voltage(string):
    # Conservation (Kirchhoff's voltage law around the string). With capacitances four decades
    # apart, (Q - Q_rr,k) / C_k rounds to a few ulps of the level over C_min: 1e-10 relative is
    # far below anything physical and well above that rounding (a case at 1.05e-12 was found).
    string_voltage, charges, capacitances = string
    sharing = solve_dynamic_sharing(string_voltage, charges, capacitances)
    assert math.isclose(sharing.voltages.sum(), string_voltage, rel_tol=1e-10)
    assert (sharing.voltages >= 0.0).all()
    # Charge balance: every blocking stage holds Q - Q_rr,k on its capacitance.
    blocking = sharing.voltages > 0.0
    np.testing.assert_allclose(
        charges[blocking] + capacitances[blocking] * sharing.voltages[blocking],
        sharing.extracted_charge,
        rtol=1e-12,
    )


@settings(max_examples=100, deadline=None)
@given(strings, st.randoms(use_true_random=False))
def test_permuting_positions_permutes_the_answer(string, random):
    string_voltage, charges, capacitances = string
    order = list(range(charges.size))
    random.shuffle(order)
    sharing = solve_dynamic_sharing(string_voltage, charges, capacitances)
    permuted = solve_dynamic_sharing(string_voltage, charges[order], capacitances[order])
    np.testing.assert_allclose(
        permuted.voltages, sharing.voltages[order], rtol=1e-9, atol=1e-12 * string_voltage
    )


@settings(max_examples=100, deadline=None)
@given(strings, st.floats(min_value=1e-12, max_value=1e-6))
def test_adding_a_common_capacitance_never_raises_the_worst_voltage(string, extra):
    # Proof for C_k -> C_k + d (any unequal C_k): on a fixed set of blocking stages,
    # Q = Q_rr,k + C_k V_k for each, and sum_k dV_k = 0 gives dQ/dd = mean of V_k weighted by
    # 1 / C_k, so dV_k/dd = (mean - V_k) / C_k <= 0 for the stage with the largest V_k. Stages
    # join the blocking set with V = 0, and V is continuous in d, so max_k V_k never rises.
    string_voltage, charges, capacitances = string
    before = solve_dynamic_sharing(string_voltage, charges, capacitances).voltages.max()
    after = solve_dynamic_sharing(string_voltage, charges, capacitances + extra).voltages.max()
    assert after <= before * (1 + 1e-12)


@settings(max_examples=100, deadline=None)
@given(strings, st.floats(min_value=1.0, max_value=100.0))
def test_scaling_an_equal_capacitance_never_raises_the_worst_voltage(string, factor):
    # Equal capacitances C on every stage: scaling C by a factor is adding a common amount, so
    # the proof above applies (the fast device's share V_s / p + (mean Q_rr - Q_rr,min) / C falls).
    string_voltage, charges, capacitances = string
    equal = np.full_like(capacitances, capacitances[0])
    before = solve_dynamic_sharing(string_voltage, charges, equal).voltages.max()
    after = solve_dynamic_sharing(string_voltage, charges, factor * equal).voltages.max()
    assert after <= before * (1 + 1e-12)
