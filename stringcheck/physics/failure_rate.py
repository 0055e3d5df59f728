"""Failure rate of a low-frequency diode by the parts-stress model of MIL-HDBK-217F Notice 2.

lambda_p = lambda_b pi_T pi_S pi_C pi_Q pi_E  [failures per 10^6 hours], section 6.1 (Diodes, Low
Frequency) of the handbook. The factor tables below are the handbook's, **from memory** (marked
so in the report and the docs); a user who holds the handbook can override the base rate.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["BASE_RATES", "CONTACT_FACTORS", "ENVIRONMENT_FACTORS", "QUALITY_FACTORS",
           "TEMPERATURE_ACTIVATION", "diode_failure_rate", "stress_factor", "temperature_factor"]

# lambda_b [failures / 10^6 h] by diode type, section 6.1 (from memory).
BASE_RATES = {"general_purpose": 0.0038, "switching": 0.0010, "fast_recovery": 0.069,
              "power_rectifier": 0.0030, "high_voltage_stack": 0.0050}
# pi_Q by quality level, section 6.1 (from memory).
QUALITY_FACTORS = {"JANTXV": 0.70, "JANTX": 1.0, "JAN": 2.4, "lower": 5.5, "plastic": 8.0}
# pi_E by environment, section 6.1 (from memory).
ENVIRONMENT_FACTORS = {"GB": 1.0, "GF": 6.0, "GM": 9.0, "NS": 9.0, "NU": 19.0, "AIC": 13.0,
                       "AIF": 29.0, "AUC": 20.0, "AUF": 43.0, "ARW": 24.0, "SF": 0.50, "MF": 14.0,
                       "ML": 32.0, "CL": 320.0}
# pi_C by contact construction, section 6.1 (from memory).
CONTACT_FACTORS = {"metallurgical": 1.0, "spring": 2.0}
# The temperature factor's activation constant [K] of general-purpose, switching, fast-recovery,
# power-rectifier and transient-suppressor diodes, section 6.1.
TEMPERATURE_ACTIVATION = 3091.0


def temperature_factor(junction_temperature: ArrayLike) -> NDArray[np.float64]:
    """The temperature factor pi_T of a low-frequency diode [1].

    Parameters
    ----------
    junction_temperature
        Junction temperature T_j [degC], above -273.15.

    Returns
    -------
    numpy.ndarray
        pi_T [1], 1 at 25 degC.

    Notes
    -----
    pi_T = exp(-3091 (1 / (T_j + 273) - 1 / 298)), the handbook's form (273, not 273.15).

    References
    ----------
    .. [1] MIL-HDBK-217F Notice 2, *Reliability Prediction of Electronic Equipment*, US Department
       of Defense, 1995, section 6.1 (Diodes, Low Frequency), temperature factor.
    """
    temperature = np.asarray(junction_temperature, dtype=float)
    return np.exp(-TEMPERATURE_ACTIVATION * (1.0 / (temperature + 273.0) - 1.0 / 298.0))


def stress_factor(voltage_stress: ArrayLike) -> NDArray[np.float64]:
    """The electrical-stress factor pi_S of a low-frequency diode [1].

    Parameters
    ----------
    voltage_stress
        V_S = applied reverse voltage / rated reverse voltage [1], >= 0.

    Returns
    -------
    numpy.ndarray
        pi_S [1]: 0.054 for V_S <= 0.3, V_S^2.43 for 0.3 < V_S <= 1; a stress above 1 (over the
        rating, which the voltage checks fail) is taken at 1.

    References
    ----------
    .. [1] MIL-HDBK-217F Notice 2, 1995, section 6.1, electrical stress factor.
    """
    stress = np.minimum(np.asarray(voltage_stress, dtype=float), 1.0)
    return np.where(stress <= 0.3, 0.054, np.power(np.maximum(stress, 0.3), 2.43))


def diode_failure_rate(junction_temperature: ArrayLike, voltage_stress: ArrayLike, *,
                       base_rate: float, contact_factor: float, quality_factor: float,
                       environment_factor: float) -> NDArray[np.float64]:
    """Part failure rate lambda_p of a low-frequency diode [failures / 10^6 h] [1].

    Parameters
    ----------
    junction_temperature
        T_j [degC].
    voltage_stress
        V_S, applied over rated reverse voltage [1], >= 0.
    base_rate
        lambda_b [failures / 10^6 h], > 0.
    contact_factor, quality_factor, environment_factor
        pi_C, pi_Q, pi_E [1], > 0.

    Returns
    -------
    numpy.ndarray
        lambda_p [failures / 10^6 h], broadcast shape of the inputs (x 1000 for FIT, failures per
        10^9 h).

    Notes
    -----
    lambda_p = lambda_b pi_T pi_S pi_C pi_Q pi_E (:func:`temperature_factor`,
    :func:`stress_factor`).

    References
    ----------
    .. [1] MIL-HDBK-217F Notice 2, 1995, section 6.1 (Diodes, Low Frequency).
    """
    return (base_rate * temperature_factor(junction_temperature) * stress_factor(voltage_stress)
            * contact_factor * quality_factor * environment_factor)
