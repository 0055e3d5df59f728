"""Measured lots (issue 6 item 3): reading the CSV, its errors, resampling, fits, serial numbers.

Sources of the expectations: the lot values are invented for the tests. Resampling without
replacement gives every position the lot's empirical distribution, checked with the
Dvoretzky-Kiefer-Wolfowitz bound (with Massart's constant, Ann. Probab. 18, 1990); maximum-likelihood
fits are checked against scipy.stats.lognorm.fit / norm.fit and against the closed forms (mean and
divisor-n standard deviation of ln x; Johnson, Kotz and Balakrishnan, Continuous Univariate
Distributions vol. 1, ch. 14); the copula's correlation against the lot's with its sampling error
(Fisher's z, standard error 1/sqrt(n - 3)).
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from stringcheck.design.reading import load_design
from stringcheck.errors import DesignError
from stringcheck.design.lots import fit_column, rank_scores, score_correlation
from stringcheck.montecarlo.sampling import draw_strings
from stringcheck.studies.check import run_check
from stringcheck.report.wording import sentences
from stringcheck.report.wording import estimator_text, rare_note_text

DESIGN = """
[duty]
reverse_voltage = "{voltage}"
waveform = "half-sine"
frequency = "50 Hz"
di_dt = "10 A/us"
[string]
series = {series}
parallel = {parallel}
part = "A"
{positions}
[parts.A]
v_rrm = "2 kV"
i_r = {{ typ = "0.2 uA", max = "2 uA", at_voltage = "2 kV", at_temperature = "25 degC" }}
q_rr = {{ typ = "80 nC", max = "150 nC", at_di_dt = "10 A/us" }}
c_j = "15 pF"
measured = "{lot}"
{fit}
[grading]
resistor = "4.7 MOhm"
resistor_tolerance = "1 %"
capacitor = "2.2 nF"
capacitor_tolerance = "5 %"
[monte_carlo]
trials = 2000
seed = 11
"""


def _lot_values(devices: int, seed: int = 3) -> tuple[np.ndarray, np.ndarray]:
    """Invented lot: lognormal leakage [uA] and charge [nC] with correlation 0.6 in log space."""
    rng = np.random.default_rng(seed)
    z = rng.multivariate_normal([0.0, 0.0], [[1.0, 0.6], [0.6, 1.0]], size=devices)
    return 0.3 * np.exp(0.6 * z[:, 0]), 90.0 * np.exp(0.2 * z[:, 1])


def _write_lot(folder: Path, devices: int = 80, *, name: str = "lot.csv", header: str | None = None,
               rows: list[str] | None = None, seed: int = 3) -> Path:
    path = folder / name
    if rows is None:
        leakage, charge = _lot_values(devices, seed)
        rows = [f"S{k:03d},{a:.6g},{b:.6g}" for k, (a, b) in enumerate(zip(leakage, charge))]
    text = (header or "serial,i_r [uA],q_rr [nC]") + "\n" + "\n".join(rows) + "\n"
    path.write_text(text, encoding="utf-8")
    return path


def _design(folder: Path, *, series: int = 10, parallel: int = 1, fit: str = "",
            positions: str = "", lot: str = "lot.csv", voltage: str = "12 kV"):
    path = folder / "design.toml"
    path.write_text(DESIGN.format(series=series, parallel=parallel, fit=fit, positions=positions,
                                  lot=lot, voltage=voltage), encoding="utf-8")
    return load_design(path)


def _lot_array(folder: Path, name: str = "lot.csv") -> np.ndarray:
    lines = (folder / name).read_text().splitlines()[1:]
    return np.array([[float(x) for x in line.split(",")[1:]] for line in lines])


# --- reading -------------------------------------------------------------------------------------


def test_lot_is_read_in_si_units_with_serials(tmp_path):
    _write_lot(tmp_path, 20)
    lot = _design(tmp_path, series=5).parts["A"].measured
    raw = _lot_array(tmp_path)
    assert lot.devices == 20 and lot.parameters == ("i_r", "q_rr")
    np.testing.assert_allclose(lot.column("i_r"), raw[:, 0] * 1e-6, rtol=1e-15)
    np.testing.assert_allclose(lot.column("q_rr"), raw[:, 1] * 1e-9, rtol=1e-15)
    assert lot.serials[:2] == ("S000", "S001") and lot.row_of("S007") == 7


@pytest.mark.parametrize("unit", ["uA/degC*K", "uA/\u00b0C*K", "uA/\u2103*K", "uA*K/degC",
                                  "\u00b5A", "\u03bcA"])
def test_a_column_unit_per_degree_celsius_times_kelvin_is_the_plain_unit(tmp_path, unit):
    # SI Brochure (9th ed.) 2.3.1: a difference of 1 degC is 1 K, so uA/degC*K is uA. Read as an
    # absolute temperature the column would be scaled by 1 K / 274.15 K.
    _write_lot(tmp_path, rows=["S1,0.5,2", "S2,0.7,3"], header=f"serial,i_r [{unit}],q_rr [nC]")
    lot = _design(tmp_path, series=2).parts["A"].measured
    np.testing.assert_array_equal(lot.column("i_r"), [0.5e-6, 0.7e-6])


@pytest.mark.parametrize("unit", ["2 uA", "1,5 uA", "uA 10", "10^3 uA"])
def test_a_column_unit_holding_a_number_is_refused(tmp_path, unit):
    # A column's unit is a unit alone; "[2 uA]" would scale every cell by 2. The header is quoted
    # (RFC 4180) so that a comma stays in it.
    _write_lot(tmp_path, rows=["S1,0.5,2"], header=f'serial,"i_r [{unit}]",q_rr [nC]')
    with pytest.raises(DesignError) as error:
        _design(tmp_path, series=1)
    message = str(error.value)
    assert f"'i_r [{unit}]'" in message and "not a unit of ampere" in message, message
    assert "parts.A.measured" in message and "\n" not in message


def test_columns_may_come_in_any_order_and_case(tmp_path):
    _write_lot(tmp_path, rows=["2.0, 0.5, X1", "3.0, 0.7, X2"], header="Q_RR [nC], I_R [uA], serial")
    lot = _design(tmp_path, series=2).parts["A"].measured
    assert lot.parameters == ("i_r", "q_rr")
    np.testing.assert_allclose(lot.values, [[0.5e-6, 2e-9], [0.7e-6, 3e-9]])


def test_lot_outside_the_datasheet_limit_is_counted(tmp_path):
    # Datasheet max of i_r is 2 uA: two devices above it (by hand).
    rows = [f"S{k},{v},{90}" for k, v in enumerate([0.1, 0.2, 2.5, 0.3, 3.0, 0.2])]
    _write_lot(tmp_path, rows=rows)
    lot = _design(tmp_path, series=4).parts["A"].measured
    leakage = lot.columns[0]
    assert (leakage.below, leakage.above) == (0, 2)
    assert any("2 of 6 devices" in w and "above the datasheet max" in w
               for w in sentences(lot.outside_limits("A")))


# --- errors: one DesignError naming the lot, the row and the column --------------------------------

BAD_LOTS = [
    ("unknown column", "serial,i_x [uA],q_rr [nC]", ["S1,1,2"], "unknown column 2 'i_x [uA]'"),
    ("missing unit", "serial,i_r,q_rr [nC]", ["S1,1,2"], "has no unit"),
    ("wrong unit", "serial,i_r [V],q_rr [nC]", ["S1,1,2"], "not a unit of ampere"),
    ("non-numeric cell", "serial,i_r [uA],q_rr [nC]", ["S1,1,2", "S2,abc,3"],
     "line 3, column 'i_r [uA]': 'abc' is not a number"),
    ("empty cell", "serial,i_r [uA],q_rr [nC]", ["S1,1,2", "S2,,3"],
     "line 3, column 'i_r [uA]': an empty cell is not a number"),
    ("NaN", "serial,i_r [uA],q_rr [nC]", ["S1,1,2", "S2,1,nan"],
     "line 3, column 'q_rr [nC]': 'nan' is not a finite number"),
    ("negative leakage", "serial,i_r [uA],q_rr [nC]", ["S1,-1,2"], "must be greater than zero"),
    ("header only", "serial,i_r [uA],q_rr [nC]", [], "the lot is empty"),
    ("repeated serial", "serial,i_r [uA],q_rr [nC]", ["S1,1,2", "S1,1,2"],
     "serial 'S1' repeats line 2"),
    ("no parameter column", "serial", ["S1", "S2"], "no measured parameter columns"),
    ("repeated column", "i_r [uA],i_r [nA]", ["1,2"], "repeats i_r"),
]


@pytest.mark.parametrize("case, header, rows, expected", BAD_LOTS, ids=[c[0] for c in BAD_LOTS])
def test_bad_lot_is_one_clear_error(tmp_path, case, header, rows, expected):
    _write_lot(tmp_path, header=header, rows=rows)
    with pytest.raises(DesignError) as error:
        _design(tmp_path, series=1)
    message = str(error.value)
    assert expected in message, message
    assert "lot.csv" in message and "parts.A.measured" in message and "\n" not in message


def test_empty_file_and_missing_file(tmp_path):
    (tmp_path / "lot.csv").write_text("")
    with pytest.raises(DesignError, match="the lot file is empty"):
        _design(tmp_path)
    with pytest.raises(DesignError, match="no such lot file"):
        _design(tmp_path, lot="nowhere.csv")


def test_lot_smaller_than_the_string(tmp_path):
    _write_lot(tmp_path, 8)
    with pytest.raises(DesignError, match=r"holds 8 device\(s\) but the string draws 10"):
        _design(tmp_path, series=10)
    # Two branches of 4 draw 8: exactly enough.
    _design(tmp_path, series=4, parallel=2)


def test_fit_needs_enough_devices_and_a_lot(tmp_path):
    _write_lot(tmp_path, 5)
    with pytest.raises(DesignError, match="too few to fit"):
        _design(tmp_path, series=2, fit='fit = "lognormal"')
    with pytest.raises(DesignError, match="must be one of"):
        _design(tmp_path, series=2, fit='fit = "weibull"')


def test_serial_errors(tmp_path):
    _write_lot(tmp_path, 20)
    one = '[[string.position]]\nindex = 1\nserial = "{}"\n'
    with pytest.raises(DesignError, match="no device 'NOPE'"):
        _design(tmp_path, series=4, positions=one.format("NOPE"))
    twice = one.format("S001") + '[[string.position]]\nindex = 2\nserial = "S001"\n'
    with pytest.raises(DesignError, match="already stands in position 1"):
        _design(tmp_path, series=4, positions=twice)
    with pytest.raises(DesignError, match="add branch = N"):
        _design(tmp_path, series=4, parallel=2, positions=one.format("S001"))
    _write_lot(tmp_path, rows=["1,2", "2,3"], header="i_r [uA],q_rr [nC]")
    with pytest.raises(DesignError, match="has no 'serial' column"):
        _design(tmp_path, series=2, positions=one.format("S001"))


# --- resampling ----------------------------------------------------------------------------------


def test_resampling_takes_whole_rows_without_replacement(tmp_path):
    _write_lot(tmp_path, 30)
    design = _design(tmp_path, series=12)
    drawn = draw_strings(design, ("i_r", "q_rr"), 0, 3000)
    lot = design.parts["A"].measured
    pairs = np.stack([drawn.parameters["i_r"], drawn.parameters["q_rr"]], axis=-1).reshape(-1, 2)
    # Every drawn device is a row of the lot, with its own leakage and charge together (the
    # measured correlation is kept exactly).
    rows = {tuple(row) for row in lot.values}
    assert all(tuple(pair) in rows for pair in pairs)
    # No device stands twice in one string.
    leakage = drawn.parameters["i_r"].reshape(3000, -1)
    assert all(len(set(trial)) == trial.size for trial in leakage)


def test_resampling_reproduces_the_lots_empirical_quantiles(tmp_path):
    _write_lot(tmp_path, 200)
    design = _design(tmp_path, series=20)
    trials = 5000
    drawn = draw_strings(design, ("i_r",), 0, trials).parameters["i_r"]
    lot = np.sort(design.parts["A"].measured.column("i_r"))
    # Each position's marginal is the lot's empirical distribution: a DKW band at alpha = 1e-3
    # (Massart: P(sup |F_n - F| > eps) <= 2 exp(-2 n eps^2)) holds at every position.
    epsilon = math.sqrt(math.log(2 / 1e-3) / (2 * trials))
    for position in (0, 7, 19):
        values = np.sort(drawn[:, 0, position])
        empirical = np.searchsorted(values, lot, side="right") / trials
        exact = np.arange(1, lot.size + 1) / lot.size
        assert np.max(np.abs(empirical - exact)) < epsilon
    pooled = drawn.ravel()
    for q in (0.05, 0.25, 0.5, 0.75, 0.95):
        # Quantiles of the pooled draws sit within one lot step of the lot's own.
        low, high = np.quantile(lot, [max(q - 0.01, 0), min(q + 0.01, 1)])
        assert low <= np.quantile(pooled, q) <= high


def test_resampling_is_independent_of_chunking(tmp_path):
    _write_lot(tmp_path, 50)
    design = _design(tmp_path, series=10)
    whole = draw_strings(design, ("i_r", "q_rr"), 0, 9000).parameters["q_rr"]
    first = draw_strings(design, ("i_r", "q_rr"), 0, 5000).parameters["q_rr"]
    rest = draw_strings(design, ("i_r", "q_rr"), 5000, 4000).parameters["q_rr"]
    np.testing.assert_array_equal(whole, np.concatenate([first, rest]))


@settings(max_examples=30, deadline=None)
@given(devices=st.integers(1, 40), take=st.integers(1, 40), seed=st.integers(0, 2**31))
def test_lot_rows_are_distinct_and_in_range(devices, take, seed):
    # Property: for any lot size and any string that fits in it, every trial gets distinct rows of
    # the lot, and every row is used with equal frequency in the long run (not tested here).
    from stringcheck.montecarlo.sampling import _lot_rows

    take = min(take, devices)
    rows = _lot_rows(seed, 4090, 20, 77, devices, take)
    assert rows.shape == (20, take)
    assert rows.min() >= 0 and rows.max() < devices
    assert all(np.unique(r).size == take for r in rows)


def test_every_device_is_equally_likely(tmp_path):
    _write_lot(tmp_path, 25)
    design = _design(tmp_path, series=5)
    drawn = draw_strings(design, ("i_r",), 0, 8000).parameters["i_r"][:, 0, 3]
    lot = design.parts["A"].measured.column("i_r")
    counts = np.array([np.count_nonzero(drawn == value) for value in lot])
    # Chi-square against the uniform over the lot's 25 devices (scipy.stats.chisquare).
    assert counts.sum() == 8000
    assert stats.chisquare(counts).pvalue > 1e-4


def test_serial_places_one_device_and_removes_it_from_the_draws(tmp_path):
    _write_lot(tmp_path, 12)
    positions = ('[[string.position]]\nindex = 3\nserial = "S005"\n'
                 '[[string.position]]\nindex = 1\nserial = "S000"\n')
    design = _design(tmp_path, series=12, positions=positions)
    drawn = draw_strings(design, ("i_r", "q_rr"), 0, 500)
    lot = design.parts["A"].measured
    assert np.all(drawn.parameters["i_r"][:, 0, 2] == lot.column("i_r")[5])
    assert np.all(drawn.parameters["q_rr"][:, 0, 0] == lot.column("q_rr")[0])
    others = drawn.parameters["i_r"][:, 0, [1] + list(range(3, 12))]
    assert not np.any(np.isin(others, lot.column("i_r")[[0, 5]]))
    # 12 devices, 2 placed, 10 drawn: every string is the whole lot.
    assert all(np.unique(row).size == 12 for row in drawn.parameters["i_r"].reshape(500, -1))


def test_a_stack_built_by_serial_has_no_device_scatter(tmp_path):
    _write_lot(tmp_path, 4)
    positions = "".join(f'[[string.position]]\nindex = {k + 1}\nserial = "S{k:03d}"\n'
                        for k in range(4))
    design = _design(tmp_path, series=4, positions=positions, voltage="5 kV")
    drawn = draw_strings(design, ("i_r",), 0, 100).parameters["i_r"]
    np.testing.assert_array_equal(drawn, np.broadcast_to(
        design.parts["A"].measured.column("i_r"), drawn.shape))
    result = run_check(design, trials=200)
    assert result.checks["static"].ran


# --- fits ----------------------------------------------------------------------------------------


def test_lognormal_fit_matches_scipy_and_the_closed_form():
    values = _lot_values(300, seed=5)[0] * 1e-6
    location, scale = fit_column(values, "lognormal")
    shape, loc, scipy_scale = stats.lognorm.fit(values, floc=0.0)
    assert loc == 0.0
    assert location == pytest.approx(math.log(scipy_scale), rel=1e-6)
    assert scale == pytest.approx(shape, rel=1e-6)
    # Closed form of the maximum-likelihood estimates: mean and divisor-n sd of ln x.
    assert location == pytest.approx(np.mean(np.log(values)), rel=1e-9)
    assert scale == pytest.approx(np.std(np.log(values)), rel=1e-6)


def test_normal_fit_matches_scipy():
    values = np.random.default_rng(9).normal(0.9, 0.02, size=100)
    location, scale = fit_column(values, "normal")
    assert (location, scale) == pytest.approx(stats.norm.fit(values), rel=1e-12)


def test_fitted_draws_follow_the_fit_and_keep_the_lots_correlation(tmp_path):
    _write_lot(tmp_path, 150)
    design = _design(tmp_path, series=10, fit='fit = "auto"')
    lot = design.parts["A"].measured
    drawn = draw_strings(design, ("i_r", "q_rr"), 0, 2000)
    leakage = drawn.parameters["i_r"][:, 0, 4]
    fit = lot.columns[0]
    law = stats.lognorm(fit.scale, scale=math.exp(fit.location))
    # The draws of one position are the fitted lognormal (KS against scipy.stats.lognorm).
    assert stats.kstest(leakage, law.cdf).pvalue > 1e-3
    # Their log-space correlation equals the lot's score correlation within 4 standard errors of
    # Fisher's z (1 / sqrt(n - 3)).
    logs = np.log(np.stack([drawn.parameters["i_r"].ravel(), drawn.parameters["q_rr"].ravel()]))
    rho = np.corrcoef(logs)[0, 1]
    assert abs(np.arctanh(rho) - np.arctanh(lot.correlation[0, 1])) < 4 / math.sqrt(
        logs.shape[1] / 10 - 3)
    # A static-only request draws the same leakage (the copula always mixes both columns).
    alone = draw_strings(design, ("i_r",), 0, 2000).parameters["i_r"]
    np.testing.assert_array_equal(alone, drawn.parameters["i_r"])


def test_rank_scores_and_their_correlation():
    # Hand example: ranks 1..4 of n = 4 give Phi^-1((r - 1/2) / 4).
    scores = rank_scores(np.array([[3.0], [1.0], [4.0], [2.0]]))[:, 0]
    np.testing.assert_allclose(scores, stats.norm.ppf(np.array([2.5, 0.5, 3.5, 1.5]) / 4))
    # Collinear columns still give a usable (positive definite) copula.
    x = np.linspace(0, 1, 20)
    matrix = score_correlation(np.stack([x, 2 * x], axis=1))
    np.linalg.cholesky(matrix)
    assert matrix[0, 1] == pytest.approx(1.0, abs=1e-5)


# --- the studies ---------------------------------------------------------------------------------


def test_rare_draws_a_resampled_lot_from_its_fit(tmp_path, monkeypatch):
    # The importance sampler needs a continuous distribution: a resampled lot enters it through
    # its fit (the same figures as fit = "auto", which fits the same families), and says so.
    # At 15 kV on 10 devices (50 V below the limit) the charge balance can fail: P ~ 3e-5. The
    # static check fails only far out (one device leaking much, beta = 11.1, P ~ 1e-27): searched
    # within |u| <= 10 it has no failure point.
    from stringcheck.montecarlo import importance as rare_events

    monkeypatch.setattr(rare_events, "_RAY_LIMIT", 10.0)
    _write_lot(tmp_path, 60)
    result = run_check(_design(tmp_path, series=10, voltage="15 kV"), trials=500, rare=True,
                       rare_samples=2000)
    resampled = result.checks
    fitted = run_check(_design(tmp_path, series=10, fit='fit = "auto"', voltage="15 kV"),
                       trials=500, rare=True, rare_samples=2000).checks
    rare = resampled["dynamic"].rare
    assert rare.found_failure_point and rare.decides
    assert "drawn from their fit" in estimator_text(rare) and "A" in estimator_text(rare)
    assert rare.p_fail == fitted["dynamic"].rare.p_fail > 0
    assert rare.ci_high == fitted["dynamic"].rare.ci_high
    # No failure point (the static check): a model of the lot is not pooled with the lot itself,
    # and the plain run decides.
    static = resampled["static"]
    assert not static.rare.found_failure_point and static.rare.pooled_trials == 0
    assert not static.rare.decides
    assert "plain run (the lot itself) decides" in rare_note_text(static.rare)
    assert static.passed == (static.estimate.ci_high <= result.target_p_fail)
    from stringcheck.report.terminal import _plain_mark

    assert _plain_mark(static) == " (plain; IS found no failure point)"


def test_as_fitted_is_the_auto_fit_and_refuses_a_small_lot(tmp_path):
    _write_lot(tmp_path, 60)
    resampled = _design(tmp_path, series=10).parts["A"].measured
    auto = _design(tmp_path, series=10, fit='fit = "auto"').parts["A"].measured
    refitted = resampled.as_fitted()
    assert refitted.fit == "auto" and not refitted.resampled
    np.testing.assert_allclose(refitted.scores, auto.scores, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(refitted.correlation, auto.correlation, rtol=1e-12, atol=1e-12)
    _write_lot(tmp_path, 5)
    with pytest.raises(DesignError, match="parts.A.measured.*too few"):
        run_check(_design(tmp_path, series=4), trials=200, rare=True)


def test_a_leakier_lot_shifts_voltage_to_the_others(tmp_path):
    # Physics: a device leaking more takes less of the blocking voltage. A lot whose first
    # device leaks 100 x the others, placed by serial in position 1, holds the lowest voltage.
    rows = ["S0,50,90"] + [f"S{k},0.5,90" for k in range(1, 10)]
    _write_lot(tmp_path, rows=rows)
    design = _design(tmp_path, series=10, positions='[[string.position]]\nindex = 1\n'
                                                    'serial = "S0"\n')
    static = run_check(design, trials=300, only=("static",)).checks["static"]
    means = [p.mean_voltage for p in static.positions]
    # At 50 Hz the 2.2 nF capacitors (omega R C = 3.25) hold it nearer its share over the
    # blocking half, so each device's stress (the worse of dc and ac) differs less than the dc
    # solution's; held as dc, the leaky device takes under 0.9 of the others' share.
    assert means[0] == min(means) and means[0] < 0.96 * np.mean(means[1:])
    dc = replace(design, duty=replace(design.duty, waveform="dc"))
    static = run_check(dc, trials=300, only=("static",)).checks["static"]
    means = [p.mean_voltage for p in static.positions]
    assert means[0] == min(means) and means[0] < 0.9 * np.mean(means[1:])


# --- the command line ----------------------------------------------------------------------------


def test_cli_reports_the_lot_and_its_warning(tmp_path):
    import json

    from typer.testing import CliRunner

    from stringcheck.cli.app import app

    example = Path(__file__).resolve().parents[2] / "examples" / \
        "precipitator-30kv-measured.toml"
    out = tmp_path / "result.json"
    result = CliRunner().invoke(app, ["check", str(example), "--trials", "4000", "--json",
                                      str(out)], terminal_width=120)
    assert result.exit_code == 0, result.output
    text = " ".join(result.output.split())  # the report wraps at the console width
    assert "Measured lot of part FR2K: fr2k-incoming-lot.csv, 60 devices" in text
    assert "1 of 60 devices of fr2k-incoming-lot.csv have i_r above the datasheet max" in text
    lots = json.loads(out.read_text())["lots"]
    assert lots[0]["devices"] == 60 and lots[0]["fit"] == "resample"
    assert lots[0]["columns"][0]["above_datasheet_max"] == 1  # 2.391 uA > 2 uA, by hand


def test_cli_bad_lot_is_one_line_exit_2(tmp_path):
    from typer.testing import CliRunner

    from stringcheck.cli.app import app

    _write_lot(tmp_path, header="serial,i_r [uA],q_rr [nC]", rows=["S1,1,2", "S2,1.5,oops"])
    (tmp_path / "design.toml").write_text(DESIGN.format(series=2, parallel=1, fit="", positions="",
                                                        lot="lot.csv", voltage="2 kV"))
    result = CliRunner().invoke(app, ["check", str(tmp_path / "design.toml")], terminal_width=300)
    assert result.exit_code == 2, result.output
    lines = [line for line in result.output.splitlines() if line.strip()]
    assert len(lines) == 1 and "line 3, column 'q_rr [nC]': 'oops' is not a number" in lines[0]
    assert "Traceback" not in result.output


# --- measured lots in a review (swap and mix) ----------------------------------------------------

_PART_B = """
[parts.B]
v_rrm = "2 kV"
i_r = { typ = "0.4 uA", max = "4 uA", at_voltage = "2 kV", at_temperature = "25 degC" }
q_rr = { typ = "60 nC", max = "120 nC", at_di_dt = "10 A/us" }
c_j = "15 pF"
measured = "lot_b.csv"
"""


def _write_lot_b(folder: Path, devices: int) -> None:
    # B's devices leak ten times more than A's (whole decades apart, so no value is in both lots).
    leakage, charge = _lot_values(devices, seed=8)
    _write_lot(folder, name="lot_b.csv", rows=[f"B{k:03d},{10 * a + 5:.6g},{b:.6g}" for k, (a, b)
                                               in enumerate(zip(leakage, charge))])


def _design_with_b(folder: Path, *, series: int, positions: str = ""):
    text = DESIGN.format(series=series, parallel=1, fit="", positions=positions, lot="lot.csv",
                         voltage="12 kV") + _PART_B
    (folder / "design.toml").write_text(text)
    return load_design(folder / "design.toml")


def test_mix_with_a_resampled_substitute_draws_distinct_devices(tmp_path):
    from stringcheck.montecarlo.sampling import substituted_devices
    from stringcheck.studies.review import mixed

    _write_lot(tmp_path, 40)
    _write_lot_b(tmp_path, 12)
    design = mixed(_design_with_b(tmp_path, series=12), 0.5, "B")
    drawn = draw_strings(design, ("i_r", "q_rr"), 0, 400)
    swap = substituted_devices(design, 0, 400, design.monte_carlo.seed)
    lot_b = design.parts["B"].measured.column("i_r")
    leakage = drawn.parameters["i_r"]
    # Substituted devices come from B's lot, the others from A's, none twice in one string.
    assert np.all(np.isin(leakage[swap], lot_b))
    assert not np.any(np.isin(leakage[~swap], lot_b))
    assert all(np.unique(row).size == row.size for row in leakage.reshape(400, -1))
    assert 0 < swap.mean() < 1


def test_mix_or_swap_needing_more_devices_than_the_lot_holds_is_refused(tmp_path):
    from stringcheck.studies.review import mixed, swapped

    _write_lot(tmp_path, 40)
    _write_lot_b(tmp_path, 6)
    design = _design_with_b(tmp_path, series=12)
    # A mix may put B in every one of the 12 positions of a string: 6 devices are not enough.
    with pytest.raises(DesignError, match=r"parts.B.measured: the lot lot_b.csv holds 6"):
        mixed(design, 0.2, "B")
    swapped(design, (1, 2, 3, 4, 5, 6), "B")
    with pytest.raises(DesignError, match="draws 7 from it"):
        swapped(design, (1, 2, 3, 4, 5, 6, 7), "B")


def test_swap_over_a_serial_position_puts_in_a_new_device(tmp_path):
    from stringcheck.studies.review import swapped

    _write_lot(tmp_path, 40)
    _write_lot_b(tmp_path, 12)
    design = _design_with_b(tmp_path, series=6, positions='[[string.position]]\nindex = 2\n'
                                                         'serial = "S003"\ntemperature_rise = "5 K"\n')
    candidate = swapped(design, (2,), "B")
    assert candidate.string.serial_grid()[0, 1] is None
    assert candidate.string.temperature_rise_grid()[0, 1] == 5.0
    leakage = draw_strings(candidate, ("i_r",), 0, 200).parameters["i_r"][:, 0, 1]
    assert np.all(np.isin(leakage, candidate.parts["B"].measured.column("i_r")))


def test_mix_of_a_part_that_already_stands_in_the_string_never_repeats_a_device(tmp_path):
    # B stands in position 5 of the baseline and is mixed in elsewhere: a device of B's lot drawn
    # for position 5 (baseline variant) and one drawn for another position (mixed-in variant)
    # must still differ.
    from stringcheck.studies.review import mixed

    _write_lot(tmp_path, 40)
    _write_lot_b(tmp_path, 12)
    design = mixed(_design_with_b(tmp_path, series=8, positions='[[string.position]]\nindex = 5\n'
                                                               'part = "B"\n'), 0.5, "B")
    leakage = draw_strings(design, ("i_r", "q_rr"), 0, 4096).parameters["i_r"].reshape(4096, -1)
    assert all(np.unique(row).size == row.size for row in leakage)


def test_every_ordered_sample_is_equally_likely():
    # Floyd's algorithm plus a random order gives every ordered pair of distinct devices out of 5
    # the same probability 1/20 (chi-square, scipy.stats.chisquare), and a lot far larger than
    # the string costs no more than a small one (2 uniforms per drawn device).
    from stringcheck.montecarlo.sampling import _lot_rows

    pairs = _lot_rows(11, 0, 40_000, 5, 5, 2)
    counts = np.zeros((5, 5), dtype=int)
    np.add.at(counts, (pairs[:, 0], pairs[:, 1]), 1)
    assert np.all(np.diag(counts) == 0)
    assert stats.chisquare(counts[~np.eye(5, dtype=bool)]).pvalue > 1e-4
    big = _lot_rows(11, 0, 4096, 5, 2_000_000, 3)
    assert big.max() < 2_000_000 and all(np.unique(r).size == 3 for r in big)


# --- found by review: recovery columns, normal fits, blank lines, separators ---------------------


def test_a_lot_of_i_rm_and_t_rr_gives_each_device_its_charge(tmp_path):
    # Q_rr = 1/2 I_RM t_rr per device (docs/methods/, triangular recovery), by hand: 1/2 x 2 A x
    # 100 ns = 100 nC and 1/2 x 3 A x 80 ns = 120 nC.
    _write_lot(tmp_path, header="serial,i_r [uA],i_rm [A],t_rr [ns]",
               rows=["S1,0.2,2,100", "S2,0.3,3,80"])
    design = _design(tmp_path, series=2)
    lot = design.parts["A"].measured
    np.testing.assert_allclose(lot.column("q_rr"), [100e-9, 120e-9], rtol=1e-12)
    drawn = draw_strings(design, ("i_r", "q_rr"), 0, 50).parameters["q_rr"]
    np.testing.assert_allclose(np.unique(drawn), [1e-7, 1.2e-7], rtol=1e-12)
    assert any("1/2 I_RM t_rr" in note for note in sentences(design.assumptions))


def test_recovery_time_alone_is_refused(tmp_path):
    _write_lot(tmp_path, header="serial,i_r [uA],t_rr [ns]", rows=["S1,0.2,100", "S2,0.3,80"])
    with pytest.raises(DesignError, match="t_rr alone is not used"):
        _design(tmp_path, series=2)


def test_a_normal_fit_that_goes_negative_is_refused(tmp_path):
    # The invented lot's leakage is lognormal with sigma 0.6 in log space: a normal fit puts
    # several per cent of the draws below zero (scipy.stats.norm.cdf(0) of the fit).
    _write_lot(tmp_path, 80)
    with pytest.raises(DesignError, match=r"fit = \"normal\" puts .* of the i_r draws below zero"):
        _design(tmp_path, series=4, fit='fit = "normal"')


def test_line_numbers_count_blank_lines(tmp_path):
    (tmp_path / "lot.csv").write_text("serial,i_r [uA],q_rr [nC]\nS1,1,2\n\n\nS2,0x7,3\n")
    with pytest.raises(DesignError, match="line 5, column 'i_r \\[uA\\]'"):
        _design(tmp_path, series=1)


@pytest.mark.parametrize("text, expected", [
    ("serial;i_r [uA];q_rr [nC]\nS1;1;2\n", "separated by semicolons"),
    ("serial\ti_r [uA]\tq_rr [nC]\nS1\t1\t2\n", "separated by tabs"),
])
def test_other_separators_name_the_fix(tmp_path, text, expected):
    (tmp_path / "lot.csv").write_text(text)
    with pytest.raises(DesignError, match=expected):
        _design(tmp_path, series=1)


def test_latin_1_lot_and_trailing_commas(tmp_path):
    (tmp_path / "lot.csv").write_bytes("serial,i_r [\u00b5A],q_rr [nC]\nS1,1,2\n".encode("latin-1"))
    with pytest.raises(DesignError, match="save it as UTF-8"):
        _design(tmp_path, series=1)
    (tmp_path / "lot.csv").write_text("serial,i_r [uA],q_rr [nC],\nS1,1,2,\nS2,1.5,3,\n")
    assert _design(tmp_path, series=2).parts["A"].measured.devices == 2


def test_a_full_mix_keeps_the_serial_placed_devices_part(tmp_path):
    # At fraction 1 every drawn device is the mix's part, but a device placed by serial number is
    # the one built in: its part stays in use (with lot sharing its lot draws were missing).
    from stringcheck.studies.review import mixed

    _write_lot(tmp_path, 40)
    _write_lot_b(tmp_path, 12)
    text = DESIGN.format(series=4, parallel=1, fit="", lot="lot.csv", voltage="6 kV",
                         positions='[[string.position]]\nindex = 1\nserial = "S000"\n') \
        .replace("seed = 11", "seed = 11\nlot_share = 0.3") + _PART_B
    (tmp_path / "design.toml").write_text(text)
    design = mixed(load_design(tmp_path / "design.toml"), 1.0, "B")
    assert design.parts_used() == ("A", "B")
    assert list(design.string.part_grids()[0][0]) == ["A", "B", "B", "B"]
    result = run_check(design, trials=600)
    assert result.checks["static"].ran
