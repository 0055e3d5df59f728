"""Tests of stringcheck.physics.junction_capacitance (the junction law, its charge and its fit)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.integrate import quad

from stringcheck.physics.junction_capacitance import (
    fit_junction_law,
    junction_capacitance,
    junction_charge,
    voltage_at_charge,
)


@pytest.mark.parametrize("gamma", [0.0, 1.0 / 3.0, 0.5, 0.9, 1.0 - 1e-9, 1.0])
@pytest.mark.parametrize("phi", [0.7, 1.2])
def test_charge_is_the_quadrature_of_the_capacitance(gamma, phi):
    # Outside reference: scipy.integrate.quad of C_j0 / (1 + V/phi)^gamma (Sze and Ng, 3rd ed.,
    # ch. 2) from 0 to V, against the closed form of the charge.
    c0 = 400e-12
    for voltage in (0.01, 1.0, 37.0, 400.0, 6500.0):
        expected, _ = quad(lambda v: c0 / (1.0 + v / phi) ** gamma, 0.0, voltage,
                           epsabs=0.0, epsrel=1e-13, limit=200)
        got = junction_charge(voltage, c0, built_in_potential=phi, grading_exponent=gamma)
        assert math.isclose(float(got), expected, rel_tol=1e-10), (voltage, got, expected)


def test_capacitance_follows_the_law_and_a_zero_exponent_is_constant():
    # C_j(V) = C_j0 (1 + V/phi)^-gamma written out (Sze and Ng, ch. 2): an abrupt junction
    # (gamma = 1/2) at V = 3 phi has C_j0 / 2.
    assert math.isclose(float(junction_capacitance(3.0, 1e-9, built_in_potential=1.0,
                                                   grading_exponent=0.5)), 0.5e-9, rel_tol=1e-14)
    np.testing.assert_array_equal(
        junction_capacitance(np.array([0.0, 10.0, 1e4]), 5e-11, built_in_potential=0.7,
                             grading_exponent=0.0), 5e-11)
    # gamma = 0: the charge is C V exactly as the constant-capacitance model has it.
    assert math.isclose(float(junction_charge(800.0, 5e-11, built_in_potential=0.7,
                                              grading_exponent=0.0)), 4e-8, rel_tol=1e-14)


@given(st.floats(0.0, 1.0), st.floats(1e-3, 1e5), st.floats(0.3, 3.0))
def test_voltage_at_charge_inverts_the_charge(gamma, voltage, phi):
    charge = junction_charge(voltage, 1e-10, built_in_potential=phi, grading_exponent=gamma)
    back = voltage_at_charge(charge, 1e-10, built_in_potential=phi, grading_exponent=gamma)
    assert math.isclose(float(back), voltage, rel_tol=1e-9)


def test_two_rows_fit_the_closed_form_with_phi_held():
    # Closed form through two rows (the law's logarithm is a line in log1p(V/phi)):
    # gamma = ln(C1/C2) / ln((1 + V2/phi)/(1 + V1/phi)), C_j0 = C1 (1 + V1/phi)^gamma.
    phi, (v1, c1), (v2, c2) = 1.1, (1.0, 380e-12), (400.0, 40e-12)
    gamma = math.log(c1 / c2) / math.log((1 + v2 / phi) / (1 + v1 / phi))
    c0 = c1 * (1 + v1 / phi) ** gamma
    law = fit_junction_law([v1, v2], [c1, c2], built_in_potential=phi, default_exponent=0.5)
    assert math.isclose(float(law.grading_exponent), gamma, rel_tol=1e-12)
    assert math.isclose(float(law.zero_bias_capacitance), c0, rel_tol=1e-12)
    assert float(law.residual) < 1e-12
    # The fitted law passes through both rows.
    np.testing.assert_allclose(junction_capacitance([v1, v2], law.zero_bias_capacitance,
                                                    built_in_potential=phi,
                                                    grading_exponent=law.grading_exponent),
                               [c1, c2], rtol=1e-12)


def test_rows_on_a_law_give_it_back_and_one_row_takes_the_default_exponent():
    voltages = np.array([0.0, 10.0, 100.0, 600.0])
    rows = junction_capacitance(voltages, 2e-9, built_in_potential=0.7, grading_exponent=1 / 3)
    law = fit_junction_law(voltages, rows, built_in_potential=0.7, default_exponent=0.5)
    assert math.isclose(float(law.grading_exponent), 1 / 3, rel_tol=1e-10)
    assert math.isclose(float(law.zero_bias_capacitance), 2e-9, rel_tol=1e-10)
    one = fit_junction_law([400.0], [40e-12], built_in_potential=1.0, default_exponent=0.5)
    assert float(one.grading_exponent) == 0.5
    assert math.isclose(float(one.zero_bias_capacitance), 40e-12 * math.sqrt(401.0),
                        rel_tol=1e-12)


def test_fit_is_vectorized_over_leading_axes():
    voltages = np.array([[1.0, 400.0], [1.0, 400.0]])
    rows = np.array([[380e-12, 40e-12], [300e-12, 30e-12]])
    law = fit_junction_law(voltages, rows, built_in_potential=1.1, default_exponent=0.5)
    assert law.zero_bias_capacitance.shape == (2,)
    single = fit_junction_law(voltages[1], rows[1], built_in_potential=1.1, default_exponent=0.5)
    assert math.isclose(float(law.grading_exponent[1]), float(single.grading_exponent))
