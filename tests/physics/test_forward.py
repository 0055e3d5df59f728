"""Tests of stringcheck.physics.forward."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad

from stringcheck.errors import StringcheckError
from stringcheck.physics.forward import (
    DEFAULT_PHASE_POINTS,
    SLOPE_RESISTANCE_FLOOR,
    blocking_factor,
    conduction_loss,
    form_factor,
    leakage_loss,
    peak_factor,
    phase_samples,
    recovery_loss,
    slope_resistance,
    threshold_voltage,
)
from stringcheck.physics.leakage import leakage_current

PERIOD = 1.0 / 50.0


def _current(time, peak, waveform):
    """The waveforms as defined in the module docstring, over one period starting at 0."""
    phase = (time % PERIOD) / PERIOD
    if waveform == "dc":
        return peak
    if waveform == "square":
        return peak if phase < 0.5 else 0.0
    return peak * math.sin(2.0 * math.pi * phase) if phase < 0.5 else 0.0


def _period_mean(function):
    """(1 / T) int_0^T f dt by scipy quad, split at the half period where the waveforms jump."""
    first, _ = quad(function, 0.0, PERIOD / 2, epsabs=0.0, epsrel=1e-13, limit=200)
    second, _ = quad(function, PERIOD / 2, PERIOD, epsabs=0.0, epsrel=1e-13, limit=200)
    return (first + second) / PERIOD


def test_line_model_temperature_laws():
    # IEC 60747-2 threshold-voltage / slope-resistance representation with linear tempcos:
    # V_T0 = 0.80 V at 25 degC, -2 mV/K (Si PN, common practice) -> 0.60 V at 125 degC;
    # r_T = 2 mohm, +0.4 %/K -> 2.8 mohm at 125 degC (closed form).
    assert math.isclose(threshold_voltage(0.80, -2e-3, 125.0, 25.0), 0.60, rel_tol=1e-14)
    assert math.isclose(slope_resistance(2e-3, 4e-3, 125.0, 25.0), 2.8e-3, rel_tol=1e-14)
    # Below the reference the laws run the other way.
    assert math.isclose(threshold_voltage(0.80, -2e-3, -15.0, 25.0), 0.88, rel_tol=1e-14)


def test_slope_resistance_is_clipped_at_the_floor():
    # A negative tempco extrapolated past 1 + a (T - T_ref) = 0 would give r_T <= 0.
    values = slope_resistance(2e-3, -1e-2, np.array([25.0, 100.0, 125.0, 300.0]), 25.0)
    np.testing.assert_allclose(values[:2], [2e-3, 0.5e-3], rtol=1e-14)
    np.testing.assert_array_equal(values[2:], SLOPE_RESISTANCE_FLOOR)


@pytest.mark.parametrize(
    ("waveform", "expected_form", "expected_peak"),
    [("half-sine", math.pi / 2, math.pi), ("square", math.sqrt(2.0), 2.0), ("dc", 1.0, 1.0)],
)
def test_form_and_peak_factors_against_quadrature(waveform, expected_form, expected_peak):
    # Half-wave pulse train: I_RMS / I_AV = pi / 2, I_pk / I_AV = pi; square wave of duty 1/2:
    # sqrt(2) and 2 (elementary integrals; here checked by scipy quad over one period).
    peak = 10.0
    average = _period_mean(lambda t: _current(t, peak, waveform))
    rms = math.sqrt(_period_mean(lambda t: _current(t, peak, waveform) ** 2))
    assert math.isclose(rms / average, expected_form, rel_tol=1e-10)
    assert math.isclose(peak / average, expected_peak, rel_tol=1e-10)
    assert math.isclose(form_factor(waveform), expected_form, rel_tol=1e-15)
    assert math.isclose(peak_factor(waveform), expected_peak, rel_tol=1e-15)


@pytest.mark.parametrize("waveform", ["half-sine", "square", "dc"])
def test_phase_samples_reproduce_average_and_rms_of_one_device(waveform):
    # Closed forms I_AV (given) and I_RMS = form factor x I_AV; the default number of midpoint
    # samples must reach 1e-4 relative (the module's stated accuracy).
    average = np.array([3.0, 250.0])
    samples = phase_samples(average, waveform)
    sampled_average = samples.currents @ samples.weights
    sampled_rms = np.sqrt(samples.currents**2 @ samples.weights)
    np.testing.assert_allclose(sampled_average, average, rtol=1e-4)
    np.testing.assert_allclose(sampled_rms, form_factor(waveform) * average, rtol=1e-4)
    np.testing.assert_allclose(samples.peak, peak_factor(waveform) * average, rtol=1e-15)
    assert math.isclose(samples.weights.sum(), 1.0 if waveform == "dc" else 0.5, rel_tol=1e-14)


def test_half_sine_sampling_converges_at_second_order():
    # Midpoint rule: sum_j sin((j + 1/2) h) = 1 / sin(h / 2) for h = pi / p, so the sampled
    # I_AV is (h / 2) / sin(h / 2) times the exact one (error h^2 / 24); halving h quarters it.
    errors = []
    for points in (10, 20, 40, DEFAULT_PHASE_POINTS):
        samples = phase_samples(1.0, "half-sine", points=points)
        error = samples.currents @ samples.weights - 1.0
        half_step = math.pi / points / 2
        assert math.isclose(error, half_step / math.sin(half_step) - 1.0, rel_tol=1e-9)
        errors.append(error)
        # sin^2 integrates exactly with the midpoint rule (p >= 2): I_RMS = I_pk / 2.
        assert math.isclose(math.sqrt(samples.currents**2 @ samples.weights), math.pi / 2,
                            rel_tol=1e-14)
    assert 3.9 < errors[0] / errors[1] < 4.1 and 3.9 < errors[1] / errors[2] < 4.1
    assert errors[-1] < 1e-4


@pytest.mark.parametrize("waveform", ["half-sine", "square", "dc"])
def test_conduction_loss_against_quadrature_of_v_times_i(waveform):
    # P = (1 / T) int v i dt with v = V_T0 + r_T i while i > 0 (IEC 60747-2 line model),
    # integrated by scipy quad, against V_T0 I_AV + r_T I_RMS^2 with the exact form factor.
    v_t0, r_t, average = 0.85, 3e-3, 40.0
    peak = peak_factor(waveform) * average

    def power(time):
        current = _current(time, peak, waveform)
        return (v_t0 + r_t * current) * current if current > 0 else 0.0

    expected = _period_mean(power)
    loss = conduction_loss(v_t0, r_t, average, form_factor(waveform) * average)
    assert math.isclose(loss, expected, rel_tol=1e-10)


@pytest.mark.parametrize("exponent", [0.0, 0.3, 0.5, 1.0])
def test_blocking_factor_against_quadrature(exponent):
    # Mean over the period of (v / V)^(1 + m) with v = V sin on the blocking half period
    # (scipy quad); closed values 1/pi for m = 0 and 1/4 for m = 1 (elementary integrals).
    def normalized(time):
        phase = (time % PERIOD) / PERIOD
        return -math.sin(2 * math.pi * phase) if phase > 0.5 else 0.0

    expected = _period_mean(lambda t: normalized(t) ** (1.0 + exponent))
    factor = blocking_factor(exponent, "half-sine", forward_current=10.0)
    assert math.isclose(factor, expected, rel_tol=1e-10)
    if exponent == 0.0:
        assert math.isclose(factor, 1.0 / math.pi, rel_tol=1e-14)
    if exponent == 1.0:
        assert math.isclose(factor, 0.25, rel_tol=1e-14)
    assert blocking_factor(exponent, "square", forward_current=10.0) == 0.5
    # dc: conducting continuously while current flows, blocking continuously without it.
    np.testing.assert_array_equal(
        blocking_factor(exponent, "dc", forward_current=np.array([10.0, 0.0])), [0.0, 1.0]
    )


@pytest.mark.parametrize("waveform", ["half-sine", "square"])
def test_leakage_loss_against_quadrature_of_v_times_leakage(waveform):
    # (1 / T) int v(t) I_R(v(t), T_j) dt by scipy quad over the assumed reverse-voltage shape.
    common = dict(reference_voltage=1000.0, reference_temperature=25.0, doubling_temperature=10.0,
                  voltage_exponent=0.5)
    peak_voltage, temperature, reference_current = 800.0, 110.0, 2e-6

    def reverse(time):
        phase = (time % PERIOD) / PERIOD
        if phase <= 0.5:
            return 0.0
        return peak_voltage * (-math.sin(2 * math.pi * phase) if waveform == "half-sine" else 1.0)

    expected = _period_mean(
        lambda t: reverse(t) * float(leakage_current(reference_current, reverse(t), temperature,
                                                     **common)))
    loss = leakage_loss(reference_current, peak_voltage, temperature, waveform=waveform,
                        forward_current=20.0, **common)
    assert math.isclose(loss, expected, rel_tol=1e-9)


def test_leakage_loss_of_dc_blocking_and_dc_conducting():
    common = dict(reference_voltage=1000.0, reference_temperature=25.0, doubling_temperature=10.0,
                  voltage_exponent=0.5, waveform="dc")
    # Continuous blocking: P = V I_R(V, T); 4x the voltage doubles I_R (m = 0.5), +10 K doubles.
    blocking = leakage_loss(1e-6, 4000.0, 35.0, forward_current=0.0, **common)
    assert math.isclose(blocking, 4000.0 * 4e-6, rel_tol=1e-14)
    assert leakage_loss(1e-6, 4000.0, 35.0, forward_current=5.0, **common) == 0.0


def test_recovery_loss_against_the_triangular_tail_integral():
    # Triangular recovery current (Mohan et al. ch. 20; Rashid ch. 2): rises to I_RM over t_a,
    # falls to 0 over t_b. With V_R across the device during the tail only, the energy is
    # V_R int_{t_a}^{t_rr} i dt (scipy quad) = V_R Q_rr t_b / t_rr.
    peak, rise, fall = 30.0, 2e-6, 1e-6
    charge = 0.5 * peak * (rise + fall)
    voltage, frequency = 600.0, 20e3

    def current(time):
        return peak * time / rise if time < rise else peak * (rise + fall - time) / fall

    tail_energy = voltage * quad(current, rise, rise + fall, epsabs=0.0, epsrel=1e-13)[0]
    softness = fall / rise
    loss = recovery_loss(charge, voltage, frequency, tail_fraction=softness / (1 + softness))
    assert math.isclose(loss, tail_energy * frequency, rel_tol=1e-12)
    # The default is the quick upper estimate E_rr ~ Q_rr V_R (common practice).
    assert math.isclose(recovery_loss(charge, voltage, frequency), charge * voltage * frequency,
                        rel_tol=1e-15)
    assert recovery_loss(charge, voltage, frequency) > loss


def test_unknown_waveform_is_an_error_naming_the_valid_ones():
    with pytest.raises(StringcheckError, match="half-sine"):
        phase_samples(1.0, "sine")
    with pytest.raises(StringcheckError, match="waveform"):
        form_factor("triangle")
