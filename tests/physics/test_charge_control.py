"""Tests of stringcheck.physics.charge_control.

Source of the model: P. O. Lauritzen and C. L. Ma, "A simple diode model with reverse recovery",
IEEE Trans. Power Electronics 6(2), 1991: i = (q_E - q_M) / T_M, dq_M/dt = i - q_M / tau,
q_E = I_S tau (exp(v / nV_T) - 1). The closed forms under test are derived in the docstring of
``ramp_recovery``; they are checked here against scipy's solve_ivp on the model's own equations in
an inductive test circuit, against scipy's brentq, and by round trips. Device values are invented.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from stringcheck.physics.charge_control import (
    RampRecovery,
    diode_current,
    emitter_charge,
    forward_state,
    ramp_recovery,
    stored_charge_rate,
    thermal_voltage,
)
from stringcheck.physics.charge_control_fit import (
    ChargeControlFit,
    fit_charge_control,
    lifetime_for_charge,
    peak_current_from_recovery_time,
    rescale_recovery_charge,
)

SATURATION, EMISSION = 1e-9, 2.0


def _recover_in_test_circuit(lifetime, transit_time, forward_current, di_dt):
    """Turn-off of one model diode by solve_ivp (Radau), written from the paper's equations.

    Circuit: reverse source V_R through L = V_R / (di/dt) onto the diode, which has a small C_j
    and an R-C snubber (R = sqrt(L / C)) across it so that the snap-off does not swing the diode
    back into conduction. The snubber takes current only while v changes, about C x 1.3 V = 13 nC
    before the peak against microcoulombs of recovery charge. Returns the time grid and the
    diode's own current (q_E - q_M) / T_M, measured from the zero crossing of the ramp.
    """
    reverse, junction, snubber = 1000.0, 10e-12, 10e-9
    inductance = reverse / di_dt
    damping = math.sqrt(inductance / snubber)
    scale = 1.0 / (EMISSION * float(thermal_voltage(300.0)))
    start = forward_state(forward_current, lifetime, transit_time)

    def rates(_, state):
        current, voltage, stored, held = state
        diode = (SATURATION * lifetime * math.expm1(scale * voltage) - stored) / transit_time
        branch = (voltage - held) / damping
        return [(-reverse - voltage) / inductance, (current - diode - branch) / junction,
                diode - stored / lifetime, branch / snubber]

    fall = forward_current / di_dt
    end = fall + 5.0 * math.sqrt(2.0 * lifetime * forward_current / di_dt) + 30.0 * lifetime
    initial = [forward_current, float(start.junction_voltage), float(start.stored_charge),
               float(start.junction_voltage)]
    tolerances = [1e-9 * forward_current, 1e-6, 1e-9 * lifetime * forward_current, 1e-6]
    solution = solve_ivp(rates, (0.0, end), initial, method="Radau", rtol=1e-9,
                         atol=tolerances, dense_output=True)
    assert solution.status == 0
    time = np.linspace(0.0, end, 200_001)
    _, voltage, stored, _ = solution.sol(time)
    diode = (SATURATION * lifetime * np.expm1(scale * voltage) - stored) / transit_time
    return time - fall, diode


def _measured(time, diode):
    """I_RM, the tail time constant (log-slope from 60 % to 10 % of I_RM) and Q_rr of a record."""
    peak_index = int(np.argmin(diode))
    peak = -diode[peak_index]
    tail = (np.arange(diode.size) > peak_index) & (-diode < 0.6 * peak) & (-diode > 0.1 * peak)
    slope = np.polyfit(time[tail], np.log(-diode[tail]), 1)[0]
    charge = np.trapezoid(np.where(diode < 0.0, -diode, 0.0), time)
    return peak, -1.0 / slope, charge, time[peak_index]


@pytest.mark.parametrize(
    "lifetime, transit_time, forward_current, di_dt",
    [(0.5e-6, 0.1e-6, 100.0, 50e6),   # long conduction: I_F / (a tau) = 4
     (2e-6, 0.5e-6, 20.0, 100e6)],     # short: I_F / (a tau) = 0.1, W_0 far from 0
)
def test_ramp_closed_forms_match_the_ode(lifetime, transit_time, forward_current, di_dt):
    # Independent: solve_ivp (Radau) of the charge-control equations of Lauritzen and Ma (1991).
    # Tolerances: 0.5 % on I_RM and Q_rr (the ramp is (V_R + v_F) / L, 0.13 % steeper than
    # V_R / L, and the snubber takes ~13 nC before the peak); 0.2 % on tau_rr, which the ODE
    # reproduces exactly once q_E sits at -I_S tau.
    closed = ramp_recovery(lifetime, transit_time, forward_current, di_dt)
    peak, tail, charge, rise = _measured(*_recover_in_test_circuit(
        lifetime, transit_time, forward_current, di_dt))
    assert math.isclose(peak, closed.peak_current, rel_tol=5e-3)
    assert math.isclose(tail, closed.tail_time_constant, rel_tol=2e-3)
    assert math.isclose(tail, lifetime * transit_time / (lifetime + transit_time), rel_tol=2e-3)
    assert math.isclose(charge, closed.recovery_charge, rel_tol=5e-3)
    assert math.isclose(rise, closed.rise_time, rel_tol=2e-2)


def test_peak_current_solves_the_blocking_condition_by_brentq():
    # The closed form is the root of q_E(t_1) = q_M(t_1) + T_M i(t_1) = 0 for the ramp solution
    # q_M(t) = tau (I_F - a t) + a tau^2 (1 - exp(-t / tau)); brentq finds it independently.
    lifetime, transit_time, forward_current, di_dt = 1.2e-6, 0.3e-6, 40.0, 30e6

    def emitter(time):
        current = forward_current - di_dt * time
        stored = lifetime * current + di_dt * lifetime**2 * (1.0 - math.exp(-time / lifetime))
        return stored + transit_time * current

    blocking = brentq(emitter, 0.0, 10.0 * forward_current / di_dt, xtol=1e-18, rtol=1e-15)
    closed = ramp_recovery(lifetime, transit_time, forward_current, di_dt)
    assert math.isclose(closed.peak_current, di_dt * blocking - forward_current, rel_tol=1e-10)


def test_long_conduction_limit():
    # For I_F >> a tau the Lambert term vanishes: I_RM = a tau^2 / (tau + T_M) (closed form).
    closed = ramp_recovery(1e-6, 0.25e-6, 1e4, 10e6)
    assert math.isclose(closed.peak_current, 10e6 * 1e-12 / 1.25e-6, rel_tol=1e-12)


def test_model_equations_at_a_steady_forward_state():
    # In a steady state dq_M/dt = 0 and the diode plus shunt carry I_F (paper's equations).
    lifetime, transit_time, current, shunt = 0.8e-6, 0.2e-6, 50.0, 1e-3
    state = forward_state(current, lifetime, transit_time, shunt_conductance=shunt)
    q_e = emitter_charge(state.junction_voltage, lifetime)
    diode = diode_current(q_e, state.stored_charge, transit_time)
    assert math.isclose(diode + shunt * state.junction_voltage, current, rel_tol=1e-12)
    assert abs(stored_charge_rate(diode, state.stored_charge, lifetime)) < 1e-12 * current
    # brentq on the same steady-state equation, independently of the Newton iteration.
    scale = EMISSION * float(thermal_voltage(300.0))
    root = brentq(lambda v: SATURATION * lifetime * math.expm1(v / scale)
                  - (lifetime + transit_time) * (current - shunt * v), 0.0, 5.0, xtol=1e-15)
    assert math.isclose(state.junction_voltage, root, rel_tol=1e-12)
    # k T / q at 300 K is 25.85 mV (CODATA constants).
    assert math.isclose(thermal_voltage(300.0), 0.025852, rel_tol=1e-4)


def test_fit_round_trip_closed_form_and_ode():
    # Target invented: Q_rr = 8 uC, I_RM = 25 A at I_F = 100 A, 50 A/us. Closed-form round trip to
    # 1e-9; the ODE of the fitted model (solve_ivp, as above) reproduces the targets within 0.5 %.
    target_charge, target_peak, current, rate = 8e-6, 25.0, 100.0, 50e6
    fit = fit_charge_control(target_charge, target_peak, current, rate)
    assert isinstance(fit, ChargeControlFit)
    closed = ramp_recovery(fit.lifetime, fit.transit_time, current, rate)
    assert isinstance(closed, RampRecovery)
    assert math.isclose(closed.recovery_charge, target_charge, rel_tol=1e-9)
    assert math.isclose(closed.peak_current, target_peak, rel_tol=1e-9)
    peak, _, charge, _ = _measured(*_recover_in_test_circuit(fit.lifetime, fit.transit_time,
                                                             current, rate))
    assert math.isclose(peak, target_peak, rel_tol=5e-3)
    assert math.isclose(charge, target_charge, rel_tol=5e-3)


def test_fit_from_recovery_time_round_trip():
    # A datasheet with t_rr (25 % end point, common practice) instead of I_RM.
    fit = ChargeControlFit(lifetime=np.array([0.4e-6, 3e-6]), transit_time=np.array([0.1e-6, 1e-6]))
    closed = ramp_recovery(fit.lifetime, fit.transit_time, 60.0, 80e6)
    peak = peak_current_from_recovery_time(closed.recovery_charge, closed.recovery_time, 80e6)
    np.testing.assert_allclose(peak, closed.peak_current, rtol=1e-12)
    back = fit_charge_control(closed.recovery_charge, peak, 60.0, 80e6)
    np.testing.assert_allclose(back.lifetime, fit.lifetime, rtol=1e-9)
    np.testing.assert_allclose(back.transit_time, fit.transit_time, rtol=1e-9)


def test_impossible_targets_give_nan():
    # A triangle with no tail already holds I_RM^2 / (2a): less charge than that has no model;
    # likewise a t_rr too short for the charge, and no stored charge without forward current.
    assert np.isnan(fit_charge_control(1e-6, 20.0, 100.0, 50e6).lifetime)  # 20^2/(1e8) = 4 uC
    assert np.isnan(fit_charge_control(8e-6, 25.0, 0.0, 50e6).lifetime)
    assert np.isnan(peak_current_from_recovery_time(10e-6, 0.5e-6, 50e6))  # a t^2 / 2 = 6.25 uC
    assert np.isnan(lifetime_for_charge(5e-6, 1e-7, 0.0, 50e6))


def test_monte_carlo_mapping_round_trip_vectorized():
    # Each drawn Q_rr maps onto a tau whose closed-form Q_rr gives the draw back (1e-10).
    rng = np.random.default_rng(11)
    draws = np.exp(rng.normal(np.log(6e-6), 0.3, size=(200, 12)))
    lifetime = lifetime_for_charge(draws, 0.12e-6, 100.0, 50e6)
    assert lifetime.shape == (200, 12) and np.isfinite(lifetime).all()
    back = ramp_recovery(lifetime, 0.12e-6, 100.0, 50e6).recovery_charge
    np.testing.assert_allclose(back, draws, rtol=1e-10)
    # A larger draw needs a longer lifetime (Q_rr rises with tau at fixed T_M).
    order = np.argsort(draws, axis=None)
    assert (np.diff(lifetime.ravel()[order]) > 0.0).all()


def test_rescale_identity_and_against_the_ode():
    # At the test condition itself the rescaling is the identity; at another condition it equals
    # the Q_rr that the model's ODE gives there (solve_ivp, 0.5 % as above).
    fit = fit_charge_control(8e-6, 25.0, 100.0, 50e6)
    same = rescale_recovery_charge(8e-6, fit.transit_time, 100.0, 50e6, 100.0, 50e6)
    assert math.isclose(same, 8e-6, rel_tol=1e-10)
    moved = rescale_recovery_charge(8e-6, fit.transit_time, 100.0, 50e6, 30.0, 120e6)
    *_, charge, _ = _measured(*_recover_in_test_circuit(fit.lifetime, fit.transit_time,
                                                        30.0, 120e6))
    assert math.isclose(moved, charge, rel_tol=5e-3)


lifetimes = st.floats(min_value=-7.5, max_value=-4.5).map(lambda e: 10.0**e)
fractions = st.floats(min_value=0.01, max_value=0.9)
currents = st.floats(min_value=0.0, max_value=3.0).map(lambda e: 10.0**e)
slopes = st.floats(min_value=6.0, max_value=9.0).map(lambda e: 10.0**e)


@settings(max_examples=60, deadline=None)
@given(lifetimes, fractions, currents, slopes, st.floats(min_value=1.01, max_value=4.0))
def test_faster_commutation_and_longer_lifetime_raise_the_recovery(tau, share, current, rate,
                                                                   factor):
    # Properties of the closed forms: Q_rr and I_RM grow with di/dt (less time to recombine) and
    # with tau at fixed T_M. Bound from the paper's equations: q_M never exceeds tau I_F (it
    # relaxes towards tau i <= tau I_F), and from the zero crossing t_0 on the reverse charge is
    # q_M(t_0) minus what recombines, so Q_rr <= q_M(t_0) <= tau I_F.
    transit = tau * share
    base = ramp_recovery(tau, transit, current, rate)
    faster = ramp_recovery(tau, transit, current, rate * factor)
    longer = ramp_recovery(tau * factor, transit, current, rate)
    assert faster.recovery_charge >= base.recovery_charge * (1 - 1e-12)
    assert faster.peak_current >= base.peak_current * (1 - 1e-12)
    assert longer.recovery_charge >= base.recovery_charge * (1 - 1e-12)
    assert base.recovery_charge <= tau * current * (1 + 1e-9)
