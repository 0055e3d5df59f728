"""A device parameter between datasheet rows at several junction temperatures.

A datasheet gives leakage and recovery figures at two or three junction temperatures (25 degC and
100-150 degC are usual). Between two rows the parameter is taken as exponential in temperature, the
form the leakage doubling rule and the rising carrier lifetime of a silicon PiN diode both have; V_T0
and r_T, which move little, linearly. Outside the rows the end segment's law is extended (the
report says so). All functions are pure, vectorized and broadcast their arguments.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["doubling_temperature_from_rows", "exponential_law", "interpolate_rows",
           "local_doubling_temperature"]

_LN2 = float(np.log(2.0))


def doubling_temperature_from_rows(cool_temperature: ArrayLike, cool_value: ArrayLike,
                                   hot_temperature: ArrayLike, hot_value: ArrayLike
                                   ) -> NDArray[np.float64]:
    """The temperature rise that doubles a quantity exponential in T through two rows [K].

    Parameters
    ----------
    cool_temperature, hot_temperature
        The rows' junction temperatures [degC], hot > cool.
    cool_value, hot_value
        The quantity at each (leakage [A], for instance), > 0; hot > cool for a finite positive
        result.

    Returns
    -------
    numpy.ndarray
        T_double = (T_hot - T_cool) ln 2 / ln(x_hot / x_cool) [K] (inf for equal values).

    Notes
    -----
    From x(T) = x_cool 2^((T - T_cool) / T_double) at T = T_hot. Example: 5 uA at 25 degC and
    50 uA at 125 degC double every 100 K / log2(10) = 30.1 K.

    References
    ----------
    .. [1] S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007,
       chapter 2 (generation current ~ n_i, approximated by an exponential in T over a range).
    """
    span = np.asarray(hot_temperature, dtype=float) - np.asarray(cool_temperature, dtype=float)
    with np.errstate(divide="ignore"):
        return span * _LN2 / np.log(np.asarray(hot_value, dtype=float)
                                     / np.asarray(cool_value, dtype=float))


def exponential_law(temperature: ArrayLike, reference_value: ArrayLike, *,
                    reference_temperature: ArrayLike, rate: ArrayLike) -> NDArray[np.float64]:
    """A quantity exponential in T from one row: x(T) = x_ref exp(rate (T - T_ref)).

    Parameters
    ----------
    temperature
        Junction temperature [degC].
    reference_value
        The row's value [unit of the quantity].
    reference_temperature
        The row's temperature [degC].
    rate
        Relative rise per kelvin [1/K] (0: temperature-independent; ln 2 / T_double for leakage).

    Returns
    -------
    numpy.ndarray
        x(T) [unit of the quantity], broadcast shape of the inputs.

    References
    ----------
    .. [1] B. J. Baliga, *Fundamentals of Power Semiconductor Devices*, Springer, 2008, chapter 5
       (PiN rectifiers: stored charge ~ high-level lifetime, which rises with temperature).
    """
    shift = np.asarray(temperature, dtype=float) - np.asarray(reference_temperature, dtype=float)
    return np.asarray(reference_value, dtype=float) * np.exp(np.asarray(rate, dtype=float) * shift)


def _segments(temperature: np.ndarray, row_temperatures: np.ndarray):
    """(index j of the segment [T_j, T_j+1] that holds or extends to each T, its fraction t)."""
    last = row_temperatures.size - 2
    index = np.clip(np.searchsorted(row_temperatures, temperature, side="right") - 1, 0, last)
    start = row_temperatures[index]
    fraction = (temperature - start) / (row_temperatures[index + 1] - start)
    return index, fraction


def interpolate_rows(temperature: ArrayLike, row_temperatures: ArrayLike, row_values: ArrayLike,
                     *, exponential: bool = True,
                     typical_values: ArrayLike | None = None) -> NDArray[np.float64]:
    """A parameter between rows at several temperatures, each value its own device's.

    Parameters
    ----------
    temperature
        Junction temperature [degC], shape S (any shape broadcasting with ``row_values[..., 0]``).
    row_temperatures
        The rows' temperatures [degC], shape (k,), k >= 2, strictly increasing.
    row_values
        The parameter at each row [unit of the parameter], shape (..., k) (> 0 if
        ``exponential``).
    exponential
        Exponential in T between rows (leakage, recovery); else linear (V_T0, r_T).
    typical_values
        The rows' typical values, shape (k,): outside the rows each device's end-row value is
        moved by the law of the typical values' end segment (the spread stays that of the end
        row, so the devices keep their order); None: each device's own end segment is extended.

    Returns
    -------
    numpy.ndarray
        The parameter at ``temperature``, broadcast shape of S and ``row_values[..., 0]``.

    Notes
    -----
    On the segment [T_j, T_j+1] holding T, with t = (T - T_j) / (T_j+1 - T_j):
    ln x = (1 - t) ln x_j + t ln x_j+1 (exponential) or x = (1 - t) x_j + t x_j+1; below the
    first row and above the last the end segment is extended (t < 0 or t > 1), with
    ``typical_values`` as ln x = ln x_end + (t - t_end) ln(x~_j+1 / x~_j) of the typical x~
    (a convex combination of increasing maps inside, a shift outside: a device's rank among
    devices is the same at every temperature). Through two
    leakage rows this is the doubling law with T_double of
    :func:`doubling_temperature_from_rows`.

    References
    ----------
    .. [1] S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007,
       chapter 2 (leakage exponential in T).
    .. [2] B. J. Baliga, *Fundamentals of Power Semiconductor Devices*, Springer, 2008,
       chapter 5 (recovery charge rising with lifetime and temperature).
    """
    index, fraction, first, second = _segment_ends(temperature, row_temperatures, row_values)
    if typical_values is None:
        if not exponential:
            return first + fraction * (second - first)
        return first * np.exp(fraction * np.log(second / first))
    typical = np.asarray(typical_values, dtype=float)
    inside = np.clip(fraction, 0.0, 1.0)
    beyond = fraction - inside  # < 0 below the first row, > 0 above the last, else 0
    if not exponential:
        return first + inside * (second - first) + beyond * (typical[index + 1] - typical[index])
    return first * np.exp(inside * np.log(second / first)
                          + beyond * np.log(typical[index + 1] / typical[index]))


def local_doubling_temperature(temperature: ArrayLike, row_temperatures: ArrayLike,
                               row_values: ArrayLike) -> NDArray[np.float64]:
    """The doubling temperature [K] of the exponential segment of :func:`interpolate_rows` that
    holds (or extends to) each ``temperature`` [degC]; shapes as there (inf on a flat segment,
    negative on a falling one)."""
    rows_t = np.asarray(row_temperatures, dtype=float)
    index, _, first, second = _segment_ends(temperature, rows_t, row_values)
    return doubling_temperature_from_rows(rows_t[index], first, rows_t[index + 1], second)


def _segment_ends(temperature: ArrayLike, row_temperatures: ArrayLike, row_values: ArrayLike):
    """The segment of the rows that holds (or extends to) each ``temperature`` [degC]: its index,
    the fraction t along it, and the values at its two ends (shapes as in
    :func:`interpolate_rows`)."""
    rows_t = np.asarray(row_temperatures, dtype=float)
    values = np.asarray(row_values, dtype=float)
    temperature = np.asarray(temperature, dtype=float)
    shape = np.broadcast_shapes(temperature.shape, values.shape[:-1])
    temperature = np.broadcast_to(temperature, shape)
    values = np.broadcast_to(values, shape + values.shape[-1:])
    index, fraction = _segments(temperature, rows_t)
    first = np.take_along_axis(values, index[..., None], axis=-1)[..., 0]
    second = np.take_along_axis(values, index[..., None] + 1, axis=-1)[..., 0]
    return index, fraction, first, second
