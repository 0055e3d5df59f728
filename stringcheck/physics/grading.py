"""Passive grading network of a series diode string: sizing rules, ratings and discharge.

Every stage of a series string has a grading resistor R (static sharing, bleeding the string
after switch-off) and usually a grading capacitor C (dynamic sharing at turn-off). This module
holds the textbook worst-case sizing rules, the dissipation of the resistors, the energy in the
capacitors and the time the string takes to discharge to a safe voltage. All functions are pure
and vectorized.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.constants import SAFE_VOLTAGE
from stringcheck.errors import StringcheckError

__all__ = [
    "WAVEFORM_MEAN_SQUARE_FACTOR",
    "discharge_time",
    "resistance_at_temperature",
    "resistor_power",
    "stored_energy",
    "worst_case_dynamic_capacitance",
    "worst_case_static_resistance",
]

WAVEFORM_MEAN_SQUARE_FACTOR = {"dc": 1.0, "half-sine": 0.25, "square": 0.5, "offset-sine": 0.25}
"""Mean square of the reverse voltage over a period, per unit peak voltage squared."""

_EPSILON = np.finfo(float).eps
_DISCHARGE_MAX_ITERATIONS = 200


def worst_case_static_resistance(
    series_count: ArrayLike,
    device_voltage_limit: ArrayLike,
    string_voltage: ArrayLike,
    leakage_spread: ArrayLike,
) -> NDArray[np.float64]:
    """Largest equal grading resistance that keeps every device within its voltage limit.

    Parameters
    ----------
    series_count
        Number of devices in series n [-], >= 2.
    device_voltage_limit
        Largest reverse voltage allowed on one device V_DM [V], with n V_DM > V_s.
    string_voltage
        Reverse voltage across the string V_s [V], > 0.
    leakage_spread
        Difference between the largest and the smallest leakage current dI_R [A], > 0.

    Returns
    -------
    numpy.ndarray
        Resistance R [ohm]; any equal grading resistance up to this value keeps the worst stage
        at or below V_DM for constant leakage currents.

    Notes
    -----
    Worst case: one device at the minimum leakage, n - 1 at the maximum. With equal resistors
    the low-leakage device takes V_DM = V_s / n + (n - 1) R dI_R / n, so

    .. math:: R = \\frac{n V_{DM} - V_s}{(n - 1) \\, \\Delta I_R}

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), series-connected
       diodes: steady-state voltage sharing.
    """
    n = np.asarray(series_count, dtype=float)
    limit = np.asarray(device_voltage_limit, dtype=float)
    voltage = np.asarray(string_voltage, dtype=float)
    return (n * limit - voltage) / ((n - 1.0) * np.asarray(leakage_spread, dtype=float))


def worst_case_dynamic_capacitance(
    series_count: ArrayLike,
    device_voltage_limit: ArrayLike,
    string_voltage: ArrayLike,
    charge_spread: ArrayLike,
) -> NDArray[np.float64]:
    """Smallest equal grading capacitance that keeps every device within its voltage limit.

    Parameters
    ----------
    series_count
        Number of devices in series n [-], >= 2.
    device_voltage_limit
        Largest reverse voltage allowed on one device V_DM [V], with n V_DM > V_s.
    string_voltage
        Reverse voltage across the string after recovery V_s [V], > 0.
    charge_spread
        Difference between the largest and the smallest recovery charge dQ_rr [C], > 0.

    Returns
    -------
    numpy.ndarray
        Capacitance C [F]; any equal stage capacitance of at least this value keeps the worst
        stage at or below V_DM (charge balance, grading resistors neglected).

    Notes
    -----
    Worst case: one device at the minimum recovery charge, n - 1 at the maximum. The fast device
    blocks first and its capacitor takes the extra charge dQ_rr from each of the others' recovery:

    .. math:: C = \\frac{(n - 1) \\, \\Delta Q_{rr}}{n V_{DM} - V_s}

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), series-connected
       diodes: dynamic voltage sharing.
    """
    n = np.asarray(series_count, dtype=float)
    limit = np.asarray(device_voltage_limit, dtype=float)
    voltage = np.asarray(string_voltage, dtype=float)
    return (n - 1.0) * np.asarray(charge_spread, dtype=float) / (n * limit - voltage)


def resistance_at_temperature(
    resistance: ArrayLike,
    temperature_coefficient: ArrayLike,
    temperature: ArrayLike,
    *,
    reference_temperature: ArrayLike,
) -> NDArray[np.float64]:
    """Resistance of a grading resistor at its temperature, from its linear temperature coefficient.

    Parameters
    ----------
    resistance
        Resistance R at ``reference_temperature`` [ohm], > 0.
    temperature_coefficient
        Temperature coefficient of resistance alpha (TCR) [1/K], e.g. 100e-6 for 100 ppm/K;
        |alpha (T - T_ref)| < 1.
    temperature
        Temperature of the resistor T [degC].
    reference_temperature
        Temperature the TCR is specified from T_ref [degC] (25 degC for resistor datasheets,
        common practice).

    Returns
    -------
    numpy.ndarray
        R(T) [ohm], broadcast over the inputs.

    Notes
    -----
    R(T) = R (1 + alpha (T - T_ref)), the first-order (linear) law a resistor's datasheet TCR
    states; valid over the range the TCR is specified for.

    References
    ----------
    .. [1] IEC 60115-1:2020, Fixed resistors for use in electronic equipment - Part 1: Generic
       specification, clause 6 (temperature coefficient of resistance, measured from the
       reference temperature), from memory.
    """
    resistance = np.asarray(resistance, dtype=float)
    return resistance * (1.0 + np.asarray(temperature_coefficient, dtype=float)
                         * (np.asarray(temperature, dtype=float) - reference_temperature))


def resistor_power(
    voltage: ArrayLike,
    resistance: ArrayLike,
    *,
    waveform: str = "dc",
) -> NDArray[np.float64]:
    """Mean power dissipated in a grading resistor.

    Parameters
    ----------
    voltage
        Peak reverse voltage across the resistor's stage V [V].
    resistance
        Resistance R [ohm], > 0 (``inf`` gives 0 W).
    waveform
        Shape of the reverse voltage over one period:

        ``"dc"``
            V throughout (a blocking DC string).
        ``"half-sine"``
            One sine half-cycle of peak V per period, zero for the other half (a diode of a
            rectifier on a sinusoidal supply; the forward half-cycle is taken as 0 V).
        ``"square"``
            V for half of each period, zero for the other half.

    Returns
    -------
    numpy.ndarray
        Mean dissipation P [W].

    Raises
    ------
    StringcheckError
        If ``waveform`` is not one of the above.

    Notes
    -----
    P = <v^2> / R with the mean square over one period: V^2 for dc, V^2 / 4 for the half-sine
    (the mean of sin^2 over a half-cycle is 1/2, and the half-cycle fills half the period) and
    V^2 / 2 for the square wave. The stage voltage is assumed to follow the string waveform in
    proportion (static sharing holds at every instant) and the forward voltage drop is neglected.

    References
    ----------
    .. [1] J. W. Nilsson and S. A. Riedel, *Electric Circuits*, 9th ed., Prentice Hall, 2011,
       chapter 10 (sinusoidal steady-state power calculations): average power and rms value.
    """
    try:
        factor = WAVEFORM_MEAN_SQUARE_FACTOR[waveform]
    except (KeyError, TypeError):
        valid = ", ".join(repr(name) for name in WAVEFORM_MEAN_SQUARE_FACTOR)
        raise StringcheckError(f"waveform: {waveform!r} is not known; use one of {valid}") from None
    voltage = np.asarray(voltage, dtype=float)
    return factor * voltage * voltage / np.asarray(resistance, dtype=float)


def stored_energy(capacitance: ArrayLike, voltage: ArrayLike) -> NDArray[np.float64]:
    """Energy stored in a charged capacitor.

    Parameters
    ----------
    capacitance
        Capacitance C [F], >= 0.
    voltage
        Voltage across the capacitor V [V].

    Returns
    -------
    numpy.ndarray
        Energy W = C V^2 / 2 [J].

    Notes
    -----
    .. math:: W = \\tfrac{1}{2} C V^2

    References
    ----------
    .. [1] J. W. Nilsson and S. A. Riedel, *Electric Circuits*, 9th ed., Prentice Hall, 2011,
       chapter 6 (inductance, capacitance, and mutual inductance): energy stored in a capacitor.
    """
    voltage = np.asarray(voltage, dtype=float)
    return 0.5 * np.asarray(capacitance, dtype=float) * voltage * voltage


def discharge_time(
    initial_voltages: ArrayLike,
    resistances: ArrayLike,
    capacitances: ArrayLike,
    *,
    threshold: ArrayLike = SAFE_VOLTAGE,
) -> NDArray[np.float64]:
    """Time for the terminal voltage of a disconnected RC-graded string to fall to a threshold.

    Parameters
    ----------
    initial_voltages
        Stage voltages at disconnection V_k0 [V], shape ``(..., n)``, >= 0.
    resistances
        Grading resistance of each stage R_k [ohm], broadcastable to ``(..., n)``, >= 0;
        ``inf`` for a stage with no bleed path.
    capacitances
        Capacitance of each stage C_k [F], broadcastable to ``(..., n)``, >= 0.
    threshold
        Voltage the string must fall to [V], > 0; scalar or broadcastable to the leading
        shape. Default 60 V (:data:`stringcheck.constants.SAFE_VOLTAGE`).

    Returns
    -------
    numpy.ndarray
        Time t [s], shape ``...``: 0 if the sum starts at or below the threshold; ``inf`` if the
        stages that cannot discharge (R C = inf, V_k0 > 0) alone hold at least the threshold.

    Notes
    -----
    With both terminals open no current flows through the string, so every stage discharges
    through its own resistor independently and the terminal voltage is

    .. math:: V(t) = \\sum_k V_{k0} \\, e^{-t / (R_k C_k)}

    A stage with R_k C_k = 0 is empty for any t > 0. The equation V(t) = threshold is solved in
    the log domain, ln V(t) = logsumexp_k(ln V_k0 - t / tau_k), which is convex and decreasing
    in t (a log-sum-exp of affine functions); Newton's method started at t = 0, left of the
    root, then converges monotonically, and is exact in one step for equal time constants. All
    rows iterate together.

    IEC 60204-1:2016 clause 6.2.4 asks that exposed live parts of machinery discharge to 60 V or
    less within 5 s after the supply is disconnected: the criterion the report applies. The
    hazardous-live levels of IEC 61010-1 differ between editions (from memory: 30 V r.m.s.,
    42.4 V peak, 60 V DC in the 2001 edition; 33 V r.m.s., 46.7 V peak, 70 V DC in normal condition
    in the 2010 edition) and are not the criterion here.

    References
    ----------
    .. [1] J. W. Nilsson and S. A. Riedel, *Electric Circuits*, 9th ed., Prentice Hall, 2011,
       chapter 7 (response of first-order RL and RC circuits): natural response of an RC circuit.
    .. [2] IEC 61010-1, *Safety requirements for electrical equipment for measurement,
       control, and laboratory use - Part 1: General requirements*, 2nd ed. 2001 and 3rd ed.
       2010, clause 6.3 (levels of hazardous live; from memory, as quoted above).
    .. [3] IEC 60204-1:2016, *Safety of machinery - Electrical equipment of machines - Part 1:
       General requirements*, clause 6.2.4 (protection against residual voltages).
    .. [4] S. Boyd and L. Vandenberghe, *Convex Optimization*, Cambridge University Press, 2004,
       section 3.1.5: log-sum-exp is convex.
    """
    voltages = np.asarray(initial_voltages, dtype=float)
    with np.errstate(invalid="ignore"):
        time_constant = np.asarray(resistances, dtype=float) * np.asarray(capacitances, dtype=float)
    shape = np.broadcast_shapes(voltages.shape, time_constant.shape)
    leading = np.broadcast_shapes(shape[:-1], np.shape(threshold))
    count = shape[-1]
    rows = int(np.prod(leading, dtype=int))
    voltages = np.broadcast_to(voltages, leading + (count,)).reshape(rows, count)
    time_constant = np.broadcast_to(time_constant, leading + (count,)).reshape(rows, count)
    limit = np.broadcast_to(np.asarray(threshold, dtype=float), leading).reshape(rows)

    invalid = (
        np.isnan(voltages).any(axis=-1) | np.isnan(time_constant).any(axis=-1) | np.isnan(limit)
    )
    # Stages with tau = 0 hold nothing after t = 0+.
    voltages = np.where(time_constant == 0.0, 0.0, voltages)
    with np.errstate(divide="ignore"):
        # A stage without voltage contributes nothing, whatever its time constant.
        rate = np.where(voltages == 0.0, 0.0, 1.0 / time_constant)
        log_voltages = np.log(voltages)
    persistent = np.sum(np.where(rate == 0.0, voltages, 0.0), axis=-1)
    log_limit = np.log(limit)

    time = np.zeros(rows)
    time[persistent >= limit] = np.inf
    active = np.flatnonzero(
        (np.sum(voltages, axis=-1) > limit) & (persistent < limit) & ~invalid
    )
    for _ in range(_DISCHARGE_MAX_ITERATIONS):
        if active.size == 0:
            break
        row_time = time[active]
        exponent = log_voltages[active] - row_time[:, None] * rate[active]
        peak = np.max(exponent, axis=-1)
        share = np.exp(exponent - peak[:, None])
        share_sum = np.sum(share, axis=-1)
        log_sum = peak + np.log(share_sum)
        slope = -np.sum(share * rate[active], axis=-1) / share_sum
        step = -(log_sum - log_limit[active]) / slope
        time[active] = row_time + step
        # Monotone from the left: the step is positive until rounding takes over.
        active = active[step > 4.0 * _EPSILON * row_time]
    time[invalid] = np.nan
    return time.reshape(leading)
