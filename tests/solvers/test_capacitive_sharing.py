"""Tests of stringcheck.solvers.capacitive_sharing (charge balance with a nonlinear C_j(V))."""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given
from hypothesis import strategies as st
from scipy.optimize import brentq

from stringcheck.physics.junction_capacitance import junction_charge
from stringcheck.solvers.capacitive_sharing import solve_capacitive_sharing
from stringcheck.solvers.series_dynamic import solve_dynamic_sharing


def test_two_sqrt_charge_devices_issue_check_value():
    # The issue's check value, derived here: two capacitive devices whose charge scales as sqrt(V)
    # (an abrupt junction, gamma = 1/2, with phi -> 0: Q_c = 2 C_j0 sqrt(phi V)), 18 nC and
    # 20 nC at 400 V, no grading capacitor, 800 V across the pair. The same charge flows through
    # both, so 18 sqrt(V1 / 400) = 20 sqrt(V2 / 400) with V1 + V2 = 800:
    # V1 / V2 = (20 / 18)^2 = 400 / 324, V1 = 800 * 400 / 724 = 441.99 V, +10.5 % over 400 V.
    phi = 1e-12
    def c0(charge):
        return charge / (2.0 * phi * (math.sqrt(1.0 + 400.0 / phi) - 1.0))
    sharing = solve_capacitive_sharing(800.0, [0.0, 0.0], 0.0, [c0(18e-9), c0(20e-9)],
                                       built_in_potential=phi, grading_exponent=0.5)
    v1 = 800.0 * 400.0 / (400.0 + 324.0)
    # phi = 1e-12 V leaves a relative difference of order sqrt(phi / V) ~ 5e-8 from pure sqrt(V).
    assert math.isclose(sharing.voltages[0], v1, rel_tol=1e-6)
    assert math.isclose(sharing.voltages[0] / 400.0 - 1.0, 0.105, abs_tol=1e-3)
    assert math.isclose(sharing.voltages.sum(), 800.0, rel_tol=1e-11)
    assert bool(sharing.converged)


def _brentq_sharing(total, thresholds, grading, c0, phi, gamma):
    """Independent per-trial solution by scipy's brentq, nested: each stage's V_k(Q) by brentq on
    C_g V + Q_c(V) = Q - Q_rr, and the common charge Q by brentq on sum V_k(Q) = V_s."""

    def stage_voltage(k, held):
        if held <= 0:
            return 0.0
        def f(v):
            return grading[k] * v + float(junction_charge(v, c0[k], built_in_potential=phi[k],
                                                          grading_exponent=gamma[k])) - held
        high = 1.0
        while f(high) < 0:
            high *= 2.0
        return brentq(f, 0.0, high, xtol=1e-300, rtol=4 * np.finfo(float).eps)

    def excess(q):
        return sum(stage_voltage(k, q - thresholds[k]) for k in range(len(thresholds))) - total

    high = thresholds.max() + 1e-12
    while excess(high) < 0:
        high = thresholds.max() + 2.0 * (high - thresholds.max())
    q = brentq(excess, thresholds.min(), high, xtol=1e-300, rtol=4 * np.finfo(float).eps)
    return np.array([stage_voltage(k, q - thresholds[k]) for k in range(len(thresholds))])


def test_agrees_with_brentq_trial_by_trial():
    # Outside reference: scipy.optimize.brentq, nested, on each of 12 random trials of 5 stages
    # (silicon stored charge, grading capacitors and junctions of several laws).
    rng = np.random.default_rng(7)
    trials, stages = 12, 5
    total = rng.uniform(500.0, 5000.0, trials)
    thresholds = rng.uniform(0.0, 200e-9, (trials, stages))
    thresholds[:, 0] = 0.0  # a capacitive device in every trial
    grading = rng.choice([0.0, 100e-12, 1e-9], (trials, stages))
    c0 = rng.uniform(100e-12, 2e-9, (trials, stages))
    phi = rng.uniform(0.5, 1.5, (trials, stages))
    gamma = rng.uniform(0.0, 1.0, (trials, stages))
    sharing = solve_capacitive_sharing(total, thresholds, grading, c0, built_in_potential=phi,
                                       grading_exponent=gamma)
    assert sharing.converged.all()
    for trial in range(trials):
        expected = _brentq_sharing(total[trial], thresholds[trial], grading[trial], c0[trial],
                                   phi[trial], gamma[trial])
        np.testing.assert_allclose(sharing.voltages[trial], expected, rtol=1e-8,
                                   atol=1e-9 * total[trial])


def test_zero_exponent_is_the_linear_charge_balance():
    # gamma = 0: C_j = C_j0, the linear balance solved exactly by water filling (series_dynamic).
    rng = np.random.default_rng(3)
    thresholds = rng.uniform(1e-6, 2e-6, (50, 8))
    grading = rng.uniform(1e-9, 2e-9, (50, 8))
    sharing = solve_capacitive_sharing(8000.0, thresholds, grading, 60e-12,
                                       built_in_potential=0.7, grading_exponent=0.0)
    linear = solve_dynamic_sharing(8000.0, thresholds, grading + 60e-12)
    np.testing.assert_allclose(sharing.voltages, linear.voltages, rtol=1e-9, atol=1e-7)
    np.testing.assert_allclose(sharing.extracted_charge, linear.extracted_charge, rtol=1e-10)


@given(st.lists(st.tuples(st.floats(0.0, 1e-7), st.floats(0.0, 2e-9), st.floats(1e-11, 1e-9),
                          st.floats(0.0, 1.0)), min_size=1, max_size=6),
       st.floats(1.0, 2e4), st.randoms(use_true_random=False))
def test_voltages_sum_to_the_string_voltage_in_any_order(stages, total, random):
    thresholds, grading, c0, gamma = (np.array(column) for column in zip(*stages))
    sharing = solve_capacitive_sharing(total, thresholds, grading, c0, built_in_potential=1.0,
                                       grading_exponent=gamma)
    assert bool(sharing.converged)
    assert np.all(sharing.voltages >= 0)
    assert math.isclose(sharing.voltages.sum(), total, rel_tol=1e-9)
    order = list(range(len(stages)))
    random.shuffle(order)
    shuffled = solve_capacitive_sharing(total, thresholds[order], grading[order], c0[order],
                                        built_in_potential=1.0, grading_exponent=gamma[order])
    np.testing.assert_allclose(shuffled.voltages, sharing.voltages[order], rtol=1e-8,
                               atol=1e-9 * total)
    # The device with least stored charge never takes less than one with more of it and the
    # same grading and junction: here, compare the stage of least Q_rr among equal stages.
    same = solve_capacitive_sharing(total, thresholds, grading[0], c0[0], built_in_potential=1.0,
                                    grading_exponent=gamma[0])
    fastest = int(np.argmin(thresholds))
    assert same.voltages[fastest] >= same.voltages.max() * (1 - 1e-9)


def test_a_nan_row_is_flagged_and_the_others_solved():
    sharing = solve_capacitive_sharing([800.0, np.nan], [[0.0, 1e-9], [0.0, 1e-9]], 0.0, 50e-12,
                                       built_in_potential=1.0, grading_exponent=0.5)
    assert sharing.converged.tolist() == [True, False]
    assert math.isclose(sharing.voltages[0].sum(), 800.0, rel_tol=1e-11)
