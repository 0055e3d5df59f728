"""Fitting the charge-control model of :mod:`stringcheck.physics.charge_control` to datasheet
figures: Q_rr and I_RM (or t_rr) at a test forward current and di/dt give the lifetime tau and the
transit time T_M (:func:`fit_charge_control`); a drawn Q_rr gives each device's tau at a fixed T_M
(:func:`lifetime_for_charge`); Q_rr is carried from the test condition to the application's
(:func:`rescale_recovery_charge`). Pure, vectorized, SI units; NaN where no model exists.

References
----------
.. [1] P. O. Lauritzen and C. L. Ma, "A simple diode model with reverse recovery", *IEEE
   Transactions on Power Electronics*, 6(2), 1991, pp. 188-191 (author order and pages from
   memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.physics.charge_control import SOLVER_ITERATIONS, ramp_peak_current, ramp_recovery
from stringcheck.physics.recovery import RECOVERY_END_FRACTION

__all__ = ["ChargeControlFit", "fit_charge_control", "lifetime_for_charge",
           "peak_current_from_recovery_time", "rescale_recovery_charge"]


def _solve_increasing(function, target, low, high):
    """Solve function(x) = target for x in [low, high] (increasing, bracketing), per element.

    Illinois false position on log x, vectorized; elements without a bracket give NaN.
    """
    log_low, log_high = np.log(low), np.log(high)
    value_low = function(low) - target
    value_high = function(high) - target
    valid = (value_low <= 0.0) & (value_high >= 0.0)
    side = np.zeros(np.shape(target), dtype=int)
    guess = 0.5 * (log_low + log_high)
    for _ in range(SOLVER_ITERATIONS):
        denominator = value_high - value_low
        spread = denominator > 0.0
        secant = log_high - value_high * (log_high - log_low) / np.where(spread, denominator, 1.0)
        guess = np.where(spread, secant, 0.5 * (log_low + log_high))
        guess = np.clip(guess, log_low, log_high)
        value = function(np.exp(guess)) - target
        below = value < 0.0
        # Illinois: halve the retained end's value when the same end is kept twice.
        value_high = np.where(below & (side == -1), 0.5 * value_high, value_high)
        value_low = np.where(~below & (side == 1), 0.5 * value_low, value_low)
        log_low = np.where(below, guess, log_low)
        value_low = np.where(below, value, value_low)
        log_high = np.where(below, log_high, guess)
        value_high = np.where(below, value_high, value)
        side = np.where(below, -1, 1)
        if not np.any(valid & (log_high - log_low > 1e-14) & (np.abs(value) > 1e-14 * target)):
            break
    return np.where(valid, np.exp(guess), np.nan)


@dataclass(frozen=True)
class ChargeControlFit:
    """Charge-control constants fitted to a recovery measurement.

    Attributes
    ----------
    lifetime, transit_time
        tau and T_M [s].
    """

    lifetime: NDArray[np.float64]
    transit_time: NDArray[np.float64]


def fit_charge_control(
    recovery_charge: ArrayLike,
    peak_current: ArrayLike,
    forward_current: ArrayLike,
    di_dt: ArrayLike,
) -> ChargeControlFit:
    """Fit tau and T_M so that the model reproduces Q_rr and I_RM at a test condition.

    Parameters
    ----------
    recovery_charge, peak_current
        Q_rr [C] and I_RM [A] at the test condition, > 0, with Q_rr > I_RM^2 / (2 di/dt).
    forward_current, di_dt
        Test forward current I_F [A] and rate of fall |di/dt| [A/s], > 0.

    Returns
    -------
    ChargeControlFit
        tau and T_M [s]; NaN where no pair reproduces the inputs (Q_rr <= I_RM^2 / (2 a), which
        would need a negative tail, or I_F = 0).

    Notes
    -----
    From the closed forms of :func:`ramp_recovery`, the tail time constant follows at once:

    .. math:: \\tau_{rr} = (Q_{rr} - I_{RM}^2 / (2a)) / I_{RM}

    With tau_rr fixed, p = tau / (tau + T_M) = 1 - tau_rr / tau and I_RM(tau) rises from 0
    at tau = tau_rr to infinity, so tau is the root of one increasing scalar equation,
    bracketed below by tau_rr + I_RM / a (the I_F -> infinity limit I_RM = a (tau - tau_rr)
    is an upper bound on I_RM). Then T_M = tau tau_rr / (tau - tau_rr).

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes).
    """
    charge = np.asarray(recovery_charge, dtype=float)
    peak = np.asarray(peak_current, dtype=float)
    current = np.asarray(forward_current, dtype=float)
    rate = np.asarray(di_dt, dtype=float)
    charge, peak, current, rate = np.broadcast_arrays(charge, peak, current, rate)
    tail = (charge - peak * peak / (2.0 * rate)) / peak
    tail = np.where((tail > 0.0) & (current > 0.0), tail, np.nan)

    def model_peak(tau):
        return ramp_peak_current(tau, 1.0 - tail / tau, current, rate)

    low = tail + peak / rate
    high = _expand_until(model_peak, peak, low, 2.0)
    tau = _solve_increasing(model_peak, peak, low, high)
    return ChargeControlFit(lifetime=tau, transit_time=tau * tail / (tau - tail))


def _expand_until(function, target, start, factor):
    """Grow start by factor (per element) until function >= target; at most 200 times."""
    high = np.array(start, dtype=float, copy=True)
    for _ in range(SOLVER_ITERATIONS):
        short = function(high) < target
        if not short.any():
            break
        high = np.where(short, high * factor, high)
    return high


def peak_current_from_recovery_time(
    recovery_charge: ArrayLike,
    recovery_time: ArrayLike,
    di_dt: ArrayLike,
    *,
    fraction: float = RECOVERY_END_FRACTION,
) -> NDArray[np.float64]:
    """I_RM of the model's recovery waveform with a given Q_rr and t_rr, for a datasheet with t_rr.

    Parameters
    ----------
    recovery_charge
        Q_rr [C], > 0, at most a t_rr^2 / 2 (a triangle with no tail).
    recovery_time
        t_rr [s], > 0, measured from the zero crossing to ``fraction`` I_RM on the tail.
    di_dt
        Test rate of fall a [A/s], > 0.
    fraction
        End point of t_rr [-], in (0, 1); default 0.25 (common practice).

    Returns
    -------
    numpy.ndarray
        I_RM [A] for :func:`fit_charge_control`; NaN where Q_rr > a t_rr^2 / 2.

    Notes
    -----
    The waveform of :func:`ramp_recovery` (a ramp to I_RM, then an exponential tail) has
    t_rr = I/a + tau_rr L and Q_rr = I^2 / (2a) + I tau_rr with L = ln(1 / fraction).
    Eliminating tau_rr gives A I^2 + B I - Q_rr = 0 with A = (L - 2) / (2 a L) and B = t_rr / L;
    the root with tau_rr >= 0 is I = 2 Q_rr / (B + sqrt(B^2 + 4 A Q_rr)).

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes).
    """
    charge = np.asarray(recovery_charge, dtype=float)
    time = np.asarray(recovery_time, dtype=float)
    rate = np.asarray(di_dt, dtype=float)
    log_ratio = np.log(1.0 / fraction)
    quadratic = (log_ratio - 2.0) / (2.0 * rate * log_ratio)
    linear = time / log_ratio
    with np.errstate(invalid="ignore"):
        peak = 2.0 * charge / (linear + np.sqrt(linear * linear + 4.0 * quadratic * charge))
    return np.where(charge <= 0.5 * rate * time * time, peak, np.nan)


def lifetime_for_charge(
    recovery_charge: ArrayLike,
    transit_time: ArrayLike,
    forward_current: ArrayLike,
    di_dt: ArrayLike,
) -> NDArray[np.float64]:
    """Lifetime tau that gives a device the drawn Q_rr at a fixed T_M (Monte Carlo mapping).

    Parameters
    ----------
    recovery_charge
        Q_rr of each device at the test condition [C], > 0; for example shape (trials, n).
    transit_time
        T_M [s], > 0, broadcastable (usually the value fitted to the typical device).
    forward_current, di_dt
        Test forward current I_F [A] and rate of fall a [A/s], > 0.

    Returns
    -------
    numpy.ndarray
        tau [s] with Q_rr(tau, T_M) of :func:`ramp_recovery` equal to the draw; NaN for NaN
        input or I_F = 0.

    Notes
    -----
    Lifetime control sets tau and so the stored charge; T_M is a diffusion time across the
    base, fixed by the device's geometry, so the scatter of Q_rr within one part is carried by
    tau (a modelling choice). Q_rr rises monotonically with tau from 0 to infinity at fixed T_M,
    I_F and a, so the inverse is a bracketed scalar root per device, solved for all devices at
    once. The starting bracket comes from Q_rr ~ a tau^2 / 2 for T_M << tau.

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes).
    """
    charge = np.asarray(recovery_charge, dtype=float)
    transit = np.asarray(transit_time, dtype=float)
    current = np.asarray(forward_current, dtype=float)
    rate = np.asarray(di_dt, dtype=float)
    charge, transit, current, rate = np.broadcast_arrays(charge, transit, current, rate)
    charge = np.where(current > 0.0, charge, np.nan)

    def model_charge(tau):
        return ramp_recovery(tau, transit, current, rate).recovery_charge

    guess = np.sqrt(2.0 * charge / rate) + transit
    high = _expand_until(model_charge, charge, guess, 2.0)
    low = 1.0 / _expand_until(lambda inverse: -model_charge(1.0 / inverse), -charge, 1.0 / guess,
                              2.0)
    return _solve_increasing(model_charge, charge, low, high)


def rescale_recovery_charge(
    recovery_charge: ArrayLike,
    transit_time: ArrayLike,
    test_forward_current: ArrayLike,
    test_di_dt: ArrayLike,
    forward_current: ArrayLike,
    di_dt: ArrayLike,
) -> NDArray[np.float64]:
    """Carry Q_rr from a datasheet's test condition to the application's through the model.

    Parameters
    ----------
    recovery_charge
        Q_rr at the test condition [C], > 0.
    transit_time
        T_M [s], > 0 (fitted with :func:`fit_charge_control` to the typical I_RM or t_rr).
    test_forward_current, test_di_dt
        Test I_F [A] and |di/dt| [A/s], > 0.
    forward_current, di_dt
        Application I_F [A] and |di/dt| [A/s], > 0.

    Returns
    -------
    numpy.ndarray
        Q_rr at the application condition [C].

    Notes
    -----
    tau = :func:`lifetime_for_charge` at the test condition, then Q_rr of
    :func:`ramp_recovery` at the application condition. For I_F >> a tau and T_M << tau, Q_rr
    grows about in proportion to di/dt (Q_rr -> a tau^2 / 2): the stored charge left at the
    zero crossing is what recombination has not removed during the fall.

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes).
    """
    tau = lifetime_for_charge(recovery_charge, transit_time, test_forward_current, test_di_dt)
    return ramp_recovery(tau, transit_time, forward_current, di_dt).recovery_charge
