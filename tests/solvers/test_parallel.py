"""Tests of stringcheck.solvers.parallel (current sharing, waveforms, ballast)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.integrate import quad
from scipy.optimize import brentq

from stringcheck.physics.forward import form_factor, peak_factor
from stringcheck.solvers.parallel import (
    Ballast,
    BranchCurrents,
    CurrentSplit,
    ballast_for_share,
    branch_currents,
    phase_rule,
    split_current,
)


def _hand_split(thresholds, resistances, total):
    """Both branches conducting: v - r_1 i_1 = V_1, v - r_2 i_2 = V_2, i_1 + i_2 = I (linear)."""
    system = np.array([[1.0, -resistances[0], 0.0], [1.0, 0.0, -resistances[1]], [0.0, 1.0, 1.0]])
    return np.linalg.solve(system, [thresholds[0], thresholds[1], total])


def test_two_branches_both_conducting_match_the_hand_solution():
    # Kirchhoff: v = V_1 + r_1 i_1 = V_2 + r_2 i_2, i_1 + i_2 = I (three linear equations),
    # branch values of our own invention.
    thresholds, resistances, total = [1.62, 1.70], [4e-3, 2.5e-3], 120.0
    voltage, first, second = _hand_split(thresholds, resistances, total)
    assert first > 0 and second > 0
    split = split_current(thresholds, resistances, total)
    assert isinstance(split, CurrentSplit)
    np.testing.assert_allclose(split.currents, [first, second], rtol=1e-12)
    assert math.isclose(split.forward_voltage, voltage, rel_tol=1e-13)


def test_two_branches_one_not_conducting_match_the_hand_solution():
    # The linear system then gives i_2 < 0: the second branch carries nothing, the first all
    # of I, and v = V_1 + r_1 I < V_2.
    thresholds, resistances, total = [1.62, 1.90], [4e-3, 2.5e-3], 40.0
    assert _hand_split(thresholds, resistances, total)[2] < 0
    split = split_current(thresholds, resistances, total)
    np.testing.assert_array_equal(split.currents, [total, 0.0])
    assert math.isclose(split.forward_voltage, 1.62 + 4e-3 * total, rel_tol=1e-14)
    assert split.forward_voltage < thresholds[1]


def _quad_branch_currents(thresholds, resistances, average, waveform):
    """Independent reference: brentq for the common voltage at each instant, scipy quad over
    the conducting half period of a half-sine."""
    peak = peak_factor(waveform) * average

    def split_at(current):
        if current <= 0:
            return np.zeros(len(thresholds))

        def excess(voltage):
            return np.sum(np.maximum(voltage - thresholds, 0.0) / resistances) - current

        high = np.max(thresholds) + current * np.max(resistances)
        voltage = brentq(excess, np.min(thresholds), high, xtol=1e-14, rtol=1e-15)
        return np.maximum(voltage - thresholds, 0.0) / resistances

    # The integrand has a kink where a branch starts to conduct (group current
    # sum_b max(V_c - V_b, 0) / r_b): tell quad where, so that it meets its tolerance.
    onsets = [np.sum(np.maximum(level - thresholds, 0.0) / resistances) for level in thresholds]
    kinks = sorted({math.asin(i / peak) for i in onsets if 0 < i < peak})
    kinks = kinks + [math.pi - k for k in kinks] if waveform == "half-sine" else []
    result = []
    for branch in range(len(thresholds)):
        def instant(theta, power):
            return split_at(peak * math.sin(theta))[branch] ** power

        options = dict(epsabs=0, epsrel=1e-11, limit=200, points=kinks or None)
        mean = quad(instant, 0, math.pi, args=(1,), **options)[0]
        square = quad(instant, 0, math.pi, args=(2,), **options)[0]
        result.append((mean / (2 * math.pi), math.sqrt(square / (2 * math.pi))))
    return np.array(result), split_at(peak)


@pytest.mark.parametrize("thresholds, resistances, average", [
    # Branches 2 and 3 start conducting part-way up the sine (at 20 A and 47 A of 78.5 A peak).
    ([0.80, 0.86, 0.95], [3e-3, 2e-3, 4e-3], 25.0),
    # A branch that conducts only near the crest (onset at 99.6 % of the peak).
    ([0.80, 0.80 + 0.0995 * math.pi], [1e-2, 5e-3], 10.0),
    # Five branches, every onset inside the sine, two thresholds equal.
    ([1.62, 1.70, 1.70, 1.75, 1.90], [4e-3, 2.5e-3, 3e-3, 5e-3, 2e-3], 60.0),
])
def test_half_sine_branch_currents_against_quadrature(thresholds, resistances, average):
    # Issue 14 item 8: each branch's I_AV and I_RMS against brentq for the split at each instant
    # and scipy.integrate.quad over the half period (epsrel 1e-11), branch by branch, including
    # the branches that start to conduct part-way up the sine: exact to 1e-9, not to the 1e-4
    # that the group total met with midpoint samples.
    thresholds, resistances = np.array(thresholds), np.array(resistances)
    reference, peak = _quad_branch_currents(thresholds, resistances, average, "half-sine")
    currents = branch_currents(thresholds, resistances, average, "half-sine")
    assert isinstance(currents, BranchCurrents)
    np.testing.assert_allclose(currents.average, reference[:, 0], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(currents.rms, reference[:, 1], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(currents.peak, peak, rtol=1e-12)


def test_phase_rule_reproduces_the_group_moments_and_lies_in_its_pieces():
    # Integrals of the half-sine by hand: mean of I_pk sin = I_pk / pi, mean of (I_pk sin)^2
    # = I_pk^2 / 4 over the period; weights add up to the conducting half.
    thresholds = np.array([[0.80, 0.86, 0.95], [0.9, 0.9, 0.9]])
    resistances = np.array([3e-3, 2e-3, 4e-3])
    rule = phase_rule(thresholds, resistances, np.array([25.0, 0.0]), "half-sine")
    assert rule.currents.shape == rule.weights.shape == (2, 6)
    np.testing.assert_allclose(rule.weights[0].sum(), 0.5, rtol=1e-15)
    np.testing.assert_allclose(rule.currents[0] @ rule.weights[0], 25.0, rtol=1e-14)
    np.testing.assert_allclose(rule.currents[0] ** 2 @ rule.weights[0],
                               (25.0 * math.pi) ** 2 / 4, rtol=1e-14)
    np.testing.assert_array_equal(rule.currents[1], 0.0)
    assert (rule.currents[0] >= 0).all() and (rule.currents[0] <= 25.0 * math.pi).all()


@pytest.mark.parametrize("waveform", ["half-sine", "square", "dc"])
def test_single_branch_takes_the_group_waveform(waveform):
    # One branch: its I_AV, I_RMS and peak are the group's (form and peak factors).
    currents = branch_currents([[1.0]], [[5e-3]], [10.0], waveform)
    assert currents.average.shape == (1, 1)
    np.testing.assert_allclose(currents.average, 10.0, rtol=1e-14)
    np.testing.assert_allclose(currents.rms, form_factor(waveform) * 10.0, rtol=1e-14)
    np.testing.assert_allclose(currents.peak, peak_factor(waveform) * 10.0, rtol=1e-14)


groups = st.integers(min_value=2, max_value=6).flatmap(
    lambda count: st.tuples(
        arrays(float, count, elements=st.floats(min_value=0.6, max_value=2.4)),
        arrays(float, count, elements=st.floats(min_value=5e-4, max_value=2e-2)),
        st.floats(min_value=0.1, max_value=500.0),
        st.sampled_from(["dc", "half-sine", "square"]),
    )
)


@settings(max_examples=60, deadline=None)
@given(groups)
def test_branch_currents_sum_to_the_group_current(group):
    # Kirchhoff's current law at every node of the rule, hence for the averages too: the
    # branch averages add up to I_F(AV) itself (the rule is exact).
    thresholds, resistances, average, waveform = group
    rule = phase_rule(thresholds, resistances, average, waveform)
    instant = split_current(thresholds, resistances, rule.currents)
    np.testing.assert_allclose(instant.currents.sum(axis=-1), rule.currents, rtol=1e-12)
    currents = branch_currents(thresholds, resistances, average, waveform)
    assert math.isclose(currents.average.sum(), average, rel_tol=1e-12)
    assert math.isclose(currents.peak.sum(), peak_factor(waveform) * average, rel_tol=1e-12)
    assert (currents.average >= 0).all() and (currents.rms >= currents.average * (1 - 1e-12)).all()


@settings(max_examples=60, deadline=None)
@given(groups)
def test_the_closed_form_and_the_phase_rule_agree(group):
    # Two exact integrations of the same half-sine, written independently: cumulative sums over
    # the pieces (branch_currents) and the split at the two-node rule of each piece (phase_rule +
    # the water-filling solver).
    thresholds, resistances, average, _ = group
    rule = phase_rule(thresholds, resistances, average, "half-sine")
    split = split_current(thresholds, resistances, rule.currents).currents
    currents = branch_currents(thresholds, resistances, average, "half-sine")
    scale = 1e-12 * average
    np.testing.assert_allclose(currents.average, rule.weights @ split, rtol=1e-9, atol=scale)
    np.testing.assert_allclose(currents.rms ** 2, rule.weights @ split ** 2, rtol=1e-9,
                               atol=scale * average)


def test_a_large_group_keeps_kirchhoff():
    # 2,000 branches x 50 trials (the closed form works on (trials, m) arrays, never on
    # (trials, m, m)); Kirchhoff holds for the averages (they add up to I_F(AV)).
    rng = np.random.default_rng(5)
    thresholds = rng.normal(0.85, 0.03, size=(50, 2000))
    resistances = rng.normal(3e-3, 3e-4, size=(50, 2000))
    currents = branch_currents(thresholds, resistances, 4000.0, "half-sine")
    np.testing.assert_allclose(currents.average.sum(axis=-1), 4000.0, rtol=1e-10)
    assert (currents.average >= 0).all() and (currents.rms >= currents.average).all()


@settings(max_examples=60, deadline=None)
@given(groups, st.randoms(use_true_random=False))
def test_permuting_branches_permutes_the_answer(group, random):
    thresholds, resistances, average, waveform = group
    order = list(range(thresholds.size))
    random.shuffle(order)
    base = branch_currents(thresholds, resistances, average, waveform)
    permuted = branch_currents(thresholds[order], resistances[order], average, waveform)
    for name in ("average", "rms", "peak"):
        np.testing.assert_allclose(getattr(permuted, name), getattr(base, name)[order],
                                   rtol=1e-9, atol=1e-12 * average)


def test_ballast_for_two_branches_matches_the_closed_form():
    # dc, both branches conducting: i_1 = (I (r_2 + R) + dV) / (r_1 + r_2 + 2 R), dV = V_2 - V_1
    # (hand solution of the two-branch equations with R added to each); share = 2 i_1 / I
    # reaches s at R = (s I (r_1 + r_2) - 2 I r_2 - 2 dV) / (2 I (1 - s)).
    thresholds, resistances, total, target = [0.80, 0.85], [2e-3, 3e-3], 30.0, 1.15
    expected = (target * total * 5e-3 - 2 * total * 3e-3 - 2 * 0.05) / (2 * total * (1 - target))
    ballast = ballast_for_share(thresholds, resistances, total, "dc", target)
    assert isinstance(ballast, Ballast)
    assert math.isclose(ballast.resistance, expected, rel_tol=1e-9)
    assert math.isclose(ballast.share, target, rel_tol=1e-9) and ballast.share <= target
    first = (total * (3e-3 + expected) + 0.05) / (5e-3 + 2 * expected)
    assert math.isclose(ballast.loss, expected * (first**2 + (total - first) ** 2), rel_tol=1e-8)


@pytest.mark.parametrize("waveform", ["half-sine", "square", "dc"])
def test_ballast_meets_the_target_or_is_zero_when_already_under(waveform):
    rng = np.random.default_rng(20260214)
    thresholds = rng.normal(0.85, 0.03, size=(40, 4))
    resistances = rng.normal(3e-3, 3e-4, size=(40, 4))
    total = rng.uniform(5.0, 200.0, size=40)
    target = 1.10
    ballast = ballast_for_share(thresholds, resistances, total, waveform, target)
    assert ballast.resistance.shape == (40,)
    above = ballast.unballasted_share > target
    assert above.any() and (~above).any()
    # Above the target: the share with the ballast is the target (from below).
    np.testing.assert_allclose(ballast.share[above], target, rtol=1e-9)
    assert (ballast.share <= target * (1 + 1e-12)).all()
    # Already under: no ballast, no added loss, share unchanged.
    np.testing.assert_array_equal(ballast.resistance[~above], 0.0)
    np.testing.assert_array_equal(ballast.loss[~above], 0.0)
    np.testing.assert_array_equal(ballast.share[~above], ballast.unballasted_share[~above])
    # The loss is R sum_b I_RMS,b^2 of the ballasted group (recomputed here).
    currents = branch_currents(thresholds, resistances + ballast.resistance[:, None], total,
                               waveform)
    np.testing.assert_allclose(ballast.loss, ballast.resistance * (currents.rms**2).sum(axis=-1),
                               rtol=1e-12)
    # A slightly smaller ballast misses the target (the returned one is the smallest).
    if waveform != "half-sine":
        short = branch_currents(thresholds[above], resistances[above]
                                + 0.999 * ballast.resistance[above, None], total[above], waveform)
        assert (short.average.max(axis=-1) / short.average.mean(axis=-1) > target).all()


def test_unreachable_target_gives_infinite_ballast():
    ballast = ballast_for_share([[0.8, 0.9], [0.8, 0.8]], [[2e-3, 2e-3]], 10.0, "dc", 1.0)
    assert ballast.resistance[0] == np.inf and np.isnan(ballast.loss[0])
    # Equal branches already share perfectly: share 1 <= 1, no ballast.
    assert ballast.resistance[1] == 0.0 and ballast.share[1] == 1.0


@settings(max_examples=40, deadline=None)
@given(groups, st.floats(min_value=0.0, max_value=0.05), st.floats(min_value=1.0, max_value=10.0))
def test_more_ballast_never_raises_the_share_of_a_constant_current(group, ballast, factor):
    # Proven in ballast_for_share's notes for one sample (dc, square): d i_b / dR =
    # g_b (i_g - i_b) <= 0 for the largest branch current.
    thresholds, resistances, average, waveform = group
    waveform = "square" if waveform == "half-sine" else waveform
    less = branch_currents(thresholds, resistances + ballast, average, waveform).average
    more = branch_currents(thresholds, resistances + factor * ballast, average, waveform).average
    assert more.max() <= less.max() * (1 + 1e-12)
