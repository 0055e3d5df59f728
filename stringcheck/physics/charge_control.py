"""Charge-control model of a power diode with reverse recovery, its ramp closed forms and fitting.

The model keeps two charges: the junction (emitter) charge q_E, set by the junction voltage, and
the stored charge q_M in the middle of the base. The terminal current is the diffusion current
between the two, and q_M recombines with the lifetime tau:

.. math::

    i = \\frac{q_E - q_M}{T_M}, \\qquad
    \\frac{dq_M}{dt} = \\frac{q_E - q_M}{T_M} - \\frac{q_M}{\\tau}, \\qquad
    q_E = I_S \\tau \\left(e^{v / (n V_T)} - 1\\right)

For a current that falls at a constant rate the equations have closed forms (derived in
:func:`ramp_recovery`): the peak reverse-recovery current I_RM through the Lambert W function and
an exponential tail with time constant tau T_M / (tau + T_M). They turn a datasheet's Q_rr and
I_RM (or t_rr), measured at a test forward current and di/dt, into the two model constants
tau and T_M (:func:`fit_charge_control`), map a Monte Carlo draw of Q_rr onto tau per device at
a fixed T_M (:func:`lifetime_for_charge`) and carry Q_rr from the test condition to the
application's (:func:`rescale_recovery_charge`). All functions are pure, vectorized, in SI units,
and let NaN propagate; an input for which no model exists gives NaN.

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
from scipy.special import lambertw

from stringcheck.physics.recovery import RECOVERY_END_FRACTION, recovery_time_to_fraction

__all__ = [
    "BOLTZMANN_OVER_CHARGE",
    "DEFAULT_EMISSION_COEFFICIENT",
    "DEFAULT_SATURATION_CURRENT",
    "ChargeControlFit",
    "ForwardState",
    "RampRecovery",
    "diode_current",
    "emitter_charge",
    "fit_charge_control",
    "forward_state",
    "lifetime_for_charge",
    "peak_current_from_recovery_time",
    "ramp_recovery",
    "rescale_recovery_charge",
    "stored_charge_rate",
    "thermal_voltage",
]

BOLTZMANN_OVER_CHARGE = 1.380649e-23 / 1.602176634e-19
"""k / q [V/K], from the exact SI values of the Boltzmann constant and the elementary charge."""

DEFAULT_SATURATION_CURRENT = 1e-9
"""Default I_S [A]: an invented value that gives a forward drop of about 1.3 V at 100 A."""

DEFAULT_EMISSION_COEFFICIENT = 2.0
"""Default n [-]: close to 2 under high-level injection in a PiN diode (common practice)."""

_SOLVER_ITERATIONS = 200


def thermal_voltage(temperature: ArrayLike) -> NDArray[np.float64]:
    """Thermal voltage k T / q.

    Parameters
    ----------
    temperature
        Junction temperature T [K], > 0.

    Returns
    -------
    numpy.ndarray
        V_T [V]; about 25.9 mV at 300 K.

    References
    ----------
    .. [1] S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007,
       chapter 2 (p-n junctions), ideal current-voltage characteristics.
    """
    return BOLTZMANN_OVER_CHARGE * np.asarray(temperature, dtype=float)


def emitter_charge(
    junction_voltage: ArrayLike,
    lifetime: ArrayLike,
    *,
    saturation_current: ArrayLike = DEFAULT_SATURATION_CURRENT,
    emission_coefficient: ArrayLike = DEFAULT_EMISSION_COEFFICIENT,
    temperature: ArrayLike = 300.0,
) -> NDArray[np.float64]:
    """Junction charge q_E of the charge-control model.

    Parameters
    ----------
    junction_voltage
        Forward junction voltage v [V] (negative in reverse bias).
    lifetime
        High-level carrier lifetime tau [s], > 0.
    saturation_current, emission_coefficient, temperature
        I_S [A], n [-] and T [K], > 0.

    Returns
    -------
    numpy.ndarray
        q_E [C]; tends to -I_S tau in reverse bias.

    Notes
    -----
    .. math:: q_E = I_S \\tau \\left(e^{v / (n V_T)} - 1\\right)

    computed with ``expm1`` so that q_E stays accurate near zero bias.

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, "A simple diode model with reverse recovery", *IEEE
       Transactions on Power Electronics*, 6(2), 1991, pp. 188-191 (author order and pages from
       memory): i = (q_E - q_M) / T_M, dq_M/dt = i - q_M / tau, q_E = I_S tau (exp(v/nV_T) - 1).
    """
    scale = np.asarray(emission_coefficient, dtype=float) * thermal_voltage(temperature)
    saturation_charge = np.asarray(saturation_current, dtype=float) * np.asarray(lifetime, float)
    return saturation_charge * np.expm1(np.asarray(junction_voltage, dtype=float) / scale)


def diode_current(
    emitter_charge: ArrayLike, stored_charge: ArrayLike, transit_time: ArrayLike
) -> NDArray[np.float64]:
    """Terminal current of the charge-control model, i = (q_E - q_M) / T_M.

    Parameters
    ----------
    emitter_charge, stored_charge
        q_E and q_M [C].
    transit_time
        Diffusion transit time T_M [s], > 0.

    Returns
    -------
    numpy.ndarray
        Forward diode current i [A].

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes).
    """
    charge_difference = np.asarray(emitter_charge, float) - np.asarray(stored_charge, float)
    return charge_difference / np.asarray(transit_time, dtype=float)


def stored_charge_rate(
    current: ArrayLike, stored_charge: ArrayLike, lifetime: ArrayLike
) -> NDArray[np.float64]:
    """Rate of change of the stored charge, dq_M/dt = i - q_M / tau.

    Parameters
    ----------
    current, stored_charge, lifetime
        Forward diode current i [A], q_M [C] and tau [s] (> 0).

    Returns
    -------
    numpy.ndarray
        dq_M/dt [A].

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes).
    """
    recombination = np.asarray(stored_charge, float) / np.asarray(lifetime, dtype=float)
    return np.asarray(current, dtype=float) - recombination


@dataclass(frozen=True)
class ForwardState:
    """Steady forward conduction of the charge-control model.

    Attributes
    ----------
    junction_voltage, stored_charge
        Forward junction voltage v [V] and stored charge q_M = tau i_D [C].
    """

    junction_voltage: NDArray[np.float64]
    stored_charge: NDArray[np.float64]


def forward_state(
    forward_current: ArrayLike,
    lifetime: ArrayLike,
    transit_time: ArrayLike,
    *,
    shunt_conductance: ArrayLike = 0.0,
    saturation_current: ArrayLike = DEFAULT_SATURATION_CURRENT,
    emission_coefficient: ArrayLike = DEFAULT_EMISSION_COEFFICIENT,
    temperature: ArrayLike = 300.0,
) -> ForwardState:
    """Steady state of a diode with a shunt conductance that together carry a forward current.

    Parameters
    ----------
    forward_current
        Current into the diode and its shunt I_F [A], >= 0.
    lifetime, transit_time
        tau and T_M [s], > 0.
    shunt_conductance
        Conductance G in parallel with the diode [S], >= 0 (grading resistor and leakage).
    saturation_current, emission_coefficient, temperature
        As in :func:`emitter_charge`.

    Returns
    -------
    ForwardState
        The junction voltage and the stored charge.

    Notes
    -----
    In a steady state dq_M/dt = 0, so q_M = tau i_D and q_E = (tau + T_M) i_D, with
    i_D = I_F - G v. The junction voltage solves

    .. math:: I_S \\tau \\,(e^{v/(n V_T)} - 1) = (\\tau + T_M)(I_F - G v)

    whose left side minus right side is increasing and convex in v; Newton's method started at
    the solution for G = 0 (an upper bound) converges monotonically from above.

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes).
    """
    current = np.asarray(forward_current, dtype=float)
    tau = np.asarray(lifetime, dtype=float)
    total_time = tau + np.asarray(transit_time, dtype=float)
    conductance = np.asarray(shunt_conductance, dtype=float)
    scale = np.asarray(emission_coefficient, dtype=float) * thermal_voltage(temperature)
    saturation_charge = np.asarray(saturation_current, dtype=float) * tau
    voltage = scale * np.log1p(total_time * current / saturation_charge)
    for _ in range(_SOLVER_ITERATIONS):
        excess = saturation_charge * np.expm1(voltage / scale) - total_time * (
            current - conductance * voltage
        )
        slope = saturation_charge * np.exp(voltage / scale) / scale + total_time * conductance
        step = excess / slope
        voltage = voltage - step
        if not np.any(np.abs(step) > 1e-15 * np.maximum(np.abs(voltage), scale)):
            break
    return ForwardState(
        junction_voltage=voltage, stored_charge=tau * (current - conductance * voltage)
    )


@dataclass(frozen=True)
class RampRecovery:
    """Reverse recovery of the charge-control model at a constant di/dt.

    Attributes
    ----------
    peak_current
        Peak reverse-recovery current I_RM [A], >= 0.
    rise_time
        Time t_a from the current zero crossing to the peak [s].
    tail_time_constant
        Time constant tau_rr of the exponential decay after the peak [s].
    recovery_charge
        Q_rr, the whole reverse charge from the zero crossing on [C].
    recovery_time
        t_rr from the zero crossing to ``fraction`` I_RM on the tail [s].
    """

    peak_current: NDArray[np.float64]
    rise_time: NDArray[np.float64]
    tail_time_constant: NDArray[np.float64]
    recovery_charge: NDArray[np.float64]
    recovery_time: NDArray[np.float64]


def _peak_current(lifetime, share, forward_current, di_dt):
    """I_RM = a tau (p + W0(-p exp(-p - I_F / (a tau)))) with p = tau / (tau + T_M)."""
    argument = -share * np.exp(-share - forward_current / (di_dt * lifetime))
    return di_dt * lifetime * (share + lambertw(argument, 0).real)


def ramp_recovery(
    lifetime: ArrayLike,
    transit_time: ArrayLike,
    forward_current: ArrayLike,
    di_dt: ArrayLike,
    *,
    fraction: float = RECOVERY_END_FRACTION,
) -> RampRecovery:
    """Closed-form reverse recovery of the charge-control model for a falling current ramp.

    Parameters
    ----------
    lifetime, transit_time
        tau and T_M [s], > 0.
    forward_current
        Steady forward current before the ramp I_F [A], >= 0; the diode has conducted it for
        much longer than tau.
    di_dt
        Rate a = |di/dt| at which the current falls [A/s], > 0.
    fraction
        End of t_rr as a fraction of I_RM on the tail [-], in (0, 1); default 0.25.

    Returns
    -------
    RampRecovery
        I_RM, t_a, tau_rr, Q_rr and t_rr.

    Notes
    -----
    Ramp phase. The circuit imposes i(t) = I_F - a t, starting from q_M(0) = tau I_F. Then
    dq_M/dt = i - q_M / tau integrates to

    .. math:: q_M(t) = \\tau (I_F - a t) + a \\tau^2 (1 - e^{-t/\\tau})

    and q_E = q_M + T_M i falls monotonically. The junction is forward biased while q_E > 0;
    the diode takes over when q_E reaches 0 (the emitter charge cannot fall below
    -I_S tau, a negligible amount), at t_1 with i(t_1) = -I_RM. Writing u = I_RM / (a tau),
    p = tau / (tau + T_M) and c = exp(-I_F / (a tau)), q_E(t_1) = 0 reads
    1 - u / p = c e^{-u}; with w = u - p this is w e^w = -p c e^{-p}, so

    .. math:: I_{RM} = a \\tau \\left(p + W_0\\!\\left(-p\\, e^{-p - I_F/(a\\tau)}\\right)\\right)

    on the principal branch (W_{-1} < -1 would give I_RM < 0). For I_F >> a tau it tends to
    a tau^2 / (tau + T_M). Tail phase. With q_E = 0 the current is i = -q_M / T_M and
    dq_M/dt = -q_M / T_M - q_M / tau, so the reverse current decays as exp(-t / tau_rr) with

    .. math:: \\tau_{rr} = \\frac{\\tau T_M}{\\tau + T_M}

    Since q_M(t_1) = T_M I_RM, the tail carries I_RM tau_rr; with the triangle of the ramp
    from the zero crossing (t_a = I_RM / a) the recovery charge is

    .. math:: Q_{rr} = \\frac{I_{RM}^2}{2 a} + I_{RM} \\tau_{rr}

    and t_rr = t_a + tau_rr ln(1 / fraction)
    (:func:`stringcheck.physics.recovery.recovery_time_to_fraction`).

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, IEEE Trans. Power Electronics 6(2), 1991 (module notes).
    .. [2] R. M. Corless, G. H. Gonnet, D. E. G. Hare, D. J. Jeffrey and D. E. Knuth, "On the
       Lambert W function", *Advances in Computational Mathematics*, 5, 1996.
    """
    tau = np.asarray(lifetime, dtype=float)
    transit = np.asarray(transit_time, dtype=float)
    rate = np.asarray(di_dt, dtype=float)
    peak = _peak_current(tau, tau / (tau + transit), np.asarray(forward_current, float), rate)
    tail = tau * transit / (tau + transit)
    rise = peak / rate
    return RampRecovery(
        peak_current=peak,
        rise_time=rise,
        tail_time_constant=tail,
        recovery_charge=peak * peak / (2.0 * rate) + peak * tail,
        recovery_time=recovery_time_to_fraction(rise, tail, fraction=fraction),
    )


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
    for _ in range(_SOLVER_ITERATIONS):
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
        return _peak_current(tau, 1.0 - tail / tau, current, rate)

    low = tail + peak / rate
    high = _expand_until(model_peak, peak, low, 2.0)
    tau = _solve_increasing(model_peak, peak, low, high)
    return ChargeControlFit(lifetime=tau, transit_time=tau * tail / (tau - tail))


def _expand_until(function, target, start, factor):
    """Grow start by factor (per element) until function >= target; at most 200 times."""
    high = np.array(start, dtype=float, copy=True)
    for _ in range(_SOLVER_ITERATIONS):
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
