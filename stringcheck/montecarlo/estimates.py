"""Statistics of Monte Carlo runs: failure probability with exact confidence, trials needed, histograms.

A trial is one built string; it fails or it does not. The number of failures in ``n`` independent
trials is binomial, so the probability of failure is reported with the exact (Clopper-Pearson)
interval, which never covers the true value less often than the stated confidence. When a run sees
no failure at all, the upper end of that interval is what the run can vouch for, and
``trials_for_upper_bound`` tells how many failure-free trials a target would need.

Per-position statistics (mean, standard deviation, extremes, exceedances of a limit) are accumulated
by the check itself (studies/check.py), block by block, so that memory stays flat in the number of
trials and the result is the same bit for bit however the trials were split into chunks or worker
processes. Mean and variance of a block come from :func:`block_moments` (sums of the block shifted by
its first row) and the blocks are combined by :func:`merge_moments` (pairwise), so that a
position without scatter has a standard deviation of exactly 0 and a tiny spread about a large mean
keeps its digits.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import stats as _scipy_stats

from stringcheck.errors import StringcheckError

__all__ = [
    "FailureEstimate",
    "Moments",
    "block_moments",
    "merge_moment_rows",
    "clopper_pearson",
    "failure_estimate",
    "histogram_counts",
    "merge_moments",
    "trials_for_relative_error",
    "trials_for_upper_bound",
    "WANTED_RELATIVE_ERROR",
]

# Relative standard error of a plain P(fail) estimate the report asks for (10 %): with fewer trials
# it says how many more would give it (``FailureEstimate.trials_for_wanted_error``).
WANTED_RELATIVE_ERROR = 0.1


def _plain(array: NDArray) -> NDArray | float | int:
    """A 0-d array as a Python int/float (JSON-friendly), any other array unchanged."""
    return array.item() if array.ndim == 0 else array


def _checked_confidence(confidence: float) -> float:
    value = float(confidence)
    if not 0.0 < value < 1.0:
        raise StringcheckError(
            f"confidence must be a fraction strictly between 0 and 1, e.g. 0.95; got {confidence!r}"
        )
    return value


def _checked_counts(
    failures: ArrayLike, trials: ArrayLike
) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    failures_array = np.asarray(failures)
    trials_array = np.asarray(trials)
    for name, array in (("failures", failures_array), ("trials", trials_array)):
        if array.dtype == np.bool_ or not (
            np.issubdtype(array.dtype, np.integer)
            or (np.issubdtype(array.dtype, np.floating) and np.all(array == np.round(array)))
        ):
            raise StringcheckError(f"{name} must be whole counts; got {array!r}")
    failures_array = failures_array.astype(np.int64)
    trials_array = trials_array.astype(np.int64)
    if np.any(trials_array < 1):
        raise StringcheckError("trials must be at least 1")
    if np.any(failures_array < 0) or np.any(failures_array > trials_array):
        raise StringcheckError("failures must lie between 0 and the number of trials")
    return np.broadcast_arrays(failures_array, trials_array)


def clopper_pearson(
    failures: ArrayLike, trials: ArrayLike, *, confidence: float = 0.95
) -> tuple[NDArray[np.float64] | float, NDArray[np.float64] | float]:
    """Exact two-sided confidence interval for a binomial probability.

    Parameters
    ----------
    failures
        Number of failed trials ``k``, whole numbers ``0 <= k <= n``; any shape.
    trials
        Number of trials ``n >= 1``; broadcasts against ``failures``.
    confidence
        Two-sided confidence level, strictly between 0 and 1 (default 0.95).

    Returns
    -------
    low, high : numpy.ndarray or float
        Ends of the interval for the probability of failure [1], broadcast shape of the inputs;
        Python floats for scalar inputs. ``low`` is 0 when ``k = 0`` and ``high`` is 1 when
        ``k = n``.

    Raises
    ------
    StringcheckError
        If the counts are not whole, ``n < 1``, ``k`` is outside ``[0, n]``, or the confidence is
        outside (0, 1).

    Notes
    -----
    With ``alpha = 1 - confidence`` and ``B(q; a, b)`` the ``q``-quantile of the beta distribution:

    .. math::

        p_{low} = B(\\alpha / 2;\\ k,\\ n - k + 1), \\qquad
        p_{high} = B(1 - \\alpha / 2;\\ k + 1,\\ n - k).

    Each end is the probability at which observing ``k`` (or more, or fewer) failures has
    probability ``alpha / 2``, so the interval covers the true probability at least as often as
    stated, for every ``p`` and ``n``. For ``k = 0`` the upper end has the closed form
    ``1 - (alpha / 2)^(1 / n)``.

    References
    ----------
    .. [1] C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits illustrated
       in the case of the binomial", Biometrika 26 (4), 1934, pp. 404-413.
    """
    level = _checked_confidence(confidence)
    k, n = _checked_counts(failures, trials)
    tail = (1.0 - level) / 2.0
    # Beta parameters must be positive; the ends where they are not are fixed at 0 and 1.
    low = np.where(
        k == 0, 0.0, _scipy_stats.beta.ppf(tail, np.maximum(k, 1), n - k + 1)
    )
    high = np.where(
        k == n, 1.0, _scipy_stats.beta.ppf(1.0 - tail, k + 1, np.maximum(n - k, 1))
    )
    return _plain(np.asarray(low, dtype=np.float64)), _plain(np.asarray(high, dtype=np.float64))


@dataclass(frozen=True)
class FailureEstimate:
    """Probability that a built string fails, with its exact confidence interval.

    Attributes
    ----------
    failures
        Number of failed trials.
    trials
        Number of trials.
    p_fail
        Point estimate ``failures / trials`` [1].
    ci_low, ci_high
        Two-sided Clopper-Pearson interval at ``confidence`` [1].
    confidence
        Two-sided confidence level of the interval.

    Fields are Python numbers for scalar counts and numpy arrays for arrays of counts. The
    convergence figures (:attr:`relative_error`, :attr:`trials_for_wanted_error`) are properties
    computed from the counts, so the report and the JSON read the same numbers.
    """

    failures: int | NDArray[np.int64]
    trials: int | NDArray[np.int64]
    p_fail: float | NDArray[np.float64]
    ci_low: float | NDArray[np.float64]
    ci_high: float | NDArray[np.float64]
    confidence: float

    @property
    def upper_bound(self) -> float | NDArray[np.float64]:
        """Upper end of the interval: the failure probability the run can vouch for [1].

        It is also the one-sided upper bound at confidence ``(1 + confidence) / 2``.
        """
        return self.ci_high

    @property
    def relative_error(self) -> float | NDArray[np.float64]:
        """Relative standard error of ``p_fail``, ``sqrt((1 - p) / (n p))`` [1].

        ``inf`` where no failure was seen (the point estimate 0 has no relative precision: the
        upper bound is what the run knows), 0 where every trial failed.

        Notes
        -----
        The count of failures is binomial, so ``k / n`` has variance ``p (1 - p) / n``; divided
        by ``p`` its standard deviation is ``sqrt((1 - p) / (n p))`` (W. Feller, An Introduction
        to Probability Theory and Its Applications, vol. 1, 3rd ed., Wiley 1968, ch. VI, from
        memory).
        """
        p = np.asarray(self.p_fail, dtype=np.float64)
        n = np.asarray(self.trials, dtype=np.float64)
        with np.errstate(divide="ignore", invalid="ignore"):
            # Written as standard error / p, the way the report has always formed it.
            relative = np.where(p > 0.0, np.sqrt(p * (1.0 - p) / n) / np.where(p > 0.0, p, 1.0),
                                np.inf)
        return _plain(relative)

    @property
    def trials_for_wanted_error(self) -> int | None:
        """Trials a plain run would need for :data:`WANTED_RELATIVE_ERROR` at this ``p_fail``
        (:func:`trials_for_relative_error`) [1]; None where no failure was seen (scalar counts
        only)."""
        if np.ndim(self.p_fail) != 0:
            raise TypeError("trials_for_wanted_error is defined for scalar counts only")
        if self.p_fail <= 0.0:
            return None
        return trials_for_relative_error(self.p_fail, WANTED_RELATIVE_ERROR)

    @property
    def needs_more_trials(self) -> bool:
        """Whether the run knows P(fail) less precisely than :data:`WANTED_RELATIVE_ERROR`
        while having seen some but not only failures (scalar counts only)."""
        if self.failures == 0 or self.failures == self.trials:
            return False
        return self.relative_error > WANTED_RELATIVE_ERROR


def failure_estimate(
    failures: ArrayLike, trials: ArrayLike, *, confidence: float = 0.95
) -> FailureEstimate:
    """Estimate a failure probability from counts, with its Clopper-Pearson interval.

    Parameters
    ----------
    failures
        Number of failed trials ``k``, whole numbers ``0 <= k <= n``; any shape.
    trials
        Number of trials ``n >= 1``; broadcasts against ``failures``.
    confidence
        Two-sided confidence level, strictly between 0 and 1 (default 0.95).

    Returns
    -------
    FailureEstimate
        Counts, point estimate ``k / n`` and the interval from :func:`clopper_pearson`.

    Raises
    ------
    StringcheckError
        As :func:`clopper_pearson`.

    References
    ----------
    .. [1] C. J. Clopper and E. S. Pearson, Biometrika 26 (4), 1934, pp. 404-413.
    """
    low, high = clopper_pearson(failures, trials, confidence=confidence)
    k, n = _checked_counts(failures, trials)
    return FailureEstimate(
        failures=_plain(k),
        trials=_plain(n),
        p_fail=_plain(k / n),
        ci_low=low,
        ci_high=high,
        confidence=float(confidence),
    )


def _zero_failure_upper(trials: float, confidence: float) -> float:
    """Upper end of the two-sided interval after ``trials`` trials without failure."""
    return -math.expm1(math.log((1.0 - confidence) / 2.0) / trials)


def trials_for_upper_bound(target: float, *, confidence: float = 0.95) -> int:
    """Failure-free trials needed before the upper confidence bound falls to a target.

    Parameters
    ----------
    target
        Failure probability the upper bound must reach, strictly between 0 and 1 [1].
    confidence
        Two-sided confidence level of the interval, strictly between 0 and 1 (default 0.95).

    Returns
    -------
    int
        Smallest ``n`` for which ``n`` trials without a failure give a Clopper-Pearson upper end
        ``<= target``. A run with fewer trials cannot show the target is met, whatever it sees.

    Raises
    ------
    StringcheckError
        If the target or confidence is outside (0, 1).

    Notes
    -----
    With no failure the upper end is ``1 - (alpha / 2)^(1 / n)``, ``alpha = 1 - confidence``.
    Setting it equal to the target and solving for ``n``:

    .. math:: n = \\left\\lceil \\frac{\\ln(\\alpha / 2)}{\\ln(1 - p_{target})} \\right\\rceil
              \\approx \\frac{3.69}{p_{target}} \\quad (\\text{95 %, two-sided}).

    The one-sided 95 % bound gives the "rule of three", ``n ~ 3 / p``; the two-sided interval at
    95 % spends 2.5 % in each tail, hence ``-ln 0.025 = 3.69``.

    References
    ----------
    .. [1] C. J. Clopper and E. S. Pearson, Biometrika 26 (4), 1934, pp. 404-413.
    .. [2] J. A. Hanley and A. Lippman-Hand, "If nothing goes wrong, is everything all right?
       Interpreting zero numerators", JAMA 249 (13), 1983, pp. 1743-1745.
    """
    level = _checked_confidence(confidence)
    probability = float(target)
    if not 0.0 < probability < 1.0:
        raise StringcheckError(
            f"target must be a probability strictly between 0 and 1; got {target!r}"
        )
    estimate = math.log((1.0 - level) / 2.0) / math.log1p(-probability)
    trials = max(1, math.ceil(estimate))
    # The ceiling of a rounded quotient may be one off either way; settle it on the bound itself.
    if trials > 1 and _zero_failure_upper(trials - 1, level) <= probability:
        trials -= 1
    elif _zero_failure_upper(trials, level) > probability:
        trials += 1
    return trials


def trials_for_relative_error(p: float, relative_error: float) -> int:
    """Trials a plain Monte Carlo run needs to estimate a probability to a relative error.

    Parameters
    ----------
    p
        Expected failure probability, ``0 < p <= 1`` [1].
    relative_error
        Wanted standard error of the estimate divided by ``p``, > 0 (0.1 for 10 %).

    Returns
    -------
    int
        Smallest ``n`` with ``sqrt(p (1 - p) / n) / p <= relative_error`` (at least 1).

    Raises
    ------
    StringcheckError
        If ``p`` or ``relative_error`` is out of range.

    Notes
    -----
    The estimate ``k / n`` has variance ``p (1 - p) / n``, so ``n = (1 - p) / (p e^2)``: about
    ``100 / p`` trials for 10 %. This is why rare failures need importance sampling.

    References
    ----------
    .. [1] S. Asmussen and P. W. Glynn, Stochastic Simulation: Algorithms and Analysis, Springer,
       2007, ch. VI (rare-event simulation; relative error of crude Monte Carlo), from memory.
    """
    probability = float(p)
    error = float(relative_error)
    if not 0.0 < probability <= 1.0:
        raise StringcheckError(f"p must be a probability in (0, 1]; got {p!r}")
    if not (error > 0.0 and math.isfinite(error)):
        raise StringcheckError(f"relative_error must be positive, e.g. 0.1; got {relative_error!r}")
    return max(1, math.ceil((1.0 - probability) / (probability * error**2)))


def histogram_counts(
    values: ArrayLike, *, bins: int = 20, limit: float | None = None
) -> list[tuple[float, float, int]]:
    """Count values in equal-width bins, for a report to draw as a histogram.

    Parameters
    ----------
    values
        Values of any shape [any unit]; flattened. NaN and infinities are left out (count them
        separately if they mean something).
    bins
        Number of bins across the range of the values, >= 1 (default 20).
    limit
        Optional limit in the unit of the values (e.g. the allowed stress ratio). The range is
        widened to include it, and it is made a bin edge, so that no bin straddles it; there may
        then be one or two bins more than ``bins``.

    Returns
    -------
    list of (low, high, count)
        Bins in ascending order, each ``[low, high)`` except the last, which includes ``high``
        (numpy's convention). With a limit, a value equal to it falls in the bin that starts at
        it, and there is always such a bin. Empty list for no finite values. Equal values give a
        single bin ``(v, v, count)`` (or, with a limit, bins up to and past it).

    Raises
    ------
    StringcheckError
        If ``bins`` is not a positive whole number or ``limit`` is not finite.
    """
    if isinstance(bins, bool) or int(bins) != bins or bins < 1:
        raise StringcheckError(f"bins must be a positive whole number; got {bins!r}")
    if limit is not None and not math.isfinite(limit):
        raise StringcheckError(f"limit must be a finite number; got {limit!r}")
    data = np.ravel(np.asarray(values, dtype=np.float64))
    data = data[np.isfinite(data)]
    if data.size == 0:
        return []
    low, high = float(data.min()), float(data.max())
    if limit is None:
        if low == high:
            return [(low, high, int(data.size))]
        edges = np.linspace(low, high, int(bins) + 1)
    else:
        low, high = min(low, limit), max(high, limit)
        width = (high - low) / int(bins) if high > low else max(abs(limit), 1.0) / int(bins)
        below = math.ceil((limit - low) / width)
        above = max(1, math.ceil((high - limit) / width))
        # Rounding in limit +/- count * width may leave an extreme value just outside the edges.
        if limit - below * width > low:
            below += 1
        if limit + above * width < high:
            above += 1
        edges = limit + width * np.arange(-below, above + 1)
        edges[below] = limit
    counts, edges = np.histogram(data, bins=edges)
    return [
        (float(edges[index]), float(edges[index + 1]), int(counts[index]))
        for index in range(counts.size)
    ]


@dataclass(frozen=True)
class Moments:
    """Count, mean and sum of squared deviations from the mean of values, per element.

    ``count`` [1] is a whole number; ``reference`` (one of the values) and ``offset`` (the mean less
    it) [unit of the values] and ``squares`` (sum_i (x_i - mean)^2) [unit squared] are arrays of one
    shape (one entry per position). The mean is kept as reference + offset so that two blocks'
    means are compared without the rounding of a large mean (see :func:`merge_moments`).
    """

    count: int
    reference: NDArray[np.float64]
    offset: NDArray[np.float64]
    squares: NDArray[np.float64]

    @property
    def mean(self) -> NDArray[np.float64]:
        """The mean [unit of the values]."""
        return self.reference + self.offset

    def variance(self, *, ddof: int = 1) -> NDArray[np.float64]:
        """The variance with ``ddof`` degrees of freedom removed [unit squared]; NaN where
        ``count <= ddof``."""
        if self.count <= ddof:
            return np.full(np.shape(self.squares), np.nan)
        return self.squares / (self.count - ddof)


def block_moments(values: ArrayLike) -> Moments:
    """The moments of ``values`` over their leading axis (one block of rows held in memory).

    Parameters
    ----------
    values
        Array (rows, ...) [any unit]; the moments are per element of the trailing shape.

    Returns
    -------
    Moments
        With ``count`` = rows; for no rows, zeros.

    Notes
    -----
    The shifted-data algorithm, shifted by the block's first row: d = x - x_0,
    m = sum(d) / n, S = sum(d^2) - n m^2 (T. F. Chan, G. H. Golub and R. J. LeVeque, "Algorithms
    for computing the sample variance: analysis and recommendations", The American Statistician
    37(3), 1983, section 3: a shift by a data value makes the one-pass sums as accurate as two
    passes unless x_0 lies many standard deviations from the mean; the relative error of S is about
    eps (1 + z_0^2) for x_0 at z_0 standard deviations). Where every row is equal, d = 0 and S = 0
    exactly. A sum of squares about a fixed reference far from the mean (0, or a limit) loses every
    digit of a tiny spread about a large mean. One pass over the block, as fast as the plain sums.
    """
    data = np.asarray(values, dtype=float)
    rows = data.shape[0]
    if rows == 0:
        zeros = np.zeros(data.shape[1:])
        return Moments(count=0, reference=zeros, offset=zeros.copy(), squares=zeros.copy())
    shift = data[0].copy()
    deviation = data - shift
    total = np.einsum("i...->...", deviation)
    squares = np.einsum("i...->...", np.square(deviation, out=deviation))
    offset = total / rows
    # S = sum d^2 - (sum d)^2 / n >= 0; rounding may leave a few ulps below zero.
    return Moments(count=rows, reference=shift, offset=offset,
                   squares=np.maximum(squares - total * offset, 0.0))


def merge_moments(parts: "list[Moments] | tuple[Moments, ...]") -> Moments:
    """The moments of the union of disjoint blocks, merged pairwise in the order given.

    Parameters
    ----------
    parts
        Moments of blocks of one trailing shape (see :func:`block_moments`), at least one.

    Returns
    -------
    Moments
        The same for any grouping of the blocks into chunks, as long as their order is kept.

    Notes
    -----
    Two blocks A and B combine as n = n_A + n_B, delta = mean_B - mean_A,
    mean = mean_A + delta n_B / n, S = S_A + S_B + delta^2 n_A n_B / n (T. F. Chan, G. H. Golub and
    R. J. LeVeque, "Updating formulae and a pairwise algorithm for computing sample variances",
    Stanford report STAN-CS-79-773, 1979); merging neighbours pairwise, level by level, keeps the
    rounding error growing with the logarithm of the number of blocks. delta is formed from the
    blocks' references (values of the data, whose difference is exact when they lie within a
    factor of two of each other) and offsets, never from two rounded large means.
    """
    level = list(parts)
    if not level:
        raise ValueError("merge_moments needs at least one block")
    while len(level) > 1:
        merged = [_merge_pair(level[i], level[i + 1]) for i in range(0, len(level) - 1, 2)]
        if len(level) % 2:
            merged.append(level[-1])
        level = merged
    return level[0]


def _merge_pair(first: Moments, second: Moments) -> Moments:
    if second.count == 0:
        return first
    if first.count == 0:
        return second
    count = first.count + second.count
    delta = (second.reference - first.reference) + (second.offset - first.offset)
    weight = second.count / count
    offset = first.offset + delta * weight
    squares = first.squares + second.squares + delta * delta * (first.count * weight)
    return Moments(count=count, reference=first.reference, offset=offset, squares=squares)


def merge_moment_rows(count: NDArray[np.int64], reference: NDArray[np.float64],
                      offset: NDArray[np.float64], squares: NDArray[np.float64]) -> Moments:
    """The moments of the union of disjoint blocks given as rows of arrays (row k: block k),
    merged pairwise in row order: :func:`merge_moments` vectorized over the blocks.

    Parameters
    ----------
    count
        Rows of each block [1], shape (blocks,), at least one block.
    reference, offset, squares
        As the fields of :class:`Moments`, shape (blocks, ...) [unit of the values, squared for
        ``squares``].

    Returns
    -------
    Moments
        Bit for bit what :func:`merge_moments` gives for the same blocks in the same order: the
        same pairwise tree, level by level, and the same element-wise formula (Chan, Golub and
        LeVeque, Stanford report STAN-CS-79-773, 1979), with a block of no rows left out of its
        pair.
    """
    count = np.asarray(count, dtype=np.int64)
    if count.shape[0] == 0:
        raise ValueError("merge_moment_rows needs at least one block")
    while count.shape[0] > 1:
        pairs = count.shape[0] // 2
        a, b = slice(0, 2 * pairs, 2), slice(1, 2 * pairs, 2)
        n_a, n_b = count[a], count[b]
        total = n_a + n_b
        extra = (1,) * (reference.ndim - 1)
        first_empty = (n_a == 0).reshape((pairs,) + extra)
        second_empty = (n_b == 0).reshape((pairs,) + extra)
        with np.errstate(invalid="ignore", divide="ignore"):
            weight = (n_b / total).reshape((pairs,) + extra)
            delta = (reference[b] - reference[a]) + (offset[b] - offset[a])
            merged_offset = offset[a] + delta * weight
            merged_squares = squares[a] + squares[b] \
                + delta * delta * (n_a.reshape((pairs,) + extra) * weight)
        new_reference = np.where(first_empty, reference[b], reference[a])
        new_offset = np.where(second_empty, offset[a], np.where(first_empty, offset[b],
                                                                 merged_offset))
        new_squares = np.where(second_empty, squares[a], np.where(first_empty, squares[b],
                                                                   merged_squares))
        if count.shape[0] % 2:
            total = np.concatenate([total, count[-1:]])
            new_reference = np.concatenate([new_reference, reference[-1:]])
            new_offset = np.concatenate([new_offset, offset[-1:]])
            new_squares = np.concatenate([new_squares, squares[-1:]])
        count, reference, offset, squares = total, new_reference, new_offset, new_squares
    return Moments(count=int(count[0]), reference=reference[0], offset=offset[0],
                   squares=squares[0])
