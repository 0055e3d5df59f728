"""Tests of stringcheck.physics.thermal."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq, minimize_scalar

from stringcheck.errors import StringcheckError
from stringcheck.physics.thermal import junction_temperature, semenov_limit, semenov_number


def test_shared_and_separate_sinks_by_hand():
    # Series thermal network (common practice): T_j = T_a + P (R_jc + R_cs) + R_sa x (sum P
    # on a shared sink, own P on separate sinks). Two branches of one device, numbers by hand.
    power = np.array([[[10.0], [30.0]]])
    shared = junction_temperature(power, 40.0, 0.5, 0.2, heatsink="shared")
    np.testing.assert_allclose(shared[0, :, 0], [40 + 5 + 8, 40 + 15 + 8], rtol=1e-15)
    separate = junction_temperature(power, 40.0, 0.5, 0.2, heatsink="separate")
    np.testing.assert_allclose(separate[0, :, 0], [40 + 5 + 2, 40 + 15 + 6], rtol=1e-15)


def test_trial_axis_broadcasts():
    power = np.ones((3, 2, 4))
    temperatures = junction_temperature(power, np.array([0.0, 10.0, 20.0]), 1.0,
                                        np.array([0.0, 1.0, 2.0]), heatsink="shared")
    assert temperatures.shape == (3, 2, 4)
    np.testing.assert_allclose(temperatures[:, 0, 0], [1.0, 10 + 1 + 8, 20 + 1 + 16])


def test_unknown_heatsink_is_an_error():
    with pytest.raises(StringcheckError, match="shared"):
        junction_temperature(np.ones((1, 1, 1)), 25.0, 1.0, 1.0, heatsink="common")


@pytest.mark.parametrize(
    ("power", "rate", "resistance"), [(1.0, math.log(2) / 10, 1.0), (0.05, 0.1, 20.0),
                                      (3.0, math.log(2) / 8, 0.4)]
)
def test_semenov_limit_is_the_tangency_of_the_heat_balance(power, rate, resistance):
    # Semenov (Z. Physik 48, 1928): T = T_a + R P_0 exp(a (T - T_0)) has a solution iff
    # a R P_0 exp(a (T_a - T_0)) <= 1/e. Checked independently: at the limit the excess
    # h(T) = T_a + R P(T) - T has its minimum (scipy minimize_scalar) at zero, at T_a + 1/a;
    # a little below, brentq finds the lower root; a little above, h stays positive.
    reference = 25.0
    limit = semenov_limit(power, rate, resistance, reference_temperature=reference)
    assert math.isclose(semenov_number(power, rate, resistance, limit,
                                       reference_temperature=reference), 1 / math.e, rel_tol=1e-12)

    def excess(temperature, ambient):
        heating = resistance * power * math.exp(rate * (temperature - reference))
        return ambient + heating - temperature

    lowest = minimize_scalar(lambda t: excess(t, limit), bracket=(limit, limit + 2 / rate),
                             tol=1e-12)
    assert math.isclose(lowest.x, limit + 1 / rate, rel_tol=1e-6)
    assert abs(lowest.fun) < 1e-9 * (1 + abs(limit))
    below = limit - 0.01 / rate
    root = brentq(excess, below, limit + 1 / rate, args=(below,), xtol=1e-12)
    assert below < root < limit + 1 / rate
    above = limit + 0.01 / rate
    assert minimize_scalar(lambda t: excess(t, above), bracket=(above, above + 2 / rate)).fun > 0
