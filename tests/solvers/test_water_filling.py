"""Tests of stringcheck.solvers.water_filling."""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.optimize import brentq

from stringcheck.solvers.water_filling import WaterFill, water_fill


def _brentq_level(thresholds, weights, total):
    """Independent solution of sum_k w_k max(L - t_k, 0) = total by scipy's brentq."""

    def excess(level):
        return np.sum(weights * np.maximum(level - thresholds, 0.0)) - total

    low = np.min(thresholds)
    high = np.max(thresholds) + total / np.min(weights)
    return brentq(excess, low, high, xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=500)


def test_matches_brentq_on_random_rows():
    # Independent solver: scipy.optimize.brentq on the same piecewise-linear equation.
    rng = np.random.default_rng(20261202)
    thresholds = rng.normal(0.0, 1.0, size=(200, 7))
    weights = rng.uniform(0.1, 10.0, size=(200, 7))
    totals = 10.0 ** rng.uniform(-3.0, 2.0, size=200)
    solution = water_fill(thresholds, weights, totals)
    expected = [_brentq_level(t, w, s) for t, w, s in zip(thresholds, weights, totals)]
    np.testing.assert_allclose(solution.level, expected, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(solution.amounts.sum(axis=-1), totals, rtol=1e-12)


def test_two_equal_branches_in_parallel_closed_form():
    # Two diodes v = V_T0,k + r i_k in parallel (piecewise-linear forward model, Rashid ch. 2,
    # parallel-connected diodes): while both conduct, i_1 = I/2 + (V_T0,2 - V_T0,1) / (2 r).
    threshold_voltages = np.array([0.80, 0.85])
    resistance, total = 2e-3, 100.0
    solution = water_fill(threshold_voltages, 1.0 / resistance, total)
    np.testing.assert_allclose(
        solution.amounts, [total / 2 + 0.05 / (2 * resistance), total / 2 - 0.05 / (2 * resistance)],
        rtol=1e-12,
    )
    assert math.isclose(solution.level, 0.80 + resistance * solution.amounts[0], rel_tol=1e-14)


def test_only_the_low_threshold_branch_conducts_at_light_load():
    # Below the second threshold the whole current takes the first branch (closed form).
    solution = water_fill([0.80, 0.85], [500.0, 500.0], 10.0)
    np.testing.assert_allclose(solution.amounts, [10.0, 0.0], rtol=1e-14)
    assert math.isclose(solution.level, 0.80 + 10.0 / 500.0, rel_tol=1e-14)


def test_shapes_broadcast_and_result_type():
    thresholds = np.zeros((3, 5, 4))
    solution = water_fill(thresholds, np.ones(4), np.ones((3, 1)))
    assert isinstance(solution, WaterFill)
    assert solution.level.shape == (3, 5)
    assert solution.amounts.shape == (3, 5, 4)
    # Total against a single row: one level per total.
    solution = water_fill([0.0, 1.0], 1.0, [0.5, 3.0])
    np.testing.assert_allclose(solution.level, [0.5, 2.0])
    assert solution.amounts.shape == (2, 2)
    # Scalar inputs give 0-d arrays, the same types as for arrays.
    solution = water_fill([1.0, 2.0], [1.0, 1.0], 1.0)
    assert solution.level.shape == () and solution.amounts.shape == (2,)


def test_zero_total_and_ties():
    solution = water_fill([[2.0, 1.0, 3.0]], 1.0, 0.0)
    assert solution.level[0] == 1.0
    np.testing.assert_array_equal(solution.amounts, 0.0)
    # Equal thresholds share equally for equal weights (closed form: L = t + total / sum w).
    solution = water_fill([1.0, 1.0, 1.0], 1.0, 3.0)
    np.testing.assert_allclose(solution.amounts, 1.0, rtol=1e-15)


def test_large_common_offset_keeps_precision():
    # Thresholds of 1 C + (0, 1, 3) nC (a large common offset) and weights 1 / (1 nF): the
    # small differences must survive. Closed form with all three channels active:
    # 3 (L - t_1) - (s_2 + s_3) = total / w, with s_k = t_k - t_1.
    thresholds = 1.0 + np.array([0.0, 1e-9, 3e-9])
    differences = thresholds - thresholds[0]  # exact (Sterbenz lemma)
    weight, total = 1e9, 6.0
    shifted_level = (total / weight + differences.sum()) / 3.0
    solution = water_fill(thresholds, weight, total)
    np.testing.assert_allclose(solution.amounts, weight * (shifted_level - differences), rtol=1e-9)
    assert math.isclose(solution.amounts.sum(), total, rel_tol=1e-12)


def test_nan_stays_in_its_row():
    solution = water_fill([[0.0, np.nan], [0.0, 1.0]], 1.0, 1.0)
    assert np.isnan(solution.level[0]) and np.isnan(solution.amounts[0]).all()
    assert solution.level[1] == 1.0


rows = st.integers(min_value=1, max_value=8).flatmap(
    lambda count: st.tuples(
        arrays(float, count, elements=st.floats(min_value=0.6, max_value=1.2)),
        arrays(float, count, elements=st.floats(min_value=1e-4, max_value=1e-2)),
        st.floats(min_value=1e-3, max_value=1e4),
    )
)


@settings(max_examples=100, deadline=None)
@given(rows)
def test_parallel_branch_currents_sum_to_the_total(row):
    # Conservation (Kirchhoff's current law): branch currents add up to the group current.
    threshold_voltages, resistances, total = row
    solution = water_fill(threshold_voltages, 1.0 / resistances, total)
    assert math.isclose(solution.amounts.sum(), total, rel_tol=1e-12)
    assert (solution.amounts >= 0.0).all()
    # Every conducting branch sits at the common forward voltage.
    conducting = solution.amounts > 0.0
    np.testing.assert_allclose(
        threshold_voltages[conducting] + resistances[conducting] * solution.amounts[conducting],
        solution.level,
        rtol=1e-12,
    )
    # A branch whose threshold is above the level carries nothing.
    assert (solution.amounts[threshold_voltages >= solution.level] == 0.0).all()


@settings(max_examples=100, deadline=None)
@given(rows, st.randoms(use_true_random=False))
def test_permuting_branches_permutes_the_answer(row, random):
    threshold_voltages, resistances, total = row
    order = list(range(threshold_voltages.size))
    random.shuffle(order)
    solution = water_fill(threshold_voltages, 1.0 / resistances, total)
    permuted = water_fill(threshold_voltages[order], 1.0 / resistances[order], total)
    assert math.isclose(permuted.level, solution.level, rel_tol=1e-13)
    np.testing.assert_allclose(permuted.amounts, solution.amounts[order], rtol=1e-9, atol=1e-12 * total)


@settings(max_examples=100, deadline=None)
@given(rows, st.floats(min_value=1.0, max_value=10.0))
def test_more_total_never_takes_from_any_channel(row, factor):
    # Each amount w_k max(L - t_k, 0) is nondecreasing in L, and L increases with the total.
    threshold_voltages, resistances, total = row
    base = water_fill(threshold_voltages, 1.0 / resistances, total)
    more = water_fill(threshold_voltages, 1.0 / resistances, factor * total)
    assert more.level >= base.level
    assert (more.amounts >= base.amounts * (1 - 1e-12) - 1e-12 * total).all()


def test_sorting_finishes_rows_the_newton_steps_leave(monkeypatch):
    # The active-set Newton steps and the sort that finishes the rows they leave must give the
    # same levels (both against scipy's brentq): with no Newton step every row is sorted, and
    # thresholds far apart need one step per closing channel.
    import stringcheck.solvers.water_filling as module

    rng = np.random.default_rng(7)
    thresholds = np.vstack([rng.normal(0.0, 1.0, size=(50, 6)), 10.0 ** np.arange(6.0)[None]])
    weights = rng.uniform(0.1, 10.0, size=(51, 6))
    totals = np.append(10.0 ** rng.uniform(-3.0, 2.0, size=50), 1.0)
    expected = [_brentq_level(t, w, s) for t, w, s in zip(thresholds, weights, totals)]
    for steps in (0, 1, 10):
        monkeypatch.setattr(module, "_NEWTON_STEPS", steps)
        solution = water_fill(thresholds, weights, totals)
        np.testing.assert_allclose(solution.level, expected, rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(solution.amounts.sum(axis=-1), totals, rtol=1e-12)
