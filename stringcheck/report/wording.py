"""The English of every finding (``checks.findings.Finding``): a table of code -> sentence.

The layers below the report return findings (a code, the figures, the limit); this module is the
one place that says them in words, for the terminal report and for the JSON's text keys alike.

A template is a :meth:`str.format` string over the finding's values by name and ``limit``. A value
with a unit and no format spec is written by :func:`stringcheck.units.format_quantity`; a spec
(``{time:.3g}``) formats the bare number; a worded spec (``{check:check}``, ``{ratio:times}``,
``{parameter:what}``: ``_WORDED``) says the value in words; and
``{option:KEYWORD}`` names a setting, spelled by whoever shows the sentence (the command line as its
option, ``--transient``; Python as the keyword), as ``errors.Setting`` is for errors.
"""

from __future__ import annotations

from typing import Callable

from stringcheck.checks.findings import Finding, Value
from stringcheck.design.model import LOGNORMAL_PARAMETERS
from stringcheck.errors import Setting
from stringcheck.units import format_quantity

__all__ = ["CHECK_WORDS", "TEMPLATES", "impossibility_text", "sentence", "sentences"]

# How a check that found a stage voltage is named in a sentence.
CHECK_WORDS = {"static": "static blocking", "dynamic": "charge-balance turn-off",
               "transient": "simulated turn-off peak"}

TEMPLATES: dict[str, str] = {
    # checks.grading_ratings: ratings exceeded (they fail the verdict)
    "rating.resistor_power":
        "grading resistor dissipates {power} at the worst static voltage, above its rating of "
        "{limit}",
    "rating.resistor_voltage":
        "grading resistor sees {voltage} at worst ({check:check}), above its working-voltage "
        "rating of {limit}",
    "rating.capacitor_voltage":
        "grading capacitor sees {voltage} at worst ({check:check}), above its rating of {limit}",
    # checks.grading_ratings: advisories (common practice, never hidden constraints)
    "advisory.resistor_rated_power_missing":
        "grading.resistor_rated_power not given: resistor power not checked",
    "advisory.resistor_rated_voltage_missing":
        "grading.resistor_rated_voltage not given: resistor working voltage not checked",
    "advisory.grading_current_low":
        "grading current {current} is less than {multiple:g} x the hottest maximum leakage "
        "({leakage}); several times is common practice",
    "advisory.no_grading_resistors":
        "no grading resistors: static sharing rests on the leakage alone and the stack has no "
        "bleed path for stored charge",
    "advisory.capacitor_rated_voltage_missing":
        "grading.capacitor_rated_voltage not given: capacitor voltage not checked",
    "advisory.damping_resistor_missing":
        "grading.damping_resistor not given: an undamped grading capacitor rings with the stray "
        "inductance and discharges into the device at turn-on",
    "advisory.slow_discharge":
        "the stack takes {time} to fall below {voltage:g} V through its grading resistors, longer "
        "than the {limit:g} s of IEC 60204-1:2016 clause 6.2.4: provide a discharge device or "
        "earthing stick",
    # studies.size: what sizing changed or could not settle
    "size.capacitor_raised":
        "capacitor raised from {previous:.3g} F to {raised:.3g} F: no damping resistor kept the "
        "simulated turn-off within the limit",
    "size.damping_slower_than_recovery":
        "R_d C = {time_constant:.3g} s is longer than the shortest typical t_rr ({limit:.3g} s): "
        "the capacitor may not take the charge in time; `{option:transient}` checks it in the "
        "time domain",
    # checks.preconditions: no built string can pass, whatever is drawn (the arithmetic)
    "impossible.string_voltage":
        "the string cannot hold {voltage:g} V even with perfect sharing: the sum of derating x "
        "V_RRM over the {series} devices of a branch is {limit:g} V (derating {derating:g})",
    "impossible.group_current":
        "the group cannot carry {current:g} A average even with perfect sharing: the {parallel} "
        "branch(es) together are rated {limit:g} A (the sum over the branches of the weakest "
        "device's i_fav)",
    # checks.plausibility: valid values that are probably slips (the design-file key beside)
    "plausibility.string_voltage_low":
        "{voltage} across {series} devices in series is {share} per device, {percent:.2g} % of "
        "the V_RRM of part '{part}' ({rating}): orders of magnitude below any rating; a bare "
        "number is volts (write \"{voltage:g} kV\" if kilovolts were meant)",
    "plausibility.slow_turn_off_slope":
        "a turn-off slope of {slope:g} A/s ({slope_per_us:.3g} A/us) is orders of magnitude "
        "slower than any commutation (1 to 1000 A/us is usual); a bare number is A/s: write "
        "\"{slope:g} A/us\" if that was meant",
    "plausibility.slow_test_di_dt":
        "a datasheet test di/dt of {slope:g} A/s ({slope_per_us:.3g} A/us) is orders of "
        "magnitude slower than any commutation (1 to 1000 A/us is usual); a bare number is A/s: "
        "write \"{slope:g} A/us\" if that was meant",
    "plausibility.ambient_cold":
        "{ambient:g} degC is colder than {limit:g} degC, below what power devices and grading "
        "components are commonly rated for; check the sign and the unit (a bare number is degC)",
    "plausibility.max_far_above_typ":
        "the maximum {parameter:what} {high} is {ratio:times} its typical value {typ}"
        "{typ_assumed:typ_note}; limits sit within {parameter:within} of typ: check the units of "
        "both",
    "plausibility.typ_far_above_min":
        "the typical {parameter:what} {typ} is {ratio:times} its minimum {low}; limits sit within "
        "{parameter:within} of typ: check the units of both",
    "plausibility.grading_loss_large":
        "the grading resistors of {resistor} dissipate {loss} in all at the nominal share, and no "
        "grading.resistor_rated_power is given to check it; a unit slip in the resistance (a bare "
        "number is ohms: write e.g. \"4.7 MOhm\")?",
    "plausibility.confidence_low":
        "{confidence:g}: an upper bound at less than {limit:.0%} confidence lies below the best "
        "estimate of P(fail) more often than not, so a pass vouches for little; 0.95 is usual",
    "plausibility.target_high":
        "{target:g} lets more than one built stack in ten fail; targets are usually 1e-3 to 1e-6 "
        "(was a percentage meant? {target:g} % is {as_percent:g})",
}


def _times(ratio: float) -> str:
    return f"{ratio:,.0f} x" if ratio < 1e9 else f"{ratio:.2g} x"


def _within(parameter: str) -> str:
    """How close to typ a datasheet puts the limits of ``parameter`` (common practice)."""
    return "about a decade" if parameter == "i_r" else (
        "a factor of 2 or 3" if parameter in LOGNORMAL_PARAMETERS else "some tens of percent")


# Format specs that word a value rather than format its number.
_WORDED = {
    "check": lambda name: CHECK_WORDS.get(name, name),
    "what": lambda parameter: "leakage" if parameter == "i_r" else parameter,
    "within": _within,
    "times": _times,
    "typ_note": lambda assumed: " (typ assumed from the max)" if assumed else "",
}


class _Shown:
    """A finding's value as a template writes it (see the module docstring)."""

    def __init__(self, value: Value | None):
        self.value = value

    def __format__(self, spec: str) -> str:
        number, unit = self.value.number, self.value.unit
        if spec in _WORDED:
            return _WORDED[spec](number)
        if spec:
            return format(number, spec)
        if unit and not isinstance(number, str):
            return format_quantity(number, unit)
        return str(number)


class _Options:
    """``{option:KEYWORD}``: the setting ``KEYWORD`` spelled by the caller's speller."""

    def __init__(self, spell: Callable[[Setting], str]):
        self.spell = spell

    def __format__(self, keyword: str) -> str:
        return self.spell(Setting(keyword))


def sentence(finding: Finding, *, spell: Callable[[Setting], str] = str) -> str:
    """``finding`` in words (the sentence its code's template gives).

    Parameters
    ----------
    finding
        A finding whose code is in :data:`TEMPLATES` (a KeyError otherwise: a code without a
        sentence is a bug, never a blank line).
    spell
        How a setting the sentence names is spelled (default: the Python keyword;
        ``stringcheck.cli.options.option_wording`` for the command line's option).
    """
    values = {name: _Shown(value) for name, value in finding.values.items()}
    return TEMPLATES[finding.code].format(**values, limit=_Shown(finding.limit),
                                          option=_Options(spell))


def sentences(findings, *, spell: Callable[[Setting], str] = str) -> list[str]:
    """Each of ``findings`` in words, in order."""
    return [sentence(finding, spell=spell) for finding in findings]


def impossibility_text(findings) -> str | None:
    """Why no built string can pass (``checks.preconditions.impossibility``), one clause per
    finding joined by "; ", or None when the design is possible."""
    return "; ".join(sentences(findings)) or None


# studies.review: what decided the verdict, the reasons from the computed change, and the flags
# of the substitute parts (the review's findings, kept together here so that they read as one).
_INPUT_WORDS = {"i_r": "leakage I_R", "q_rr": "recovery charge Q_rr", "c_j": "junction capacitance",
                "v_rrm": "V_RRM", "v_t0": "threshold voltage V_T0", "r_t": "slope resistance r_T",
                "i_fav": "current rating I_F(AV)", "t_j_max": "T_j,max",
                "r_th_jc": "thermal resistance R_th(j-c)"}
_WORDED.update({
    "statistic": lambda name: {"worst": "worst", "p99": "99th-percentile"}.get(name, name),
    "input": lambda name: _INPUT_WORDS.get(name, name),
    "class": lambda name: f"class {name!r}" if name else "no class",
    "arrow": lambda name: f" -> {name}" if name else ", unchanged",
})
_WHERE = "branch {branch} #{index} ({baseline_part}{new_part:arrow})"
_TYP = "(typ {candidate} vs {baseline})"
TEMPLATES.update({
    # what makes a check of the candidate unacceptable, or is only reported
    "review.check_fails":
        "{check:check}: the candidate fails the check on its own (P(fail) upper bound "
        "{p_fail_upper:.2g}, target {limit:g})",
    "review.candidate_fails":
        "the candidate fails its own check outside the compared figures (a grading rating "
        "exceeded, a requested check that could not run, or a string no sharing can rescue): "
        "its check report says which",
    "review.check_not_run":
        "{check:check}: ran for the baseline but not for the candidate, so the two cannot be "
        "compared",
    "review.margin_eroded":
        "{check:check}: the {statistic:statistic} stress rose from {baseline:.3f} to "
        "{candidate:.3f} of the limit, by {rise:.3f}, more than the stress tolerance of {limit:g}",
    "review.p_fail_rose":
        "{check:check}: the P(fail) upper bound rose from {baseline:.2g} to {candidate:.2g}, by "
        "more than the tolerance ({tolerance:g} of the target {target:g}: {limit:.2g})",
    "review.p_fail_rise_small":
        "{check:check}: the P(fail) upper bound rose from {baseline:.2g} to {candidate:.2g}, "
        "within the tolerance ({tolerance:g} of the target {target:g}): reported, not decisive",
    # the positions whose stress changed most, and the input that explains the direction
    "review.same_parts": "no position changed part: the candidate is the baseline",
    "review.position_rose":
        "{check:check}: the worst stress at " + _WHERE + " rose from {baseline:.3f} to "
        "{candidate:.3f} of the limit ({baseline_worst} -> {candidate_worst})",
    "review.position_fell":
        "{check:check}: the worst stress at " + _WHERE + " fell from {baseline:.3f} to "
        "{candidate:.3f} of the limit ({baseline_worst} -> {candidate_worst})",
    "review.q_rr.own.rose":
        "{new} stores less recovery charge than {old} " + _TYP + ": it recovers first, blocks "
        "before the others and takes more of the turn-off voltage",
    "review.q_rr.own.fell":
        "{new} stores more recovery charge than {old} " + _TYP + ": it recovers later and "
        "takes less of the turn-off voltage",
    "review.q_rr.others.rose":
        "{new} stores more recovery charge than {old} " + _TYP + ": it recovers last and "
        "pushes the turn-off voltage onto the others",
    "review.q_rr.others.fell":
        "{new} stores less recovery charge than {old} " + _TYP + ": it recovers first and "
        "takes turn-off voltage off the others",
    "review.c_j.own.rose":
        "{new} has less junction capacitance than {old} " + _TYP + ": the same charge raises "
        "its voltage more",
    "review.c_j.own.fell":
        "{new} has more junction capacitance than {old} " + _TYP + ": the same charge raises "
        "its voltage less",
    "review.c_j.others.rose":
        "{new} has more junction capacitance than {old} " + _TYP + ": it takes less of the "
        "turn-off voltage and leaves more to the others",
    "review.c_j.others.fell":
        "{new} has less junction capacitance than {old} " + _TYP + ": it takes more of the "
        "turn-off voltage, off the others",
    "review.i_r.own.rose":
        "{new} leaks less than {old} " + _TYP + ": it takes more of the blocking voltage",
    "review.i_r.own.fell":
        "{new} leaks more than {old} " + _TYP + ": it takes less of the blocking voltage",
    "review.i_r.others.rose":
        "{new} leaks more than {old} " + _TYP + ": it takes less of the blocking voltage and "
        "pushes it onto the others",
    "review.i_r.others.fell":
        "{new} leaks less than {old} " + _TYP + ": it takes more of the blocking voltage, off "
        "the others",
    "review.v_rrm.own.rose":
        "{new} is rated for less reverse voltage than {old} ({candidate} vs {baseline}): the "
        "same voltage is a larger share of its lower limit",
    "review.v_rrm.own.fell":
        "{new} is rated for more reverse voltage than {old} ({candidate} vs {baseline}): the "
        "same voltage is a smaller share of its higher limit",
    "review.v_t0.own.rose":
        "{new} has a lower threshold voltage than {old} " + _TYP + ": its branch takes more of "
        "the group's current",
    "review.v_t0.own.fell":
        "{new} has a higher threshold voltage than {old} " + _TYP + ": its branch takes less of "
        "the group's current",
    "review.v_t0.others.rose":
        "{new} has a higher threshold voltage than {old} " + _TYP + ": its branch takes less "
        "current and leaves more to the others",
    "review.v_t0.others.fell":
        "{new} has a lower threshold voltage than {old} " + _TYP + ": its branch takes more "
        "current, off the others",
    "review.r_t.own.rose":
        "{new} has a lower slope resistance than {old} " + _TYP + ": its branch takes more of "
        "the group's current",
    "review.r_t.own.fell":
        "{new} has a higher slope resistance than {old} " + _TYP + ": its branch takes less of "
        "the group's current",
    "review.r_t.others.rose":
        "{new} has a higher slope resistance than {old} " + _TYP + ": its branch takes less "
        "current and leaves more to the others",
    "review.r_t.others.fell":
        "{new} has a lower slope resistance than {old} " + _TYP + ": its branch takes more "
        "current, off the others",
    "review.i_fav.own.rose":
        "{new} is rated for less average current than {old} ({candidate} vs {baseline}): the "
        "same current is a larger share of its rating",
    "review.i_fav.own.fell":
        "{new} is rated for more average current than {old} ({candidate} vs {baseline}): the "
        "same current is a smaller share of its rating",
    "review.thermal.t_j_max.own.rose":
        "{new} allows a lower junction temperature than {old} ({candidate} vs {baseline})",
    "review.thermal.t_j_max.own.fell":
        "{new} allows a higher junction temperature than {old} ({candidate} vs {baseline})",
    "review.thermal.r_th_jc.own.rose":
        "{new} has a higher junction-to-case thermal resistance than {old} ({candidate:.3g} vs "
        "{baseline:.3g} K/W): it runs hotter",
    "review.thermal.r_th_jc.own.fell":
        "{new} has a lower junction-to-case thermal resistance than {old} ({candidate:.3g} vs "
        "{baseline:.3g} K/W): it runs cooler",
    "review.thermal.i_r.own.rose":
        "{new} leaks more than {old} " + _TYP + ": more leakage loss, it runs hotter",
    "review.thermal.i_r.own.fell":
        "{new} leaks less than {old} " + _TYP + ": less leakage loss, it runs cooler",
    "review.thermal.q_rr.own.rose":
        "{new} stores more recovery charge than {old} " + _TYP + ": more recovery loss, it "
        "runs hotter",
    "review.thermal.q_rr.own.fell":
        "{new} stores less recovery charge than {old} " + _TYP + ": less recovery loss, it "
        "runs cooler",
    "review.scatter.wider":
        "{new}'s {input:input} scatters more than {old}'s (max - typ {candidate} vs {baseline}): "
        "the devices share less evenly and the worst of them takes more",
    "review.scatter.narrower":
        "{new}'s {input:input} scatters less than {old}'s (max - typ {candidate} vs {baseline}): "
        "the devices share more evenly and the worst of them takes less",
    "review.input_changed":
        "the {input:input} changed ({old} typ {baseline}, {new} typ {candidate}), but alone it "
        "would move this stress the other way: the change comes from how the string shares as "
        "a whole",
    "review.no_input_changed":
        "{check:check}: no input of this check differs between the parts; the change comes "
        "from the other devices' draws",
    # the substitute parts themselves, whatever the Monte Carlo says
    "review.lower_v_rrm":
        "{new} (position(s) {positions}) is rated for less reverse voltage than {old} "
        "({candidate} vs {baseline}): less margin above the derated limit, whatever the Monte "
        "Carlo shows",
    "review.class_changed":
        "{new} (position(s) {positions}) is of {candidate:class} and {old} of {baseline:class}: "
        "compare what the model does not (avalanche and surge ratings, ageing) before approving",
})
