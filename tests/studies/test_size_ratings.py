"""``size`` carries one rating type: the check's grading summary with the sized ratings filled in."""

from __future__ import annotations

import pytest

from stringcheck.checks.grading_ratings import GradingSummary
from stringcheck.design.reading import parse_design_text
from stringcheck.physics.grading import resistor_power
from stringcheck.report.export import sizing_to_dict
from stringcheck.studies.size import size

# Eight fixed (no-scatter) stages on 9 kV, half-sine at 50 Hz: the worst stage voltage is the
# static corner's, so the ratings follow from it by hand.
DESIGN = """
[duty]
reverse_voltage = 9000
waveform = "half-sine"
frequency = 50
di_dt = "10 A/us"
[string]
series = 8
derating = 0.9
part = "SLOW"
[[string.position]]
index = 1
part = "FAST"
[parts.FAST]
v_rrm = 1400
i_r = { typ = 2e-6, at_temperature = "25 degC", at_voltage = 1400 }
q_rr = { typ = 0.4e-6 }
leakage_voltage_exponent = 0
[parts.SLOW]
v_rrm = 1400
i_r = { typ = 12e-6, at_temperature = "25 degC", at_voltage = 1400 }
q_rr = { typ = 1.0e-6 }
leakage_voltage_exponent = 0
[monte_carlo]
trials = 4000
[sizing]
target_p_fail = 1e-3
"""

RATING_KEYS = {"derating", "worst_stage_voltage", "worst_stage_voltage_check",
               "resistor_voltage_required", "resistor_power_continuous", "resistor_power_duty",
               "resistor_power_required", "grading_loss_total", "capacitor_voltage_required",
               "damping_loss_per_stage", "damping_loss_total", "stage_energy", "total_energy",
               "discharge_time", "damping_pulse_voltage", "damping_energy_per_turn_off",
               "damping_power"}


@pytest.fixture(scope="module")
def sized():
    return size(parse_design_text(DESIGN))


def test_one_rating_type_with_one_name_per_quantity(sized):
    ratings, network = sized.ratings, sized.check.grading
    assert type(ratings) is GradingSummary and type(network) is GradingSummary
    # The quantities both describe hold the same value under the same name.
    for name in ("worst_stage_voltage", "worst_voltage_check", "resistor_power_continuous",
                 "resistor_power_duty", "total_grading_loss", "stage_energy", "resistor",
                 "capacitor"):
        assert getattr(ratings, name) == getattr(network, name), name
    assert network.derating is None and ratings.derating == 0.9


def test_ratings_follow_from_the_worst_stage_voltage(sized):
    ratings = sized.ratings
    worst = ratings.worst_stage_voltage
    assert ratings.resistor_voltage_required == pytest.approx(worst / 0.9, rel=1e-12)
    # Mean power of a half-sine half-wave across R: V^2 / (4 R) (Nilsson & Riedel, Electric
    # Circuits, ch. 10: the rms of a half-wave sine is V / 2).
    static = sized.check.checks["static"].worst_voltage
    resistor = sized.check.grading.resistor
    assert ratings.resistor_power_duty == pytest.approx(static ** 2 / (4 * resistor), rel=1e-12)
    assert ratings.resistor_power_duty == pytest.approx(
        float(resistor_power(static, resistor, waveform="half-sine")), rel=0)
    assert ratings.resistor_power_required == pytest.approx(ratings.resistor_power_duty / 0.9)


def test_the_json_keys_of_the_ratings_are_kept(sized):
    data = sizing_to_dict(sized)
    assert set(data["grading"]["ratings"]) == RATING_KEYS
    assert data["grading"]["ratings"]["grading_loss_total"] == data["network"]["total_grading_loss"]
    # The network object of the check has no sizing-only keys.
    assert "derating" not in data["network"] and "resistor_power_required" not in data["network"]
