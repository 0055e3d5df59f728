"""Device populations: spreads against scipy's distributions, screening, seeding and chunking,
lot sharing and the Gaussian copula."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from stringcheck.design.model import Spread
from stringcheck.design.reading import parse_design_text
from stringcheck.montecarlo.sampling import BLOCK_TRIALS, chunk_bounds, draw_strings
from stringcheck.montecarlo.quantile_maps import spread_quantile, tolerance_draw

K = 3.0  # docs/methods/: a datasheet limit sits sigma_at_limit = 3 standard deviations out


def make_design(*, lot_share: float = 0.0, correlation: str = "", series: int = 6,
                parallel: int = 2, seed: int = 11, screened: bool = True, positions: str = ""):
    """A design of our own for sampling: part A everywhere unless ``positions`` says otherwise."""
    text = f"""
[duty]
reverse_voltage = "6 kV"
[string]
series = {series}
parallel = {parallel}
part = "A"
{positions}
[parts.A]
v_rrm = "1.6 kV"
i_r = {{ min = "0.02 uA", typ = "0.2 uA", max = "2 uA" }}
q_rr = {{ typ = "80 nC", max = "150 nC" }}
v_t0 = {{ min = "0.9 V", typ = "1.0 V", max = "1.15 V" }}
[parts.B]
v_rrm = "1.6 kV"
i_r = {{ typ = "0.5 uA", max = "5 uA" }}
q_rr = {{ typ = "60 nC", max = "90 nC" }}
v_t0 = {{ typ = "0.9 V", max = "1.0 V" }}
[grading]
resistor = "4.7 MOhm"
resistor_tolerance = "1 %"
capacitor = "2.2 nF"
capacitor_tolerance = "10 %"
[monte_carlo]
seed = {seed}
screened = {str(screened).lower()}
lot_share = {lot_share}
{correlation}
"""
    return parse_design_text(text)


# --- one spread against scipy ----------------------------------------------------------------------

def test_symmetric_unscreened_lognormal_matches_scipy_lognorm():
    # Lognormal with median typ and limits at k sigma: ln X ~ N(ln typ, (ln(max/typ)/k)^2).
    # Independent reference: scipy.stats.lognorm(s=sigma, scale=median).
    spread = Spread(typ=1e-6, low=1e-7, high=1e-5)
    sigma = math.log(10.0) / K
    reference = stats.lognorm(s=sigma, scale=1e-6)
    # Quantile by quantile (deterministic): X(Phi^-1(q)) = F^-1(q).
    q = np.linspace(0.001, 0.999, 101)
    mapped = spread_quantile(spread, stats.norm.ppf(q), lognormal=True, sigma_at_limit=K,
                             screened=False)
    np.testing.assert_allclose(mapped, reference.ppf(q), rtol=1e-10)
    # Kolmogorov-Smirnov test of drawn values at a fixed seed (scipy.stats.kstest).
    latent = np.random.default_rng(1).standard_normal(20_000)
    drawn = spread_quantile(spread, latent, lognormal=True, sigma_at_limit=K, screened=False)
    assert stats.kstest(drawn, reference.cdf).pvalue > 0.01


def test_limits_sit_at_sigma_at_limit_unscreened():
    # Unscreened, P(X > max) = P(X < min) = norm.sf(3) = 0.00135 (normal tail, scipy.stats.norm).
    # Checked by an exact binomial test (scipy.stats.binomtest) on 400 000 draws at a fixed seed.
    spread = Spread(typ=1e-6, low=1e-7, high=1e-5)
    latent = np.random.default_rng(2).standard_normal(400_000)
    drawn = spread_quantile(spread, latent, lognormal=True, sigma_at_limit=K, screened=False)
    for count in (np.count_nonzero(drawn > spread.high), np.count_nonzero(drawn < spread.low)):
        assert stats.binomtest(int(count), drawn.size, stats.norm.sf(K)).pvalue > 0.001
    # The same for a normal parameter and another sigma_at_limit.
    normal = Spread(typ=1.0, low=0.8, high=1.2)
    drawn = spread_quantile(normal, latent, lognormal=False, sigma_at_limit=2.0, screened=False)
    count = int(np.count_nonzero(drawn > normal.high))
    assert stats.binomtest(count, drawn.size, stats.norm.sf(2.0)).pvalue > 0.001


def test_screened_normal_matches_scipy_truncnorm():
    # Production screening truncates at the limits: (X - typ) / sigma ~ truncnorm(-k, k).
    # Independent reference: scipy.stats.truncnorm (mapped back to the parameter's scale).
    spread = Spread(typ=1.0, low=0.94, high=1.06)
    scale = 0.06 / K
    reference = stats.truncnorm(-K, K, loc=1.0, scale=scale)
    q = np.linspace(0.001, 0.999, 101)
    mapped = spread_quantile(spread, stats.norm.ppf(q), lognormal=False, sigma_at_limit=K,
                             screened=True)
    np.testing.assert_allclose(mapped, reference.ppf(q), rtol=1e-9, atol=1e-12)
    latent = np.random.default_rng(3).standard_normal(20_000)
    drawn = spread_quantile(spread, latent, lognormal=False, sigma_at_limit=K, screened=True)
    assert stats.kstest((drawn - 1.0) / scale, stats.truncnorm(-K, K).cdf).pvalue > 0.01
    assert drawn.min() >= spread.low and drawn.max() <= spread.high


def test_screened_max_only_lognormal_matches_one_sided_truncnorm():
    # Only a max: the upper side sets sigma for both sides, and screening cuts at max only:
    # ln(X / typ) / sigma ~ truncnorm(-inf, k) (scipy.stats.truncnorm as reference).
    spread = Spread(typ=0.2e-6, high=2e-6)
    sigma = math.log(10.0) / K
    latent = np.random.default_rng(4).standard_normal(20_000)
    drawn = spread_quantile(spread, latent, lognormal=True, sigma_at_limit=K, screened=True)
    mapped_back = np.log(drawn / spread.typ) / sigma
    assert stats.kstest(mapped_back, stats.truncnorm(-np.inf, K).cdf).pvalue > 0.01
    assert drawn.max() <= spread.high * (1 + 1e-12)
    assert drawn.min() < spread.typ / 10  # the unscreened side keeps its tail


def test_asymmetric_limits_give_two_piece_distribution():
    # Median typ, each side at its own distance: half the draws on either side, and each side's
    # limit at k sigma of that side (two-piece normal; P(X > max) = norm.sf(k) unscreened).
    spread = Spread(typ=1.0, low=0.9, high=1.3)
    latent = np.random.default_rng(5).standard_normal(200_000)
    drawn = spread_quantile(spread, latent, lognormal=False, sigma_at_limit=K, screened=False)
    assert np.median(drawn) == pytest.approx(1.0, abs=0.002)
    upper = (drawn[drawn > 1.0] - 1.0) / (0.3 / K)
    lower = (1.0 - drawn[drawn < 1.0]) / (0.1 / K)
    # Each half mapped back is a half-normal (scipy.stats.halfnorm).
    assert stats.kstest(upper, stats.halfnorm.cdf).pvalue > 0.01
    assert stats.kstest(lower, stats.halfnorm.cdf).pvalue > 0.01


def test_fixed_spread_gives_the_constant():
    latent = np.random.default_rng(6).standard_normal((7, 2, 3))
    for lognormal in (True, False):
        for screened in (True, False):
            out = spread_quantile(Spread(typ=3.5e-9), latent, lognormal=lognormal,
                                  sigma_at_limit=K, screened=screened)
            assert out.shape == latent.shape
            assert np.all(out == 3.5e-9)


@settings(max_examples=100)
@given(typ=st.floats(1e-9, 1e3),
       low_factor=st.one_of(st.none(), st.floats(0.05, 0.999)),
       high_factor=st.one_of(st.none(), st.floats(1.001, 20.0)),
       lognormal=st.booleans(),
       sigma=st.floats(1.0, 6.0),
       latent=st.lists(st.floats(-9.0, 9.0), min_size=1, max_size=40))
def test_screened_draws_never_leave_the_limits(typ, low_factor, high_factor, lognormal, sigma,
                                               latent):
    # Screening: a device outside the datasheet limits was rejected by its maker (docs/methods/).
    # Also the map must be rank-preserving (non-decreasing in the latent value), which the
    # Gaussian copula relies on.
    if low_factor is None and high_factor is None:
        low_factor = 0.5
    low = None if low_factor is None else typ * low_factor
    high = None if high_factor is None else typ * high_factor
    spread = Spread(typ=typ, low=low, high=high)
    z = np.sort(np.asarray(latent))
    out = spread_quantile(spread, z, lognormal=lognormal, sigma_at_limit=sigma, screened=True)
    tolerance = 1e-12 * typ * (high_factor or 1.0)
    if low is not None:
        assert np.all(out >= low - tolerance)
    if high is not None:
        assert np.all(out <= high + tolerance)
    assert np.all(np.diff(out) >= -tolerance)


@settings(max_examples=100)
@given(nominal=st.floats(1.0, 1e9), tolerance=st.floats(0.0, 0.99),
       sigma=st.floats(1.0, 6.0), latent=st.lists(st.floats(-12.0, 12.0), min_size=1, max_size=40))
def test_tolerance_draw_stays_within_tolerance(nominal, tolerance, sigma, latent):
    # A component outside its tolerance band is rejected by its maker (IEC 60062 tolerance codes
    # define the band as +-tolerance about nominal).
    out = tolerance_draw(nominal, tolerance, np.asarray(latent), sigma_at_limit=sigma)
    slack = 1e-12 * nominal
    assert np.all(out >= nominal * (1 - tolerance) - slack)
    assert np.all(out <= nominal * (1 + tolerance) + slack)
    if tolerance == 0:
        assert np.all(out == nominal)


def test_tolerance_draw_spread_matches_truncated_normal():
    # Normal with the tolerance at k sigma, truncated there: (R/R0 - 1) k / tol ~ truncnorm(-k, k)
    # (scipy.stats.truncnorm as reference).
    latent = np.random.default_rng(7).standard_normal(20_000)
    out = tolerance_draw(4.7e6, 0.05, latent, sigma_at_limit=K)
    mapped_back = (out / 4.7e6 - 1.0) * K / 0.05
    assert stats.kstest(mapped_back, stats.truncnorm(-K, K).cdf).pvalue > 0.01


@pytest.mark.parametrize("low, high", [(-3.0, 3.0), (-math.inf, 3.0), (-3.0, math.inf),
                                       (-1.0, 1.0), (-math.inf, 6.0), (-1.0, 6.0)])
def test_tabulated_truncation_matches_the_exact_map(low, high):
    # The piecewise polynomial that evaluates the truncation map must agree with the map from
    # the normal CDF (ndtr / ndtri, each side in its accurate form) to a few units of the last
    # place, on a dense grid and across the interval joints; beyond |z| = 8 the exact map is used.
    from stringcheck.montecarlo.quantile_maps import _truncate, _truncate_exact

    z = np.concatenate([np.linspace(-9.0, 9.0, 400_001), np.arange(-512, 513) / 64.0,
                        [-np.inf, np.inf, np.nan]])
    table = _truncate(z, low, high)
    exact = _truncate_exact(z, low, high)
    finite = ~np.isnan(z)
    np.testing.assert_allclose(table[finite], exact[finite], rtol=0.0, atol=1e-14)
    assert np.isnan(table[-1])
    # Rank-preserving to rounding (the exact map too wobbles by an ulp where it is flat).
    assert np.all(np.diff(table[:400_001]) >= -2e-15)
    # The exact map against scipy's truncated normal: Phi_trunc^-1(Phi(z)).
    q = np.linspace(0.001, 0.999, 101)
    np.testing.assert_allclose(_truncate(stats.norm.ppf(q), low, high),
                               stats.truncnorm(low, high).ppf(q), rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("low, high, log_scale", [(-math.inf, 3.0, math.log(10.0) / 3.0),
                                                  (-3.0, 3.0, math.log(2.0) / 3.0),
                                                  (-math.inf, 2.0, 1.5), (-3.0, 3.0, 0.0)])
def test_tabulated_screened_draw_matches_the_exact_map(low, high, log_scale):
    # A screened draw, typ exp(sigma y) (lognormal) or typ + sigma y (normal, and the tolerance
    # draws), y the truncated latent, is tabulated as one map: it must agree with the exact map to
    # a few units of the last place, relative.
    from stringcheck.montecarlo.quantile_maps import _exact_map, _truncate

    z = np.concatenate([np.linspace(-9.0, 9.0, 400_001), np.arange(-2048, 2049) / 256.0])
    table = _truncate(z, low, high, scale=log_scale, median=2e-7, lognormal=True)
    exact = _exact_map(z, low, high, log_scale, 2e-7, True)
    np.testing.assert_allclose(table, exact, rtol=2e-14, atol=0.0)
    assert table.max() <= 2e-7 * math.exp(log_scale * high)
    table = _truncate(z, low, high, scale=4.7e6 * 0.05 / 3.0, median=4.7e6)
    exact = _exact_map(z, low, high, 4.7e6 * 0.05 / 3.0, 4.7e6, False)
    np.testing.assert_allclose(table, exact, rtol=1e-15, atol=0.0)


# --- whole strings ---------------------------------------------------------------------------------

def _assert_same(a, b):
    assert a.parameters.keys() == b.parameters.keys()
    for name in a.parameters:
        np.testing.assert_array_equal(a.parameters[name], b.parameters[name])
        np.testing.assert_array_equal(a.latent[name], b.latent[name])
    np.testing.assert_array_equal(a.resistance, b.resistance)
    np.testing.assert_array_equal(a.capacitance, b.capacitance)


def _concat(pieces):
    class Joined:
        parameters = {n: np.concatenate([p.parameters[n] for p in pieces]) for n in pieces[0].parameters}
        latent = {n: np.concatenate([p.latent[n] for p in pieces]) for n in pieces[0].latent}
        resistance = np.concatenate([p.resistance for p in pieces])
        capacitance = np.concatenate([p.capacitance for p in pieces])
    return Joined


CORRELATED = "[monte_carlo.correlation]\ni_r-q_rr = -0.6"


def test_shapes_and_trial_count():
    design = make_design(series=5, parallel=3)
    drawn = draw_strings(design, ("i_r", "q_rr"), 0, 17)
    assert drawn.trials == 17
    for name in ("i_r", "q_rr"):
        assert drawn.parameters[name].shape == (17, 3, 5)
        assert drawn.latent[name].shape == (17, 3, 5)
    assert drawn.resistance.shape == drawn.capacitance.shape == (17, 3, 5)


def test_same_seed_gives_the_same_arrays_and_another_seed_does_not():
    design = make_design(lot_share=0.3, correlation=CORRELATED)
    parameters = ("i_r", "q_rr", "v_t0")
    _assert_same(draw_strings(design, parameters, 0, 500), draw_strings(design, parameters, 0, 500))
    other = draw_strings(design, parameters, 0, 500, seed=12)
    assert not np.array_equal(other.parameters["i_r"],
                              draw_strings(design, parameters, 0, 500).parameters["i_r"])
    # The seed argument overrides the design's: seed=11 is the design's own.
    _assert_same(draw_strings(design, parameters, 0, 500, seed=11),
                 draw_strings(design, parameters, 0, 500))


@pytest.mark.parametrize("cuts", [(1000,), (5000,), (1000, 4096, 8191), (BLOCK_TRIALS,)])
def test_chunks_give_the_same_draws_as_one_piece(cuts):
    # docs/methods/monte-carlo.md: results do not depend on chunk size; chunks may start inside a block.
    design = make_design(lot_share=0.3, correlation=CORRELATED)
    parameters = ("i_r", "q_rr", "v_t0")
    total = 10_000
    whole = draw_strings(design, parameters, 0, total)
    edges = (0,) + cuts + (total,)
    pieces = [draw_strings(design, parameters, a, b - a) for a, b in zip(edges[:-1], edges[1:])]
    _assert_same(whole, _concat(pieces))


def test_chunk_bounds_cover_the_run_in_whole_blocks():
    bounds = chunk_bounds(10_000, 5000)
    assert bounds == [(0, BLOCK_TRIALS), (BLOCK_TRIALS, BLOCK_TRIALS),
                      (2 * BLOCK_TRIALS, 10_000 - 2 * BLOCK_TRIALS)]
    assert sum(count for _, count in chunk_bounds(12_345, 1)) == 12_345


def test_screened_string_draws_stay_within_the_limits():
    design = make_design()
    drawn = draw_strings(design, ("i_r", "v_t0"), 0, 20_000)
    i_r, v_t0 = drawn.parameters["i_r"], drawn.parameters["v_t0"]
    assert i_r.min() >= 0.02e-6 * (1 - 1e-12) and i_r.max() <= 2e-6 * (1 + 1e-12)
    assert v_t0.min() >= 0.9 - 1e-12 and v_t0.max() <= 1.15 + 1e-12
    assert np.abs(drawn.resistance / 4.7e6 - 1).max() <= 0.01 + 1e-12
    assert np.abs(drawn.capacitance / 2.2e-9 - 1).max() <= 0.10 + 1e-12


def _position_correlation(latent: np.ndarray, first, second) -> float:
    return float(np.corrcoef(latent[(slice(None),) + first], latent[(slice(None),) + second])[0, 1])


N_CORRELATION = 20_000
# Standard error of a sample correlation near rho: (1 - rho^2) / sqrt(N) (Fisher; any statistics
# text). Tolerances below are 5 standard errors at rho = 0.
TOLERANCE = 5.0 / math.sqrt(N_CORRELATION)


def test_no_lot_share_leaves_positions_uncorrelated():
    drawn = draw_strings(make_design(lot_share=0.0), ("i_r",), 0, N_CORRELATION)
    latent = drawn.latent_normals("i_r")
    assert abs(_position_correlation(latent, (0, 0), (0, 1))) < TOLERANCE
    assert abs(_position_correlation(latent, (0, 2), (1, 2))) < TOLERANCE
    # Each latent is standard normal (scipy.stats.kstest against norm).
    assert stats.kstest(latent[:, 0, 0], "norm").pvalue > 0.01


@pytest.mark.parametrize("share", [0.5, 0.3])
def test_lot_share_correlates_positions_of_one_string(share):
    # z = sqrt(s) z_lot + sqrt(1 - s) z_device: corr = s between two devices of one lot, and
    # unit variance (docs/methods/, "lot_share is the fraction of variance common...").
    drawn = draw_strings(make_design(lot_share=share), ("i_r", "q_rr"), 0, N_CORRELATION)
    for name in ("i_r", "q_rr"):
        latent = drawn.latent[name]
        assert _position_correlation(latent, (0, 0), (0, 5)) == pytest.approx(share, abs=TOLERANCE)
        # Both branches of one built string share the lot.
        assert _position_correlation(latent, (0, 1), (1, 3)) == pytest.approx(share, abs=TOLERANCE)
        assert latent.var() == pytest.approx(1.0, abs=0.02)
        assert stats.kstest(latent[:, 1, 1], "norm").pvalue > 0.01
    # Parameters are drawn from separate lot columns: i_r and q_rr of one device stay independent.
    same_device = np.corrcoef(drawn.latent["i_r"][:, 0, 0], drawn.latent["q_rr"][:, 0, 0])[0, 1]
    assert abs(same_device) < TOLERANCE


def test_different_parts_of_one_string_draw_from_different_lots():
    # A mixed-vendor string draws each position from its own part (docs/methods/).
    positions = '[[string.position]]\nindex = 1\npart = "B"'
    drawn = draw_strings(make_design(lot_share=0.5, positions=positions), ("i_r",), 0, N_CORRELATION)
    latent = drawn.latent["i_r"]
    assert abs(_position_correlation(latent, (0, 0), (0, 3))) < TOLERANCE  # B against A
    assert _position_correlation(latent, (0, 0), (1, 0)) == pytest.approx(0.5, abs=TOLERANCE)  # B, B


def test_correlation_key_gives_the_latent_correlation():
    # Gaussian copula: the latent normals of one device have the given correlation; the rank
    # correlation of the drawn values is then (6 / pi) asin(rho / 2) (Kruskal, JASA 1958), checked
    # with scipy.stats.spearmanr.
    rho = -0.6
    drawn = draw_strings(make_design(correlation=CORRELATED, lot_share=0.3), ("i_r", "q_rr"), 0,
                         N_CORRELATION)
    i_r, q_rr = drawn.latent["i_r"].ravel(), drawn.latent["q_rr"].ravel()
    assert np.corrcoef(i_r, q_rr)[0, 1] == pytest.approx(rho, abs=0.01)
    assert i_r.var() == pytest.approx(1.0, abs=0.01) and q_rr.var() == pytest.approx(1.0, abs=0.01)
    spearman = stats.spearmanr(drawn.parameters["i_r"][:, 0, 2],
                               drawn.parameters["q_rr"][:, 0, 2]).statistic
    assert spearman == pytest.approx(6 / math.pi * math.asin(rho / 2), abs=0.03)


def test_drawing_one_more_parameter_does_not_change_the_others():
    # montecarlo/sampling.py docstring: each parameter has its own stream, so adding one leaves the rest.
    design = make_design(lot_share=0.3)
    alone = draw_strings(design, ("i_r",), 1000, 3000)
    more = draw_strings(design, ("q_rr", "v_t0", "i_r"), 1000, 3000)
    np.testing.assert_array_equal(alone.parameters["i_r"], more.parameters["i_r"])
    np.testing.assert_array_equal(alone.resistance, more.resistance)
    np.testing.assert_array_equal(alone.capacitance, more.capacitance)


def test_uncorrelated_extra_parameter_leaves_correlated_pair_unchanged():
    design = make_design(correlation=CORRELATED)
    pair = draw_strings(design, ("i_r", "q_rr"), 0, 2000)
    more = draw_strings(design, ("i_r", "q_rr", "v_t0"), 0, 2000)
    for name in ("i_r", "q_rr"):
        np.testing.assert_allclose(pair.parameters[name], more.parameters[name], rtol=1e-14)


@pytest.mark.parametrize(("first", "second", "name"), [
    (("i_r", "q_rr"), ("q_rr", "i_r"), "i_r"),  # same set, other order
    (("q_rr",), ("i_r", "q_rr"), "q_rr"),  # one more (correlated) parameter
])
def test_correlated_draws_do_not_depend_on_which_parameters_are_requested(first, second, name):
    design = make_design(correlation=CORRELATED)
    a = draw_strings(design, first, 0, 500)
    b = draw_strings(design, second, 0, 500)
    np.testing.assert_allclose(a.parameters[name], b.parameters[name], rtol=1e-12)


def test_trial_slice_cuts_every_per_trial_array():
    # The check works through a chunk in slices: a slice must equal drawing those trials alone.
    design = make_design()
    drawn = draw_strings(design, ("i_r", "q_rr"), 0, 3 * BLOCK_TRIALS)
    part = drawn.trial_slice(BLOCK_TRIALS, BLOCK_TRIALS)
    alone = draw_strings(design, ("i_r", "q_rr"), BLOCK_TRIALS, BLOCK_TRIALS)
    assert part.first_trial == alone.first_trial == BLOCK_TRIALS and part.trials == BLOCK_TRIALS
    for name in ("i_r", "q_rr"):
        np.testing.assert_array_equal(part.parameters[name], alone.parameters[name])
        np.testing.assert_array_equal(part.latent[name], alone.latent[name])
    for got, expected in ((part.resistance, alone.resistance),
                          (part.capacitance, alone.capacitance)):
        if expected is None:
            assert got is None
        else:
            np.testing.assert_array_equal(got, expected)
