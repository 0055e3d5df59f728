"""physics.waveforms and physics.charge_control_history against outside references."""

import math

import numpy as np
import pytest
from scipy.integrate import quad, solve_ivp

from stringcheck.constants import WAVEFORMS
from stringcheck.errors import StringcheckError
from stringcheck.physics.charge_control import ramp_recovery
from stringcheck.physics.charge_control_fit import rescale_recovery_charge
from stringcheck.physics.charge_control_history import (
    carry_recovery_charge,
    equivalent_steady_current,
    recovery_from_stored_charge,
    zero_crossing_charge,
)
from stringcheck.physics.forward import blocking_factor
from stringcheck.physics.grading import resistor_power
from stringcheck.physics.waveforms import (
    forward_peak_factor,
    natural_commutation_slope,
    reverse_mean_square,
    reverse_voltage_shape,
)


@pytest.mark.parametrize("waveform", WAVEFORMS)
def test_reverse_mean_square_by_quadrature(waveform):
    # Outside reference: scipy.integrate.quad of (v/V)^2 over one period, split at pi.
    def square(theta):
        return float(reverse_voltage_shape(waveform, theta)) ** 2
    total = sum(quad(square, a, b)[0] for a, b in ((0, np.pi), (np.pi, 2 * np.pi)))
    assert reverse_mean_square(waveform) == pytest.approx(total / (2 * np.pi), rel=1e-9)


def test_issue_figures_of_the_mean_square():
    # The issue's figures: offset-sine 0.375 V_pk^2, half-sine 0.25 V_pk^2.
    assert reverse_mean_square("offset-sine") == 0.375
    assert reverse_mean_square("half-sine") == 0.25
    assert float(resistor_power(1000.0, 1e6, waveform="offset-sine")) == pytest.approx(0.375)


def test_offset_sine_swings_between_zero_and_peak():
    theta = np.linspace(0, 2 * np.pi, 1001)
    shape = reverse_voltage_shape("offset-sine", theta)
    assert shape.min() == pytest.approx(0.0, abs=1e-6)
    assert shape.max() == pytest.approx(1.0, abs=1e-6)
    assert float(reverse_voltage_shape("offset-sine", np.pi / 2)) == pytest.approx(0.0)


@pytest.mark.parametrize("m", [0.0, 0.3, 0.5, 1.0])
def test_offset_sine_blocking_factor_by_quadrature(m):
    # Outside reference: quad of (v/V)^(1+m) over a period of (1 - sin)/2.
    value = quad(lambda t: (0.5 * (1 - math.sin(t))) ** (1 + m), 0, 2 * np.pi)[0] / (2 * np.pi)
    assert float(blocking_factor(m, "offset-sine", forward_current=1.0)) == pytest.approx(
        value, rel=1e-9)


def test_natural_slope_of_a_half_sine_by_hand():
    # By hand: i = I_pk sin(wt), di/dt at wt = pi is -w I_pk; I_pk = pi I_AV.
    # 50 Hz, I_AV = 0.5 A: I_pk = 1.5708 A, w = 314.16 rad/s -> 493.5 A/s.
    slope = float(natural_commutation_slope(0.5, 50.0, "half-sine"))
    assert slope == pytest.approx(2 * math.pi * 50 * math.pi * 0.5, rel=1e-12)
    assert slope == pytest.approx(493.48, rel=1e-4)
    # Numerical derivative of the sine at the zero crossing (central difference).
    peak, omega, h = math.pi * 0.5, 2 * math.pi * 50, 1e-7
    t0 = math.pi / omega
    numeric = (peak * math.sin(omega * (t0 + h)) - peak * math.sin(omega * (t0 - h))) / (2 * h)
    assert -numeric == pytest.approx(slope, rel=1e-6)
    assert math.isnan(float(natural_commutation_slope(1.0, 50.0, "square")))
    assert forward_peak_factor("offset-sine") == pytest.approx(math.pi)


def test_unknown_waveform():
    with pytest.raises(StringcheckError, match="triangle"):
        reverse_mean_square("triangle")


def _simulate(tau, transit, current, t_end, rate, t_zero):
    """Own solve_ivp of dq/dt = i - q/tau with i(t) imposed while q_E = q + T_M i > 0, then
    the tail i = -q/T_M; returns Q_rr counted from the current zero (t_zero) and I_RM."""
    def forward(t, y):
        return [current(t) - y[0] / tau]

    def junction_off(t, y):
        return y[0] + transit * current(t)
    junction_off.terminal = True
    junction_off.direction = -1
    first = solve_ivp(forward, (0.0, t_end), [0.0], events=junction_off, rtol=1e-11,
                      atol=1e-22, dense_output=True, max_step=t_end / 2000)
    t1 = first.t_events[0][0]
    q1 = first.y_events[0][0][0]
    peak = -current(t1)
    # Reverse charge during the forward-biased part: -int_{t_zero}^{t1} i dt = (t1-t_zero)^2 a / 2.
    reverse_ramp = quad(lambda t: -current(t), t_zero, t1, limit=200)[0]
    # Tail: i = -q/T_M, dq/dt = -q (1/T_M + 1/tau); integrate to many time constants.
    tail_tc = tau * transit / (tau + transit)
    second = solve_ivp(lambda t, y: [-y[0] / transit - y[0] / tau, y[0] / transit],
                       (0.0, 60 * tail_tc), [q1, 0.0], rtol=1e-11, atol=1e-22)
    return reverse_ramp + second.y[1][-1], peak


@pytest.mark.parametrize("frequency, tau, slope_factor", [
    (50.0, 2e-6, 1.0),        # line frequency, natural commutation
    (20e3, 4e-6, 1.0),        # 20 kHz half-sine: omega tau about 0.5
    (20e3, 4e-6, 10.0),       # faster commutation after the sine's zero
    (20e3, 4e-6, 0.3),        # slower
])
def test_half_sine_history_against_solve_ivp(frequency, tau, slope_factor):
    # Outside reference: our own scipy solve_ivp of the charge-control model (dq/dt = i - q/tau)
    # driven by I_pk sin(wt) up to the zero and by the commutation slope after it.
    transit, peak = 0.4e-6, 30.0
    omega = 2 * math.pi * frequency
    t_zero = math.pi / omega
    rate = slope_factor * omega * peak

    def current(t):
        return peak * math.sin(omega * t) if t < t_zero else -rate * (t - t_zero)
    expected, expected_peak = _simulate(tau, transit, current, t_zero + 50 * tau, rate, t_zero)
    q0 = zero_crossing_charge(tau, peak, rate, "half-sine", frequency=frequency)
    got = recovery_from_stored_charge(q0, tau, transit, rate)
    assert float(got.peak_current) == pytest.approx(expected_peak, rel=1e-5)
    assert float(got.recovery_charge) == pytest.approx(expected, rel=1e-5)


def test_square_pulse_history_against_solve_ivp():
    # Outside reference: own solve_ivp; a 100 kHz square pulse held 5 us, tau 3 us, so the
    # charge has not reached tau I_pk when the ramp starts.
    tau, transit, peak, rate, frequency = 3e-6, 0.3e-6, 20.0, 50e6, 100e3
    hold = 0.5 / frequency
    t_zero = hold + peak / rate

    def current(t):
        return peak if t < hold else peak - rate * (t - hold)
    expected, expected_peak = _simulate(tau, transit, current, t_zero + 50 * tau, rate, t_zero)
    q0 = zero_crossing_charge(tau, peak, rate, "square", frequency=frequency)
    got = recovery_from_stored_charge(q0, tau, transit, rate)
    assert float(got.peak_current) == pytest.approx(expected_peak, rel=1e-5)
    assert float(got.recovery_charge) == pytest.approx(expected, rel=1e-5)


def test_dc_history_is_the_ramp_closed_form():
    # Closed form: a steady current falling at a (ramp_recovery) is the case Q_0 of dc.
    tau = np.array([1e-6, 5e-6, 20e-6])
    transit, current, rate = 0.5e-6, np.array([1.0, 10.0, 100.0]), 20e6
    q0 = zero_crossing_charge(tau, current, rate, "dc")
    got = recovery_from_stored_charge(q0, tau, transit, rate)
    ramp = ramp_recovery(tau, transit, current, rate)
    np.testing.assert_allclose(got.recovery_charge, ramp.recovery_charge, rtol=1e-9)
    np.testing.assert_allclose(equivalent_steady_current(q0, tau, rate), current, rtol=1e-9)
    carried = carry_recovery_charge(np.array([1e-6, 2e-6]), transit, 5.0, 50e6, 8.0, 20e6, "dc")
    np.testing.assert_allclose(
        carried, rescale_recovery_charge(np.array([1e-6, 2e-6]), transit, 5.0, 50e6, 8.0, 20e6),
        rtol=1e-12)


def test_line_frequency_sine_stores_little_charge():
    # At 50 Hz omega tau << 1, so Q_0 -> omega I_pk tau^2 (module notes) and, falling at
    # 10 A/us afterwards (20,000 x the natural slope), I_RM -> Q_0 / T_M.
    tau, transit, peak, frequency, rate = 2e-6, 0.4e-6, 1.57, 50.0, 10e6
    q0 = float(zero_crossing_charge(tau, peak, rate, "half-sine", frequency=frequency))
    assert q0 == pytest.approx(2 * math.pi * frequency * peak * tau ** 2, rel=1e-6)
    got = recovery_from_stored_charge(q0, tau, transit, rate)
    assert float(got.peak_current) == pytest.approx(q0 / transit, rel=1e-3)
    steady = ramp_recovery(tau, transit, peak / math.pi, rate)
    # The tail carries I_RM tau_rr = Q_0 tau / (tau + T_M); the ramp's triangle is negligible.
    assert float(got.recovery_charge) == pytest.approx(q0 * tau / (tau + transit), rel=1e-3)
    assert float(got.recovery_charge) < 0.01 * float(steady.recovery_charge)
