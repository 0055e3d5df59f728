"""The grading resistor's linear TCR law (``physics.grading.resistance_at_temperature``)."""

import numpy as np
import pytest

from stringcheck.physics.grading import resistance_at_temperature


def test_linear_tcr_law_against_the_datasheet_definition():
    # IEC 60115-1 (temperature coefficient of resistance, from memory): alpha = (R(T) - R(T_ref))
    # / (R(T_ref) (T - T_ref)). 100 ppm/K over 100 K above 25 degC is +1 %; -50 ppm/K over 40 K
    # below it is +0.2 %.
    resistance = resistance_at_temperature(np.array([10e6, 10e6]), np.array([100e-6, -50e-6]),
                                           np.array([125.0, -15.0]), reference_temperature=25.0)
    assert resistance == pytest.approx([10.1e6, 10.02e6], rel=1e-12)


def test_the_law_recovers_its_coefficient():
    temperature = np.linspace(-40.0, 150.0, 9)
    resistance = resistance_at_temperature(4.7e6, 250e-6, temperature, reference_temperature=25.0)
    slope = np.polyfit(temperature, resistance, 1)[0]
    assert slope / 4.7e6 == pytest.approx(250e-6, rel=1e-9)
    assert resistance_at_temperature(4.7e6, 250e-6, 25.0, reference_temperature=25.0) == 4.7e6
