"""``stringcheck review --mix FRACTION:PART``: mixed stock drawn device by device.

Sources of the checks: closed-form limits (fraction 0 is the baseline, fraction 1 is every position
swapped), the binomial law of the substituted count (scipy.stats), a coupling property of the draw
(hypothesis), and the CLI.
"""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from typer.testing import CliRunner

from stringcheck.cli.app import app
from stringcheck.design.reading import parse_design_text
from stringcheck.errors import StringcheckError
from stringcheck.report.export import result_to_dict
from stringcheck.montecarlo.sampling import BLOCK_TRIALS, draw_strings, substituted_devices
from stringcheck.solvers.series_static import solve_static_sharing
from stringcheck.studies.check import run_check
from stringcheck.studies.review import mixed, parse_mix, parse_swap, review, swapped

runner = CliRunner()
EXAMPLES = Path(__file__).resolve().parents[2] / "examples"

# Invented 2 x 6 string of slow devices with scatter in leakage and charge; FAST recovers with less
# charge, LEAKY leaks three times as much at every quantile, WEAK is SLOW with a lower V_RRM.
BASE = """
[duty]
reverse_voltage = "6 kV"
waveform = "half-sine"
frequency = "50 Hz"
di_dt = "10 A/us"
[string]
series = 6
parallel = 2
derating = 0.9
part = "SLOW"
[parts.SLOW]
v_rrm = "1.6 kV"
i_r = { typ = "1 uA", max = "5 uA", at_temperature = "25 degC" }
q_rr = { typ = "1.0 uC", max = "1.3 uC" }
leakage_voltage_exponent = 0
[parts.FAST]
v_rrm = "1.6 kV"
i_r = { typ = "1 uA", max = "5 uA", at_temperature = "25 degC" }
q_rr = { typ = "0.7 uC", max = "0.9 uC" }
leakage_voltage_exponent = 0
[parts.LEAKY]
v_rrm = "1.6 kV"
i_r = { typ = "3 uA", max = "15 uA", at_temperature = "25 degC" }
q_rr = { typ = "1.0 uC", max = "1.3 uC" }
leakage_voltage_exponent = 0
[parts.WEAK]
v_rrm = "1.15 kV"
i_r = { typ = "1 uA", max = "5 uA", at_temperature = "25 degC" }
q_rr = { typ = "1.0 uC", max = "1.3 uC" }
leakage_voltage_exponent = 0
[grading]
resistor = "10 MOhm"
resistor_tolerance = "1 %"
capacitor = "3.3 nF"
capacitor_tolerance = "5 %"
[monte_carlo]
trials = 4096
seed = 9
lot_share = 0.3
"""

# The parallel example with a second part whose threshold voltage is 0.15 V lower (invented).
LOW_THRESHOLD = """
[parts.LOWVT]
class = "si-fast-recovery"
v_rrm = "1.6 kV"
i_fav = "20 A"
v_t0 = { typ = "0.95 V", max = "1.15 V", at_temperature = "125 degC" }
r_t = { typ = "15 mOhm", max = "20 mOhm", at_temperature = "125 degC" }
t_j_max = "150 degC"
"""


def _checks(result) -> dict:
    """The JSON of every check that ran (the design's title left out)."""
    return result_to_dict(result)["checks"]


def test_fraction_zero_is_the_baseline_bit_for_bit():
    # Closed-form limit: at fraction 0 no device is substituted (u < 0 never holds).
    base = parse_design_text(BASE)
    result = review(base, mixed(base, 0.0, "FAST"))
    assert result.verdict == "accept"
    assert all(c.rise in (None, 0.0) for c in result.changes)
    assert result.worse_positions == ()
    assert _checks(result.candidate) == _checks(result.baseline)


@pytest.mark.parametrize("part", ["FAST", "LEAKY", "WEAK"])
def test_fraction_one_is_every_position_swapped_bit_for_bit(part):
    # Closed-form limit: at fraction 1 every device is substituted (u < 1 always holds), and on
    # common random numbers that is the design with the part in every position.
    base = parse_design_text(BASE)
    everywhere = run_check(swapped(base, tuple(range(1, 7)), part))
    mix = run_check(mixed(base, 1.0, part))
    assert _checks(mix) == _checks(everywhere)
    assert mix.verdict == everywhere.verdict


def test_fraction_one_equals_the_swap_in_the_parallel_and_thermal_checks():
    # Closed-form limit, as above, for the forward checks of the parallel example.
    text = (EXAMPLES / "furnace-rectifier-3x2-parallel.toml").read_text(encoding="utf-8")
    base = parse_design_text(text + LOW_THRESHOLD)
    everywhere = run_check(swapped(base, (1, 2), "LOWVT"), trials=3000)
    mix = run_check(mixed(base, 1.0, "LOWVT"), trials=3000)
    assert mix.checks["parallel"].ran and mix.checks["thermal"].ran
    assert _checks(mix) == _checks(everywhere)


def test_fraction_one_equals_the_swap_in_the_transient_check():
    # Closed-form limit for the time-domain turn-off (each device takes its own part's fit).
    text = (EXAMPLES / "precipitator-30kv.toml").read_text(encoding="utf-8")
    base = parse_design_text(text)
    part = base.parts["FR2K"]
    quick = replace(part, name="QUICK", q_rr=part.q_rr.scaled(0.7))
    base = replace(base, parts={**base.parts, "QUICK": quick})
    options = dict(trials=600, transient=True, transient_worst=3, transient_sample=40)
    everywhere = run_check(swapped(base, tuple(range(1, 25)), "QUICK"), **options)
    mix = run_check(mixed(base, 1.0, "QUICK"), **options)
    assert mix.checks["transient"].ran, mix.checks["transient"].reason
    assert _checks(mix)["transient"] == _checks(everywhere)["transient"]
    half = run_check(mixed(base, 0.5, "QUICK"), **options)
    assert half.checks["transient"].ran
    assert {p.part for p in half.checks["transient"].positions} == {"FR2K|QUICK"}


def test_the_substituted_count_is_binomial():
    # scipy: per built string the number of substituted devices is Binomial(n_devices, f); a
    # chi-square goodness-of-fit over the trials, and an exact binomial test of the total.
    design = mixed(parse_design_text(BASE), 0.3, "FAST")
    devices = 12
    trials = 3 * BLOCK_TRIALS
    drawn = draw_strings(design, ("i_r",), 0, trials)
    fast = drawn.part_names.index("FAST")
    counts = np.count_nonzero(drawn.part_index == fast, axis=(1, 2))
    observed = np.bincount(counts, minlength=devices + 1)
    expected = trials * stats.binom.pmf(np.arange(devices + 1), devices, 0.3)
    # Pool the sparse tail (expected < 5) into its neighbour, as the chi-square test requires.
    keep = expected >= 5
    observed_pooled = np.append(observed[keep], observed[~keep].sum())
    expected_pooled = np.append(expected[keep], expected[~keep].sum())
    assert stats.chisquare(observed_pooled, expected_pooled).pvalue > 1e-3
    total = int(counts.sum())
    assert stats.binomtest(total, trials * devices, 0.3).pvalue > 1e-3


def test_the_mixed_devices_take_their_own_parts_draws():
    # Property of common random numbers: a substituted device has the value the all-FAST design
    # draws there, every other device the baseline's value; grading draws are shared.
    base = parse_design_text(BASE)
    design = mixed(base, 0.4, "FAST")
    drawn = draw_strings(design, ("i_r", "q_rr"), 0, 500)
    plain = draw_strings(base, ("i_r", "q_rr"), 0, 500)
    fast = draw_strings(swapped(base, tuple(range(1, 7)), "FAST"), ("i_r", "q_rr"), 0, 500)
    swap = drawn.part_index == drawn.part_names.index("FAST")
    assert 0 < np.count_nonzero(swap) < swap.size
    for name in ("i_r", "q_rr"):
        np.testing.assert_array_equal(drawn.parameters[name],
                                      np.where(swap, fast.parameters[name], plain.parameters[name]))
    np.testing.assert_array_equal(drawn.resistance, plain.resistance)
    np.testing.assert_array_equal(drawn.capacitance, plain.capacitance)


@settings(max_examples=40, deadline=None)
@given(low=st.floats(0.0, 1.0), high=st.floats(0.0, 1.0), seed=st.integers(0, 2**32 - 1),
       first=st.integers(0, 3 * BLOCK_TRIALS))
def test_a_higher_fraction_substitutes_a_superset(low, high, seed, first):
    # Property (coupling): a device is substituted when its own uniform is below the fraction, so
    # the devices substituted at f1 <= f2 are a subset of those at f2, for any trials.
    low, high = min(low, high), max(low, high)
    base = parse_design_text(BASE)
    at_low = substituted_devices(mixed(base, low, "FAST"), first, 50, seed)
    at_high = substituted_devices(mixed(base, high, "FAST"), first, 50, seed)
    assert not np.any(at_low & ~at_high)


def test_substitution_does_not_depend_on_where_a_chunk_starts():
    # Property: the choice is keyed by block and device, so a chunk reproduces the rows of a longer draw.
    design = mixed(parse_design_text(BASE), 0.5, "FAST")
    whole = substituted_devices(design, 0, 2 * BLOCK_TRIALS, 5)
    part = substituted_devices(design, BLOCK_TRIALS - 10, 30, 5)
    np.testing.assert_array_equal(part, whole[BLOCK_TRIALS - 10:BLOCK_TRIALS + 20])


@settings(max_examples=8, deadline=None)
@given(low=st.sampled_from([0.0, 0.05, 0.2, 0.5]), step=st.sampled_from([0.0, 0.1, 0.3, 0.5]),
       seed=st.integers(0, 1000))
def test_more_of_a_weaker_part_never_lowers_the_static_failures(low, step, seed):
    # Property (coupling): WEAK has the spreads of SLOW and only a lower limit, so without lot
    # sharing (a lot component is drawn per part) every built string carries the same voltages at
    # any fraction; the weak devices at f2 >= f1 include those at f1, so a string failing at f1
    # fails at f2 and the failure count (and with it the upper bound of P(fail)) never falls as
    # the fraction rises.
    base = parse_design_text(BASE)
    base = replace(base, monte_carlo=replace(base.monte_carlo, lot_share=0.0))
    high = min(1.0, low + step)
    first = run_check(mixed(base, low, "WEAK"), seed=seed, only=("static",)).checks["static"]
    second = run_check(mixed(base, high, "WEAK"), seed=seed, only=("static",)).checks["static"]
    assert second.estimate.failures >= first.estimate.failures
    assert second.estimate.ci_high >= first.estimate.ci_high
    assert second.worst_ratio >= first.worst_ratio
    assert second.worst_voltage == first.worst_voltage


@settings(max_examples=25, deadline=None)
@given(low=st.floats(0.0, 1.0), high=st.floats(0.0, 1.0), seed=st.integers(0, 2**32 - 1))
def test_more_of_a_leakier_part_never_unloads_the_devices_that_keep_their_part(low, high, seed):
    # Property (coupling and static sharing, docs/methods/): LEAKY leaks 3x SLOW at every quantile,
    # so without lot sharing each device substituted at f2 >= f1 leaks at least as much as at f1.
    # With V_k = (I - I_R,k) / G_k and sum V_k = V_s, more leakage elsewhere raises the string
    # current I, so a device that is SLOW at f2 never carries less voltage than at f1.
    low, high = min(low, high), max(low, high)
    base = parse_design_text(BASE)
    base = replace(base, monte_carlo=replace(base.monte_carlo, lot_share=0.0))
    voltages, slow = [], None
    for fraction in (low, high):
        drawn = draw_strings(mixed(base, fraction, "LEAKY"), ("i_r",), 0, 200, seed=seed)
        solution = solve_static_sharing(6000.0, 1.0 / drawn.resistance, drawn.parameters["i_r"],
                                        reference_voltage=1600.0, voltage_exponent=0.0)
        voltages.append(solution.voltages)
        slow = drawn.part_index == drawn.part_names.index("SLOW") if "SLOW" in drawn.part_names \
            else np.zeros(drawn.part_index.shape, dtype=bool)
    assert np.all(voltages[1][slow] >= voltages[0][slow] * (1 - 1e-12))


def test_a_leakier_substitute_pushes_voltage_onto_the_devices_that_keep_their_part():
    # Static sharing (docs/methods/): V_k = (I - I_R,k) R_k with sum V_k = V_s; a leakier device takes
    # less voltage and pushes it onto the others, so a string with both parts shares worse than
    # one of a single part, and every position is reported as the mixed "SLOW|LEAKY".
    base = parse_design_text(BASE)
    plain = run_check(base, only=("static",)).checks["static"]
    leaky = run_check(mixed(base, 0.5, "LEAKY"), only=("static",)).checks["static"]
    assert leaky.worst_voltage > plain.worst_voltage
    assert {p.part for p in leaky.positions} == {"SLOW|LEAKY"}


@pytest.mark.parametrize("text,expected", [
    ("0.25:FAST", (0.25, "FAST")), ("25%:FAST", (0.25, "FAST")), (" 1 : FAST ", (1.0, "FAST")),
    ("0:FAST", (0.0, "FAST")), ("100%:FAST", (1.0, "FAST")), ("1e-1:FAST", (0.1, "FAST")),
])
def test_mix_strings(text, expected):
    fraction, part = parse_mix(text, parse_design_text(BASE))
    assert part == expected[1] and fraction == pytest.approx(expected[0], rel=1e-12)


@pytest.mark.parametrize("text,fragment", [
    ("1.5:FAST", "0..1"), ("25:FAST", "0..1"), ("-0.1:FAST", "0..1"), ("nan:FAST", "0..1"),
    ("abc:FAST", "not a number"), ("0.2:NOPE", "NOPE"), ("0.2", "FRACTION:PART"),
    ("0.2:A:B", "FRACTION:PART"), ("inf%:FAST", "0..1"),
])
def test_bad_mix_strings_name_the_problem(text, fragment):
    with pytest.raises(StringcheckError, match=fragment):
        parse_mix(text, parse_design_text(BASE))


def test_a_substitute_is_checked_as_the_reader_checks_a_part_in_use():
    text = BASE + """
[parts.NOLEAK]
v_rrm = "1.6 kV"
q_rr = { typ = "1.0 uC" }
[parts.COOL]
v_rrm = "1.6 kV"
i_r = { typ = "1 uA", at_temperature = "25 degC" }
q_rr = { typ = "1.0 uC" }
t_j_max = "20 degC"
"""
    design = parse_design_text(text)
    with pytest.raises(StringcheckError, match="NOLEAK.*i_r"):
        parse_mix("0.1:NOLEAK", design)
    with pytest.raises(StringcheckError, match="t_j_max of part 'COOL'"):
        parse_mix("0.1:COOL", design)
    with pytest.raises(StringcheckError, match="swap='2:NOLEAK'.*NOLEAK.*i_r"):
        parse_swap("2:NOLEAK", design)


def _pair_with_a_lower_threshold(pair: str, beta: float, shift: float) -> str:
    """``pair`` (tests/designs/parallel_pair.toml) at beta, and part LOW: the same with V_T0 lower by
    ``shift`` standard deviations of dV = V_T0,1 - V_T0,2 (sigma sqrt 2, sigma = 10 mV)."""
    sigma = 0.010
    i_fav = 7.5 + beta * sigma * math.sqrt(2) / (2 * 0.010)  # d = 2 r_T (I_F(AV) - I / 2)
    delta = shift * sigma * math.sqrt(2)
    return pair.replace('i_fav = "9.8 A"', f'i_fav = "{i_fav!r} A"') + f"""
[parts.LOW]
v_rrm = "2 kV"
i_fav = "{i_fav!r} A"
i_r = {{ typ = "1 uA", at_temperature = "25 degC" }}
v_t0 = {{ typ = "{0.9 - delta!r} V", min = "{0.87 - delta!r} V", max = "{0.93 - delta!r} V", \
at_temperature = "25 degC" }}
r_t = {{ typ = "10 mOhm" }}
"""


@pytest.mark.parametrize("beta, shift, fraction, trials", [(2.5, 1.0, 0.3, 100_000),
                                                          (5.0, 1.5, 0.1, 4096)])
def test_importance_sampling_under_a_mix_against_the_closed_form(beta, shift, fraction, trials,
                                                                 parallel_pair_design):
    # Two branches (tests/designs/parallel_pair.toml): a branch fails when the other's V_T0 exceeds
    # its own by more than d = beta sigma sqrt 2. With each device LOW (V_T0 lower by
    # shift sigma sqrt 2) with probability f, independently: P(fail) = ((1-f)^2 + f^2) 2 Phi(-beta)
    # + 2 f (1-f) (Phi(-(beta - shift)) + Phi(-(beta + shift))) (scipy.stats.norm). The
    # substitution is a step in the sampler's latent space; the estimate must still be within its
    # own 3 standard errors (and agree with the plain run where that sees failures).
    exact = ((1 - fraction) ** 2 + fraction ** 2) * 2 * stats.norm.sf(beta) + \
        2 * fraction * (1 - fraction) * (stats.norm.sf(beta - shift) + stats.norm.sf(beta + shift))
    text = _pair_with_a_lower_threshold(parallel_pair_design, beta, shift)
    design = mixed(parse_design_text(text), fraction, "LOW")
    check = run_check(design, trials=trials, rare=True).checks["parallel"]
    rare = check.rare
    assert rare.found_failure_point and rare.decides
    assert abs(rare.p_fail - exact) <= 3.0 * rare.std_error
    assert rare.std_error < 0.25 * exact
    if check.estimate.failures > 100:
        plain = check.estimate
        plain_error = math.sqrt(plain.p_fail * (1 - plain.p_fail) / plain.trials)
        assert abs(plain.p_fail - exact) <= 3.0 * plain_error


def test_drivers_under_a_mix_rank_the_substitution():
    # A faster part (30 % less Q_rr) mixed in at 20 %: in the turn-off the substituted devices
    # block first and take more voltage (charge balance), so the more of them a string holds, the
    # worse it is; halving the fraction lowers the 99th-percentile stress.
    design = mixed(parse_design_text(BASE), 0.2, "FAST")
    result = run_check(design, trials=8192, drivers=True)
    dynamic = {d.input: d for d in result.drivers if d.check == "dynamic"}
    assert "mix" in dynamic and dynamic["mix"].rank_correlation > 0.1
    mix = dynamic["mix"]
    assert mix.tightened_p99_ratio is not None
    assert mix.tightened_p99_ratio <= result.checks["dynamic"].p99_ratio
    assert "substituted devices" in mix.label


def test_cli_review_takes_rare_and_drivers_under_a_mix(tmp_path):
    path = tmp_path / "base.toml"
    path.write_text(BASE, encoding="utf-8")
    target = tmp_path / "review.json"
    out = runner.invoke(app, ["review", str(path), "--mix", "0.2:FAST", "--trials", "2048",
                              "--rare", "--drivers", "--json", str(target)])
    assert out.exit_code in (0, 1), out.output
    data = json.loads(target.read_text(encoding="utf-8"))
    for side in ("baseline", "candidate"):
        rare = data[side]["checks"]["dynamic"]["rare"]
        assert rare is not None and rare["automatic"] is False
    changes = {c["check"]: c for c in data["changes"]["checks"]}
    dynamic = changes["dynamic"]
    assert dynamic["candidate_p_fail_by"] in ("importance sampling", "plain")
    rare = data["candidate"]["checks"]["dynamic"]["rare"]
    if rare["decides"]:
        assert dynamic["candidate_p_fail_upper"] == rare["p_fail_ci"][1]
    assert any(d["input"] == "mix" for d in data["candidate"]["drivers"])
    assert "candidate dynamic: P(fail) from" in " ".join(out.output.split())
    assert "What drives the worst stress" in out.output


def test_cli_review_mix_exit_codes(tmp_path):
    path = tmp_path / "base.toml"
    path.write_text(BASE, encoding="utf-8")
    same = runner.invoke(app, ["review", str(path), "--mix", "0:FAST", "--quiet"])
    assert same.exit_code == 0, same.output
    assert same.output.startswith("accept")
    weak = runner.invoke(app, ["review", str(path), "--mix", "50%:WEAK", "--quiet"])
    assert weak.exit_code == 1, weak.output
    for bad, fragment in (("2:FAST", "0..1"), ("0.3:NOPE", "NOPE"), ("x", "FRACTION:PART")):
        out = runner.invoke(app, ["review", str(path), "--mix", bad])
        assert out.exit_code == 2, out.output
        assert fragment in out.stderr and "--mix" in out.stderr
        assert len(out.stderr.strip().splitlines()) == 1, out.stderr
    for extra in (["--swap", "1:FAST"], [str(path)]):
        both = runner.invoke(app, ["review", str(path), *extra, "--mix", "0.1:FAST"])
        assert both.exit_code == 2 and "exactly one" in both.stderr, both.output


@pytest.mark.slow
def test_cli_mixing_a_lower_threshold_part_into_a_parallel_group_worsens_the_share(tmp_path):
    # Forward sharing (docs/methods/): a branch with a lower V_T0 takes more of the group current.
    text = (EXAMPLES / "furnace-rectifier-3x2-parallel.toml").read_text(encoding="utf-8")
    path = tmp_path / "furnace.toml"
    path.write_text(text + LOW_THRESHOLD, encoding="utf-8")
    target = tmp_path / "review.json"
    out = runner.invoke(app, ["review", str(path), "--mix", "0.34:LOWVT", "--trials", "4096",
                              "--json", str(target)])
    assert out.exit_code in (0, 1), out.output
    assert "LOWVT mixed in at 34 % of the devices" in out.output
    data = json.loads(target.read_text(encoding="utf-8"))
    assert data["mix"] == {"fraction": 0.34, "part": "LOWVT"}
    assert "LOWVT mixed in at 34 %" in data["candidate"]["design"]["title"]
    base, cand = data["baseline"]["checks"], data["candidate"]["checks"]
    assert cand["parallel"]["worst_share"] > base["parallel"]["worst_share"]
    assert cand["parallel"]["p99_share"] > base["parallel"]["p99_share"]
    assert {p["part"] for p in cand["thermal"]["positions"]} == {"FR|LOWVT"}
    assert any("lower threshold voltage" in line for line in data["changes"]["reasons"])


def test_cli_mix_workers_two_equals_one(tmp_path):
    # Property: the draws are keyed by block, so the run does not depend on the worker count.
    path = tmp_path / "base.toml"
    path.write_text(BASE, encoding="utf-8")
    outputs = []
    for workers in ("1", "2"):
        target = tmp_path / f"review-{workers}.json"
        out = runner.invoke(app, ["review", str(path), "--mix", "0.3:FAST", "--trials", "9000",
                                  "--workers", workers, "--json", str(target), "--quiet"])
        assert out.exit_code in (0, 1), out.output
        outputs.append(target.read_text(encoding="utf-8"))
    assert outputs[0] == outputs[1]


@pytest.mark.parametrize("fraction", [0.0, 1.0])
def test_rare_takes_a_mix_of_none_or_all(fraction):
    # Fractions 0 and 1 draw no substitution at all (every device one part): the sampler has no
    # mix coordinates to move and must still build the strings.
    design = mixed(parse_design_text(BASE), fraction, "FAST")
    result = run_check(design, trials=2048, rare=True)
    assert result.checks["static"].rare is not None
