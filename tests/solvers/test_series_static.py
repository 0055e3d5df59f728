"""Tests of stringcheck.solvers.series_static (steady blocking with grading resistors)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.optimize import brentq, fsolve

from stringcheck.physics.grading import worst_case_static_resistance
from stringcheck.solvers.series_static import StaticSharing, solve_static_sharing, stage_voltage

REFERENCE_VOLTAGE = 1000.0


def _reference_solution(string_voltage, conductance, leakage, exponent):
    """Independent solution by nested scipy brentq: stage inverse inside, string equation outside."""
    coefficient = leakage / REFERENCE_VOLTAGE**exponent

    def stage(current, g, c, m):
        def excess(voltage):
            return g * voltage + c * abs(voltage) ** m - current

        low = -c / g - 1.0 if m == 0 else 0.0
        high = current / g + 1.0 if g > 0 else 2.0 * (current / c) ** (1.0 / m)
        return brentq(excess, low, high, xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=500)

    def voltages(current):
        return np.array([stage(current, *row) for row in zip(conductance, coefficient, exponent)])

    high = np.sum(conductance * string_voltage + coefficient * string_voltage**exponent)
    current = brentq(
        lambda value: voltages(value).sum() - string_voltage,
        1e-300,
        high,
        xtol=1e-300,
        rtol=4 * np.finfo(float).eps,
        maxiter=500,
    )
    return voltages(current), current


@pytest.mark.parametrize("count", [2, 3, 10, 50])
@pytest.mark.parametrize("exponent", [0.0, 1e-300])
def test_textbook_worst_corner_puts_exactly_the_limit_on_the_low_leakage_device(count, exponent):
    # Rashid, Power Electronics, 3rd ed., ch. 2 (series-connected diodes): one device at the
    # minimum leakage, n - 1 at the maximum, R = (n V_DM - V_s) / ((n - 1) dI_R) puts V_DM on
    # the low-leakage device. Operating point of our own: V_DM = 1 kV, 0.8 kV per device,
    # leakage 1 uA .. 5 uA. Exponent 1e-300 is constant leakage to within a double but takes
    # the iterative path instead of the closed form.
    limit, string_voltage = 1000.0, 800.0 * count
    low, high = 1e-6, 5e-6
    resistance = worst_case_static_resistance(count, limit, string_voltage, high - low)
    leakage = np.full(count, high)
    leakage[0] = low
    sharing = solve_static_sharing(
        string_voltage,
        1.0 / resistance,
        leakage,
        reference_voltage=REFERENCE_VOLTAGE,
        voltage_exponent=exponent,
    )
    assert sharing.converged
    assert math.isclose(sharing.voltages[0], limit, rel_tol=1e-12)
    assert math.isclose(sharing.voltages.sum(), string_voltage, rel_tol=1e-12)


def test_constant_leakage_closed_form_matches_a_linear_solve():
    # Independent solver: numpy.linalg.solve on the (n + 1) x (n + 1) linear system
    # G_k V_k - I = -I_R,k, sum_k V_k = V_s.
    rng = np.random.default_rng(11)
    count = 6
    conductance = 1.0 / rng.uniform(1e6, 3e6, count)
    leakage = rng.uniform(1e-7, 5e-6, count)
    matrix = np.zeros((count + 1, count + 1))
    matrix[:count, :count] = np.diag(conductance)
    matrix[:count, count] = -1.0
    matrix[count, :count] = 1.0
    solution = np.linalg.solve(matrix, np.append(-leakage, 12e3))
    sharing = solve_static_sharing(
        12e3, conductance, leakage, reference_voltage=REFERENCE_VOLTAGE, voltage_exponent=0.0
    )
    np.testing.assert_allclose(sharing.voltages, solution[:count], rtol=1e-12)
    assert math.isclose(sharing.string_current, solution[count], rel_tol=1e-12)
    assert sharing.iterations == 0 and sharing.converged


@pytest.mark.parametrize("mixed", [False, True])
def test_matches_nested_brentq_on_random_strings(mixed):
    # Independent solver: scipy brentq for each stage inverse and for the string equation.
    rng = np.random.default_rng(5 + mixed)
    trials, count = 30, 5
    conductance = 1.0 / 10.0 ** rng.uniform(5.5, 7.5, (trials, count))
    leakage = 10.0 ** rng.uniform(-7.0, -5.0, (trials, count))
    if mixed:
        exponent = rng.choice([0.0, 0.3, 0.5, 0.8, 1.0], (trials, count))
    else:
        exponent = np.full((trials, count), 0.5)
    voltages = rng.uniform(2e3, 8e3, trials)
    sharing = solve_static_sharing(
        voltages, conductance, leakage, reference_voltage=REFERENCE_VOLTAGE, voltage_exponent=exponent
    )
    assert sharing.converged.all()
    np.testing.assert_allclose(sharing.voltages.sum(axis=-1), voltages, rtol=1e-12)
    for row in range(trials):
        expected, current = _reference_solution(
            voltages[row], conductance[row], leakage[row], exponent[row]
        )
        np.testing.assert_allclose(sharing.voltages[row], expected, rtol=1e-9)
        assert math.isclose(sharing.string_current[row], current, rel_tol=1e-9)


def test_matches_fsolve_on_the_whole_system():
    # Independent solver: scipy fsolve on the n + 1 equations G_k V_k + c_k V_k^m_k = I,
    # sum V_k = V_s, for a mixed string (m = 0.5 and m = 0.8 parts).
    conductance = 1.0 / np.array([2.2e6, 2.0e6, 2.4e6, 2.2e6])
    leakage = np.array([2e-6, 0.5e-6, 4e-6, 1e-6])
    exponent = np.array([0.5, 0.5, 0.8, 0.8])
    coefficient = leakage / REFERENCE_VOLTAGE**exponent
    string_voltage = 6000.0

    def equations(unknowns):
        voltages, current = unknowns[:-1], unknowns[-1]
        stages = conductance * voltages + coefficient * np.abs(voltages) ** exponent - current
        return np.append(stages * 1e6, voltages.sum() / string_voltage - 1.0)

    start = np.append(np.full(4, string_voltage / 4), 1e-3)
    solution = fsolve(equations, start, xtol=1e-14)
    sharing = solve_static_sharing(
        string_voltage,
        conductance,
        leakage,
        reference_voltage=REFERENCE_VOLTAGE,
        voltage_exponent=exponent,
    )
    np.testing.assert_allclose(sharing.voltages, solution[:4], rtol=1e-9)
    assert math.isclose(sharing.string_current, solution[4], rel_tol=1e-9)


def test_without_resistors_square_root_leakage_closed_form():
    # G = 0, m = 0.5: c_k V_k^(1/2) = I gives V_k = (I / c_k)^2, so V_k is proportional to
    # 1 / c_k^2 (closed form). Leakage at V_ref in the ratio 1 : 2 : 4.
    leakage = np.array([1e-6, 2e-6, 4e-6])
    sharing = solve_static_sharing(
        2100.0, 0.0, leakage, reference_voltage=REFERENCE_VOLTAGE, voltage_exponent=0.5
    )
    np.testing.assert_allclose(sharing.voltages, 2100.0 * np.array([16, 4, 1]) / 21, rtol=1e-12)
    assert math.isclose(
        sharing.string_current, 1e-6 * math.sqrt(1600.0 / REFERENCE_VOLTAGE), rel_tol=1e-12
    )


def test_stage_inverse_for_square_root_leakage_is_the_root_of_a_quadratic():
    # G V + c V^(1/2) = I is a quadratic in x = V^(1/2): x = (-c + sqrt(c^2 + 4 G I)) / (2 G).
    rng = np.random.default_rng(3)
    conductance = 1.0 / 10.0 ** rng.uniform(5, 8, 200)
    leakage = 10.0 ** rng.uniform(-8, -4, 200)
    current = 10.0 ** rng.uniform(-6, -2, 200)
    coefficient = leakage / math.sqrt(REFERENCE_VOLTAGE)
    # Written without cancellation: x = 2 I / (c + sqrt(c^2 + 4 G I)).
    root = 2.0 * current / (coefficient + np.sqrt(coefficient**2 + 4.0 * conductance * current))
    inverse = stage_voltage(
        current,
        conductance,
        leakage,
        reference_voltage=REFERENCE_VOLTAGE,
        voltage_exponent=0.5,
    )
    np.testing.assert_allclose(inverse, root**2, rtol=1e-13)


def test_stage_inverse_linear_limits():
    # m = 0: V = (I - I_R) / G; m = 1: V = I / (G + I_R / V_ref) (closed forms).
    np.testing.assert_allclose(
        stage_voltage(
            3e-3, [1e-6, 1e-6], 1e-3, reference_voltage=REFERENCE_VOLTAGE, voltage_exponent=[0, 1]
        ),
        [2e3, 3e-3 / 2e-6],
        rtol=1e-15,
    )


def test_result_type_and_shapes():
    sharing = solve_static_sharing(
        [5e3, 6e3],
        np.full((2, 4), 1e-6),
        np.full(4, 1e-6),
        reference_voltage=REFERENCE_VOLTAGE,
        voltage_exponent=[0.5, 0.5, 0.0, 1.0],
    )
    assert isinstance(sharing, StaticSharing)
    assert sharing.voltages.shape == (2, 4)
    assert sharing.string_current.shape == (2,) and sharing.converged.shape == (2,)
    assert isinstance(sharing.iterations, int)
    scalar = solve_static_sharing(
        5e3, 1e-6, [1e-6, 2e-6], reference_voltage=REFERENCE_VOLTAGE, voltage_exponent=0.5
    )
    assert scalar.voltages.shape == (2,) and scalar.string_current.shape == ()


@pytest.mark.parametrize("exponent", [0.0, 0.5])
def test_nan_stays_in_its_trial(exponent):
    sharing = solve_static_sharing(
        5e3,
        1e-6,
        [[1e-6, np.nan], [1e-6, 2e-6]],
        reference_voltage=REFERENCE_VOLTAGE,
        voltage_exponent=exponent,
    )
    assert np.isnan(sharing.voltages[0]).all() and not sharing.converged[0]
    assert sharing.converged[1] and math.isclose(sharing.voltages[1].sum(), 5e3, rel_tol=1e-12)


def test_scaling_unequal_resistors_by_a_common_factor_can_lower_the_worst_voltage():
    # Why the resistance properties below use an equal resistance, or lower every conductance by
    # a common amount: with constant leakage (closed form I = (V_s + sum c R) / sum R),
    # R = (10, 1) ohm, c = (1, 0) A, V_s = 11 V gives I = 21/11 A, V = (100/11, 21/11) V;
    # doubling both resistors gives I = 31/22 A, V = (90/11, 31/11) V: the worst stage falls.
    def solve(resistances):
        return solve_static_sharing(
            11.0,
            1.0 / np.array(resistances),
            [1.0, 0.0],
            reference_voltage=1.0,
            voltage_exponent=0.0,
        ).voltages

    before, after = solve([10.0, 1.0]), solve([20.0, 2.0])
    np.testing.assert_allclose(before, [100 / 11, 21 / 11], rtol=1e-14)
    np.testing.assert_allclose(after, [90 / 11, 31 / 11], rtol=1e-14)
    assert after.max() < before.max()


exponents = st.one_of(st.just(0.0), st.floats(min_value=0.1, max_value=1.0))
strings = st.integers(min_value=2, max_value=8).flatmap(
    lambda count: st.tuples(
        st.floats(min_value=1e3, max_value=1e5),
        arrays(float, count, elements=st.floats(min_value=1e5, max_value=1e8)),
        arrays(float, count, elements=st.floats(min_value=1e-9, max_value=1e-4)),
        arrays(float, count, elements=exponents),
    )
)


def _solve(string_voltage, resistances, leakage, exponent):
    return solve_static_sharing(
        string_voltage,
        1.0 / resistances,
        leakage,
        reference_voltage=REFERENCE_VOLTAGE,
        voltage_exponent=exponent,
    )


@settings(max_examples=100, deadline=None)
@given(strings)
def test_voltages_sum_to_the_string_voltage(string):
    # Conservation (Kirchhoff's voltage law around the string); every stage carries the same I.
    string_voltage, resistances, leakage, exponent = string
    sharing = _solve(string_voltage, resistances, leakage, exponent)
    assert sharing.converged
    assert math.isclose(sharing.voltages.sum(), string_voltage, rel_tol=1e-12)
    coefficient = leakage / REFERENCE_VOLTAGE**exponent
    stage_currents = sharing.voltages / resistances + coefficient * np.abs(sharing.voltages) ** exponent
    np.testing.assert_allclose(stage_currents, sharing.string_current, rtol=1e-9)


@settings(max_examples=100, deadline=None)
@given(strings, st.randoms(use_true_random=False))
def test_permuting_positions_permutes_the_answer(string, random):
    string_voltage, resistances, leakage, exponent = string
    order = list(range(resistances.size))
    random.shuffle(order)
    sharing = _solve(string_voltage, resistances, leakage, exponent)
    permuted = _solve(string_voltage, resistances[order], leakage[order], exponent[order])
    np.testing.assert_allclose(
        permuted.voltages, sharing.voltages[order], rtol=1e-9, atol=1e-11 * string_voltage
    )


@settings(max_examples=100, deadline=None)
@given(strings, st.floats(min_value=1.0, max_value=100.0))
def test_raising_an_equal_grading_resistance_never_lowers_the_worst_voltage(string, factor):
    # Equal resistance R on every stage, scaled by a common factor > 1 (see the proof below:
    # G -> G / factor lowers every conductance by the same amount).
    string_voltage, resistances, leakage, exponent = string
    equal = np.full_like(resistances, resistances[0])
    before = _solve(string_voltage, equal, leakage, exponent).voltages.max()
    after = _solve(string_voltage, factor * equal, leakage, exponent).voltages.max()
    assert after >= before - 1e-10 * string_voltage


@settings(max_examples=100, deadline=None)
@given(strings, st.floats(min_value=0.0, max_value=0.999))
def test_lowering_every_conductance_by_a_common_amount_never_lowers_the_worst_voltage(
    string, fraction
):
    # Proof for G_k -> G_k - g (any unequal G_k, any increasing leakage f_k): with
    # D_k = G_k + f_k'(V_k) > 0, G_k V_k + f_k(V_k) = I and sum_k dV_k = 0 give
    # dI/dg = -(sum_k V_k / D_k) / (sum_k 1 / D_k) and dV_k/dg = (V_k - mean) / D_k, with
    # mean = V weighted by 1 / D_k, so the stage with the largest V_k has dV_k/dg >= 0.
    string_voltage, resistances, leakage, exponent = string
    conductance = 1.0 / resistances
    lowered = conductance - fraction * conductance.min()
    before = _solve(string_voltage, resistances, leakage, exponent).voltages.max()
    after = _solve(string_voltage, 1.0 / lowered, leakage, exponent).voltages.max()
    assert after >= before - 1e-10 * string_voltage


# Found by the fuzzing of tests/checks/test_fuzz.py (fixed).
_STALLED = dict(reference_voltage=1000.0, voltage_exponent=0.01)


def test_static_solver_never_calls_a_wrong_answer_converged():
    # Two stages without resistors, leakage 125 nA and 0.125 nA at 1 kV, m = 0.01; our own values,
    # found by the fuzzing of wide value ranges. Kirchhoff: the stage voltages sum to V_s.
    solution = solve_static_sharing(1000.0, [0.0, 0.0], [1.25e-7, 1.25e-10], **_STALLED)
    total = float(solution.voltages.sum())
    assert not solution.converged or total == pytest.approx(1000.0, rel=1e-9), (
        solution.converged, solution.voltages)
