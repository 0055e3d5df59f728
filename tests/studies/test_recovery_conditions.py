"""Q_rr carried from datasheet test conditions to the application (studies.recovery_conditions)."""

from __future__ import annotations

from importlib import resources

import numpy as np
import pytest

from stringcheck.design import parse_design_text
from stringcheck.physics.charge_control import rescale_recovery_charge
from stringcheck.studies.check import run_check
from stringcheck.studies.recovery_conditions import recovery_rescaling, rescale_charges

DEMO = (resources.files("stringcheck") / "data" / "demo.toml").read_text(encoding="utf-8")


def _with_duty(forward: str, di_dt: str) -> str:
    return DEMO.replace('di_dt = "10 A/us"              #', f'di_dt = "{di_dt}" #').replace(
        'forward_current = "0.5 A"', f'forward_current = "{forward}"', 1)


@pytest.mark.parametrize("forward,di_dt", [("0.01 A", "10 A/us"), ("0.2 A", "1 A/us"),
                                           ("5 A", "100 A/us")])
def test_interpolated_map_equals_the_exact_model(forward, di_dt):
    # The grid interpolation must reproduce physics.charge_control.rescale_recovery_charge (the
    # model itself) to 1e-6 relative, in regimes where the map is far from a power law.
    design = parse_design_text(_with_duty(forward, di_dt))
    rescaling, _ = recovery_rescaling(design)
    assert rescaling is not None
    grid = design.string.part_grid()
    rng = np.random.default_rng(4)
    charge = rng.lognormal(np.log(80e-9), 0.3, size=(2000, 1, grid.shape[1]))
    fit = rescaling.fits["FR2K"]
    exact = rescale_recovery_charge(charge, fit.transit_time, fit.test_current, fit.test_rate,
                                    rescaling.forward_current, rescaling.di_dt)
    np.testing.assert_allclose(rescale_charges(charge, grid, rescaling), exact, rtol=1e-6)


def test_application_at_the_test_conditions_leaves_q_rr_unchanged():
    # Round trip through the fitted model: tau from Q_rr at the test point, then Q_rr at the same
    # point, is the identity (the demo part is tested at 0.5 A, 10 A/us).
    design = parse_design_text(_with_duty("0.5 A", "10 A/us"))
    rescaling, note = recovery_rescaling(design)
    grid = design.string.part_grid()
    charge = np.random.default_rng(1).lognormal(np.log(80e-9), 0.3, size=(500, 1, grid.shape[1]))
    np.testing.assert_allclose(rescale_charges(charge, grid, rescaling), charge, rtol=1e-6)
    assert "carried" in note


def test_faster_turn_off_means_more_recovery_charge_and_a_harder_dynamic_check():
    # Less time for recombination during a faster current fall leaves more stored charge at the
    # zero crossing (charge-control model; Q_rr -> a tau^2 / 2 for long lifetimes), so the dynamic
    # worst voltage cannot fall when di/dt rises (same draws).
    slow = run_check(parse_design_text(_with_duty("0.5 A", "5 A/us")), trials=2000)
    fast = run_check(parse_design_text(_with_duty("0.5 A", "40 A/us")), trials=2000)
    assert fast.checks["dynamic"].worst_voltage > slow.checks["dynamic"].worst_voltage
    assert any("carried" in line for line in fast.assumptions)


def test_without_recovery_data_the_report_says_q_rr_is_not_rescaled():
    # Without a class the part inherits nothing: no t_rr, no i_rm, so no recovery waveform to fit.
    text = DEMO.replace('t_rr = { typ = "0.2 us", max = "0.3 us", at_di_dt = "10 A/us" }\n', "")
    text = "\n".join(line for line in text.splitlines() if not line.startswith("class ="))
    result = run_check(parse_design_text(text), trials=200)
    assert any("not rescaled" in line for line in result.assumptions)
