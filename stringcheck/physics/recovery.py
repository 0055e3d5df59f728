"""Reverse-recovery relations of a power diode for a triangular recovery current.

At turn-off the forward current falls at a constant rate di/dt, crosses zero, and keeps falling
for the rise time t_a while the stored charge near the junction is removed; the reverse current
then peaks at I_RM and decays back to zero during the fall time t_b. Approximating the reverse
current by a triangle of base t_rr = t_a + t_b and height I_RM gives the relations below. All
functions are pure, vectorized, take SI units and let NaN propagate.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "RECOVERY_END_FRACTION",
    "peak_current_from_charge",
    "peak_current_from_rise",
    "recovery_charge",
    "recovery_time_fraction",
    "recovery_time_from_charge",
    "recovery_time_to_fraction",
    "softness",
]

RECOVERY_END_FRACTION = 0.25
"""Fraction of I_RM at which the reverse-recovery time ends (common practice: 25 %)."""


def recovery_charge(peak_current: ArrayLike, recovery_time: ArrayLike) -> NDArray[np.float64]:
    """Reverse-recovery charge of a triangular recovery current.

    Parameters
    ----------
    peak_current
        Peak reverse-recovery current I_RM [A], >= 0.
    recovery_time
        Reverse-recovery time t_rr = t_a + t_b [s], >= 0.

    Returns
    -------
    numpy.ndarray
        Recovery charge Q_rr [C].

    Notes
    -----
    The area of a triangle of height I_RM and base t_rr:

    .. math:: Q_{rr} = \\tfrac{1}{2} I_{RM} \\, t_{rr}

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), reverse recovery
       characteristics.
    .. [2] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 20 (power diodes), reverse
       recovery.
    """
    return 0.5 * np.asarray(peak_current, dtype=float) * np.asarray(recovery_time, dtype=float)


def peak_current_from_rise(di_dt: ArrayLike, rise_time: ArrayLike) -> NDArray[np.float64]:
    """Peak reverse-recovery current reached after the rise time at a given di/dt.

    Parameters
    ----------
    di_dt
        Magnitude of the commutation rate of the current |di/dt| [A/s], >= 0.
    rise_time
        Time t_a from the current zero crossing to the reverse-current peak [s], >= 0.

    Returns
    -------
    numpy.ndarray
        Peak reverse-recovery current I_RM [A].

    Notes
    -----
    The current keeps falling at the imposed rate until the junction starts to block:

    .. math:: I_{RM} = t_a \\, \\frac{di}{dt}

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), reverse recovery
       characteristics.
    .. [2] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 20 (power diodes), reverse
       recovery.
    """
    return np.asarray(rise_time, dtype=float) * np.asarray(di_dt, dtype=float)


def recovery_time_from_charge(recovery_charge: ArrayLike, di_dt: ArrayLike) -> NDArray[np.float64]:
    """Reverse-recovery time from the recovery charge and di/dt, for an abrupt recovery.

    Parameters
    ----------
    recovery_charge
        Reverse-recovery charge Q_rr [C], >= 0.
    di_dt
        Magnitude of the commutation rate |di/dt| [A/s], > 0.

    Returns
    -------
    numpy.ndarray
        Reverse-recovery time t_rr [s].

    Notes
    -----
    With t_b << t_a, t_rr ~ t_a and I_RM = t_rr di/dt, so Q_rr = 1/2 di/dt t_rr^2:

    .. math:: t_{rr} = \\sqrt{2 Q_{rr} / (di/dt)}

    Valid only for t_b << t_a (a snappy diode); a soft diode has a longer t_rr for the same charge.

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), reverse recovery
       characteristics.
    .. [2] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 20 (power diodes), reverse
       recovery.
    """
    return np.sqrt(2.0 * np.asarray(recovery_charge, dtype=float) / np.asarray(di_dt, dtype=float))


def peak_current_from_charge(recovery_charge: ArrayLike, di_dt: ArrayLike) -> NDArray[np.float64]:
    """Peak reverse-recovery current from the recovery charge and di/dt, for an abrupt recovery.

    Parameters
    ----------
    recovery_charge
        Reverse-recovery charge Q_rr [C], >= 0.
    di_dt
        Magnitude of the commutation rate |di/dt| [A/s], >= 0.

    Returns
    -------
    numpy.ndarray
        Peak reverse-recovery current I_RM [A].

    Notes
    -----
    With t_b << t_a (see :func:`recovery_time_from_charge`):

    .. math:: I_{RM} = \\sqrt{2 Q_{rr} \\, di/dt}

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), reverse recovery
       characteristics.
    .. [2] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 20 (power diodes), reverse
       recovery.
    """
    return np.sqrt(2.0 * np.asarray(recovery_charge, dtype=float) * np.asarray(di_dt, dtype=float))


def softness(rise_time: ArrayLike, fall_time: ArrayLike) -> NDArray[np.float64]:
    """Softness factor of a recovery: the ratio of fall time to rise time.

    Parameters
    ----------
    rise_time
        Time t_a from the current zero crossing to the reverse-current peak [s], > 0.
    fall_time
        Time t_b from the reverse-current peak to the end of recovery [s], >= 0.

    Returns
    -------
    numpy.ndarray
        Softness S = t_b / t_a [-]. S < 1 is a snappy recovery, S >= 1 a soft one.

    Notes
    -----
    .. math:: S = t_b / t_a

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), reverse recovery
       characteristics.
    .. [2] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 20 (power diodes), reverse
       recovery.
    """
    return np.asarray(fall_time, dtype=float) / np.asarray(rise_time, dtype=float)


def recovery_time_to_fraction(
    rise_time: ArrayLike,
    tail_time_constant: ArrayLike,
    *,
    fraction: float = RECOVERY_END_FRACTION,
) -> NDArray[np.float64]:
    """Reverse-recovery time of a recovery whose tail decays exponentially after the peak.

    Parameters
    ----------
    rise_time
        Time t_a from the current zero crossing to the reverse-current peak [s], >= 0.
    tail_time_constant
        Time constant tau of the exponential decay of the reverse current after I_RM [s], >= 0.
    fraction
        Fraction of I_RM at which recovery is taken to end [-], in (0, 1]. Default
        :data:`RECOVERY_END_FRACTION` (0.25).

    Returns
    -------
    numpy.ndarray
        Reverse-recovery time t_rr [s], from the current zero crossing to the instant the
        reverse current has decayed to ``fraction`` * I_RM.

    Notes
    -----
    With i(t) = I_RM exp(-(t - t_a) / tau) for t > t_a, i(t_rr) = fraction * I_RM gives

    .. math:: t_{rr} = t_a + \\tau \\ln(1 / \\mathrm{fraction})

    Ending t_rr where the reverse current has fallen to 25 % of I_RM is common practice.
    JEDEC and IEC 60747-2 also define the end point by a straight line extrapolated through two
    points of the tail (through 90 % and 25 % of I_RM, from memory) to zero current; that
    definition gives a different t_rr for the same waveform, so a datasheet value must be read
    with the definition it used.

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), reverse recovery
       characteristics.
    .. [2] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 20 (power diodes), reverse
       recovery.
    .. [3] IEC 60747-2, *Semiconductor devices - Discrete devices - Part 2: Rectifier diodes*,
       definition and measurement of the reverse recovery time.
    """
    rise = np.asarray(rise_time, dtype=float)
    return rise - np.asarray(tail_time_constant, dtype=float) * np.log(fraction)


def recovery_time_fraction(recovery_time: ArrayLike, frequency: ArrayLike) -> NDArray[np.float64]:
    """Fraction of each switching period that a diode spends in reverse recovery.

    Parameters
    ----------
    recovery_time
        Reverse-recovery time t_rr [s], >= 0.
    frequency
        Commutation frequency f (one turn-off per period) [Hz], >= 0.

    Returns
    -------
    numpy.ndarray
        t_rr f [-]. Values near or above 1 mean the device never finishes recovering.

    Notes
    -----
    .. math:: \\mathrm{fraction} = t_{rr} f

    Common practice: the recovery should take a small part of the period (a few to ten percent).
    A device with t_rr = 5 us recovers for the whole period at 200 kHz and belongs at 10-20 kHz
    at most, where it recovers for 5-10 % of the period.

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), reverse recovery
       characteristics.
    .. [2] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 20 (power diodes), reverse
       recovery.
    """
    return np.asarray(recovery_time, dtype=float) * np.asarray(frequency, dtype=float)

