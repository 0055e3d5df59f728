"""The charge-control model driven by the forward current's history up to the turn-off.

A datasheet measures Q_rr after a long steady forward current that then falls at a constant
di/dt. In a stack the current has a history: a line-frequency half-sine has decayed slowly to its
zero, a square pulse may be shorter than a few lifetimes. In the charge-control model
(:mod:`stringcheck.physics.charge_control`) the stored charge obeys the linear equation
dq_M/dt = i - q_M / tau while the junction is forward biased, whatever the current, so the whole
history before the current zero is summed up by one number, the stored charge left at the zero,
Q_0 (:func:`zero_crossing_charge`). From there the current falls at the commutation slope a and
the recovery has a closed form in Q_0 (:func:`recovery_from_stored_charge`), of which the ramp
from a steady current of :func:`stringcheck.physics.charge_control.ramp_recovery` is the case
Q_0 = a tau^2 (1 - exp(-I_F / (a tau))). :func:`carry_recovery_charge` carries a datasheet's Q_rr
to a waveform's turn-off through each device's lifetime. Pure, vectorized, SI units; NaN
propagates.

References
----------
.. [1] P. O. Lauritzen and C. L. Ma, "A simple diode model with reverse recovery", *IEEE
   Transactions on Power Electronics*, 6(2), 1991, pp. 188-191 (author order and pages from
   memory).
.. [2] R. M. Corless, G. H. Gonnet, D. E. G. Hare, D. J. Jeffrey and D. E. Knuth, "On the
   Lambert W function", *Advances in Computational Mathematics*, 5, 1996.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import lambertw

from stringcheck.physics.charge_control import RampRecovery
from stringcheck.physics.charge_control_fit import lifetime_for_charge
from stringcheck.physics.recovery import RECOVERY_END_FRACTION, recovery_time_to_fraction
from stringcheck.physics.waveforms import SINE_PULSES, check_waveform

__all__ = ["carry_recovery_charge", "equivalent_steady_current", "recovery_from_stored_charge",
           "zero_crossing_charge"]


def zero_crossing_charge(
    lifetime: ArrayLike,
    peak_current: ArrayLike,
    di_dt: ArrayLike,
    waveform: str,
    *,
    frequency: ArrayLike = np.inf,
) -> NDArray[np.float64]:
    """Stored charge q_M left at the forward current's zero crossing, Q_0 [C].

    Parameters
    ----------
    lifetime
        High-level lifetime tau [s], > 0; any shape (one per device).
    peak_current
        Forward current the pulse carries I_pk [A], >= 0 (dc: the steady current; square: the
        pulse height; half-sine pulse: the crest).
    di_dt
        Commutation slope a [A/s], > 0: the rate at which a dc or square current falls to zero
        (a half-sine pulse falls along its own sine and does not use it).
    waveform
        One of :data:`stringcheck.constants.WAVEFORMS` (``physics.waveforms``).
    frequency
        Repetition frequency f [Hz], > 0; inf (the default) for a pulse held much longer than
        tau. A square pulse is held for 1 / (2 f) before its fall; a half-sine pulse lasts
        1 / (2 f) and needs a finite f.

    Returns
    -------
    numpy.ndarray
        Q_0 [C], >= 0, the broadcast shape of the array inputs.

    Notes
    -----
    Each pulse starts from q_M = 0 (the previous recovery removed the charge). With
    dq_M/dt = i - q_M / tau:

    * half-sine pulse, i = I_pk sin(omega t) over (0, pi / omega):

      .. math:: Q_0 = \\int_0^{\\pi/\\omega} I_{pk} \\sin(\\omega t)\\,
                e^{-(\\pi/\\omega - t)/\\tau} dt
                = I_{pk} \\frac{\\omega \\tau^2 (1 + e^{-\\pi/(\\omega\\tau)})}{1 + (\\omega\\tau)^2}

      which tends to omega I_pk tau^2 (the ramp's a tau^2 at the natural slope) for
      omega tau << 1;
    * square (held for T_h = 1 / (2 f), then falling at a for d = I_pk / a) and dc (T_h = inf):
      q_M = tau I_pk (1 - e^{-T_h / tau}) when the fall starts, and with c = e^{-d / tau}

      .. math:: Q_0 = a \\tau^2 (1 - c) + (q_s - \\tau I_{pk})\\, c

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes):
       dq_M/dt = i - q_M / tau, integrated here for the given i(t).
    """
    check_waveform(waveform)
    tau = np.asarray(lifetime, dtype=float)
    peak = np.asarray(peak_current, dtype=float)
    rate = np.asarray(di_dt, dtype=float)
    frequency = np.asarray(frequency, dtype=float)
    if waveform in SINE_PULSES:
        x = 2.0 * np.pi * frequency * tau  # omega tau
        with np.errstate(over="ignore", divide="ignore"):
            decay = np.exp(-np.pi / x)
        return peak * x * tau * (1.0 + decay) / (1.0 + x * x) + 0.0 * rate
    hold = 0.5 / frequency if waveform == "square" else np.inf
    start = tau * peak * -np.expm1(-hold / tau)
    with np.errstate(divide="ignore", invalid="ignore"):
        c = np.exp(-peak / (rate * tau))
    return rate * tau * tau * -np.expm1(-peak / (rate * tau)) + (start - tau * peak) * c


def recovery_from_stored_charge(
    stored_charge: ArrayLike,
    lifetime: ArrayLike,
    transit_time: ArrayLike,
    di_dt: ArrayLike,
    *,
    fraction: float = RECOVERY_END_FRACTION,
) -> RampRecovery:
    """Reverse recovery from the current zero with a stored charge Q_0, at a constant di/dt.

    Parameters
    ----------
    stored_charge
        q_M at the current zero crossing Q_0 [C], >= 0 (:func:`zero_crossing_charge`).
    lifetime, transit_time
        tau and T_M [s], > 0.
    di_dt
        Rate a = |di/dt| at which the reverse current rises after the zero [A/s], > 0.
    fraction
        End of t_rr as a fraction of I_RM on the tail [-], in (0, 1); default 0.25.

    Returns
    -------
    RampRecovery
        I_RM, t_a, tau_rr, Q_rr (counted from the zero crossing) and t_rr.

    Notes
    -----
    After the zero, i = -a s. With q_M(0) = Q_0, dq_M/ds = -a s - q_M / tau gives
    q_M = a tau^2 - a tau s + (Q_0 - a tau^2) e^{-s/tau}, and the junction stays forward biased
    while q_E = q_M + T_M i > 0. q_E = 0 at s_1 = x tau with, for p = tau / (tau + T_M) and
    k = Q_0 / (a tau^2), x = p + p (k - 1) e^{-x}; with w = x - p, w e^w = p (k - 1) e^{-p}, so

    .. math:: I_{RM} = a s_1 = a \\tau \\left(p + W_0\\!\\left(p (k - 1) e^{-p}\\right)\\right)

    (the argument is >= -p e^{-p} > -1/e). The tail is that of the ramp,
    tau_rr = tau T_M / (tau + T_M), so Q_rr = I_RM^2 / (2 a) + I_RM tau_rr. For k small
    I_RM -> Q_0 / T_M: the little charge left goes out through the emitter.

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes).
    .. [2] R. M. Corless et al., "On the Lambert W function", Adv. Comput. Math. 5, 1996.
    """
    charge = np.asarray(stored_charge, dtype=float)
    tau = np.asarray(lifetime, dtype=float)
    transit = np.asarray(transit_time, dtype=float)
    rate = np.asarray(di_dt, dtype=float)
    share = tau / (tau + transit)
    k = charge / (rate * tau * tau)
    argument = share * (k - 1.0) * np.exp(-share)
    x = share + lambertw(argument, 0).real
    # Near k = 0 the sum cancels (relative error eps / k); the first-order term p k / (1 - p)
    # (W0'(-p e^-p) = e^p / (1 - p)) is then exact to its relative second-order term.
    linear = share * k / (1.0 - share)
    x = np.where(linear * (2.0 - share) / (1.0 - share) < 1e-8, linear, x)
    peak = rate * tau * x
    tail = tau * transit / (tau + transit)
    rise = peak / rate
    return RampRecovery(
        peak_current=peak,
        rise_time=rise,
        tail_time_constant=tail,
        recovery_charge=peak * peak / (2.0 * rate) + peak * tail,
        recovery_time=recovery_time_to_fraction(rise, tail, fraction=fraction),
    )


def equivalent_steady_current(
    stored_charge: ArrayLike, lifetime: ArrayLike, di_dt: ArrayLike
) -> NDArray[np.float64]:
    """The steady current whose fall at di/dt leaves the stored charge Q_0 at the zero [A].

    Parameters
    ----------
    stored_charge
        Q_0 [C], >= 0.
    lifetime
        tau [s], > 0.
    di_dt
        Rate of fall a [A/s], > 0.

    Returns
    -------
    numpy.ndarray
        I_eq = -a tau ln(1 - Q_0 / (a tau^2)) [A]; inf where Q_0 >= a tau^2 (no steady current
        falling at a leaves that much). A simulation started in the steady state at I_eq
        (``solvers.transient``) then meets the zero with the history's charge.

    Notes
    -----
    Inverse of Q_0 = a tau^2 (1 - e^{-I/(a tau)}) (:func:`zero_crossing_charge`, dc).

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes).
    """
    charge = np.asarray(stored_charge, dtype=float)
    scale = np.asarray(di_dt, dtype=float) * np.asarray(lifetime, dtype=float)
    k = charge / (scale * np.asarray(lifetime, dtype=float))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(k < 1.0, -scale * np.log1p(-np.minimum(k, 1.0)), np.inf)


def carry_recovery_charge(
    recovery_charge: ArrayLike,
    transit_time: ArrayLike,
    test_forward_current: ArrayLike,
    test_di_dt: ArrayLike,
    peak_current: ArrayLike,
    di_dt: ArrayLike,
    waveform: str,
    *,
    frequency: ArrayLike = np.inf,
) -> NDArray[np.float64]:
    """Carry Q_rr from a datasheet's test condition to a waveform's turn-off through the model.

    Parameters
    ----------
    recovery_charge
        Q_rr at the test condition [C], > 0 (one per device).
    transit_time
        T_M [s], > 0, fitted to the part's typical recovery.
    test_forward_current, test_di_dt
        The datasheet's steady test I_F [A] and |di/dt| [A/s], > 0.
    peak_current, di_dt, waveform, frequency
        The application's pulse (:func:`zero_crossing_charge`) and commutation slope a [A/s].

    Returns
    -------
    numpy.ndarray
        Q_rr at the application's turn-off [C].

    Notes
    -----
    tau = :func:`stringcheck.physics.charge_control_fit.lifetime_for_charge` at the test
    condition (a steady current falling at a ramp), Q_0 = :func:`zero_crossing_charge` of the
    waveform with that tau, then :func:`recovery_from_stored_charge`. For dc this is
    :func:`stringcheck.physics.charge_control_fit.rescale_recovery_charge`.

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes).
    """
    tau = lifetime_for_charge(recovery_charge, transit_time, test_forward_current, test_di_dt)
    charge = zero_crossing_charge(tau, peak_current, di_dt, waveform, frequency=frequency)
    return recovery_from_stored_charge(charge, tau, transit_time, di_dt).recovery_charge
