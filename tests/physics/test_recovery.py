"""Tests of stringcheck.physics.recovery.

Source of the relations: M. H. Rashid, Power Electronics, 3rd ed., ch. 2 (reverse recovery
characteristics), and N. Mohan, T. Undeland, W. Robbins, Power Electronics, 3rd ed., ch. 20
(power diodes): triangular recovery current, Q_rr = 1/2 I_RM t_rr, I_RM = t_a di/dt, S = t_b / t_a.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad

from stringcheck.physics.recovery import (
    RECOVERY_END_FRACTION,
    peak_current_from_charge,
    peak_current_from_rise,
    recovery_charge,
    recovery_time_fraction,
    recovery_time_from_charge,
    recovery_time_to_fraction,
    softness,
)

charges = st.floats(min_value=-9.0, max_value=-3.0).map(lambda exponent: 10.0**exponent)
rates = st.floats(min_value=6.0, max_value=10.0).map(lambda exponent: 10.0**exponent)
times = st.floats(min_value=-9.0, max_value=-4.0).map(lambda exponent: 10.0**exponent)


def test_recovery_charge_is_the_area_of_the_triangle():
    # Rashid ch. 2 / Mohan ch. 20: the triangular reverse current of height I_RM, rising for t_a
    # and falling for t_b; its area integrated numerically by scipy's quad.
    peak, rise, fall = 30.0, 2e-6, 1.5e-6

    def reverse_current(time):
        if time <= rise:
            return peak * time / rise
        return peak * max(rise + fall - time, 0.0) / fall

    area, _ = quad(reverse_current, 0.0, rise + fall, points=[rise], epsabs=0.0, epsrel=1e-12)
    assert math.isclose(recovery_charge(peak, rise + fall), area, rel_tol=1e-10)


def test_peak_current_from_rise_and_softness_of_a_triangle():
    # I_RM = t_a di/dt (Rashid ch. 2); S = t_b / t_a.
    assert peak_current_from_rise(50e6, 2e-6) == 100.0
    assert softness(2e-6, 0.0) == 0.0
    assert softness(2e-6, 2e-6) == 1.0
    assert softness(2e-6, 1e-6) == 0.5


def test_abrupt_recovery_relations_give_back_the_charge():
    # With t_b = 0, t_rr = t_a: Q_rr = 1/2 I_RM t_rr, I_RM = t_rr di/dt, so
    # t_rr = sqrt(2 Q / di/dt) and I_RM = sqrt(2 Q di/dt) (Rashid ch. 2).
    charge, rate = 10e-6, 50e6  # 10 uC at 50 A/us
    time = recovery_time_from_charge(charge, rate)
    peak = peak_current_from_charge(charge, rate)
    assert math.isclose(time, math.sqrt(2 * 10e-6 / 50e6), rel_tol=1e-15)  # 0.632 us
    assert math.isclose(peak, math.sqrt(2 * 10e-6 * 50e6), rel_tol=1e-15)  # 31.6 A
    assert math.isclose(recovery_charge(peak, time), charge, rel_tol=1e-14)
    assert math.isclose(peak_current_from_rise(rate, time), peak, rel_tol=1e-14)


def test_recovery_ends_at_a_quarter_of_the_peak():
    # Common practice: t_rr ends where the reverse current has decayed to 25 % of I_RM.
    assert RECOVERY_END_FRACTION == 0.25
    rise, tau, peak = 1e-6, 0.4e-6, 20.0
    end = recovery_time_to_fraction(rise, tau)
    # Exponential tail i(t) = I_RM exp(-(t - t_a) / tau) evaluated at the end point.
    assert math.isclose(peak * math.exp(-(end - rise) / tau), 0.25 * peak, rel_tol=1e-14)
    assert math.isclose(end, rise + tau * math.log(4.0), rel_tol=1e-15)


def test_no_tail_means_recovery_ends_at_the_peak():
    # tau = 0: t_rr = t_a for any end fraction (closed-form limit).
    np.testing.assert_array_equal(
        recovery_time_to_fraction([1e-6, 3e-6], 0.0, fraction=0.1), [1e-6, 3e-6]
    )


def test_five_microsecond_device_recovers_for_the_whole_period_at_200_khz():
    # Common practice: a 5 us device is busy recovering for the whole period at 200 kHz and belongs
    # at 10-20 kHz at most, where it recovers for 5-10 % of each period.
    assert math.isclose(recovery_time_fraction(5e-6, 200e3), 1.0, rel_tol=1e-15)
    np.testing.assert_allclose(recovery_time_fraction(5e-6, [10e3, 20e3]), [0.05, 0.10], rtol=1e-15)


def test_nan_propagates_and_arrays_broadcast():
    result = recovery_time_from_charge(np.array([[1e-6], [np.nan]]), np.array([10e6, 100e6]))
    assert result.shape == (2, 2)
    assert np.isfinite(result[0]).all() and np.isnan(result[1]).all()


@settings(max_examples=100, deadline=None)
@given(charges, rates)
def test_round_trip_through_the_triangle(charge, rate):
    # Q_rr -> (t_rr, I_RM) -> 1/2 I_RM t_rr gives Q_rr back; I_RM / t_rr is the imposed di/dt.
    time = recovery_time_from_charge(charge, rate)
    peak = peak_current_from_charge(charge, rate)
    assert math.isclose(recovery_charge(peak, time), charge, rel_tol=1e-12)
    assert math.isclose(peak / time, rate, rel_tol=1e-12)


@settings(max_examples=100, deadline=None)
@given(charges, rates)
def test_recovery_time_scales_with_square_root_of_charge(charge, rate):
    # t_rr = sqrt(2 Q / di/dt): four times the charge doubles t_rr; four times di/dt halves it.
    base = recovery_time_from_charge(charge, rate)
    assert math.isclose(recovery_time_from_charge(4.0 * charge, rate), 2.0 * base, rel_tol=1e-12)
    assert math.isclose(recovery_time_from_charge(charge, 4.0 * rate), 0.5 * base, rel_tol=1e-12)


@settings(max_examples=100, deadline=None)
@given(
    times,
    times,
    st.floats(min_value=0.01, max_value=0.9),
    st.floats(min_value=0.01, max_value=0.9),
)
def test_a_lower_end_fraction_gives_a_longer_recovery_time(rise, tau, first, second):
    # The exponential tail is decreasing, so it reaches a lower fraction of I_RM later.
    low, high = min(first, second), max(first, second)
    assert recovery_time_to_fraction(rise, tau, fraction=low) >= recovery_time_to_fraction(
        rise, tau, fraction=high
    )
    # And the current at the end point is the requested fraction of I_RM.
    end = recovery_time_to_fraction(rise, tau, fraction=low)
    assert math.isclose(math.exp(-(end - rise) / tau), low, rel_tol=1e-9)
