"""The sizing search against the textbook corners, its own monotonicity, and bad input."""

from __future__ import annotations

from dataclasses import replace

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stringcheck import eseries
from stringcheck.design.reading import parse_design_text
from stringcheck.errors import DesignError, ImpossibleDesignError, SizingError
from stringcheck.physics.grading import worst_case_dynamic_capacitance, worst_case_static_resistance
from stringcheck.studies.check import run_check
from stringcheck.studies.size import size

from tests.designs import design_text


def corner(*, n=8, v_s=9000.0, v_rrm=1400.0, derating=0.9, leak=(2e-6, 12e-6),
           charge=(0.4e-6, 1.0e-6), target=1e-3, trials=4000, resistor_series="E96",
           capacitor_series="E12", tolerance=0.0, extra_duty="") -> str:
    """Fixed (no-scatter) corner: position 1 least leakage and least Q_rr, the rest the most."""
    return f"""
[duty]
reverse_voltage = {v_s}
waveform = "half-sine"
frequency = 50
di_dt = "10 A/us"
forward_current = "1 A"
{extra_duty}
[string]
series = {n}
derating = {derating}
part = "SLOW"
[[string.position]]
index = 1
part = "FAST"
[parts.FAST]
v_rrm = {v_rrm}
i_r = {{ typ = {leak[0]}, at_temperature = "25 degC", at_voltage = {v_rrm} }}
q_rr = {{ typ = {charge[0]} }}
leakage_voltage_exponent = 0
[parts.SLOW]
v_rrm = {v_rrm}
i_r = {{ typ = {leak[1]}, at_temperature = "25 degC", at_voltage = {v_rrm} }}
q_rr = {{ typ = {charge[1]} }}
leakage_voltage_exponent = 0
[grading]
resistor_tolerance = {tolerance}
[monte_carlo]
trials = {trials}
[sizing]
target_p_fail = {target}
resistor_series = "{resistor_series}"
capacitor_series = "{capacitor_series}"
"""


@pytest.mark.parametrize("r_series,c_series", [("E96", "E12"), ("E24", "E6"), ("E192", "E48")])
def test_fixed_corner_gives_the_textbook_preferred_values(r_series, c_series):
    # Series-diode equalisation (M. H. Rashid, Power Electronics; N. Mohan et al., Power
    # Electronics): R <= (n V_DM - V_s) / ((n - 1) dI_R), C >= (n - 1) dQ_rr / (n V_DM - V_s).
    # With no scatter the Monte Carlo is the corner, so the search must land on the largest preferred
    # R not above the bound and the smallest preferred C not below it. Operating point our own.
    design = parse_design_text(corner(resistor_series=r_series, capacitor_series=c_series))
    result = size(design)
    n, v_s, v_dm = 8, 9000.0, 0.9 * 1400.0
    r_bound = float(worst_case_static_resistance(n, v_dm, v_s, 10e-6))
    c_bound = float(worst_case_dynamic_capacitance(n, v_dm, v_s, 0.6e-6))
    assert result.resistor.chosen.value == pytest.approx(float(eseries.round_down(r_bound, r_series)))
    assert result.capacitor.chosen.value == pytest.approx(float(eseries.round_up(c_bound, c_series)))
    assert result.resistor.series == r_series and result.capacitor.series == c_series
    # The rejected neighbours are the next preferred values and really fail.
    assert result.resistor.rejected_neighbour.value == pytest.approx(
        float(eseries.step(result.resistor.chosen.value, r_series, 1)))
    assert not result.resistor.rejected_neighbour.passed
    assert result.capacitor.rejected_neighbour.value == pytest.approx(
        float(eseries.step(result.capacitor.chosen.value, c_series, -1)))
    assert not result.capacitor.rejected_neighbour.passed
    assert result.check.verdict == "pass"


def test_resistor_tolerance_drawn_in_the_monte_carlo_lowers_the_resistor():
    # With a 1 % tolerance drawn (screened at the tolerance), the chosen R must leave room for it:
    # a string with every resistor at its worst still meets the target only if R (1 + t) stays near
    # the bound. It can never be larger than the no-tolerance answer.
    plain = size(parse_design_text(corner())).resistor.chosen.value
    toleranced = size(parse_design_text(corner(tolerance=0.01))).resistor.chosen.value
    assert toleranced <= plain


def test_damping_resistor_follows_its_stated_rule():
    # R_d = max(2 sqrt(L / (n C)) (critical damping of a series RLC: Alexander & Sadiku, series RLC
    # step response), V_s / (n I_F)), rounded up to E12.
    result = size(parse_design_text(corner(extra_duty='stray_inductance = "20 uH"')))
    c = result.capacitor.chosen.value
    expected = max(2 * (20e-6 / (8 * c)) ** 0.5, 9000.0 / 8 / 1.0)
    assert result.damping_resistor == pytest.approx(float(eseries.round_up(expected, "E12")))
    assert "critical damping" in result.damping_rule


def test_find_series_gives_the_smallest_count_that_passes():
    design = parse_design_text(corner(n=10))
    result = size(design, find_series=True)
    n = result.series_count
    assert result.check.verdict == "pass"
    # One device fewer with the same network fails (or is impossible).
    layout = result.design.string
    fewer = replace(result.design, string=replace(layout, series=n - 1, positions=tuple(
        p for p in layout.positions if p.index <= n - 1)))
    assert run_check(fewer).verdict == "fail"


def test_too_short_a_string_is_impossible_with_the_arithmetic():
    # Perfect sharing is the best any network can do: n x derating x V_RRM = 6 x 0.9 x 1400 V
    # = 7560 V < 9000 V, so no R or C can pass (the string needs ceil(9000 / 1260) = 8 devices).
    design = parse_design_text(corner(n=6))
    with pytest.raises(ImpossibleDesignError, match=r"7560 V.*string.series >= 8"):
        size(design)


def test_find_series_lengthens_an_impossible_string():
    # The same string with --find-series starts at the minimum count and grows until a network
    # passes; the answer is then at least that minimum, and passes.
    result = size(parse_design_text(corner(n=6)), find_series=True)
    assert result.series_count >= 8
    assert result.check.verdict == "pass"



def test_find_series_stops_at_the_device_cap_with_the_arithmetic():
    # 50 MV over 0.8 x 5 kV = 4 kV per device: ceil(50e6 / 4e3) = 12,500 devices > 10,000.
    text = corner(n=6).replace("reverse_voltage = 9000.0", 'reverse_voltage = "50 MV"') \
        .replace("v_rrm = 1400.0", 'v_rrm = "5 kV"').replace("derating = 0.9", "derating = 0.8")
    with pytest.raises(DesignError, match=r"12,500 devices.*50 MV / 4 kV.*10,000"):
        size(parse_design_text(text), find_series=True)

def test_too_few_trials_for_the_target_is_a_clear_error():
    # Zero-failure Clopper-Pearson bound: 1000 trials cannot show P <= 1e-3 (needs about 3689).
    # The study names its keyword; the option's wording: tests/cli/test_option_wording.py.
    with pytest.raises(SizingError, match=r"use trials=\d+ or more"):
        size(parse_design_text(corner(trials=1000)))


@pytest.mark.parametrize("text,key", [
    ('resistor_series = "E96"', 'resistor_series = "E7"'),
    ("target_p_fail = 0.001", "target_p_fail = 1.5"),
    ("target_p_fail = 0.001", "target_p_fail = 0"),
])
def test_bad_sizing_input_names_the_key(text, key):
    bad = corner().replace(text, key)
    with pytest.raises(DesignError, match="sizing"):
        parse_design_text(bad)


SCATTERED = """
[duty]
reverse_voltage = "10 kV"
di_dt = "20 A/us"
waveform = "square"
frequency = "1 kHz"
[string]
series = 10
derating = 0.8
[parts.D]
class = "si-fast-recovery"
v_rrm = "1.6 kV"
i_r = {{ typ = "1 uA", max = "8 uA", at_temperature = "25 degC" }}
q_rr = {{ typ = "0.3 uC", max = "0.6 uC" }}
c_j = "40 pF"
[grading]
resistor_tolerance = "2 %"
capacitor_tolerance = "10 %"
[monte_carlo]
trials = {trials}
seed = {seed}
lot_share = 0.2
[sizing]
target_p_fail = {target}
resistor_series = "E24"
capacitor_series = "E12"
"""


@settings(max_examples=6, deadline=None)
@given(seed=st.integers(0, 10_000), target=st.sampled_from([0.02, 0.05, 0.1]))
def test_sized_network_passes_and_one_step_further_fails(seed, target):
    # Properties of the search (issue 3): the sized network passes check on the same draws, and the
    # one-step-larger R / one-step-smaller C fails the target.
    design = parse_design_text(SCATTERED.format(trials=400, seed=seed, target=target))
    result = size(design)
    check = run_check(result.design)
    assert check.checks["static"].passed and check.checks["dynamic"].passed
    bigger_r = float(eseries.step(result.resistor.chosen.value, "E24", 1))
    r_design = replace(result.design, grading=replace(result.design.grading, resistor=bigger_r))
    assert not run_check(r_design, only=("static",)).checks["static"].passed
    smaller_c = float(eseries.step(result.capacitor.chosen.value, "E12", -1))
    c_design = replace(result.design, grading=replace(result.design.grading, capacitor=smaller_c))
    assert not run_check(c_design, only=("dynamic",)).checks["dynamic"].passed


@settings(max_examples=5, deadline=None)
@given(seed=st.integers(0, 10_000))
def test_tighter_target_never_gives_larger_r_or_smaller_c(seed):
    loose = size(parse_design_text(SCATTERED.format(trials=400, seed=seed, target=0.1)))
    tight = size(parse_design_text(SCATTERED.format(trials=400, seed=seed, target=0.02)))
    assert tight.resistor.chosen.value <= loose.resistor.chosen.value
    assert tight.capacitor.chosen.value >= loose.capacitor.chosen.value


SMALL_STACK = design_text("one_kv_stack") + """[grading]
resistor_tolerance = "1 %"
capacitor_tolerance = "5 %"
[monte_carlo]
trials = 400
seed = 5
[sizing]
target_p_fail = 0.02
"""


@pytest.mark.slow
def test_transient_chooses_the_least_energy_damping_resistor_within_the_limit():
    # The time-domain choice is an argmin over the E12 values tried: the chosen R_d is one whose
    # worst simulated peak stays within the limit, with the least energy per turn-off among them.
    # A steady current at the turn-off: the 50 Hz half-sine of the shared stack leaves almost no
    # recovery charge (issue 17), so the dynamic check would size a capacitor too small for any
    # damping resistor to hold the overshoot of the step into the stray inductance.
    result = size(parse_design_text(SMALL_STACK.replace('waveform = "half-sine"',
                                                        'waveform = "dc"')), transient=True)
    tried = result.damping_candidates
    assert tried, result.damping_rule
    good = [c for c in tried if c.within_limit]
    assert good, [(c.value, c.worst_ratio) for c in tried]
    best = min(good, key=lambda c: (c.energy, c.worst_ratio))
    assert result.damping_resistor == best.value
    assert all(c.worst_ratio <= 1.0 for c in good)
    # The final check of the sized design includes the transient.
    assert result.check.checks["transient"].ran


def test_printed_corner_of_fixed_parts_is_the_textbook_corner_and_agrees_with_the_choice():
    # Textbook corners of series-diode grading (from memory: N. Mohan, T. M. Undeland and
    # W. P. Robbins, Power Electronics, and M. H. Rashid, Power Electronics, chapter on power
    # diodes, series connection): R <= (n V_max - V_S) / ((n - 1) dI_R) and
    # C >= (n - 1) dQ_rr / (n V_max - V_S). Fixed {typ} parts: dI_R = 12 - 2 uA and
    # dQ_rr = 1.0 - 0.4 uC; a missing min is not zero. The choice must then be the preferred value
    # next to the corner on the right side of it.
    result = size(parse_design_text(corner()))
    n, v_s, v_max = 8, 9000.0, 0.9 * 1400.0
    r_corner = (n * v_max - v_s) / ((n - 1) * (12e-6 - 2e-6))
    c_corner = (n - 1) * (1.0e-6 - 0.4e-6) / (n * v_max - v_s)
    assert result.resistor.textbook_bound == pytest.approx(r_corner, rel=1e-12)
    assert result.capacitor.textbook_bound == pytest.approx(c_corner, rel=1e-12)
    assert result.resistor.chosen.value <= r_corner < result.resistor.rejected_neighbour.value
    assert result.capacitor.rejected_neighbour.value < c_corner <= result.capacitor.chosen.value


def test_printed_corner_uses_the_mirrored_limit_the_monte_carlo_draws():
    # SLOW gives only a max: the draw puts its lower limit level (sigma_at_limit standard
    # deviations below typ) at typ^2 / max (the lognormal spread mirrored, docs/methods/),
    # not at zero; FAST stays fixed. dI_R = max(SLOW) - min(FAST typ, SLOW typ^2 / max), and so for
    # Q_rr; textbook corners as in the test above.
    text = corner().replace(
        'i_r = { typ = 1.2e-05, at_temperature = "25 degC", at_voltage = 1400.0 }',
        'i_r = { typ = 1.2e-05, max = 1.5e-05, at_temperature = "25 degC", at_voltage = 1400.0 }'
    ).replace("q_rr = { typ = 1e-06 }", "q_rr = { typ = 1e-06, max = 1.2e-06 }")
    assert "max = 1.5e-05" in text and "max = 1.2e-06" in text
    result = size(parse_design_text(text))
    n, v_s, v_max = 8, 9000.0, 0.9 * 1400.0
    leakage = 1.5e-5 - min(2e-6, 1.2e-5 ** 2 / 1.5e-5)
    charge = 1.2e-6 - min(0.4e-6, 1.0e-6 ** 2 / 1.2e-6)
    assert result.resistor.textbook_bound == pytest.approx(
        (n * v_max - v_s) / ((n - 1) * leakage), rel=1e-9)
    assert result.capacitor.textbook_bound == pytest.approx(
        (n - 1) * charge / (n * v_max - v_s), rel=1e-9)
    # The scattered draws stay inside the corner: the Monte Carlo choice is no worse than it.
    assert result.resistor.chosen.value >= eseries.round_down(result.resistor.textbook_bound, "E96")
    assert result.capacitor.chosen.value <= eseries.round_up(result.capacitor.textbook_bound, "E12")


def test_no_scatter_anywhere_gives_no_corner():
    # One part, fixed: every device alike, dI_R = 0 (R unbounded by the corner), so no corner is
    # printed rather than one from a zero minimum.
    text = corner().replace('part = "FAST"', 'part = "SLOW"')
    result = size(parse_design_text(text))
    assert result.resistor.textbook_bound is None
