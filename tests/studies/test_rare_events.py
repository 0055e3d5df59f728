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
