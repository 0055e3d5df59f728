"""MIL-HDBK-217F Notice 2 section 6.1 (Diodes, Low Frequency): the factors and a value by hand."""

from __future__ import annotations

import math

import numpy as np
import pytest

from stringcheck.design.model import (
    RELIABILITY_CONTACTS,
    RELIABILITY_DEVICE_TYPES,
    RELIABILITY_ENVIRONMENTS,
    RELIABILITY_QUALITIES,
)
from stringcheck.physics.failure_rate import (
    BASE_RATES,
    CONTACT_FACTORS,
    ENVIRONMENT_FACTORS,
    QUALITY_FACTORS,
    diode_failure_rate,
    stress_factor,
    temperature_factor,
)


def test_worked_value_by_hand():
    # MIL-HDBK-217F N2, section 6.1: lambda_p = lambda_b pi_T pi_S pi_C pi_Q pi_E.
    # A power rectifier (lambda_b = 0.0030 / 10^6 h, from memory) at T_j = 100 degC and
    # V_S = 0.5, metallurgically bonded (pi_C = 1), quality "Lower" (pi_Q = 5.5), ground fixed
    # (pi_E = 6.0). By hand:
    #   pi_T = exp(-3091 (1/373 - 1/298)) = exp(-3091 x (-6.74740e-4)) = exp(2.08562) = 8.0496
    #   pi_S = 0.5^2.43 = exp(2.43 ln 0.5) = exp(-1.68434) = 0.18557
    #   lambda_p = 0.0030 x 8.0496 x 0.18557 x 1 x 5.5 x 6.0 = 0.14788 / 10^6 h = 147.9 FIT
    assert temperature_factor(100.0) == pytest.approx(8.0496, rel=1e-4)
    assert stress_factor(0.5) == pytest.approx(0.18557, rel=1e-4)
    rate = diode_failure_rate(100.0, 0.5, base_rate=0.0030, contact_factor=1.0,
                              quality_factor=5.5, environment_factor=6.0)
    assert rate == pytest.approx(0.14788, rel=1e-4)


def test_temperature_factor_is_one_at_the_reference_and_rises():
    # pi_T = 1 at T_j = 25 degC (298 K in the handbook's form, 273 + 25).
    assert temperature_factor(25.0) == pytest.approx(1.0, abs=1e-15)
    values = temperature_factor(np.array([0.0, 25.0, 75.0, 150.0]))
    assert np.all(np.diff(values) > 0)


def test_stress_factor_table():
    # Section 6.1: pi_S = 0.054 for V_S <= 0.3, V_S^2.43 for 0.3 < V_S <= 1.
    stress = np.array([0.0, 0.1, 0.3, 0.31, 0.8, 1.0])
    expected = np.array([0.054, 0.054, 0.054, 0.31 ** 2.43, 0.8 ** 2.43, 1.0])
    assert np.allclose(stress_factor(stress), expected, rtol=1e-12)
    # Over the rating (the voltage checks fail it) pi_S stays at its value at 1.
    assert stress_factor(1.3) == 1.0
    # 0.3^2.43 = 0.0537 meets 0.054 at the break: the table is continuous to 1 %.
    assert math.isclose(0.3 ** 2.43, 0.054, rel_tol=0.01)


def test_the_design_files_names_are_the_tables():
    assert set(RELIABILITY_DEVICE_TYPES) == set(BASE_RATES)
    assert set(RELIABILITY_QUALITIES) == set(QUALITY_FACTORS)
    assert set(RELIABILITY_ENVIRONMENTS) == set(ENVIRONMENT_FACTORS)
    assert set(RELIABILITY_CONTACTS) == set(CONTACT_FACTORS)
