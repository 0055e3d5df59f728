"""The one comparison of a stress with its limit (stringcheck.limits), and a device exactly at its
limit through a different float path passing every check."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from stringcheck.design.reading import parse_design_text
from stringcheck.limits import LIMIT_RTOL, within_limit
from stringcheck.studies.check import run_check

from tests.designs import corner_design


def test_tolerance_is_four_ulps_of_one():
    # IEEE 754 binary64: eps = 2^-52 (Goldberg 1991, table of format parameters).
    assert LIMIT_RTOL == 4 * 2.0 ** -52
    assert within_limit(1.0 + 4 * 2.0 ** -52)
    assert not within_limit(1.0 + 8 * 2.0 ** -52)
    assert not within_limit(np.nan) and not within_limit(1.0, np.nan)
    assert within_limit(1e300, np.inf)


@given(st.floats(1e-6, 1e6), st.floats(1e-6, 1e6), st.integers(2, 10_000))
def test_a_value_reached_by_another_float_path_is_within_its_limit(a, b, n):
    # n x (a x b) / n equals a x b in exact arithmetic; in floats the two paths differ by a few
    # roundings of half an ulp each (Goldberg 1991), inside the four-ulp tolerance.
    limit = a * b
    value = (n * a) * b / n
    assert within_limit(value, limit)
    # A real excess, 1e-12 relative (far above rounding), is never let through.
    assert not within_limit(limit * (1 + 1e-12), limit)


def test_identical_devices_exactly_at_their_limit_pass_static_and_dynamic():
    # 3 identical devices at V_s = 3 x 0.7 x 1400 V = 2940 V exactly (checked in exact
    # arithmetic below): each blocks V_s / 3 = derating x V_RRM, the limit itself. The charge
    # balance computes 2940 / 3 = 980.0 while 0.7 x 1400 rounds to 979.9999999999999: one ulp
    # apart. Before the shared tolerance every trial failed the dynamic check by that ulp.
    assert Fraction(3) * Fraction(7, 10) * 1400 == 2940
    text = corner_design(series=3, string_voltage=2940.0, v_rrm=1400.0, derating=0.7,
                         leak_low=5e-6, leak_high=5e-6, charge_low=0.3e-6, charge_high=0.3e-6,
                         resistor=1e6, capacitor=4.7e-9, trials=4000)
    result = run_check(parse_design_text(text))
    limit = 0.7 * 1400.0
    for name in ("static", "dynamic"):
        check = result.checks[name]
        assert check.estimate.failures == 0, name
        assert check.passed, name
        assert check.worst_voltage == pytest.approx(limit, rel=1e-12), name
        assert all(p.failures == 0 for p in check.positions), name
    # The dynamic stage voltage really is above the float limit (the case this guards).
    assert result.checks["dynamic"].worst_ratio > 1.0
