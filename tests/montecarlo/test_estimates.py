"""Tests of stringcheck.montecarlo.estimates against scipy, closed forms and simulation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy import stats as scipy_stats

from stringcheck.montecarlo import estimates as stats
from stringcheck.errors import StringcheckError


# --- Clopper-Pearson -----------------------------------------------------------------------------
COUNT_PAIRS = [
    (k, n)
    for n in (1, 2, 5, 10, 37, 100, 1000, 12345)
    for k in sorted({0, 1, 2, n // 3, n // 2, n - 1, n})
    if k <= n
]


@pytest.mark.parametrize("confidence", [0.8, 0.9, 0.95, 0.99])
def test_clopper_pearson_matches_scipy_binomtest(confidence):
    # scipy.stats.binomtest(k, n).proportion_ci(method="exact") is scipy's own Clopper-Pearson,
    # found by a root finder on the binomial tail; it agrees to about 2e-8 relative, hence 1e-7.
    for k, n in COUNT_PAIRS:
        expected = scipy_stats.binomtest(k, n).proportion_ci(
            confidence_level=confidence, method="exact"
        )
        low, high = stats.clopper_pearson(k, n, confidence=confidence)
        assert low == pytest.approx(expected.low, rel=1e-7, abs=1e-15), (k, n)
        assert high == pytest.approx(expected.high, rel=1e-7, abs=1e-15), (k, n)


@pytest.mark.parametrize("n", [1, 2, 7, 100, 12345])
def test_clopper_pearson_one_failure_closed_form(n):
    # For k = 1 the lower end solves P(X >= 1) = 1 - (1 - p)^n = alpha/2, so
    # p_low = 1 - (1 - alpha/2)^(1/n); by symmetry p_high(k = n - 1) = (1 - alpha/2)^(1/n)
    # (Clopper and Pearson 1934, binomial tail equations). Exact, so a tight tolerance.
    tail = 0.025
    low = stats.clopper_pearson(1, n, confidence=0.95)[0]
    assert low == pytest.approx(-math.expm1(math.log1p(-tail) / n), rel=1e-12)
    high = stats.clopper_pearson(n - 1, n, confidence=0.95)[1]
    assert high == pytest.approx(math.exp(math.log1p(-tail) / n), rel=1e-12)


def test_clopper_pearson_is_vectorized():
    failures = np.array([[0, 3], [7, 20]])
    trials = np.array([20, 20])
    low, high = stats.clopper_pearson(failures, trials)
    assert low.shape == high.shape == (2, 2)
    for index in np.ndindex(failures.shape):
        scalar_low, scalar_high = stats.clopper_pearson(int(failures[index]), 20)
        assert low[index] == scalar_low
        assert high[index] == scalar_high
    assert isinstance(stats.clopper_pearson(3, 20)[0], float)


def test_clopper_pearson_ends():
    # Clopper and Pearson (1934): low is 0 with no failure, high is 1 with all failures.
    assert stats.clopper_pearson(0, 50)[0] == 0.0
    assert stats.clopper_pearson(50, 50)[1] == 1.0
    assert stats.clopper_pearson(0, 1)[1] == pytest.approx(0.975)  # 1 - 0.025^(1/1)


@pytest.mark.parametrize("trials", [1, 10, 300, 10_000, 1_000_000])
def test_zero_failure_upper_end_closed_form(trials):
    # With k = 0 the beta quantile reduces to 1 - (alpha/2)^(1/n) (Clopper and Pearson 1934).
    high = stats.clopper_pearson(0, trials, confidence=0.95)[1]
    assert high == pytest.approx(1.0 - 0.025 ** (1.0 / trials), rel=1e-10)


def test_rule_of_three():
    # Hanley and Lippman-Hand, JAMA 1983 ("rule of three"): with no event in n trials the
    # one-sided 95 % upper bound is about 3/n (exactly -ln(0.05)/n = 2.996/n for large n). The
    # one-sided 95 % bound is the upper end of the two-sided 90 % interval.
    n = 10_000
    one_sided_95 = stats.clopper_pearson(0, n, confidence=0.90)[1]
    assert one_sided_95 * n == pytest.approx(3.0, rel=2e-3)
    # Two-sided 95 % spends 2.5 % in the upper tail: -ln(0.025) = 3.689.
    two_sided_95 = stats.clopper_pearson(0, n, confidence=0.95)[1]
    assert two_sided_95 * n == pytest.approx(-math.log(0.025), rel=5e-4)
    assert two_sided_95 * n == pytest.approx(3.69, abs=0.01)


@pytest.mark.parametrize(
    ("failures", "trials", "message"),
    [
        (-1, 10, "failures"),
        (11, 10, "failures"),
        (1, 0, "trials"),
        (1.5, 10, "whole"),
        (True, 10, "whole"),
    ],
)
def test_clopper_pearson_rejects_bad_counts(failures, trials, message):
    with pytest.raises(StringcheckError, match=message):
        stats.clopper_pearson(failures, trials)


@pytest.mark.parametrize("confidence", [0.0, 1.0, 95, -0.5])
def test_clopper_pearson_rejects_bad_confidence(confidence):
    with pytest.raises(StringcheckError, match="confidence"):
        stats.clopper_pearson(1, 10, confidence=confidence)


@pytest.mark.parametrize("n", [10, 40, 150])
def test_clopper_pearson_exact_coverage_is_at_least_nominal(n):
    # The defining property (Clopper and Pearson 1934): for every p the probability that the
    # interval covers p is >= the confidence. Exact coverage: sum of binomial pmf over the k whose
    # interval contains p.
    k = np.arange(n + 1)
    low, high = stats.clopper_pearson(k, n, confidence=0.95)
    for p in np.linspace(0.001, 0.999, 181):
        covered = (low <= p) & (p <= high)
        assert scipy_stats.binom.pmf(k[covered], n, p).sum() >= 0.95 - 1e-12, p


@pytest.mark.parametrize(("p", "n"), [(0.01, 200), (0.05, 60), (0.3, 25), (0.5, 100)])
def test_clopper_pearson_coverage_by_simulation(p, n):
    # Simulated coverage at a fixed seed; the interval is conservative, so it covers at least as
    # often as stated (95 %). 40 000 repetitions: standard error of a coverage ~0.97 is 0.0009.
    rng = np.random.default_rng(1934)
    failures = rng.binomial(n, p, size=40_000)
    low, high = stats.clopper_pearson(failures, n, confidence=0.95)
    coverage = np.mean((low <= p) & (p <= high))
    assert coverage >= 0.95
    # and it agrees with the exact coverage to within four standard errors
    k = np.arange(n + 1)
    exact_low, exact_high = stats.clopper_pearson(k, n, confidence=0.95)
    exact = scipy_stats.binom.pmf(k[(exact_low <= p) & (p <= exact_high)], n, p).sum()
    assert coverage == pytest.approx(exact, abs=4 * math.sqrt(exact * (1 - exact) / 40_000))


# --- FailureEstimate -----------------------------------------------------------------------------
def test_failure_estimate_fields():
    estimate = stats.failure_estimate(3, 1000, confidence=0.9)
    low, high = stats.clopper_pearson(3, 1000, confidence=0.9)
    assert estimate.failures == 3 and estimate.trials == 1000
    assert estimate.p_fail == 0.003
    assert (estimate.ci_low, estimate.ci_high) == (low, high)
    assert estimate.upper_bound == high
    assert estimate.confidence == 0.9
    assert isinstance(estimate.failures, int) and isinstance(estimate.p_fail, float)
    with pytest.raises(AttributeError):
        estimate.failures = 4  # frozen


def test_failure_estimate_arrays():
    estimate = stats.failure_estimate(np.array([0, 5]), np.array([100, 100]))
    np.testing.assert_array_equal(estimate.p_fail, [0.0, 0.05])
    assert estimate.upper_bound.shape == (2,)


# --- convergence figures of an estimate --------------------------------------------------------
@pytest.mark.parametrize("failures, trials", [(1, 10), (3, 1000), (40, 4000), (999, 1000)])
def test_relative_error_is_the_binomial_closed_form(failures, trials):
    # A binomial proportion k / n has standard deviation sqrt(p (1 - p) / n) (Feller, vol. 1,
    # ch. VI, from memory); divided by p: sqrt((1 - p) / (n p)).
    p = failures / trials
    estimate = stats.failure_estimate(failures, trials)
    assert estimate.relative_error == pytest.approx(math.sqrt((1 - p) / (trials * p)), rel=1e-12)
    # scipy's binomial: the standard deviation of the count over its mean is the same figure.
    assert estimate.relative_error == pytest.approx(
        scipy_stats.binom(trials, p).std() / scipy_stats.binom(trials, p).mean(), rel=1e-12)


def test_relative_error_ends_and_arrays():
    assert stats.failure_estimate(0, 100).relative_error == math.inf
    assert stats.failure_estimate(100, 100).relative_error == 0.0
    both = stats.failure_estimate(np.array([0, 25]), np.array([100, 100])).relative_error
    np.testing.assert_allclose(both, [math.inf, math.sqrt(0.75 / 25)])


@pytest.mark.parametrize("failures, trials", [(1, 10), (3, 1000), (40, 4000), (7, 50)])
def test_trials_for_wanted_error_reaches_the_wanted_error(failures, trials):
    estimate = stats.failure_estimate(failures, trials)
    p = estimate.p_fail
    needed = estimate.trials_for_wanted_error
    # n = (1 - p) / (p e^2), rounded up (the binomial closed form solved for n)
    assert needed == math.ceil((1 - p) / (p * stats.WANTED_RELATIVE_ERROR ** 2))
    assert math.sqrt((1 - p) / (needed * p)) <= stats.WANTED_RELATIVE_ERROR
    assert needed == 1 or math.sqrt((1 - p) / ((needed - 1) * p)) > stats.WANTED_RELATIVE_ERROR
    assert estimate.needs_more_trials == (needed > trials)


def test_no_failure_needs_no_relative_error_but_the_zero_failure_bound():
    estimate = stats.failure_estimate(0, 3688)
    assert estimate.trials_for_wanted_error is None and not estimate.needs_more_trials
    # Clopper and Pearson (1934) with k = 0: the two-sided upper end is 1 - (alpha / 2)^(1 / n).
    assert estimate.upper_bound == pytest.approx(1 - 0.025 ** (1 / 3688), rel=1e-10)
    assert not stats.failure_estimate(10, 10).needs_more_trials


def test_trials_for_wanted_error_is_for_scalar_counts():
    with pytest.raises(TypeError):
        stats.failure_estimate(np.array([1, 2]), np.array([10, 10])).trials_for_wanted_error


# --- trials needed -------------------------------------------------------------------------------
def test_trials_for_upper_bound_worked_example():
    # Hand calculation: ln(0.025) / ln(0.999) = 3687.2, so 3688 failure-free trials show
    # P(fail) <= 1e-3 at 95 % (two-sided); about 3.69 / p.
    assert stats.trials_for_upper_bound(1e-3, confidence=0.95) == 3688


@given(
    target=st.floats(min_value=1e-9, max_value=0.9),
    confidence=st.floats(min_value=0.5, max_value=0.999),
)
def test_trials_for_upper_bound_round_trip(target, confidence):
    trials = stats.trials_for_upper_bound(target, confidence=confidence)
    # n failure-free trials reach the target, n - 1 do not (Clopper-Pearson via scipy's beta).
    assert stats.clopper_pearson(0, trials, confidence=confidence)[1] <= target * (1 + 1e-9)
    if trials > 1:
        assert stats.clopper_pearson(0, trials - 1, confidence=confidence)[1] > target * (1 - 1e-9)


@pytest.mark.parametrize("target", [0.0, 1.0, -0.1, math.nan])
def test_trials_for_upper_bound_rejects_bad_target(target):
    with pytest.raises(StringcheckError, match="target"):
        stats.trials_for_upper_bound(target)


def test_trials_for_relative_error_worked_example():
    # (1 - p) / (p e^2) = 0.99 / (0.01 * 0.01) = 9900 (variance of a binomial proportion).
    assert stats.trials_for_relative_error(0.01, 0.1) == 9900


@pytest.mark.parametrize(("p", "relative_error"), [(0.5, 0.01), (1e-4, 0.2), (0.9, 0.05)])
def test_trials_for_relative_error_against_binomial_spread(p, relative_error):
    # scipy's binomial standard deviation of the count, divided by n p, is the relative error.
    n = stats.trials_for_relative_error(p, relative_error)
    assert scipy_stats.binom(n, p).std() / (n * p) <= relative_error * (1 + 1e-12)
    assert scipy_stats.binom(n - 1, p).std() / ((n - 1) * p) > relative_error


# --- histogram counts ----------------------------------------------------------------------------
def test_histogram_counts_without_limit_matches_numpy():
    values = np.random.default_rng(11).lognormal(size=1000)
    bins = stats.histogram_counts(values, bins=12)
    counts, edges = np.histogram(values, bins=12)
    assert [count for _, _, count in bins] == counts.tolist()
    np.testing.assert_allclose([low for low, _, _ in bins], edges[:-1])


@given(
    values=st.lists(st.floats(-1e6, 1e6), min_size=1, max_size=200),
    bins=st.integers(1, 30),
    limit=st.none() | st.floats(-1e6, 1e6),
)
def test_histogram_counts_properties(values, bins, limit):
    result = stats.histogram_counts(values, bins=bins, limit=limit)
    data = np.array(values)
    # every value is counted once, bins are contiguous and ascending
    assert sum(count for _, _, count in result) == data.size
    assert all(a[1] == b[0] for a, b in zip(result, result[1:]))
    assert all(low <= high for low, high, _ in result)
    if limit is not None:
        # the limit is an edge, and the bins from it upward hold exactly the values >= limit
        starts = [low for low, _, _ in result]
        assert limit in starts
        at_or_above = sum(count for low, _, count in result if low >= limit)
        assert at_or_above == int(np.sum(data >= limit))
        assert len(result) <= bins + 2


def test_histogram_counts_edge_cases():
    assert stats.histogram_counts([]) == []
    assert stats.histogram_counts([np.nan, np.inf]) == []
    assert stats.histogram_counts([2.0, 2.0, np.nan]) == [(2.0, 2.0, 2)]
    with pytest.raises(StringcheckError, match="bins"):
        stats.histogram_counts([1.0], bins=0)
    with pytest.raises(StringcheckError, match="limit"):
        stats.histogram_counts([1.0], limit=math.inf)


# --- Moments of blocks (per-position mean and standard deviation) ----------------------------------
def _merged_std(values, block):
    parts = [stats.block_moments(values[start:start + block])
             for start in range(0, values.shape[0], block)]
    moments = stats.merge_moments(parts)
    return moments, np.sqrt(moments.variance(ddof=1))


def test_block_moments_match_numpy_on_a_tiny_spread_about_a_large_mean():
    # Reference: numpy.mean and numpy.std(ddof=1) of the whole array (two passes over it). A
    # position at 10 kV with a spread of a microvolt: a sum of squares about a far reference
    # (here the 0 V of the raw sums, or a limit) loses every digit of it; the shifted two-pass
    # blocks and the pairwise merge (Chan, Golub and LeVeque 1979/1983) keep it.
    rng = np.random.default_rng(3)
    values = 1.0e4 + 1.0e-6 * rng.standard_normal((10_000, 3))
    values[:, 2] = 1.5e5 + 3.0e-7 * rng.standard_normal(10_000)
    moments, std = _merged_std(values, 4096)
    # The mean within a thousandth of the spread of the exactly rounded mean (math.fsum).
    exact = np.array([math.fsum(column) / column.size for column in values.T])
    np.testing.assert_allclose(moments.mean, exact, rtol=0, atol=3e-10)
    # numpy.std of each column as a contiguous array (its pairwise sums; along axis 0 of a 2-d
    # array numpy sums naively and is itself off by some 1e-6 on the last column).
    reference = np.array([np.ascontiguousarray(column).std(ddof=1) for column in values.T])
    np.testing.assert_allclose(std, reference, rtol=1e-8)
    # The data are hard: the textbook one-pass formula about 0 is off by orders of magnitude.
    naive = np.sqrt(np.abs((np.sum(values**2, axis=0) - values.shape[0] * values.mean(axis=0)**2)
                           / (values.shape[0] - 1)))
    assert np.all(np.abs(naive - reference) > 10 * reference)


@pytest.mark.parametrize("value", [0.1, 1234.5678, 1.0e4 / 3.0, 7.0e5])
def test_constant_values_have_exactly_zero_spread(value):
    # A position without scatter: every value equal, so the spread is 0 exactly and the mean is
    # the value itself (numpy.std, whose mean is rounded, gives about 2e-15 for 0.1).
    values = np.full((3 * 4096 + 17, 2), value)
    moments, std = _merged_std(values, 4096)
    assert np.all(std == 0.0)
    assert np.all(moments.mean == value)


@given(st.lists(st.integers(min_value=0, max_value=40), min_size=1, max_size=8),
       st.floats(min_value=-1e6, max_value=1e6), st.floats(min_value=1e-9, max_value=1e3),
       st.integers(min_value=0, max_value=2**31))
def test_merged_blocks_agree_with_numpy_for_any_split(sizes, centre, scale, seed):
    # Property: however the rows are split into blocks (empty blocks included), the merged
    # moments are numpy's mean and variance of the whole.
    total = sum(sizes)
    if total < 2:
        return
    rng = np.random.default_rng(seed)
    values = centre + scale * rng.standard_normal(total)
    edges = np.cumsum([0] + sizes)
    moments = stats.merge_moments([stats.block_moments(values[a:b])
                                   for a, b in zip(edges[:-1], edges[1:])])
    assert moments.count == total
    assert moments.mean == pytest.approx(values.mean(), rel=1e-12, abs=1e-12 * scale)
    assert moments.variance(ddof=1) == pytest.approx(values.var(ddof=1), rel=1e-7)


@given(sizes=st.lists(st.integers(0, 40), min_size=1, max_size=23),
       centre=st.floats(-1e6, 1e6), scale=st.floats(1e-9, 1e3), seed=st.integers(0, 2 ** 32 - 1))
def test_merging_rows_of_blocks_is_merge_moments_bit_for_bit(sizes, centre, scale, seed):
    # The vectorized merge (accumulators fold a block's 64 units with it) must build the same
    # pairwise tree with the same element-wise formula as merge_moments, empty blocks included:
    # compared for exact equality, not within a tolerance.
    rng = np.random.default_rng(seed)
    values = centre + scale * rng.standard_normal((sum(sizes), 3))
    edges = np.cumsum([0] + sizes)
    parts = [stats.block_moments(values[a:b]) for a, b in zip(edges[:-1], edges[1:])]
    expected = stats.merge_moments(parts)
    rows = stats.merge_moment_rows(np.array([part.count for part in parts]),
                                   np.stack([part.reference for part in parts]),
                                   np.stack([part.offset for part in parts]),
                                   np.stack([part.squares for part in parts]))
    assert rows.count == expected.count
    for name in ("reference", "offset", "squares"):
        assert np.array_equal(getattr(rows, name), getattr(expected, name)), name
