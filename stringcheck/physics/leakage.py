"""Reverse leakage current of a blocking diode as a function of voltage and junction temperature.

The model scales a datasheet leakage value, measured at one reverse voltage and one junction
temperature, to another operating point with a power law in voltage and an exponential in
temperature. All functions are pure, vectorized and broadcast their arguments.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["leakage_current", "temperature_factor"]


def temperature_factor(
    junction_temperature: ArrayLike,
    *,
    reference_temperature: ArrayLike,
    doubling_temperature: ArrayLike,
) -> NDArray[np.float64]:
    """Factor by which leakage current grows from the reference to the junction temperature.

    Parameters
    ----------
    junction_temperature
        Junction temperature T [degC]. Any real value.
    reference_temperature
        Temperature T_ref at which the reference leakage was measured [degC].
    doubling_temperature
        Temperature rise that doubles the leakage current [K], > 0. About 10 K for silicon.

    Returns
    -------
    numpy.ndarray
        The dimensionless factor 2^((T - T_ref) / T_double) [-], broadcast shape of the inputs.

    Notes
    -----
    .. math:: k_T = 2^{(T - T_\\mathrm{ref}) / T_\\mathrm{double}}

    evaluated with ``numpy.exp2`` so that whole multiples of the doubling temperature give exact
    powers of two. Leakage of a silicon junction doubling about every 10 K is common practice; the
    underlying temperature dependence is that of the intrinsic carrier density n_i (generation
    current ~ n_i), which this exponential approximates over a limited range.

    References
    ----------
    .. [1] S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007,
       chapter 2 (p-n junctions), generation-recombination current and its temperature dependence.
    """
    temperature = np.asarray(junction_temperature, dtype=float)
    reference = np.asarray(reference_temperature, dtype=float)
    doubling = np.asarray(doubling_temperature, dtype=float)
    return np.exp2((temperature - reference) / doubling)


def leakage_current(
    reference_current: ArrayLike,
    reverse_voltage: ArrayLike,
    junction_temperature: ArrayLike,
    *,
    reference_voltage: ArrayLike,
    reference_temperature: ArrayLike,
    doubling_temperature: ArrayLike,
    voltage_exponent: ArrayLike,
) -> NDArray[np.float64]:
    """Reverse leakage current at a given reverse voltage and junction temperature.

    Parameters
    ----------
    reference_current
        Leakage current I_R,ref measured at ``reference_voltage`` and ``reference_temperature``
        [A], >= 0.
    reverse_voltage
        Reverse voltage V across the device [V], >= 0.
    junction_temperature
        Junction temperature T [degC].
    reference_voltage
        Reverse voltage V_ref of the reference measurement [V], > 0.
    reference_temperature
        Junction temperature T_ref of the reference measurement [degC].
    doubling_temperature
        Temperature rise that doubles the leakage [K], > 0 (about 10 K for silicon).
    voltage_exponent
        Exponent m of the voltage law [-], in [0, 1]. 0 is a constant (voltage independent)
        leakage, 0.5 the generation current of an abrupt junction, 1 an ohmic leakage path.

    Returns
    -------
    numpy.ndarray
        Leakage current I_R [A], broadcast shape of all inputs.

    Notes
    -----
    .. math:: I_R = I_{R,\\mathrm{ref}} \\, (V / V_\\mathrm{ref})^m \\,
              2^{(T - T_\\mathrm{ref}) / T_\\mathrm{double}}

    In reverse bias the generation current density of a junction is J_gen = q n_i W / tau_g
    (tau_g the generation lifetime), proportional to the depletion width W. For an abrupt junction
    W ~ sqrt(V_bi + V), which for V >> V_bi gives m = 0.5 [1]_. Doubling every ~10 K for silicon
    is common practice (see :func:`temperature_factor`). With m = 0 and V = 0 the voltage factor
    is 0^0 = 1 (numpy's convention): a constant leakage.

    References
    ----------
    .. [1] S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007,
       chapter 2 (p-n junctions): depletion width of the abrupt junction and the
       generation-recombination current under reverse bias.
    """
    current = np.asarray(reference_current, dtype=float)
    voltage = np.asarray(reverse_voltage, dtype=float)
    exponent = np.asarray(voltage_exponent, dtype=float)
    voltage_factor = np.power(voltage / np.asarray(reference_voltage, dtype=float), exponent)
    return (
        current
        * voltage_factor
        * temperature_factor(
            junction_temperature,
            reference_temperature=reference_temperature,
            doubling_temperature=doubling_temperature,
        )
    )
