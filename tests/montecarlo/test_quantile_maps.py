"""The uniform-score maps the Monte Carlo draws through: the tabulated quantile functions against
their exact form, the exact form against scipy.stats, and the drawn populations against scipy's
distributions."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from stringcheck.design.model import Spread
from stringcheck.montecarlo.quantile_maps import (
    _SCORE_TOLERANCE,
    _exact_ends,
    _exact_from_uniform,
    _from_uniform,
    _score_table,
    normal_scores,
    spread_quantile,
    tolerance_draw,
)

K = 3.0  # docs/methods/: a datasheet limit sits sigma_at_limit = 3 standard deviations out

# Scores the generator can give: k 2^-53, k < 2^53. Dense on [0, 1), every interval joint of the
# table, and both extremes.
_JOINTS = np.arange(2**14) / 2.0**14
SCORES = np.concatenate([np.linspace(0.0, 1.0 - 2.0**-53, 400_001), _JOINTS,
                         _JOINTS + 2.0**-53, [2.0**-53, 1.0 - 2.0**-53, 0.5 - 2.0**-54]])

MAPS = [  # (low, high, upper, lower, median, lognormal)
    (-K, K, 1.0, 1.0, 0.0, False),                              # screened both sides
    (-math.inf, K, math.log(10.0) / K, math.log(10.0) / K, 1e-6, True),  # leakage, max only
    (-math.inf, math.inf, 0.5, 0.3, 2.0, True),                 # unscreened two-piece lognormal
    (-K, K, math.log(2.0) / K, math.log(1.5) / K, 80e-9, True),  # screened two-piece
    (-1.0, 1.0, 1e-3, 1e-3, 1.0, False),                        # a tight screen
    (-6.0, 6.0, 1.0, 1.0, 0.0, False),                          # a wide one
    (-K, K, 4.7e6 * 0.05 / K, 4.7e6 * 0.05 / K, 4.7e6, False),  # a 5 % resistor
]


def _unit(values: np.ndarray, upper: float, lower: float, lognormal: bool) -> np.ndarray:
    """One standard deviation of the value: s (normal) or s times the value (lognormal)."""
    return max(upper, lower) * (np.abs(values) if lognormal else 1.0)


@pytest.mark.parametrize("low, high, upper, lower, median, lognormal", MAPS)
def test_tabulated_score_map_is_within_its_tolerance_of_the_exact_map(low, high, upper, lower,
                                                                     median, lognormal):
    # The promise of the table: within 1e-8 standard deviations of the exact quantile function,
    # everywhere, the joints and the extremes included (there it is the exact map itself).
    table = _from_uniform(SCORES, low, high, upper, lower, median, lognormal)
    exact = _exact_from_uniform(SCORES, low, high, upper, lower, median, lognormal)
    error = np.abs(table - exact) / _unit(exact, upper, lower, lognormal)
    assert np.all(np.isfinite(table))
    assert error.max() <= 1.5 * _SCORE_TOLERANCE
    # Nondecreasing to within the tolerance (a quantile function).
    steps = np.diff(table[:400_001]) / _unit(table[1:400_001], upper, lower, lognormal)
    assert steps.min() >= -2 * _SCORE_TOLERANCE
    # Screened draws stay within the limits.
    if np.isfinite(high):
        ceiling = median * math.exp(upper * high) if lognormal else median + upper * high
        assert table.max() <= ceiling * (1 + 1e-15)
    if np.isfinite(low):
        floor = median * math.exp(lower * low) if lognormal else median + lower * low
        assert table.min() >= floor * (1 - 1e-15)


@pytest.mark.parametrize("low, high", [(-K, K), (-math.inf, K), (-K, math.inf), (-1.0, 6.0),
                                       (-math.inf, math.inf)])
def test_exact_score_map_is_scipys_truncated_normal_quantile(low, high):
    # y = F^-1(u) of the standard normal truncated to [low, high]: scipy.stats.truncnorm.ppf, and
    # the lognormal value typ exp(s y).
    # Upper-side scores against isf of the upper-tail probability. (Beyond about 1 - 1e-6,
    # truncnorm.isf itself loses digits; the far upper tail is checked against norm.isf below.)
    u = np.concatenate([np.linspace(1e-6, 1.0 - 1e-6, 2001), [1e-12]])
    reference = stats.truncnorm(low, high)
    expected = np.where(u < 0.5, reference.ppf(u + 2.0**-54), reference.isf((1.0 - u) - 2.0**-54))
    y = _exact_from_uniform(u, low, high, 1.0, 1.0, 0.0, False)
    np.testing.assert_allclose(y, expected, rtol=1e-9, atol=1e-12)
    value = _exact_from_uniform(u, low, high, 0.7, 0.7, 3e-7, True)
    np.testing.assert_allclose(value, 3e-7 * np.exp(0.7 * expected), rtol=1e-9)
    if np.isinf(low) and np.isinf(high):
        far = _exact_from_uniform(np.array([1.0 - 2.0**-40]), low, high, 1.0, 1.0, 0.0, False)
        assert far[0] == pytest.approx(stats.norm.isf(2.0**-40 - 2.0**-54), rel=1e-13)


def test_normal_scores_are_the_normal_quantile_of_the_cell_midpoint():
    # z = Phi^-1(u + 2^-54) (scipy.stats.norm.ppf, and isf on the upper side), within the table's
    # 1e-8 in the bulk and to rounding in the exactly evaluated tails; symmetric about the middle
    # cell; finite at the extremes (|z| = 8.29 at 2^-53 from either end).
    u = np.linspace(0.0, 1.0 - 2.0**-53, 100_001)
    expected = np.where(u < 0.5, stats.norm.ppf(u + 2.0**-54), stats.norm.isf((1.0 - u) - 2.0**-54))
    z = normal_scores(u)
    np.testing.assert_allclose(z, expected, rtol=0, atol=1.5 * _SCORE_TOLERANCE)
    tails = (u < 1e-3) | (u > 1 - 1e-3)
    np.testing.assert_allclose(z[tails], expected[tails], rtol=1e-12)
    low, high = normal_scores(np.array([0.0, 1.0 - 2.0**-53]))
    assert low == pytest.approx(stats.norm.ppf(2.0**-54), rel=1e-12) and high == -low
    assert np.all(np.diff(z) > -2 * _SCORE_TOLERANCE)


def test_out_must_be_a_contiguous_array_apart_from_the_scores():
    # A non-contiguous out (a transpose) or the scores themselves would be written wrong: refused.
    u = np.random.default_rng(5).random((8, 6))
    for out in (np.zeros((6, 8)).T, u, np.zeros((8, 5))):
        with pytest.raises(ValueError, match="C-contiguous"):
            tolerance_draw(10e6, 0.01, u, sigma_at_limit=K, uniform=True, out=out)


@settings(max_examples=40, deadline=None)
@given(typ=st.floats(1e-9, 1e3), up=st.floats(1.05, 20.0), down=st.floats(1.05, 20.0),
       screened=st.booleans(), lognormal=st.booleans(),
       u=st.lists(st.integers(0, 2**53 - 1), min_size=1, max_size=50))
def test_uniform_and_normal_faces_of_one_latent_give_one_draw(typ, up, down, screened, lognormal,
                                                              u):
    # A score u and its normal z = Phi^-1(u) are one latent value: mapping either gives the same
    # draw, within the table's tolerance (property over spreads and scores).
    high = typ * up
    low = typ / down if lognormal else typ * (1.0 - (down - 1.0) / (down + 1.0))
    spread = Spread(typ=typ, low=low, high=high)
    scores = np.array(u, dtype=float) * 2.0**-53
    options = dict(lognormal=lognormal, sigma_at_limit=K, screened=screened)
    by_score = spread_quantile(spread, scores, uniform=True, **options)
    by_normal = spread_quantile(spread, normal_scores(scores), **options)
    if lognormal:
        sigma = max(math.log(high / typ), math.log(typ / low)) / K
        np.testing.assert_allclose(by_score, by_normal, rtol=1e-7 * sigma + 1e-13)
    else:
        sigma = max(high - typ, typ - low) / K
        np.testing.assert_allclose(by_score, by_normal, rtol=0, atol=1e-7 * sigma + 1e-12 * typ)


def test_drawn_population_follows_scipys_distribution():
    # 200,000 seeded uniform scores through a screened lognormal leakage (max only) and a 5 %
    # tolerance: KS against scipy.stats (truncnorm of the log, truncnorm of the value).
    u = np.random.default_rng(3).random(200_000)
    spread = Spread(typ=1e-6, low=None, high=1e-5)
    drawn = spread_quantile(spread, u, lognormal=True, sigma_at_limit=K, screened=True,
                            uniform=True)
    sigma = math.log(10.0) / K
    reference = stats.truncnorm(-np.inf, K, loc=math.log(1e-6), scale=sigma)
    assert stats.kstest(np.log(drawn), reference.cdf).pvalue > 0.01
    values = tolerance_draw(4.7e6, 0.05, u, sigma_at_limit=K, uniform=True)
    assert stats.kstest((values / 4.7e6 - 1.0) * K / 0.05, stats.truncnorm(-K, K).cdf).pvalue > 0.01
    assert values.min() >= 4.7e6 * 0.95 and values.max() <= 4.7e6 * 1.05


def test_tolerance_draw_writes_into_a_given_array():
    u = np.random.default_rng(4).random((3, 7))
    out = np.empty((3, 7))
    returned = tolerance_draw(10e6, 0.01, u, sigma_at_limit=K, uniform=True, out=out)
    assert returned is out
    np.testing.assert_array_equal(out, tolerance_draw(10e6, 0.01, u, sigma_at_limit=K,
                                                      uniform=True))


def test_exact_intervals_are_found_as_tails_or_looked_up():
    # A symmetric screen: only the two tails are exact, found by comparing scores with two
    # bounds. A two-piece kink inside the table: looked up interval by interval (None).
    exact = _score_table(-K, K, 1.0, 1.0, 0.0, False)[3]
    ends = _exact_ends(exact.tobytes())
    assert ends is not None and 0.0 < ends[0] < 0.01 and 0.99 < ends[1] < 1.0
    # (With limits on both sides at K the kink, at u = 1/2, falls on a joint; here it does not.)
    kinked = _score_table(-math.inf, K, 1.0, 0.2, 0.0, False)[3]
    assert kinked[1000:-1000].any() and _exact_ends(kinked.tobytes()) is None


# Found by the fuzzing of tests/checks/test_fuzz.py (fixed).
def test_screened_normal_draw_stays_within_its_limit():
    drawn = spread_quantile(Spread(typ=1.0, high=2.0), np.array([9.0]), lognormal=False,
                            sigma_at_limit=5.09375, screened=True)
    assert drawn[0] <= 2.0 * (1 + 1e-12), repr(drawn[0])
