"""IEC 60063 preferred values (E6 ... E192) and rounding to them.

Grading resistors and capacitors are bought in preferred values. This module holds the E6, E12,
E24, E48, E96 and E192 series and rounds any positive value, in any decade, down, up or to the
nearest member of a series, steps along a series across decades, and picks the largest resistor or
smallest capacitor that still meets a bound once the component's tolerance is allowed for.

The tables are written out literally, as the decade mantissas in [1, 10) that IEC 60063:2015 lists
(Table 1 for E6, E12 and E24 with two significant figures; Table 2 for E48, E96 and E192 with
three).
They were written from memory of the standard's tables, and the tests cross-check every member
against the independent PyPI ``eseries`` package. The tables, not the geometric formula, are the
truth: the rounded values of 10^(i/N) differ from the standardised E24 values at 2.7, 3.0, 3.3, 3.6,
3.9, 4.3, 4.7 and 8.2 (and thus E6 and E12 at 2.7, 3.3, 3.9, 4.7 and 8.2), and from E192 at 9.20
(the formula gives 9.19).

Floating point: 4.7e3 and 3.3e-9 are not exact binary fractions, so every comparison with a series
member uses the relative tolerance ``RELATIVE_TOLERANCE`` (1e-9): a value within it of a preferred
value *is* that preferred value. Results are built as integer mantissa times an exact power of ten,
so they equal the float a user would type (``round_up(3.2e-9, "E24") == 3.3e-9``).

References
----------
.. [1] IEC 60063:2015, "Preferred number series for resistors and capacitors", Tables 1 and 2.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.errors import SizingError

__all__ = [
    "E6",
    "E12",
    "E24",
    "E48",
    "E96",
    "E192",
    "RELATIVE_TOLERANCE",
    "SERIES_NAMES",
    "canonical_series_name",
    "is_preferred",
    "largest_with_tolerance",
    "round_down",
    "round_nearest",
    "round_up",
    "series_values",
    "smallest_with_tolerance",
    "step",
    "values_between",
]

SERIES_NAMES: tuple[str, ...] = ("E6", "E12", "E24", "E48", "E96", "E192")

RELATIVE_TOLERANCE: float = 1e-9
"""Relative distance within which a value counts as equal to a preferred value."""

# IEC 60063:2015, Table 1 (two significant figures).
E6: tuple[float, ...] = (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)

E12: tuple[float, ...] = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)

E24: tuple[float, ...] = (
    1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
    3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1,
)  # fmt: skip

# IEC 60063:2015, Table 2 (three significant figures).
E48: tuple[float, ...] = (
    1.00, 1.05, 1.10, 1.15, 1.21, 1.27, 1.33, 1.40, 1.47, 1.54, 1.62, 1.69,
    1.78, 1.87, 1.96, 2.05, 2.15, 2.26, 2.37, 2.49, 2.61, 2.74, 2.87, 3.01,
    3.16, 3.32, 3.48, 3.65, 3.83, 4.02, 4.22, 4.42, 4.64, 4.87, 5.11, 5.36,
    5.62, 5.90, 6.19, 6.49, 6.81, 7.15, 7.50, 7.87, 8.25, 8.66, 9.09, 9.53,
)  # fmt: skip

E96: tuple[float, ...] = (
    1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24, 1.27, 1.30,
    1.33, 1.37, 1.40, 1.43, 1.47, 1.50, 1.54, 1.58, 1.62, 1.65, 1.69, 1.74,
    1.78, 1.82, 1.87, 1.91, 1.96, 2.00, 2.05, 2.10, 2.15, 2.21, 2.26, 2.32,
    2.37, 2.43, 2.49, 2.55, 2.61, 2.67, 2.74, 2.80, 2.87, 2.94, 3.01, 3.09,
    3.16, 3.24, 3.32, 3.40, 3.48, 3.57, 3.65, 3.74, 3.83, 3.92, 4.02, 4.12,
    4.22, 4.32, 4.42, 4.53, 4.64, 4.75, 4.87, 4.99, 5.11, 5.23, 5.36, 5.49,
    5.62, 5.76, 5.90, 6.04, 6.19, 6.34, 6.49, 6.65, 6.81, 6.98, 7.15, 7.32,
    7.50, 7.68, 7.87, 8.06, 8.25, 8.45, 8.66, 8.87, 9.09, 9.31, 9.53, 9.76,
)  # fmt: skip

E192: tuple[float, ...] = (
    1.00, 1.01, 1.02, 1.04, 1.05, 1.06, 1.07, 1.09, 1.10, 1.11, 1.13, 1.14,
    1.15, 1.17, 1.18, 1.20, 1.21, 1.23, 1.24, 1.26, 1.27, 1.29, 1.30, 1.32,
    1.33, 1.35, 1.37, 1.38, 1.40, 1.42, 1.43, 1.45, 1.47, 1.49, 1.50, 1.52,
    1.54, 1.56, 1.58, 1.60, 1.62, 1.64, 1.65, 1.67, 1.69, 1.72, 1.74, 1.76,
    1.78, 1.80, 1.82, 1.84, 1.87, 1.89, 1.91, 1.93, 1.96, 1.98, 2.00, 2.03,
    2.05, 2.08, 2.10, 2.13, 2.15, 2.18, 2.21, 2.23, 2.26, 2.29, 2.32, 2.34,
    2.37, 2.40, 2.43, 2.46, 2.49, 2.52, 2.55, 2.58, 2.61, 2.64, 2.67, 2.71,
    2.74, 2.77, 2.80, 2.84, 2.87, 2.91, 2.94, 2.98, 3.01, 3.05, 3.09, 3.12,
    3.16, 3.20, 3.24, 3.28, 3.32, 3.36, 3.40, 3.44, 3.48, 3.52, 3.57, 3.61,
    3.65, 3.70, 3.74, 3.79, 3.83, 3.88, 3.92, 3.97, 4.02, 4.07, 4.12, 4.17,
    4.22, 4.27, 4.32, 4.37, 4.42, 4.48, 4.53, 4.59, 4.64, 4.70, 4.75, 4.81,
    4.87, 4.93, 4.99, 5.05, 5.11, 5.17, 5.23, 5.30, 5.36, 5.42, 5.49, 5.56,
    5.62, 5.69, 5.76, 5.83, 5.90, 5.97, 6.04, 6.12, 6.19, 6.26, 6.34, 6.42,
    6.49, 6.57, 6.65, 6.73, 6.81, 6.90, 6.98, 7.06, 7.15, 7.23, 7.32, 7.41,
    7.50, 7.59, 7.68, 7.77, 7.87, 7.96, 8.06, 8.16, 8.25, 8.35, 8.45, 8.56,
    8.66, 8.76, 8.87, 8.98, 9.09, 9.20, 9.31, 9.42, 9.53, 9.65, 9.76, 9.88,
)  # fmt: skip

_TABLES: dict[str, tuple[float, ...]] = {
    "E6": E6,
    "E12": E12,
    "E24": E24,
    "E48": E48,
    "E96": E96,
    "E192": E192,
}

# Exact powers of ten: Python's float parser rounds "1e-9" correctly, unlike 10.0 ** -9 built by
# repeated multiplication on some platforms. 10^309 and beyond overflow to inf.
_POWER_LIMIT = 330
_POWERS_OF_TEN = np.array([float(f"1e{exponent}") for exponent in range(_POWER_LIMIT + 1)])

# Values outside this range cannot be scaled by exact powers of ten without overflow.
_SMALLEST_VALUE = 1e-290
_LARGEST_VALUE = 1e290


@dataclass(frozen=True)
class _Series:
    """One series prepared for vectorized look-up (internal)."""

    name: str
    count: int
    digits: int
    mantissas: NDArray[np.int64]
    """Integer mantissas, e.g. 10 ... 91 for E24 or 100 ... 988 for E192."""
    ladder: NDArray[np.float64]
    """Mantissas of the decade below, the decade itself and the decade above, then the first of
    the decade after, in units of 10^(exponent - digits + 1): 3 count + 1 ascending entries."""


def canonical_series_name(name: str) -> str:
    """Return the canonical spelling of a series name ("e24" -> "E24").

    Parameters
    ----------
    name
        Name of a series, in any letter case, surrounding spaces ignored.

    Returns
    -------
    str
        One of ``SERIES_NAMES``.

    Raises
    ------
    SizingError
        If the name is not one of ``SERIES_NAMES``; the message lists the valid names.
    """
    if isinstance(name, str):
        canonical = name.strip().upper()
        if canonical in _TABLES:
            return canonical
    valid = ", ".join(SERIES_NAMES)
    raise SizingError(f"unknown preferred-value series {name!r}; valid series are {valid}")


def series_values(name: str) -> tuple[float, ...]:
    """Return the decade mantissas of a series as IEC 60063 tabulates them.

    Parameters
    ----------
    name
        Name of a series (``"E6"`` ... ``"E192"``, any letter case).

    Returns
    -------
    tuple of float
        The mantissas in [1, 10), ascending; e.g. ``(1.0, 1.5, 2.2, 3.3, 4.7, 6.8)`` for E6.

    Raises
    ------
    SizingError
        If the name is not one of ``SERIES_NAMES``.

    References
    ----------
    .. [1] IEC 60063:2015, Tables 1 and 2.
    """
    return _TABLES[canonical_series_name(name)]


@functools.cache
def _prepared(canonical_name: str) -> _Series:
    table = _TABLES[canonical_name]
    digits = 2 if len(table) <= 24 else 3
    scale = 10 ** (digits - 1)
    mantissas = np.array([round(value * scale) for value in table], dtype=np.int64)
    ladder = np.concatenate(
        [mantissas / 10.0, mantissas.astype(np.float64), mantissas * 10.0, [mantissas[0] * 100.0]]
    )
    return _Series(
        name=canonical_name,
        count=len(table),
        digits=digits,
        mantissas=mantissas,
        ladder=ladder,
    )


def _series(name: str) -> _Series:
    return _prepared(canonical_series_name(name))


def _checked_values(value: ArrayLike, argument: str) -> NDArray[np.float64]:
    array = np.asarray(value, dtype=np.float64)
    inside = (array >= _SMALLEST_VALUE) & (array <= _LARGEST_VALUE)
    if not np.all(inside):
        bad = array[~inside].flat[0]
        raise SizingError(
            f"{argument} must be a positive finite value between {_SMALLEST_VALUE:g} and "
            f"{_LARGEST_VALUE:g} to be rounded to a preferred value; got {bad!r}"
        )
    return array


def _times_power_of_ten(
    mantissa: NDArray[np.float64], exponent: NDArray[np.int64]
) -> NDArray[np.float64]:
    """mantissa * 10^exponent with one correctly rounded operation (|exponent| <= 330)."""
    magnitude = _POWERS_OF_TEN[np.minimum(np.abs(exponent), _POWER_LIMIT)]
    with np.errstate(over="ignore"):
        return np.where(exponent >= 0, mantissa * magnitude, mantissa / magnitude)


def _member(series: _Series, index: NDArray[np.int64]) -> NDArray[np.float64]:
    """Value of the series member with global index ``decade * count + position``."""
    decade, position = np.divmod(index, series.count)
    mantissa = series.mantissas[position].astype(np.float64)
    return _times_power_of_ten(mantissa, decade - (series.digits - 1))


def _floor_index(series: _Series, value: NDArray[np.float64]) -> NDArray[np.int64]:
    """Global index of the largest member <= value * (1 + RELATIVE_TOLERANCE)."""
    decade = np.floor(np.log10(value)).astype(np.int64)
    scaled = _times_power_of_ten(value, (series.digits - 1) - decade)
    # log10 may land one decade off next to a power of ten; the ladder spans the neighbouring
    # decades so that the search still finds the right member.
    rung = np.searchsorted(series.ladder, scaled * (1.0 + RELATIVE_TOLERANCE), side="right") - 1
    return (decade - 1) * series.count + rung


def _ceiling_index(series: _Series, value: NDArray[np.float64]) -> NDArray[np.int64]:
    """Global index of the smallest member >= value * (1 - RELATIVE_TOLERANCE)."""
    index = _floor_index(series, value)
    below = _member(series, index) < value * (1.0 - RELATIVE_TOLERANCE)
    return index + below


def _result(array: NDArray) -> NDArray | np.floating:
    # A 0-d input gives a numpy scalar, as numpy's own ufuncs do.
    return array[()]


def is_preferred(value: ArrayLike, series: str) -> NDArray[np.bool_] | np.bool_:
    """Tell whether values are members of a series (within ``RELATIVE_TOLERANCE``).

    Parameters
    ----------
    value
        Positive values [any unit], any shape.
    series
        Name of a series (``"E6"`` ... ``"E192"``).

    Returns
    -------
    numpy.ndarray of bool or numpy.bool_
        True where the value is a preferred value of the series in some decade.
    """
    prepared = _series(series)
    array = _checked_values(value, "value")
    member = _member(prepared, _floor_index(prepared, array))
    return _result(np.abs(member - array) <= RELATIVE_TOLERANCE * array)


def round_down(value: ArrayLike, series: str) -> NDArray[np.float64] | np.float64:
    """Round values down to the largest preferred value that does not exceed them.

    Parameters
    ----------
    value
        Positive values [any unit], any shape, between 1e-290 and 1e290.
    series
        Name of a series (``"E6"`` ... ``"E192"``, any letter case).

    Returns
    -------
    numpy.ndarray or numpy.float64
        Largest member ``p`` of the series with ``p <= value``, same shape as ``value``. A value
        within ``RELATIVE_TOLERANCE`` of a member returns that member.

    Raises
    ------
    SizingError
        If the series is unknown or a value is not positive and finite.

    References
    ----------
    .. [1] IEC 60063:2015, Tables 1 and 2.

    Examples
    --------
    >>> float(round_down(4.99e3, "E24"))
    4700.0
    """
    prepared = _series(series)
    array = _checked_values(value, "value")
    return _result(_member(prepared, _floor_index(prepared, array)))


def round_up(value: ArrayLike, series: str) -> NDArray[np.float64] | np.float64:
    """Round values up to the smallest preferred value that is not below them.

    Parameters
    ----------
    value
        Positive values [any unit], any shape, between 1e-290 and 1e290.
    series
        Name of a series (``"E6"`` ... ``"E192"``, any letter case).

    Returns
    -------
    numpy.ndarray or numpy.float64
        Smallest member ``p`` of the series with ``p >= value``, same shape as ``value``.

    Raises
    ------
    SizingError
        If the series is unknown or a value is not positive and finite.

    References
    ----------
    .. [1] IEC 60063:2015, Tables 1 and 2.

    Examples
    --------
    >>> float(round_up(3.2e-9, "E24"))
    3.3e-09
    """
    prepared = _series(series)
    array = _checked_values(value, "value")
    return _result(_member(prepared, _ceiling_index(prepared, array)))


def round_nearest(value: ArrayLike, series: str) -> NDArray[np.float64] | np.float64:
    """Round values to the nearest preferred value on a logarithmic scale.

    Parameters
    ----------
    value
        Positive values [any unit], any shape, between 1e-290 and 1e290.
    series
        Name of a series (``"E6"`` ... ``"E192"``, any letter case).

    Returns
    -------
    numpy.ndarray or numpy.float64
        The member ``p`` that minimises ``|log(value / p)|``; a value exactly at the geometric mean
        of two neighbours goes up.

    Notes
    -----
    The E series are (nearly) geometric, so the log-scale distance is the one that treats every
    step of a series alike. It differs from the nearest value on a linear scale only for values
    between the geometric and the arithmetic mean of two neighbours.

    References
    ----------
    .. [1] IEC 60063:2015, Tables 1 and 2.
    """
    prepared = _series(series)
    array = _checked_values(value, "value")
    index = _floor_index(prepared, array)
    below = _member(prepared, index)
    above = _member(prepared, index + 1)
    exact = np.abs(below - array) <= RELATIVE_TOLERANCE * array
    # Compare ratios, not products, so that values near 1e290 cannot overflow.
    closer_below = exact | (array / below < above / array)
    return _result(np.where(closer_below, below, above))


def step(value: ArrayLike, series: str, steps: ArrayLike) -> NDArray[np.float64] | np.float64:
    """Move a preferred value a number of positions up or down its series, across decades.

    Parameters
    ----------
    value
        Preferred values of the series [any unit], any shape.
    series
        Name of a series (``"E6"`` ... ``"E192"``, any letter case).
    steps
        Integer number of positions: positive goes up, negative down, zero returns the value.
        Broadcasts against ``value``.

    Returns
    -------
    numpy.ndarray or numpy.float64
        The preferred value ``steps`` positions away; ``step(4.7e3, "E24", 1)`` is 5.1e3 and
        ``step(1.0e3, "E24", -1)`` is 910.

    Raises
    ------
    SizingError
        If a value is not a member of the series (round it first), or ``steps`` is not integer.
    """
    prepared = _series(series)
    array = _checked_values(value, "value")
    steps_array = np.asarray(steps)
    if not np.issubdtype(steps_array.dtype, np.integer):
        if not np.all(np.isfinite(steps_array)) or np.any(steps_array != np.round(steps_array)):
            raise SizingError(f"steps must be a whole number of positions; got {steps!r}")
        steps_array = steps_array.astype(np.int64)
    index = _floor_index(prepared, array)
    member = _member(prepared, index)
    off_series = np.abs(member - array) > RELATIVE_TOLERANCE * array
    if np.any(off_series):
        bad = array[off_series].flat[0]
        raise SizingError(
            f"value {bad!r} is not a member of {prepared.name}; round it with round_down, "
            "round_up or round_nearest before stepping"
        )
    return _result(_member(prepared, index + steps_array))


def values_between(low: float, high: float, series: str) -> NDArray[np.float64]:
    """List every preferred value in a closed range, across decades.

    Parameters
    ----------
    low, high
        Ends of the range [any unit], ``0 < low <= high``. Ends that are themselves preferred
        values (within ``RELATIVE_TOLERANCE``) are included.
    series
        Name of a series (``"E6"`` ... ``"E192"``, any letter case).

    Returns
    -------
    numpy.ndarray
        One-dimensional, ascending; empty if no member lies in the range.

    Raises
    ------
    SizingError
        If the series is unknown, an end is not positive and finite, or ``low > high``.
    """
    prepared = _series(series)
    low_array = _checked_values(low, "low")
    high_array = _checked_values(high, "high")
    if low_array.ndim or high_array.ndim:
        raise SizingError("values_between takes scalar ends low and high")
    if low_array > high_array:
        raise SizingError(
            f"low ({float(low_array)!r}) must not exceed high ({float(high_array)!r})"
        )
    first = int(_ceiling_index(prepared, low_array))
    last = int(_floor_index(prepared, high_array))
    return _member(prepared, np.arange(first, last + 1, dtype=np.int64))


def _checked_tolerance(tolerance: float) -> float:
    value = float(tolerance)
    if not 0.0 <= value < 1.0:
        raise SizingError(
            f"tolerance must be a fraction in [0, 1), e.g. 0.05 for +/-5 %; got {tolerance!r}"
        )
    return value


def largest_with_tolerance(
    bound: ArrayLike, series: str, tolerance: float
) -> NDArray[np.float64] | np.float64:
    """Largest preferred value whose upper tolerance limit stays within a bound.

    Used for grading resistors: the static-sharing bound is an upper limit on R, and a part
    marked R may be as large as R (1 + tolerance).

    Parameters
    ----------
    bound
        Upper bound on the actual value [any unit, e.g. ohm], positive, any shape.
    series
        Name of a series (``"E6"`` ... ``"E192"``, any letter case).
    tolerance
        Relative tolerance of the part, a fraction in [0, 1) (0.05 for +/-5 %).

    Returns
    -------
    numpy.ndarray or numpy.float64
        Largest member ``R`` with ``R (1 + tolerance) <= bound`` (within ``RELATIVE_TOLERANCE``).

    Raises
    ------
    SizingError
        If the series is unknown, the tolerance is outside [0, 1), or a bound is not positive.
    """
    fraction = _checked_tolerance(tolerance)
    array = _checked_values(bound, "bound")
    return round_down(array / (1.0 + fraction), series)


def smallest_with_tolerance(
    bound: ArrayLike, series: str, tolerance: float
) -> NDArray[np.float64] | np.float64:
    """Smallest preferred value whose lower tolerance limit stays at or above a bound.

    Used for grading capacitors: the dynamic-sharing bound is a lower limit on C, and a part
    marked C may be as small as C (1 - tolerance).

    Parameters
    ----------
    bound
        Lower bound on the actual value [any unit, e.g. F], positive, any shape.
    series
        Name of a series (``"E6"`` ... ``"E192"``, any letter case).
    tolerance
        Relative tolerance of the part, a fraction in [0, 1) (0.1 for +/-10 %).

    Returns
    -------
    numpy.ndarray or numpy.float64
        Smallest member ``C`` with ``C (1 - tolerance) >= bound`` (within ``RELATIVE_TOLERANCE``).

    Raises
    ------
    SizingError
        If the series is unknown, the tolerance is outside [0, 1), or a bound is not positive.
    """
    fraction = _checked_tolerance(tolerance)
    array = _checked_values(bound, "bound")
    return round_up(array / (1.0 - fraction), series)
