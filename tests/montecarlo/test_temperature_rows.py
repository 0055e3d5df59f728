"""Each drawn device at a junction temperature between its datasheet rows
(montecarlo.temperature_rows), screening per row, the grading parts' tolerance shape, and the rows
wired into the static and dynamic checks."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from stringcheck.design.reading import parse_design_text
from stringcheck.montecarlo.quantile_maps import tolerance_draw
from stringcheck.montecarlo.sampling import draw_strings
from stringcheck.montecarlo.temperature_rows import (
    parameter_at_temperature,
    strings_at_temperature,
)
from stringcheck.studies.check import run_check
from tests.cli.invocation import BASE, edited

ONE_ROW = 'i_r = { typ = "0.3 uA", max = "3 uA", at_temperature = "25 degC", at_voltage = "1.6 kV" }'
# Two rows of unequal relative spread (x10 at 25 degC, x4 at 125 degC): the rows' quantiles do not
# scale by one factor, so a rank kept across temperatures is not automatic.
TWO_ROWS = ('i_r = [{ typ = "5 uA", max = "50 uA", at_temperature = "25 degC" },\n'
            '       { typ = "50 uA", max = "200 uA", at_temperature = "125 degC" }]')
K = 3.0  # sigma_at_limit (the default)


def rows_design(rows: str = TWO_ROWS, extra: str = ""):
    return parse_design_text(edited(ONE_ROW, rows).replace("seed = 11", "seed = 11\n" + extra),
                             source="rows.toml")


@pytest.fixture(scope="module")
def drawn_rows():
    design = rows_design()
    return design, draw_strings(design, ("i_r",), 0, 4000)


@settings(max_examples=25, deadline=None)
@given(st.floats(-100.0, 400.0))
def test_a_device_keeps_its_rank_at_every_temperature(drawn_rows, temperature):
    # Property (can fail: rows of unequal spread, one screened, one not): one latent value per
    # device, so the order of the devices at any temperature is the order of their latents.
    design, drawn = drawn_rows
    values = parameter_at_temperature(design, drawn, "i_r", temperature).ravel()
    latent = np.asarray(drawn.latent["i_r"]).ravel()
    assert np.array_equal(np.argsort(values, kind="stable"), np.argsort(latent, kind="stable"))


def test_at_each_row_temperature_the_devices_follow_that_row(drawn_rows):
    design, drawn = drawn_rows
    cool = parameter_at_temperature(design, drawn, "i_r", 25.0).ravel()
    hot = parameter_at_temperature(design, drawn, "i_r", 125.0).ravel()
    np.testing.assert_allclose(hot, np.asarray(drawn.parameters["i_r"]).ravel(), rtol=1e-12)
    # The 25 degC row is screened (the makers' test temperature): lognormal, median 5 uA, limit
    # x10 at 3 sigma, truncated at +3 sigma (scipy.stats.truncnorm in log space).
    sigma_cool = math.log(10.0) / K
    z_cool = np.log(cool / 5e-6) / sigma_cool
    assert cool.max() <= 50e-6 * (1 + 1e-9)
    assert stats.kstest(z_cool, stats.truncnorm(-np.inf, K).cdf).pvalue > 1e-3
    # The 125 degC row is not screened (guaranteed, not tested): the plain lognormal
    # (scipy.stats.norm in log space), so some devices lie beyond its max (P = Phi(-3) each).
    sigma_hot = math.log(4.0) / K
    z_hot = np.log(hot / 50e-6) / sigma_hot
    assert stats.kstest(z_hot, stats.norm.cdf).pvalue > 1e-3
    beyond = int(np.count_nonzero(hot > 200e-6))
    assert stats.binomtest(beyond, hot.size, stats.norm.sf(K)).pvalue > 1e-3 and beyond > 0


def test_between_rows_each_device_follows_the_exponential_law(drawn_rows):
    design, drawn = drawn_rows
    cool = parameter_at_temperature(design, drawn, "i_r", 25.0)
    hot = parameter_at_temperature(design, drawn, "i_r", 125.0)
    # Closed form of the exponential in T between the device's two rows.
    middle = parameter_at_temperature(design, drawn, "i_r", 60.0)
    np.testing.assert_allclose(middle, cool * (hot / cool) ** 0.35, rtol=1e-10)
    # Outside the rows: the end row moved by the typical values' law (x10 per 100 K).
    above = parameter_at_temperature(design, drawn, "i_r", 150.0)
    np.testing.assert_allclose(above, hot * 10.0 ** 0.25, rtol=1e-10)


def test_a_temperature_per_device_broadcasts_to_the_trials(drawn_rows):
    design, drawn = drawn_rows
    shape = np.shape(drawn.parameters["i_r"])
    rng = np.random.default_rng(5)
    each = rng.uniform(20.0, 140.0, size=shape)
    got = parameter_at_temperature(design, drawn, "i_r", each)
    assert got.shape == shape
    # The same as evaluating device by device at its own temperature (a scalar each).
    for index in [(0, 0, 0), (17, 0, 3), (399, 0, 5)]:
        one = parameter_at_temperature(design, drawn, "i_r", each[index])[index]
        assert got[index] == pytest.approx(one, rel=1e-12)


def test_one_recovery_row_follows_the_class_law():
    design = parse_design_text(BASE, source="base.toml")  # q_rr one row, no class: silicon
    drawn = draw_strings(design, ("q_rr",), 0, 200)
    hot = strings_at_temperature(design, drawn, 125.0, ("q_rr",))
    # 2.5x per 100 K from the row's (assumed) 25 degC, device by device.
    np.testing.assert_allclose(hot.parameters["q_rr"], 2.5 * drawn.parameters["q_rr"], rtol=1e-12)
    sic = parse_design_text(edited('v_rrm = "1.6 kV"', 'class = "sic-schottky"\nv_rrm = "1.6 kV"'),
                            source="sic.toml")
    drawn = draw_strings(sic, ("q_rr",), 0, 50)
    assert strings_at_temperature(sic, drawn, 125.0, ("q_rr",)) is drawn  # flat: unchanged


@pytest.mark.parametrize("uniform_scores", [True, False])
def test_tolerance_shapes_against_scipy(uniform_scores):
    rng = np.random.default_rng(17)
    nominal, tolerance = 2.2e-9, 0.1
    latent = rng.random(20000) if uniform_scores else rng.standard_normal(20000)
    flat = tolerance_draw(nominal, tolerance, latent, sigma_at_limit=K, uniform=uniform_scores,
                          distribution="uniform")
    # scipy.stats.uniform over the band nominal (1 +- tolerance).
    band = stats.uniform(loc=nominal * (1 - tolerance), scale=2 * nominal * tolerance)
    assert stats.kstest(flat, band.cdf).pvalue > 1e-3
    normal = tolerance_draw(nominal, tolerance, latent, sigma_at_limit=K, uniform=uniform_scores)
    # scipy.stats.truncnorm: the tolerance at 3 sigma, truncated there; and not uniform.
    shape = stats.truncnorm(-K, K, loc=nominal, scale=nominal * tolerance / K)
    assert stats.kstest(normal, shape.cdf).pvalue > 1e-3
    assert stats.kstest(normal, band.cdf).pvalue < 1e-6


def test_the_capacitor_is_drawn_uniform_by_default():
    design = parse_design_text(BASE, source="base.toml")
    drawn = draw_strings(design, ("i_r",), 0, 2000)
    values = np.asarray(drawn.capacitance).ravel()
    band = stats.uniform(loc=2.2e-9 * 0.9, scale=2.2e-9 * 0.2)
    assert stats.kstest(values, band.cdf).pvalue > 1e-3


def test_static_check_with_two_rows_is_the_fitted_doubling_when_the_rows_scale_alike():
    # Rows whose quantiles scale by one factor (x10 at every quantile, both unscreened) are the
    # doubling law with T_double = 100 K / log2(10) for every device: the static check through the
    # rows equals the one-row part with that leakage_doubling (the arithmetic of the issue).
    rows = ('i_r = [{ typ = "0.3 uA", max = "3 uA", at_temperature = "25 degC", screened = false },\n'
            '       { typ = "3 uA", max = "30 uA", at_temperature = "125 degC", screened = false }]')
    one = ('i_r = { typ = "3 uA", max = "30 uA", at_temperature = "125 degC", screened = false }\n'
           f'leakage_doubling = "{100.0 / math.log2(10.0)!r} K"')
    results = [run_check(rows_design(text), trials=300, only=("static",)).checks["static"]
               for text in (rows, one)]
    np.testing.assert_allclose(results[0].worst_string, results[1].worst_string, rtol=1e-9)
    assert results[0].worst_voltage == pytest.approx(results[1].worst_voltage, rel=1e-9)


def test_hotter_recovery_rows_raise_the_dynamic_check():
    # Q_rr of a hot position comes from the hot row: with positions at different temperatures
    # the charge balance sees the difference (a flat design would not).
    rows = edited('q_rr = { typ = "90 nC", max = "160 nC" }',
                  'q_rr = [{ typ = "90 nC", max = "160 nC", at_temperature = "25 degC" },'
                  ' { typ = "270 nC", max = "480 nC", at_temperature = "125 degC" }]')
    flat = edited('v_rrm = "1.6 kV"', 'class = "sic-schottky"\nv_rrm = "1.6 kV"')
    rows, flat = (text.replace('temperature_rise = "10 K"', 'temperature_rise = "60 K"')
                  for text in (rows, flat))
    hot = run_check(parse_design_text(rows, source="r.toml"), trials=300, only=("dynamic",))
    cold = run_check(parse_design_text(flat, source="f.toml"), trials=300, only=("dynamic",))
    # Position 1 runs 60 K hotter: more charge, so less voltage than its neighbour at turn-off
    # (the device that recovers first blocks first); with a flat law the two are alike.
    def ratio(result):
        first, second = result.checks["dynamic"].positions[:2]
        return first.mean_voltage / second.mean_voltage

    assert ratio(hot) < ratio(cold) - 0.01
    assert ratio(cold) == pytest.approx(1.0, abs=0.02)


def test_a_tightened_input_halves_every_row():
    from stringcheck.montecarlo.sensitivity import tightened

    part = tightened(rows_design(), "i_r").parts["MAIN"]
    cool, hot = part.rows("i_r")
    # Halved in log space: max/typ from 10 to sqrt(10), from 4 to 2.
    assert cool.high / cool.typ == pytest.approx(math.sqrt(10.0))
    assert hot.high / hot.typ == pytest.approx(2.0) and part.i_r == hot


def test_forward_rows_give_each_device_its_own_line_through_them():
    # Two V_T0 rows of the same spread (+-30 mV at 25 and at 125 degC, 0.2 V apart) are one
    # tempco for every device, -2 mV/K: the thermal check through the rows equals the one-row part
    # with tempco_v_t0 = -2 mV/K (linear interpolation between the rows, the solver's own law).
    from tests.designs import design_text

    text = design_text("parallel_pair") + '[thermal]\nr_th_sa = "0.5 K/W"\n'
    text = text.replace('i_fav = "9.8 A"', 'i_fav = "9.8 A"\nr_th_jc = "0.5 K/W"\nr_th_cs = "0.1 K/W"'
                        '\nt_j_max = "175 degC"')
    row = 'v_t0 = { typ = "0.9 V", min = "0.87 V", max = "0.93 V", at_temperature = "25 degC" }'
    rows = ('v_t0 = [{ typ = "0.9 V", min = "0.87 V", max = "0.93 V", at_temperature = "25 degC" },'
            ' { typ = "0.7 V", min = "0.67 V", max = "0.73 V", at_temperature = "125 degC" }]')
    one = ('v_t0 = { typ = "0.7 V", min = "0.67 V", max = "0.73 V", at_temperature = "125 degC" }\n'
           'tempco_v_t0 = "-2 mV/K"')
    through, single = (run_check(parse_design_text(text.replace(row, edit), source="p.toml"),
                                 trials=256, rare=False).checks["thermal"]
                       for edit in (rows, one))
    assert through.ran and through.worst_tj == pytest.approx(single.worst_tj, rel=1e-9)
    # The drawn devices' own tempcos are the rows' slope.
    design = parse_design_text(text.replace(row, rows), source="p.toml")
    drawn = draw_strings(design, ("v_t0",), 0, 64)
    from stringcheck.montecarlo.temperature_rows import device_coefficient

    np.testing.assert_allclose(device_coefficient(design, drawn, "v_t0", np.zeros((2, 1))),
                               -2e-3, rtol=1e-9)
    # Rows of unequal spread give each device its own tempco: the check differs from the one-row
    # part with the typical slope (the rows reach the solver, not only their typical values).
    wide = rows.replace('min = "0.67 V", max = "0.73 V"', 'min = "0.61 V", max = "0.79 V"')
    own = parse_design_text(text.replace(row, wide), source="p.toml")
    slopes = device_coefficient(own, draw_strings(own, ("v_t0",), 0, 64), "v_t0", np.zeros((2, 1)))
    assert np.ptp(slopes) > 1e-4
    spread = run_check(own, trials=256, rare=False).checks["thermal"]
    typical = parse_design_text(text.replace(row, one.replace(
        'min = "0.67 V", max = "0.73 V"', 'min = "0.61 V", max = "0.79 V"')), source="p.toml")
    assert spread.worst_tj != pytest.approx(run_check(typical, trials=256, rare=False)
                                            .checks["thermal"].worst_tj, rel=1e-6)
