"""Shared test settings: a fixed hypothesis profile in CI so that runs are repeatable, and fixtures
over the shared design texts of tests/designs/."""

import os

import pytest
from hypothesis import HealthCheck, settings

from tests.designs import design_text, half_plane_design_text

settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True,
                          suppress_health_check=[HealthCheck.too_slow])
settings.register_profile("dev", deadline=None)
settings.load_profile("ci" if os.environ.get("CI") else os.environ.get("HYPOTHESIS_PROFILE", "dev"))


# Two stages, 100 MOhm each on 2 kV, m = 0. Stage 1 leaks a fixed 1 uA; stage 2 a lognormal leakage,
# median 1 uA, sigma = ln(10) / 3 (max 10 uA at 3 sigma), unscreened. Static sharing (closed form,
# docs/methods/): V_1 = V_s / 2 + R (I_2 - I_1) / 2, so V_1 > V_RRM exactly when
# z_2 > beta = ln(1 + 2 (V_RRM - V_s / 2) / (R I_1)) / sigma: a half-plane in latent space, and
# P(fail) = Phi(-beta). Stage 2 cannot fail: V_2 < V_s / 2 + R I_1 / 2 < V_RRM.
# The text: tests/designs/half_plane.template.toml, filled in by
# tests.designs.half_plane_design_text.


@pytest.fixture
def half_plane_design():
    """The function :func:`tests.designs.half_plane_design_text`."""
    return half_plane_design_text


# Two branches of one device, dc, no thermal data: branch currents i_k = (v - V_T0,k) / r_T with one
# r_T, so the hotter branch carries I / 2 + |V_T0,1 - V_T0,2| / (2 r_T) (docs/methods/, forward
# sharing, solved by hand). It exceeds I_F(AV) when |dV| > d = 2 r_T (I_F(AV) - I / 2). V_T0 normal,
# sigma = 10 mV, unscreened: dV ~ N(0, 2 sigma^2), two half-planes at beta = d / (sigma sqrt 2) in
# latent space, P(fail) = 2 Phi(-beta) (scipy.stats.norm).
# The text: tests/designs/parallel_pair.toml.


@pytest.fixture
def parallel_pair_design():
    """The text of tests/designs/parallel_pair.toml (parallel check: P(fail) = 2 Phi(-beta))."""
    return design_text("parallel_pair")
