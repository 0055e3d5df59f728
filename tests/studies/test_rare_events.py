"""Importance sampling of small failure probabilities against a closed form (studies.rare_events)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from stringcheck.design import parse_design_text
from stringcheck.studies.check import run_check

# Two stages, m = 0, 100 MOhm each, 2 kV. Stage 1 has a fixed leakage of 1 uA; stage 2 a lognormal
# one, median 1 uA, sigma = ln(10) / 3 (max 10 uA at 3 sigma), unscreened. Static sharing (closed
# form, DESIGN.md 4): V_1 = V_s / 2 + R (I_2 - I_1) / 2, so V_1 > V_RRM exactly when
# z_2 > ln(1 + 2 (V_RRM - V_s / 2) / (R I_1)) / sigma: a half-plane in latent space, and
# P(fail) = Phi(-beta) (scipy.stats.norm). Stage 2 cannot fail: V_2 < V_s / 2 + R I_1 / 2 < V_RRM.
TEMPLATE = """
[duty]
reverse_voltage = "2 kV"
[string]
series = 2
derating = 1.0
part = "FIX"
[[string.position]]
index = 2
part = "VAR"
[parts.FIX]
v_rrm = "VR V"
i_r = { typ = "1 uA", at_temperature = "25 degC" }
leakage_voltage_exponent = 0
[parts.VAR]
v_rrm = "VR V"
i_r = { typ = "1 uA", max = "10 uA", at_temperature = "25 degC" }
leakage_voltage_exponent = 0
[grading]
resistor = "100 MOhm"
[monte_carlo]
trials = 20000
seed = 1
screened = false
"""
SIGMA = np.log(10.0) / 3.0


def design_for(beta: float):
    leakage = 1e-6 * np.exp(SIGMA * beta)
    v_rrm = 1000.0 + 100e6 * (leakage - 1e-6) / 2.0
    return parse_design_text(TEMPLATE.replace("VR V", f"{float(v_rrm)!r} V"))


def test_importance_sampling_at_one_in_ten_million():
    beta = 5.199  # Phi(-beta) ~ 1e-7
    exact = stats.norm.sf(beta)
    check = run_check(design_for(beta), trials=4096, rare=True, rare_samples=20000).checks["static"]
    rare = check.rare
    assert rare.found_failure_point
    assert rare.beta == pytest.approx(beta, rel=1e-6)
    assert abs(rare.p_fail - exact) <= 3.0 * rare.std_error
    assert rare.std_error < 0.1 * exact  # a useful estimate, not a lucky wide one
    assert check.estimate.failures == 0  # plain Monte Carlo sees nothing at this level


def test_plain_monte_carlo_agrees_at_one_in_a_hundred():
    beta = 2.3263  # Phi(-beta) ~ 1e-2
    exact = stats.norm.sf(beta)
    check = run_check(design_for(beta), trials=20000, rare=True).checks["static"]
    assert check.estimate.ci_low <= exact <= check.estimate.ci_high
    assert abs(check.rare.p_fail - exact) <= 3.0 * check.rare.std_error


def test_screened_limits_leave_no_failure_and_the_bound_stays_honest():
    # Screening truncates stage 2 at 10 uA (3 sigma), so with beta = 5.2 nothing can fail; the
    # estimator finds no failure point and falls back to the exact interval of its plain samples.
    text = TEMPLATE.replace("screened = false", "screened = true")
    leakage = 1e-6 * np.exp(SIGMA * 5.2)
    design = parse_design_text(text.replace("VR V", f"{float(1000.0 + 100e6 * (leakage - 1e-6) / 2)!r} V"))
    rare = run_check(design, trials=4096, rare=True, rare_samples=5000).checks["static"].rare
    assert not rare.found_failure_point
    assert rare.p_fail == 0.0
    assert rare.ci_high == pytest.approx(1 - 0.025 ** (1 / 5000), rel=1e-6)  # exact CP, 0 of n
