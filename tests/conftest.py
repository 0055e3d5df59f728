"""Shared test settings: a fixed hypothesis profile in CI so that runs are repeatable."""

import math
import os

import pytest
from hypothesis import HealthCheck, settings

settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True,
                          suppress_health_check=[HealthCheck.too_slow])
settings.register_profile("dev", deadline=None)
settings.load_profile("ci" if os.environ.get("CI") else os.environ.get("HYPOTHESIS_PROFILE", "dev"))


# Two stages, 100 MOhm each on 2 kV, m = 0. Stage 1 leaks a fixed 1 uA; stage 2 a lognormal leakage,
# median 1 uA, sigma = ln(10) / 3 (max 10 uA at 3 sigma), unscreened. Static sharing (closed form,
# DESIGN.md 4): V_1 = V_s / 2 + R (I_2 - I_1) / 2, so V_1 > V_RRM exactly when
# z_2 > beta = ln(1 + 2 (V_RRM - V_s / 2) / (R I_1)) / sigma: a half-plane in latent space, and
# P(fail) = Phi(-beta). Stage 2 cannot fail: V_2 < V_s / 2 + R I_1 / 2 < V_RRM.
HALF_PLANE_SIGMA = math.log(10.0) / 3.0


def half_plane_design_text(beta: float, *, screened: bool = False, trials: int = 20000) -> str:
    """Design text whose static P(fail) is Phi(-beta) exactly (see the comment above)."""
    leakage = 1e-6 * math.exp(HALF_PLANE_SIGMA * beta)
    v_rrm = float(1000.0 + 100e6 * (leakage - 1e-6) / 2.0)
    return f"""
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
v_rrm = "{v_rrm!r} V"
i_r = {{ typ = "1 uA", at_temperature = "25 degC" }}
leakage_voltage_exponent = 0
[parts.VAR]
v_rrm = "{v_rrm!r} V"
i_r = {{ typ = "1 uA", max = "10 uA", at_temperature = "25 degC" }}
leakage_voltage_exponent = 0
[grading]
resistor = "100 MOhm"
[monte_carlo]
trials = {trials}
seed = 1
screened = {"true" if screened else "false"}
"""


@pytest.fixture
def half_plane_design():
    """The function :func:`half_plane_design_text`."""
    return half_plane_design_text


# Two branches of one device, dc, no thermal data: branch currents i_k = (v - V_T0,k) / r_T with one
# r_T, so the hotter branch carries I / 2 + |V_T0,1 - V_T0,2| / (2 r_T) (DESIGN.md 4, forward
# sharing, solved by hand). It exceeds I_F(AV) when |dV| > d = 2 r_T (I_F(AV) - I / 2). V_T0 normal,
# sigma = 10 mV, unscreened: dV ~ N(0, 2 sigma^2), two half-planes at beta = d / (sigma sqrt 2) in
# latent space, P(fail) = 2 Phi(-beta) (scipy.stats.norm).
PARALLEL_PAIR = """
[duty]
reverse_voltage = "1 kV"
forward_current = "15 A"
waveform = "dc"
[string]
series = 1
parallel = 2
derating = 1.0
part = "P"
[parts.P]
v_rrm = "2 kV"
i_fav = "9.8 A"
i_r = { typ = "1 uA", at_temperature = "25 degC" }
v_t0 = { typ = "0.9 V", min = "0.87 V", max = "0.93 V", at_temperature = "25 degC" }
r_t = { typ = "10 mOhm" }
[grading]
resistor = "100 MOhm"
[monte_carlo]
screened = false
seed = 5
"""


@pytest.fixture
def parallel_pair_design():
    """The design text :data:`PARALLEL_PAIR` (P(fail) of the parallel check = 2 Phi(-beta))."""
    return PARALLEL_PAIR
