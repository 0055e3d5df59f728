"""Tests of stringcheck.physics.leakage."""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from stringcheck.physics.leakage import leakage_current, temperature_factor

temperatures = st.floats(min_value=-55.0, max_value=200.0)
doublings = st.floats(min_value=5.0, max_value=20.0)


def test_leakage_doubles_every_ten_kelvin():
    # Common practice: silicon leakage doubles about every 10 K.
    factors = temperature_factor(
        [5.0, 15.0, 25.0, 35.0, 45.0, 125.0], reference_temperature=25.0, doubling_temperature=10.0
    )
    np.testing.assert_array_equal(factors, [0.25, 0.5, 1.0, 2.0, 4.0, 1024.0])


def test_square_root_law_gives_factor_two_for_four_times_the_voltage():
    # Sze & Ng, Physics of Semiconductor Devices, 3rd ed., ch. 2: generation current ~ W ~ V^(1/2)
    # in an abrupt junction, so four times the voltage doubles the leakage.
    current = leakage_current(
        1e-6,
        4000.0,
        25.0,
        reference_voltage=1000.0,
        reference_temperature=25.0,
        doubling_temperature=10.0,
        voltage_exponent=0.5,
    )
    assert current == 2e-6


def test_square_root_law_matches_abrupt_junction_depletion_width():
    # Sze & Ng, ch. 2: abrupt one-sided junction W = sqrt(2 eps_s (V_bi + V) / (q N_B)) and
    # J_gen = q n_i W / tau_g. Silicon eps_s = 11.9 eps_0, V_bi ~ 0.7 V (from memory); for
    # V >> V_bi the ratio of generation currents is the m = 0.5 law to within V_bi / V.
    permittivity = 11.9 * 8.8541878128e-12
    charge, doping, built_in = 1.602176634e-19, 1e20, 0.7

    def width(voltage):
        return math.sqrt(2.0 * permittivity * (built_in + voltage) / (charge * doping))

    for voltage in (500.0, 1500.0, 3000.0):
        expected = width(voltage) / width(1000.0)
        model = leakage_current(
            1.0,
            voltage,
            25.0,
            reference_voltage=1000.0,
            reference_temperature=25.0,
            doubling_temperature=10.0,
            voltage_exponent=0.5,
        )
        assert math.isclose(model, expected, rel_tol=1e-3)


def test_exponent_zero_is_constant_and_one_is_ohmic():
    # Closed-form limits of I_R,ref (V / V_ref)^m.
    voltages = np.array([0.0, 10.0, 500.0, 2000.0])
    common = dict(reference_voltage=1000.0, reference_temperature=25.0, doubling_temperature=10.0)
    np.testing.assert_array_equal(
        leakage_current(3e-6, voltages, 25.0, voltage_exponent=0.0, **common), 3e-6
    )
    np.testing.assert_allclose(
        leakage_current(3e-6, voltages, 25.0, voltage_exponent=1.0, **common),
        3e-6 * voltages / 1000.0,
        rtol=1e-15,
    )


def test_broadcasts_trials_against_positions():
    currents = np.full((4, 1), 1e-6)
    temperatures_by_position = np.array([25.0, 35.0, 45.0])
    result = leakage_current(
        currents,
        1000.0,
        temperatures_by_position,
        reference_voltage=1000.0,
        reference_temperature=25.0,
        doubling_temperature=10.0,
        voltage_exponent=[0.0, 0.5, 1.0],
    )
    assert result.shape == (4, 3)
    np.testing.assert_allclose(result[0], [1e-6, 2e-6, 4e-6], rtol=1e-15)


def test_nan_propagates():
    result = leakage_current(
        [1e-6, np.nan],
        1000.0,
        [np.nan, 25.0],
        reference_voltage=1000.0,
        reference_temperature=25.0,
        doubling_temperature=10.0,
        voltage_exponent=0.5,
    )
    assert np.isnan(result).all()


@settings(max_examples=100, deadline=None)
@given(temperatures, temperatures, temperatures, doublings)
def test_temperature_factor_composes(first, second, third, doubling):
    # 2^(a/d) 2^(b/d) = 2^((a+b)/d): scaling in two steps equals scaling in one.
    one_step = temperature_factor(third, reference_temperature=first, doubling_temperature=doubling)
    two_steps = temperature_factor(
        second, reference_temperature=first, doubling_temperature=doubling
    ) * temperature_factor(third, reference_temperature=second, doubling_temperature=doubling)
    assert math.isclose(one_step, two_steps, rel_tol=1e-12)


@settings(max_examples=100, deadline=None)
@given(
    st.floats(min_value=1.0, max_value=1e4),
    st.floats(min_value=1.0, max_value=1e4),
    st.floats(min_value=0.0, max_value=1.0),
    temperatures,
    doublings,
)
def test_matches_the_formula_term_by_term(voltage, reference, exponent, temperature, doubling):
    # docs/methods/ formula evaluated independently with the math module.
    expected = 2e-7 * math.pow(voltage / reference, exponent) * math.pow(2.0, (temperature - 25.0) / doubling)
    model = leakage_current(
        2e-7,
        voltage,
        temperature,
        reference_voltage=reference,
        reference_temperature=25.0,
        doubling_temperature=doubling,
        voltage_exponent=exponent,
    )
    assert math.isclose(model, expected, rel_tol=1e-12)
