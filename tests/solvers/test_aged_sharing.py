"""End-of-life sharing (solvers.aged_sharing) against closed forms and scipy's own solves."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq, fsolve

from stringcheck.solvers.aged_sharing import (
    solve_dynamic_sharing_dc_bias,
    solve_static_sharing_voltage_coefficient,
)


def test_minus_100_ppm_per_volt_at_1_kv_is_minus_10_percent():
    # R(V) = R0 (1 + gamma V): gamma = -100e-6 /V at V = 1000 V gives R = 0.9 R0, -10 %. Three
    # equal stages across 3 kV take 1 kV each (symmetry), so the string current is
    # 1000 V / (0.9 x 10 MOhm) (Ohm's law), leakage 0.
    solution = solve_static_sharing_voltage_coefficient(
        3000.0, np.full(3, 10e6), np.zeros(3), reference_voltage=1000.0, voltage_exponent=0.5,
        voltage_coefficient=-100e-6)
    assert np.allclose(solution.voltages, 1000.0, rtol=1e-12)
    assert solution.string_current == pytest.approx(1000.0 / (0.9 * 10e6), rel=1e-9)
    assert bool(solution.converged)


def test_static_solve_against_scipy_fsolve():
    # Our own nonlinear solve (scipy fsolve on V_1..V_n and I): I = V_k / (R_k (1 + gamma V_k))
    # + G_s,k V_k + c_k V_k^m, sum V_k = V_s (Kirchhoff), for unequal resistors and leakages.
    resistance = np.array([4.7e6, 5.1e6, 4.3e6, 4.9e6])
    leakage = np.array([20e-6, 2e-6, 60e-6, 8e-6])  # at 1 kV
    shunt = np.array([0.0, 1e-9, 0.0, 0.0])
    exponent, gamma, total = 0.5, -300e-6, 4000.0
    coefficient = leakage / 1000.0 ** exponent
    solution = solve_static_sharing_voltage_coefficient(
        total, resistance, leakage, reference_voltage=1000.0, voltage_exponent=exponent,
        voltage_coefficient=gamma, shunt_conductance=shunt)

    def equations(x):
        voltages, current = x[:-1], x[-1] * 1e-4
        stage = voltages / (resistance * (1 + gamma * voltages)) + shunt * voltages + \
            coefficient * np.abs(voltages) ** exponent
        return np.append((stage - current) * 1e4, (voltages.sum() - total) / total)

    start = np.append(np.full(4, total / 4), 2.0)
    reference = fsolve(equations, start, xtol=1e-13)
    assert np.allclose(solution.voltages, reference[:-1], rtol=1e-8)
    assert bool(solution.converged)
    # The coefficient matters here: the linear solve differs by more than the tolerance.
    linear = solve_static_sharing_voltage_coefficient(
        total, resistance, leakage, reference_voltage=1000.0, voltage_exponent=exponent,
        voltage_coefficient=0.0, shunt_conductance=shunt)
    assert np.max(np.abs(linear.voltages - solution.voltages)) > 1.0


def test_dc_bias_charge_balance_against_our_own_solver():
    # Our own solve: with C(V) = C0 (1 - b V / V_r) each stage holds
    # Q_k(V) = C0 (V - b V^2 / (2 V_r)) + c_j V; after the common extracted charge q,
    # Q_k(V_k) = max(q - Q_rr,k, 0), and sum V_k = V_s. Nested scipy brentq.
    charges = np.array([80e-9, 100e-9, 140e-9])
    grading, junction, loss, rated, total = 1e-9, 10e-12, 0.3, 2000.0, 3000.0
    solution = solve_dynamic_sharing_dc_bias(total, charges, grading, junction, dc_bias_loss=loss,
                                             rated_voltage=rated)

    def stage_voltage(excess):
        if excess <= 0:
            return 0.0
        return brentq(lambda v: grading * (v - loss * v * v / (2 * rated)) + junction * v - excess,
                      0.0, rated / loss, xtol=1e-12)  # Q_k rises up to V_r / b

    top = charges.max() + (grading + junction) * total  # every stage at V_s or more
    level = brentq(lambda q: sum(stage_voltage(q - c) for c in charges) - total, 0.0, top,
                   xtol=1e-20)
    expected = np.array([stage_voltage(level - c) for c in charges])
    assert np.allclose(solution.voltages, expected, rtol=1e-8)
    assert solution.voltages.sum() == pytest.approx(total, rel=1e-10)
