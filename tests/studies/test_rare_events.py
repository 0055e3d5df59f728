"""Importance sampling of small failure probabilities against a closed form (studies.rare_events)."""

from __future__ import annotations

import pytest
from scipy import stats

from stringcheck.design import parse_design_text
from stringcheck.studies.check import run_check

# The two-stage design of tests/conftest.py (fixture half_plane_design): P(fail) = Phi(-beta)
# exactly, a half-plane in latent space.


def test_importance_sampling_at_one_in_ten_million(half_plane_design):
    beta = 5.199  # Phi(-beta) ~ 1e-7
    exact = stats.norm.sf(beta)
    check = run_check(parse_design_text(half_plane_design(beta)), trials=4096, rare=True,
                      rare_samples=20000).checks["static"]
    rare = check.rare
    assert rare.found_failure_point
    assert rare.beta == pytest.approx(beta, rel=1e-6)
    assert abs(rare.p_fail - exact) <= 3.0 * rare.std_error
    assert rare.std_error < 0.1 * exact  # a useful estimate, not a lucky wide one
    assert check.estimate.failures == 0  # plain Monte Carlo sees nothing at this level


def test_plain_monte_carlo_agrees_at_one_in_a_hundred(half_plane_design):
    beta = 2.3263  # Phi(-beta) ~ 1e-2
    exact = stats.norm.sf(beta)
    check = run_check(parse_design_text(half_plane_design(beta)), trials=20000,
                      rare=True).checks["static"]
    assert check.estimate.ci_low <= exact <= check.estimate.ci_high
    assert abs(check.rare.p_fail - exact) <= 3.0 * check.rare.std_error


def test_screened_limits_leave_no_failure_and_the_bound_stays_honest(half_plane_design):
    # Screening truncates stage 2 at 10 uA (3 sigma), so with beta = 5.2 nothing can fail; the
    # estimator finds no failure point and falls back to the exact interval of its plain samples.
    design = parse_design_text(half_plane_design(5.2, screened=True))
    rare = run_check(design, trials=4096, rare=True, rare_samples=5000).checks["static"].rare
    assert not rare.found_failure_point
    assert rare.p_fail == 0.0
    assert rare.ci_high == pytest.approx(1 - 0.025 ** (1 / 5000), rel=1e-6)  # exact CP, 0 of n


def test_the_verdict_follows_the_importance_sampling_bound(half_plane_design):
    # 2,000 failure-free plain trials bound P(fail) by 1.5e-3 only (exact interval), above the
    # 1e-3 target, so the plain check cannot pass; the importance sampler shows ~1e-7.
    design = parse_design_text(half_plane_design(5.199))
    assert run_check(design, trials=2000).verdict == "fail"
    assert run_check(design, trials=2000, rare=True, rare_samples=5000).verdict == "pass"


# The parallel pair of tests/conftest.py (fixture parallel_pair_design): P(fail) = 2 Phi(-beta).
def test_importance_sampling_of_the_parallel_check_against_two_half_planes(parallel_pair_design):
    d = 2 * 0.010 * (9.8 - 15 / 2)
    beta = d / (0.010 * 2 ** 0.5)
    exact = 2 * stats.norm.sf(beta)  # about 1.1e-3
    result = run_check(parse_design_text(parallel_pair_design), trials=20000, rare=True,
                       rare_samples=20000)
    check = result.checks["parallel"]
    assert check.ran and check.rare.found_failure_point
    assert check.rare.beta == pytest.approx(beta, rel=1e-3)
    assert abs(check.rare.p_fail - exact) <= 3.0 * check.rare.std_error
    # Plain Monte Carlo agrees with the closed form too (its exact interval).
    assert check.estimate.ci_low <= exact <= check.estimate.ci_high
    assert result.checks["thermal"].rare is None  # not run: no thermal data


# One device, dc, 10 A, fixed r_T = 10 mOhm, no temperature coefficients, R_th 1 + 1 K/W to a 25 degC
# ambient: T_j = 25 + 2 (10 V_T0 + 1) degC (DESIGN.md 4, conduction loss P = V_T0 I + r_T I^2, the
# leakage loss of 1 nA is below 1e-6 W). With V_T0 normal (0.9 V, sigma 10 mV, unscreened) and
# t_j_max = 25 + 2 (10 (0.9 + beta sigma) + 1) degC, T_j > t_j_max on a half-plane: P = Phi(-beta).
def _thermal_half_plane(beta: float) -> str:
    t_j_max = 25.0 + 2.0 * (10.0 * (0.9 + 0.010 * beta) + 1.0)
    return f"""
[duty]
reverse_voltage = "1 kV"
forward_current = "10 A"
waveform = "dc"
ambient = "25 degC"
[string]
series = 1
part = "P"
derating = 1.0
[parts.P]
v_rrm = "2 kV"
i_fav = "40 A"
i_r = {{ typ = "1 nA", at_temperature = "25 degC" }}
v_t0 = {{ typ = "0.9 V", min = "0.87 V", max = "0.93 V", at_temperature = "25 degC" }}
r_t = {{ typ = "10 mOhm" }}
tempco_v_t0 = 0
tempco_r_t = 0
r_th_jc = "1 K/W"
r_th_cs = "0 K/W"
t_j_max = "{t_j_max!r} degC"
[thermal]
r_th_sa = "1 K/W"
[grading]
resistor = "100 MOhm"
[monte_carlo]
screened = false
seed = 5
"""


def test_importance_sampling_of_the_thermal_check_against_a_half_plane():
    beta = 4.0
    exact = stats.norm.sf(beta)  # about 3.2e-5
    check = run_check(parse_design_text(_thermal_half_plane(beta)), trials=4096, rare=True,
                      rare_samples=20000).checks["thermal"]
    assert check.ran and check.rare.found_failure_point
    assert check.rare.beta == pytest.approx(beta, rel=1e-3)
    assert abs(check.rare.p_fail - exact) <= 3.0 * check.rare.std_error
    assert check.rare.std_error < 0.1 * exact
