"""Steady junction temperatures of devices on heatsinks, and Semenov's thermal-runaway limit.

Each device sits on a heatsink through its junction-to-case and case-to-sink thermal resistances
R_th(j-c) + R_th(c-s); the sink reaches ambient through R_th(s-a). Either every device of a group
shares one sink (``"shared"``: the sink carries the sum of all their losses) or each device has
a sink of its own (``"separate"``). Temperatures in [degC], thermal resistances in [K/W],
powers in [W]. All functions are pure and vectorized.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.constants import HEATSINKS
from stringcheck.errors import StringcheckError

__all__ = ["junction_temperature", "semenov_limit", "semenov_number"]


def junction_temperature(
    power: ArrayLike,
    ambient: ArrayLike,
    junction_to_sink: ArrayLike,
    sink_to_ambient: ArrayLike,
    *,
    heatsink: str,
) -> NDArray[np.float64]:
    """Steady junction temperature of every device of a group.

    Parameters
    ----------
    power
        Average loss of each device P_k [W], shape ``(..., m, n)`` (m branches of n devices).
    ambient
        Ambient temperature T_a [degC], broadcastable to the leading shape ``...``.
    junction_to_sink
        R_th(j-c) + R_th(c-s) of each device [K/W], broadcastable to ``power``, >= 0.
    sink_to_ambient
        R_th(s-a) of the sink [K/W], broadcastable to the leading shape ``...``, >= 0. With
        ``"separate"`` every device has a sink of this resistance.
    heatsink
        ``"shared"`` or ``"separate"``.

    Returns
    -------
    numpy.ndarray
        Junction temperatures T_j,k [degC], shape ``(..., m, n)``.

    Raises
    ------
    StringcheckError
        If ``heatsink`` is not one of :data:`stringcheck.constants.HEATSINKS`.

    Notes
    -----
    The steady thermal network, series resistances from junction to ambient (common practice):

    .. math:: T_{j,k} = T_a + P_k (R_{th(j-c),k} + R_{th(c-s),k})
              + R_{th(s-a)} \\cdot \\begin{cases} \\sum_i P_i & \\text{shared} \\\\
              P_k & \\text{separate} \\end{cases}

    Steady state only: valid when the thermal time constants are long against the period of
    the current, so that T_j follows the average loss.

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 29 (heat sinks and thermal
       management), steady-state thermal resistance network (chapter from memory).
    """
    if heatsink not in HEATSINKS:
        valid = ", ".join(repr(name) for name in HEATSINKS)
        raise StringcheckError(f"heatsink: {heatsink!r} is not known; use one of {valid}")
    power = np.asarray(power, dtype=float)
    ambient = np.asarray(ambient, dtype=float)[..., None, None]
    sink = np.asarray(sink_to_ambient, dtype=float)[..., None, None]
    own = power * np.asarray(junction_to_sink, dtype=float)
    if heatsink == "shared":
        return ambient + own + sink * power.sum(axis=(-2, -1), keepdims=True)
    return ambient + own + sink * power


def semenov_number(
    reference_power: ArrayLike,
    rate: ArrayLike,
    thermal_resistance: ArrayLike,
    ambient: ArrayLike,
    *,
    reference_temperature: ArrayLike,
) -> NDArray[np.float64]:
    """Semenov's number of a device whose loss grows exponentially with temperature.

    Parameters
    ----------
    reference_power
        Loss P_0 at the reference temperature [W], > 0.
    rate
        Exponential rate a of the loss, P = P_0 exp(a (T - T_0)) [1/K], > 0. Leakage doubling
        every T_double kelvin has a = ln 2 / T_double.
    thermal_resistance
        Junction-to-ambient thermal resistance R_th [K/W], > 0.
    ambient
        Ambient temperature T_a [degC].
    reference_temperature
        Temperature T_0 at which the loss is P_0 [degC].

    Returns
    -------
    numpy.ndarray
        Se = a R_th P_0 exp(a (T_a - T_0)) [-]. A steady state exists iff Se <= 1/e.

    Notes
    -----
    See :func:`semenov_limit`.

    References
    ----------
    .. [1] N. N. Semenov, "Zur Theorie des Verbrennungsprozesses", *Zeitschrift fuer Physik* 48,
       571-582, 1928 (title and pages from memory).
    """
    rate = np.asarray(rate, dtype=float)
    return (
        rate
        * np.asarray(thermal_resistance, dtype=float)
        * np.asarray(reference_power, dtype=float)
        * np.exp(rate * (np.asarray(ambient, dtype=float) - np.asarray(reference_temperature)))
    )


def semenov_limit(
    reference_power: ArrayLike,
    rate: ArrayLike,
    thermal_resistance: ArrayLike,
    *,
    reference_temperature: ArrayLike,
) -> NDArray[np.float64]:
    """Highest ambient temperature at which a device with exponential loss has a steady state.

    Parameters
    ----------
    reference_power
        Loss P_0 at the reference temperature [W], > 0.
    rate
        Exponential rate a of the loss, P = P_0 exp(a (T - T_0)) [1/K], > 0.
    thermal_resistance
        Junction-to-ambient thermal resistance R_th [K/W], > 0.
    reference_temperature
        Temperature T_0 at which the loss is P_0 [degC].

    Returns
    -------
    numpy.ndarray
        Critical ambient temperature T_a,crit [degC]. The junction temperature there is
        T_a,crit + 1 / a.

    Notes
    -----
    The steady state solves T = T_a + R_th P_0 exp(a (T - T_0)). The right side is convex in T,
    so a solution exists as long as the line T meets it; the limiting case is tangency, where
    also 1 = a R_th P_0 exp(a (T - T_0)). Together these give T - T_a = 1 / a and Semenov's
    criterion

    .. math:: a R_{th} P_0 e^{a (T_a - T_0)} \\le 1/e
              \\iff T_a \\le T_0 - \\frac{1 + \\ln(a R_{th} P_0)}{a}

    References
    ----------
    .. [1] N. N. Semenov, "Zur Theorie des Verbrennungsprozesses", *Zeitschrift fuer Physik* 48,
       571-582, 1928 (title and pages from memory).
    """
    rate = np.asarray(rate, dtype=float)
    resistance = np.asarray(thermal_resistance, dtype=float)
    product = rate * resistance * np.asarray(reference_power, dtype=float)
    return np.asarray(reference_temperature, dtype=float) - (1.0 + np.log(product)) / rate
