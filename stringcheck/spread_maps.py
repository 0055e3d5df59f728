"""Datasheet spreads as maps of standard-normal latent values: the two-piece normal and lognormal,
production-screened truncation, and the grading components' tolerance draws (DESIGN.md section 4,
"Spreads"). Each value's image depends on that value alone, so the maps are the same whatever the
chunking of a run. :mod:`stringcheck.sampling` feeds them its seeded latent draws; the rare-event
estimator feeds them its own.
"""

from __future__ import annotations

import functools

import numpy as np
from scipy import special

from .design import Spread


def spread_quantile(spread: Spread, latent: np.ndarray, *, lognormal: bool, sigma_at_limit: float,
                    screened: bool) -> np.ndarray:
    """Map standard-normal ``latent`` values onto the spread's distribution [unit of the spread].

    Parameters
    ----------
    spread
        The datasheet spread (typ = median; limits at ``sigma_at_limit`` standard deviations).
    latent
        Standard-normal values, any shape.
    lognormal
        True for a lognormal parameter (spread in log space), False for a normal one.
    sigma_at_limit
        Number of standard deviations between typ and a limit [1], > 0.
    screened
        Truncate at the limits (production screening).

    Notes
    -----
    Truncation maps z to Phi^-1(Phi(a) + Phi(z) (Phi(b) - Phi(a))), the inverse-CDF construction of a
    truncated normal (e.g. C. P. Robert, "Simulation of truncated normal variables", Statistics and
    Computing 5, 1995), with a = -sigma_at_limit where a lower limit exists and b = +sigma_at_limit where
    an upper one does (minus or plus infinity otherwise). The map is evaluated from a piecewise
    polynomial fitted to it, within a few units of the last place (``_truncate``).
    """
    if spread.fixed:
        return np.full(np.shape(latent), spread.typ)
    z = np.asarray(latent, dtype=float)
    k = sigma_at_limit
    if lognormal:
        upper = np.log(spread.high / spread.typ) / k if spread.high is not None else None
        lower = np.log(spread.typ / spread.low) / k if spread.low is not None else None
    else:
        upper = (spread.high - spread.typ) / k if spread.high is not None else None
        lower = (spread.typ - spread.low) / k if spread.low is not None else None
    upper = lower if upper is None else upper
    lower = upper if lower is None else lower
    if screened:
        low = -k if spread.low is not None else -np.inf
        high = k if spread.high is not None else np.inf
        if upper == lower:
            # typ exp(sigma y) or typ + sigma y of the truncated y is one smooth map of z:
            # tabulated as a whole.
            return _truncate(z, low, high, scale=upper, median=spread.typ, lognormal=lognormal)
        z = _truncate(z, low, high)
    scaled = upper * z if upper == lower else np.where(z >= 0, upper * z, lower * z)
    if lognormal:
        np.exp(scaled, out=scaled)
        scaled *= spread.typ
    else:
        scaled += spread.typ
    return scaled


def _truncate(z: np.ndarray, low: float, high: float, *, scale: float | None = None,
              median: float = 0.0, lognormal: bool = False) -> np.ndarray:
    """Map a standard normal onto the standard normal truncated to [low, high], rank-preserving;
    with ``scale`` s, onto median + s y of the truncated y, or median exp(s y) if ``lognormal``
    (a screened draw).

    Evaluated from :func:`_truncation_table` on [-8, 8] (a piecewise polynomial of the exact map,
    within a few units of the last place of it) and by :func:`_truncate_exact` outside, element by
    element, so that a value's image never depends on the array it arrives in.
    """
    if np.isinf(low) and np.isinf(high):
        return z
    table = _truncation_table(float(low), float(high), scale, median, lognormal)
    # The values at the limits themselves bound the result (the table rounds too).
    floor = -np.inf if np.isinf(low) else float(_scaled(np.float64(low), scale, median, lognormal))
    ceiling = np.inf if np.isinf(high) else float(_scaled(np.float64(high), scale, median,
                                                          lognormal))
    flat = np.ascontiguousarray(z, dtype=float).reshape(-1)
    out = np.empty_like(flat)
    per_step = 1.0 / _TABLE_STEP
    count = table[0].size
    outside = []
    # Blocks of a few hundred kB: the temporaries stay in cache.
    with np.errstate(invalid="ignore"):  # values outside the table are replaced below
        for start in range(0, flat.size, _TABLE_BLOCK):
            block = flat[start:start + _TABLE_BLOCK]
            position = block + _TABLE_RANGE
            position *= per_step
            if not (position.min() >= 0.0 and position.max() < count):  # also NaN
                outside.append(start + np.flatnonzero(~(np.abs(block) < _TABLE_RANGE)))
            index = position.astype(np.intp)
            position -= index  # the coordinate within the interval, in [0, 1)
            value = np.take(table[-1], index, mode="clip")
            term = np.empty_like(value)
            for coefficient in table[-2::-1]:
                value *= position
                value += np.take(coefficient, index, out=term, mode="clip")
            target = out[start:start + block.size]
            if floor > -np.inf:
                np.maximum(value, floor, out=value)
            np.minimum(value, ceiling, out=target)
    if outside:
        rows = np.concatenate(outside)
        out[rows] = _exact_map(flat[rows], low, high, scale, median, lognormal)
    return out.reshape(np.shape(z))


def _exact_map(z: np.ndarray, low: float, high: float, scale: float | None, median: float,
               lognormal: bool) -> np.ndarray:
    """The exact map that :func:`_truncate` tabulates."""
    return _scaled(_truncate_exact(z, low, high), scale, median, lognormal)


def _scaled(truncated: np.ndarray, scale: float | None, median: float,
            lognormal: bool) -> np.ndarray:
    """median + scale y, or median exp(scale y) if ``lognormal``, of the truncated y; y itself
    without ``scale``."""
    if scale is None:
        return truncated
    if not lognormal:
        return median + scale * truncated
    with np.errstate(over="ignore"):
        return median * np.exp(scale * truncated)


def _truncate_exact(z: np.ndarray, low: float, high: float) -> np.ndarray:
    """The truncation map from the normal CDF, each side in its accurate form.

    Phi(y) = Phi(a) + w Phi(z) and, equivalently, Phi(-y) = Phi(-b) + w Phi(-z), with
    w = Phi(b) - Phi(a): the first for z <= 0 and the second for z > 0, so that the
    probability handed to the inverse CDF is never a small difference from 1.
    """
    p_low, q_high = special.ndtr(low), special.ndtr(-high)
    width = special.ndtr(high) - p_low
    with np.errstate(invalid="ignore"):
        below = special.ndtri(p_low + width * special.ndtr(z))
        above = -special.ndtri(q_high + width * special.ndtr(-z))
    # The clip only removes the rounding of the inverse at the limits themselves.
    return np.clip(np.where(z <= 0.0, below, above), low, high)


# The table of the truncation map: intervals of _TABLE_STEP on [-_TABLE_RANGE, _TABLE_RANGE], a
# polynomial of _TABLE_DEGREE on each. Degree 4 on steps of 1/256 reproduces the exact map within
# 6e-15 for limits at 1 to 6 standard deviations (tests/test_sampling.py).
_TABLE_RANGE = 8.0
_TABLE_STEP = 2.0**-8
_TABLE_DEGREE = 4
_TABLE_BLOCK = 32768


@functools.lru_cache(maxsize=32)
def _truncation_table(low: float, high: float, scale: float | None, median: float,
                      lognormal: bool) -> tuple[np.ndarray, ...]:
    """Coefficients c_j of the map of :func:`_truncate` on each interval, in powers of the
    coordinate t in [0, 1) within it: y = sum_j c_j[i] t^j; one array per power.

    Notes
    -----
    Interpolation of :func:`_truncate_exact` at the Chebyshev points of each interval (the map
    is smooth, so the interpolant converges fast: the error falls as step^(degree + 1)); the
    power-basis coefficients come from one (degree + 1)-square Vandermonde solve for all
    intervals at once.

    References
    ----------
    .. [1] L. N. Trefethen, *Approximation Theory and Approximation Practice*, SIAM, 2013,
       chapters 2 to 8 (Chebyshev points; convergence of interpolants of smooth functions).
    """
    count = int(round(2.0 * _TABLE_RANGE / _TABLE_STEP))
    left = -_TABLE_RANGE + _TABLE_STEP * np.arange(count)
    order = _TABLE_DEGREE + 1
    nodes = 0.5 * (1.0 - np.cos(np.pi * (np.arange(order) + 0.5) / order))
    values = _exact_map(left[:, None] + _TABLE_STEP * nodes, low, high, scale, median, lognormal)
    coefficients = np.linalg.solve(np.vander(nodes, order, increasing=True), values.T)
    return tuple(np.ascontiguousarray(row) for row in coefficients)


def tolerance_draw(nominal: float, tolerance: float, latent: np.ndarray, *,
                   sigma_at_limit: float) -> np.ndarray:
    """Component values within a tolerance: normal, tolerance at ``sigma_at_limit``, truncated there.

    Parameters
    ----------
    nominal
        Nominal value [ohm] or [F], > 0.
    tolerance
        Relative tolerance [1], in [0, 1).
    latent
        Standard-normal values.
    sigma_at_limit
        Standard deviations at the tolerance limit [1].
    """
    if tolerance == 0:
        return np.full(np.shape(latent), nominal)
    # nominal + (nominal tolerance / sigma_at_limit) y of the truncated y, tabulated as one map.
    return _truncate(np.asarray(latent, dtype=float), -sigma_at_limit, sigma_at_limit,
                     scale=nominal * tolerance / sigma_at_limit, median=nominal)
