"""Datasheet spreads as maps of latent values: the two-piece normal and lognormal, production-screened
truncation, and the grading components' tolerance draws (docs/methods/monte-carlo.md). Each value's
image depends on that value alone, so the maps are the same whatever the chunking of a run.

One latent variable has two faces: a uniform score u on (0, 1) and the standard normal
z = Phi^-1(u). :mod:`stringcheck.montecarlo.sampling` draws uniform scores (``uniform=True``: the quantile
function of the spread applied to u, tabulated, no normal draw and no normal CDF in between); the
rare-event estimator and the copulas work with z (``uniform=False``).
"""

from __future__ import annotations

import functools

import numpy as np
from scipy import special

from stringcheck.design.model import Spread


def spread_quantile(spread: Spread, latent: np.ndarray, *, lognormal: bool, sigma_at_limit: float,
                    screened: bool, uniform: bool = False) -> np.ndarray:
    """Map latent values onto the spread's distribution [unit of the spread].

    Parameters
    ----------
    spread
        The datasheet spread (typ = median; limits at ``sigma_at_limit`` standard deviations).
    latent
        Standard-normal values z, or with ``uniform`` uniform scores u in [0, 1) (a score u stands
        for the midpoint u + 2^-54 of its cell, so that neither 0 nor 1 is ever reached); any shape.
    lognormal
        True for a lognormal parameter (spread in log space), False for a normal one.
    sigma_at_limit
        Number of standard deviations between typ and a limit [1], > 0.
    screened
        Truncate at the limits (production screening).
    uniform
        ``latent`` holds uniform scores rather than standard normals.

    Notes
    -----
    Truncation maps z to Phi^-1(Phi(a) + Phi(z) (Phi(b) - Phi(a))), the inverse-CDF construction of a
    truncated normal (e.g. C. P. Robert, "Simulation of truncated normal variables", Statistics and
    Computing 5, 1995), with a = -sigma_at_limit where a lower limit exists and b = +sigma_at_limit where
    an upper one does (minus or plus infinity otherwise); a uniform score u takes the place of
    Phi(z). The z map is evaluated from a piecewise polynomial fitted to it, within a few units of
    the last place (``_truncate``); the u map from a piecewise quadratic within 1e-8 standard
    deviations of the exact map, which is evaluated itself in the tails (``_from_uniform``).
    """
    if spread.fixed:
        return np.full(np.shape(latent), spread.typ)
    k = sigma_at_limit
    if lognormal:
        upper = np.log(spread.high / spread.typ) / k if spread.high is not None else None
        lower = np.log(spread.typ / spread.low) / k if spread.low is not None else None
    else:
        upper = (spread.high - spread.typ) / k if spread.high is not None else None
        lower = (spread.typ - spread.low) / k if spread.low is not None else None
    upper = lower if upper is None else upper
    lower = upper if lower is None else lower
    low = -k if screened and spread.low is not None else -np.inf
    high = k if screened and spread.high is not None else np.inf
    if uniform:
        return _from_uniform(latent, low, high, float(upper), float(lower), spread.typ, lognormal)
    z = np.asarray(latent, dtype=float)
    if screened:
        if upper == lower:
            # typ exp(sigma y) or typ + sigma y of the truncated y is one smooth map of z:
            # tabulated as a whole.
            return _truncate(z, low, high, scale=upper, median=spread.typ, lognormal=lognormal)
        z = _truncate(z, low, high)
    return _two_piece(z, upper, lower, spread.typ, lognormal)


def _two_piece(y: np.ndarray, upper: float, lower: float, median: float,
               lognormal: bool) -> np.ndarray:
    """median + s y, or median exp(s y) if ``lognormal``, with s = ``upper`` for y >= 0 and
    ``lower`` below (the two-piece spread of a latent y) [unit of the spread]."""
    scaled = upper * y if upper == lower else np.where(y >= 0.0, upper * y, lower * y)
    if not lognormal:
        scaled += median
        return scaled
    with np.errstate(over="ignore"):
        np.exp(scaled, out=scaled)
    scaled *= median
    return scaled


def normal_scores(u: np.ndarray) -> np.ndarray:
    """The standard normal z = Phi^-1(u + 2^-54) behind uniform scores u in [0, 1): the untruncated
    quantile map of :func:`_from_uniform`, within 1e-8 of the exact value (exact in the tails,
    each side from its own tail probability); about ten times faster than the inverse CDF."""
    return _from_uniform(u, -np.inf, np.inf, 1.0, 1.0, 0.0, False)


def _cell_probabilities(u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(u + 2^-54, (1 - u) - 2^-54): the midpoint of the score's cell and its complement, both
    exact for a score k 2^-53 on its own side of 1/2."""
    half_cell = 2.0**-54
    return u + half_cell, (1.0 - u) - half_cell


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
    return _truncated_quantile(special.ndtr(z), special.ndtr(-z), z <= 0.0, low, high)


def _truncated_quantile(below: np.ndarray, above: np.ndarray, lower_side: np.ndarray, low: float,
                        high: float) -> np.ndarray:
    """The standard normal truncated to [low, high] at probability ``below`` (where
    ``lower_side``) or at upper-tail probability ``above`` (elsewhere): Phi(y) = Phi(a) + w below,
    Phi(-y) = Phi(-b) + w above, w = Phi(b) - Phi(a) (the inverse-CDF construction, see
    :func:`spread_quantile`)."""
    p_low, q_high = special.ndtr(low), special.ndtr(-high)
    width = special.ndtr(high) - p_low
    with np.errstate(invalid="ignore"):
        y_below = special.ndtri(p_low + width * below)
        y_above = -special.ndtri(q_high + width * above)
    # The clip only removes the rounding of the inverse at the limits themselves.
    return np.clip(np.where(lower_side, y_below, y_above), low, high)


def _exact_from_uniform(u: np.ndarray, low: float, high: float, upper: float, lower: float,
                        median: float, lognormal: bool) -> np.ndarray:
    """The exact map that :func:`_from_uniform` tabulates: truncated quantile y of the score,
    then median + s y or median exp(s y), s = ``upper`` for y >= 0 and ``lower`` below."""
    u = np.asarray(u, dtype=float)
    below, above = _cell_probabilities(u)
    return _two_piece(_truncated_quantile(below, above, u < 0.5, low, high), upper, lower, median,
                      lognormal)


# The table of the uniform-score map: _SCORE_INTERVALS equal intervals of [0, 1), a quadratic
# through the ends and the middle of each. An interval whose quadratic is off by more than
# _SCORE_TOLERANCE standard deviations at its quarter points (the steep tails, a two-piece kink)
# is evaluated exactly instead: about 1 % of the scores for limits at 3 standard deviations.
_SCORE_INTERVALS = 2**14
_SCORE_TOLERANCE = 1e-8


@functools.lru_cache(maxsize=32)
def _score_table(low: float, high: float, upper: float, lower: float, median: float,
                 lognormal: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(c0, c1, c2, exact) of the map of :func:`_from_uniform`: value = c0 + c1 t + c2 t^2 at the
    coordinate t in [0, 1) within an interval; ``exact`` marks the intervals evaluated exactly.

    Notes
    -----
    Quadratic interpolation at the ends and the midpoint of each interval (Lagrange form turned
    into powers of t); the error of the interpolant of a smooth map falls as step^3 (e.g.
    L. N. Trefethen, *Approximation Theory and Approximation Practice*, SIAM, 2013, chapter 8).
    """
    count = _SCORE_INTERVALS
    step = 1.0 / count
    left = step * np.arange(count)
    arguments = dict(low=low, high=high, upper=upper, lower=lower, median=median,
                     lognormal=lognormal)
    ends = _exact_from_uniform(step * np.arange(count + 1), **arguments)
    middle = _exact_from_uniform(left + 0.5 * step, **arguments)
    start, end = ends[:-1], ends[1:]
    c0 = start
    c1 = 4.0 * middle - 3.0 * start - end
    c2 = 2.0 * (start + end) - 4.0 * middle
    quarters = np.array([0.25, 0.75])
    check = _exact_from_uniform(left[:, None] + step * quarters, **arguments)
    with np.errstate(invalid="ignore"):
        error = np.abs(c0[:, None] + (c1[:, None] + c2[:, None] * quarters) * quarters - check)
        # One standard deviation of the value near the check point: s, or s times the value.
        unit = max(upper, lower) * (np.abs(check) if lognormal else 1.0)
        exact = ~np.all(error <= _SCORE_TOLERANCE * unit, axis=1)
    exact |= ~(np.isfinite(c0) & np.isfinite(c1) & np.isfinite(c2))
    return tuple(np.ascontiguousarray(a) for a in (c0, c1, c2)) + (exact,)


@functools.lru_cache(maxsize=32)
def _exact_ends(exact: bytes) -> tuple[float, float] | None:
    """(a, b) when the intervals evaluated exactly are just the scores u < a and u >= b (the
    tails; compared directly, cheaper than looking each score's interval up); None when some lie
    between (a two-piece kink)."""
    flags = np.frombuffer(exact, dtype=bool)
    count = flags.size
    leading = int(np.argmin(flags)) if not flags.all() else count
    trailing = int(np.argmin(flags[::-1])) if not flags.all() else 0
    if flags[leading:count - trailing].any():
        return None
    return leading / count, (count - trailing) / count


def _from_uniform(u: np.ndarray, low: float, high: float, upper: float, lower: float,
                  median: float, lognormal: bool, out: np.ndarray | None = None) -> np.ndarray:
    """The spread's quantile function at uniform scores u in [0, 1) [unit of the spread]: the
    exact map of :func:`_exact_from_uniform`, tabulated (:func:`_score_table`) and evaluated
    exactly in the intervals the table leaves out, element by element (a score's image never
    depends on the array it arrives in); into ``out`` (the shape of ``u``) if given."""
    c0, c1, c2, exact = _score_table(float(low), float(high), float(upper), float(lower),
                                     float(median), bool(lognormal))
    ends = _exact_ends(exact.tobytes())
    flat = np.ascontiguousarray(u, dtype=float).reshape(-1)
    if out is not None and (out.shape != np.shape(u) or not out.flags.c_contiguous
                            or np.shares_memory(out, u)):
        raise ValueError("out must be a C-contiguous array of the shape of u, apart from u")
    result = np.empty(np.shape(u)) if out is None else out
    out = result.reshape(-1)  # a view: ``result`` is contiguous
    size = min(_TABLE_BLOCK, flat.size)
    position, term = np.empty(size), np.empty(size)
    index, tail = np.empty(size, dtype=np.intp), np.empty(size, dtype=bool)
    rows = []
    for start in range(0, flat.size, _TABLE_BLOCK):
        block = flat[start:start + _TABLE_BLOCK]
        n = block.size
        t, i, value, flag = position[:n], index[:n], out[start:start + n], tail[:n]
        np.multiply(block, _SCORE_INTERVALS, out=t)
        np.copyto(i, t, casting="unsafe")  # truncation toward zero: the interval
        t -= i
        if ends is None:
            np.take(exact, i, out=flag, mode="clip")
        else:
            np.less(block, ends[0], out=flag)
            flag |= block >= ends[1]
        rows.append(start + np.flatnonzero(flag))
        np.take(c2, i, out=value, mode="clip")
        value *= t
        value += np.take(c1, i, out=term[:n], mode="clip")
        value *= t
        value += np.take(c0, i, out=term[:n], mode="clip")
    rows = np.concatenate(rows) if rows else np.empty(0, dtype=np.intp)
    if rows.size:  # all at once: the exact map costs mostly calls on a few hundred values
        out[rows] = _exact_from_uniform(flat[rows], low, high, upper, lower, median, lognormal)
    return result


# The table of the truncation map: intervals of _TABLE_STEP on [-_TABLE_RANGE, _TABLE_RANGE], a
# polynomial of _TABLE_DEGREE on each. Degree 4 on steps of 1/256 reproduces the exact map within
# 6e-15 for limits at 1 to 6 standard deviations (tests/montecarlo/test_sampling.py).
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
                   sigma_at_limit: float, uniform: bool = False,
                   out: np.ndarray | None = None, distribution: str = "normal") -> np.ndarray:
    """Component values within a tolerance: normal, tolerance at ``sigma_at_limit``, truncated there
    [unit of ``nominal``] (common practice: a maker rejects parts outside the tolerance); or with
    ``distribution="uniform"`` anywhere in the band, nominal (1 + tolerance (2 u - 1)) for the
    score u (u = Phi(z) of a standard normal), the shape of parts picked from a wider spread.

    Parameters
    ----------
    nominal
        Nominal value [ohm] or [F], > 0.
    tolerance
        Relative tolerance [1], in [0, 1).
    latent
        Standard-normal values, or with ``uniform`` uniform scores in [0, 1).
    sigma_at_limit
        Standard deviations at the tolerance limit [1].
    uniform
        ``latent`` holds uniform scores (see :func:`spread_quantile`).
    out
        With ``uniform``: a contiguous array of the shape of ``latent`` to write the values into.
    """
    if tolerance == 0:
        if out is None:
            return np.full(np.shape(latent), nominal)
        out[...] = nominal
        return out
    if distribution == "uniform":
        # The score's cell midpoint u + 2^-54 (as the other maps), or Phi(z).
        score = _cell_probabilities(np.asarray(latent, dtype=float))[0] if uniform else \
            special.ndtr(np.asarray(latent, dtype=float))
        value = nominal * (1.0 + tolerance * (2.0 * score - 1.0))
        if out is None:
            return value
        out[...] = value
        return out
    scale = nominal * tolerance / sigma_at_limit
    if uniform:
        return _from_uniform(latent, -sigma_at_limit, sigma_at_limit, scale, scale, nominal, False,
                             out=out)
    # nominal + (nominal tolerance / sigma_at_limit) y of the truncated y, tabulated as one map.
    return _truncate(np.asarray(latent, dtype=float), -sigma_at_limit, sigma_at_limit,
                     scale=scale, median=nominal)
