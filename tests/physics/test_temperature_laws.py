"""Parameters between datasheet rows at several temperatures (physics.temperature_laws)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from stringcheck.physics.leakage import temperature_factor
from stringcheck.physics.temperature_laws import (
    doubling_temperature_from_rows,
    exponential_law,
    interpolate_rows,
    local_doubling_temperature,
)


def test_leakage_doubling_from_two_rows_is_the_arithmetic():
    # Plain arithmetic: 5 uA at 25 degC and 50 uA at 125 degC is a factor 10 over 100 K, one
    # doubling every 100 K / log2(10) = 30.103 K.
    doubling = doubling_temperature_from_rows(25.0, 5e-6, 125.0, 50e-6)
    assert doubling == pytest.approx(100.0 / math.log2(10.0), rel=1e-12)
    assert doubling == pytest.approx(30.1, abs=0.01)


def test_two_rows_follow_the_closed_form_exponential():
    # Closed form of the exponential law through (T1, x1), (T2, x2):
    # x(T) = x1 (x2 / x1)^((T - T1) / (T2 - T1)), also outside the rows (extended).
    t1, x1, t2, x2 = 25.0, 5e-6, 125.0, 50e-6
    temperature = np.array([-10.0, 25.0, 40.0, 75.0, 125.0, 160.0])
    expected = x1 * (x2 / x1) ** ((temperature - t1) / (t2 - t1))
    got = interpolate_rows(temperature, [t1, t2], np.array([x1, x2]))
    np.testing.assert_allclose(got, expected, rtol=1e-13)
    # ... which is the leakage doubling rule with the fitted doubling temperature.
    doubling = doubling_temperature_from_rows(t1, x1, t2, x2)
    np.testing.assert_allclose(got, x1 * temperature_factor(
        temperature, reference_temperature=t1, doubling_temperature=doubling), rtol=1e-12)
    np.testing.assert_allclose(local_doubling_temperature(temperature, [t1, t2], [x1, x2]),
                               doubling, rtol=1e-12)


def test_linear_rows_and_three_rows_take_their_own_segment():
    rows_t = [25.0, 100.0, 150.0]
    values = np.array([1.0, 2.0, 8.0])
    # Between 100 and 150 degC: the second segment's law, 2 (8/2)^((T - 100) / 50).
    assert float(interpolate_rows(125.0, rows_t, values)) == pytest.approx(2.0 * 4.0 ** 0.5)
    assert float(interpolate_rows(175.0, rows_t, values)) == pytest.approx(2.0 * 4.0 ** 1.5)
    assert float(interpolate_rows(0.0, rows_t, values)) == pytest.approx(2.0 ** (-25.0 / 75.0))
    linear = interpolate_rows(np.array([62.5, 125.0]), rows_t, values, exponential=False)
    np.testing.assert_allclose(linear, [1.5, 5.0])


def test_each_device_with_its_own_rows_broadcasts_to_the_trial_shape():
    # Rows per device (trials, parallel, series, k) and a temperature per device.
    rng = np.random.default_rng(3)
    values = np.sort(rng.uniform(1.0, 10.0, size=(5, 2, 3, 2)), axis=-1)
    temperature = rng.uniform(0.0, 150.0, size=(5, 2, 3))
    got = interpolate_rows(temperature, [25.0, 125.0], values)
    expected = values[..., 0] * (values[..., 1] / values[..., 0]) ** ((temperature - 25.0) / 100.0)
    assert got.shape == (5, 2, 3)
    np.testing.assert_allclose(got, expected, rtol=1e-12)
    # A position temperature (parallel, series) broadcasts over the trials.
    assert interpolate_rows(temperature[0], [25.0, 125.0], values).shape == (5, 2, 3)


@given(st.floats(-50.0, 200.0), st.floats(1e-9, 1.0), st.floats(-0.05, 0.05))
def test_one_row_law_is_exponential(temperature, value, rate):
    got = float(exponential_law(temperature, value, reference_temperature=25.0, rate=rate))
    assert got == pytest.approx(value * math.exp(rate * (temperature - 25.0)), rel=1e-12)
