"""Charge-control model of a power diode with reverse recovery and its ramp closed forms.

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
application's (:func:`rescale_recovery_charge`); the fitting lives in charge_control_fit.py and is
re-exported here. All functions are pure, vectorized, in SI units, and let NaN propagate; an input
for which no model exists gives NaN.

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
    "ForwardState",
    "RampRecovery",
    "diode_current",
    "emitter_charge",
    "forward_state",
    "ramp_recovery",
    "stored_charge_rate",
    "thermal_voltage",
]

BOLTZMANN_OVER_CHARGE = 1.380649e-23 / 1.602176634e-19
"""k / q [V/K], from the exact SI values of the Boltzmann constant and the elementary charge."""

DEFAULT_SATURATION_CURRENT = 1e-9
"""Default I_S [A]: an invented value that gives a forward drop of about 1.3 V at 100 A."""

DEFAULT_EMISSION_COEFFICIENT = 2.0
"""Default n [-]: close to 2 under high-level injection in a PiN diode (common practice)."""

SOLVER_ITERATIONS = 200


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
    for _ in range(SOLVER_ITERATIONS):
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


def ramp_peak_current(lifetime, share, forward_current, di_dt):
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
    peak = ramp_peak_current(tau, tau / (tau + transit), np.asarray(forward_current, float), rate)
    tail = tau * transit / (tau + transit)
    rise = peak / rate
    return RampRecovery(
        peak_current=peak,
        rise_time=rise,
        tail_time_constant=tail,
        recovery_charge=peak * peak / (2.0 * rate) + peak * tail,
        recovery_time=recovery_time_to_fraction(rise, tail, fraction=fraction),
    )
