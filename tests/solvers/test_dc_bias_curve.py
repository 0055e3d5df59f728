"""A grading capacitor's dc-bias loss given as the maker's curve (issue 22, item 2): the secant
factor against scipy quad, the one-point curve equal to the linear loss, and bad curves refused."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import quad

from stringcheck.design.reading import parse_design_text
from stringcheck.errors import DesignError
from stringcheck.solvers.aged_sharing import (
    secant_capacitance_factor,
    solve_dynamic_sharing_dc_bias,
)

CURVE = ((0.25, 0.05), (0.5, 0.2), (1.0, 0.5))


def _loss(u: float) -> float:
    return float(np.interp(u, [0.0] + [p[0] for p in CURVE], [0.0] + [p[1] for p in CURVE]))


@pytest.mark.parametrize("x", [0.1, 0.25, 0.4, 0.5, 0.8, 1.0, 1.3])
def test_the_secant_factor_is_the_mean_of_1_minus_the_loss(x):
    # Outside reference: scipy quad of (1 - L(u)) over [0, x], divided by x.
    expected = quad(lambda u: 1.0 - _loss(u), 0.0, x, points=[0.25, 0.5, 1.0])[0] / x
    assert float(secant_capacitance_factor(x, CURVE)) == pytest.approx(expected, rel=1e-12)
    assert float(secant_capacitance_factor(0.0, CURVE)) == 1.0


def test_a_one_point_curve_is_the_linear_loss():
    # C(V) = C_0 (1 - b V / V_rated): the curve ((1, b),) and the linear form give one balance.
    charge = np.array([[0.2e-6, 0.5e-6, 0.3e-6]])
    linear = solve_dynamic_sharing_dc_bias(3000.0, charge, 1e-9, 0.0, dc_bias_loss=0.3,
                                           rated_voltage=2000.0)
    curve = solve_dynamic_sharing_dc_bias(3000.0, charge, 1e-9, 0.0, dc_bias_loss=0.3,
                                          rated_voltage=2000.0, dc_bias_curve=((1.0, 0.3),))
    np.testing.assert_allclose(curve.voltages, linear.voltages, rtol=1e-12)
    assert curve.voltages.sum() == pytest.approx(3000.0, rel=1e-9)


BASE = """
[duty]
reverse_voltage = "2 kV"
[string]
series = 2
part = "A"
[parts.A]
v_rrm = "2 kV"
i_r = { typ = "1 uA" }
[grading]
resistor = "10 MOhm"
capacitor = "1 nF"
capacitor_rated_voltage = "2 kV"
[end_of_life]
capacitor_dc_bias = CURVE
"""


def test_the_design_file_takes_the_curve_and_refuses_a_bad_one():
    design = parse_design_text(BASE.replace("CURVE", "[[0.5, 0.1], [1.0, 0.3]]"))
    assert design.end_of_life.capacitor_dc_bias_curve == ((0.5, 0.1), (1.0, 0.3))
    assert design.end_of_life.capacitor_dc_bias == pytest.approx(0.3)
    for bad in ("[[0.5, 0.3], [1.0, 0.1]]", "[[1.0, 0.1], [0.5, 0.3]]", "[[0.5]]", "[]",
                "[[0.5, 1.2]]"):
        with pytest.raises(DesignError, match="end_of_life.capacitor_dc_bias"):
            parse_design_text(BASE.replace("CURVE", bad))
