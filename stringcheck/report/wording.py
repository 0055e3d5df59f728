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
        "C raised from {previous} to {raised} for the time-domain turn-off: no damping resistor "
        "kept the simulated peak within the limit at the smaller value",
    "size.transient_not_run":
        "damping resistor not confirmed in the time domain: {reason}",
    # studies.size: the limit that bound each proposed value
    "size.bound.p_fail":
        "{item:item} limited by P(fail) ({check:check}): {value} gives P(fail) <= "
        "{p_fail_upper:.3g} ({failures} failures), the next preferred value {next} gives "
        "{next_p_fail_upper:.3g}, over the target {limit:g}",
    "size.bound.grading_current":
        "{item:item} limited by grading current >= {multiple:g} x max leakage: (V_s / n) / "
        "({multiple:g} x {leakage}) = {limit} at {stage_voltage} per stage",
    "size.bound.discharge":
        "{item:item} limited by discharge below 60 V within {limit}: R <= {resistance} with "
        "{stage_capacitance} per stage and {load_capacitance} across the stack of {series} "
        "({time} at the proposed value)",
    "size.bound.resistor_max":
        "{item:item} limited by the largest realisable value ([sizing] resistor_max, {limit})",
    "size.bound.resistor_min":
        "{item:item} limited by the smallest realisable value ([sizing] resistor_min, {limit})",
    "size.bound.capacitor_max":
        "{item:item} limited by the largest realisable value ([sizing] capacitor_max, {limit})",
    "size.bound.capacitor_min":
        "{item:item} limited by the smallest realisable value ([sizing] capacitor_min, {limit})",
    "size.bound.stage_capacitance":
        "{item:item} limited by C >= {multiple:g} x (C_j + stray) = {multiple:g} x ({junction} + "
        "{stray}) = {limit}",
    "size.bound.confirmation":
        "{item:item} limited by the confirmation on an independent sample (seed {seed}): {first} "
        "gave P(fail) <= {first_p_fail_upper:.3g} ({first_failures} failures) against {limit:g} "
        "({check:check}); one step further, {value} gives {p_fail_upper:.3g} ({failures} "
        "failures)",
    "size.bound.critical_damping":
        "R_d limited by critical damping of the commutation loop: 2 sqrt(L / (n C)) = {critical} "
        "with L = {inductance} ({inductance_source:inductance_source}), n = {series}, C = "
        "{capacitor}; rounded up to E12: {value}",
    "size.bound.recovery_step":
        "R_d limited by the step I_RM x R_d = {peak_current} x {value} = {step} within the "
        "stage's margin of {limit} (critical damping would ask {critical})",
    "size.bound.time_domain":
        "R_d chosen in the time domain: {value} keeps the worst simulated peak at {ratio:.3f} x "
        "the limit, the lowest of the values tried from {low} to {high} (critical damping "
        "{critical}, recovery-step limit {step_limit}, rule {rule})",
    "size.damping.no_capacitor":
        "no grading capacitor: no damping resistor needed",
    "size.damping.kept":
        "R_d kept at the design's {value} (no stray inductance or di/dt to size it)",
    "size.damping.not_sized":
        "R_d not sized: give duty.stray_inductance or duty.di_dt (the commutation loop)",
    # studies.size: no proposal (what cannot be met, and what came closest)
    "size.unmet.range":
        "no {item:item} meets every limit: the lower limit ({low_code:limit_name}) {low} is above "
        "the upper limit ({high_code:limit_name}) {high}",
    "size.unmet.p_fail":
        "no {item:item} from {low} to {high} meets the target on the {check:check} check: the "
        "closest, {value}, gives P(fail) <= {p_fail_upper:.3g} ({failures} failures) against "
        "{limit:g}",
    "size.unmet.confirmation":
        "{item:item} {first} fails its confirmation on an independent sample (seed {seed}, "
        "{check:check}) even one step further: the closest, {value}, gives P(fail) <= "
        "{p_fail_upper:.3g} ({failures} failures) against {limit:g}",
    "size.unmet.transient":
        "no damping resistor from {low} to {high} keeps the simulated turn-off within the limit, "
        "even with C raised to {capacitor}: the closest, {value}, peaks at {ratio:.3f} x the "
        "limit",
    "size.unmet.damping_margin":
        "no damping resistor fits: the nominal share {share} leaves no margin below the limit "
        "{limit_voltage} for the step I_RM x R_d",
    "size.unmet.check":
        "the sized network (R {resistor}, C {capacitor}, R_d {damping_resistor}) fails the "
        "{check:check} check of the final run: P(fail) <= {p_fail_upper:.3g} against {limit:g}, "
        "worst stage at {ratio:.3f} x the limit",
    "size.unmet.verdict":
        "the sized network (R {resistor}, C {capacitor}, R_d {damping_resistor}) does not pass "
        "the final check (verdict {verdict})",
    "size.unmet.series":
        "no device count from {first} to {last} passes with this network",
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
    "item": lambda item: _ITEMS.get(item, item),
    "limit_name": lambda code: _LIMIT_NAMES.get(code, code),
    "inductance_source": lambda source: (
        "duty.stray_inductance" if source == "duty.stray_inductance" else "V_s / (di/dt)"),
}

# How ``size`` names the values it proposes and the limits that bound them.
_ITEMS = {"resistor": "R", "capacitor": "C", "damping_resistor": "R_d"}
_LIMIT_NAMES = {
    "size.bound.grading_current": "grading current >= k x max leakage",
    "size.bound.discharge": "discharge below 60 V in time",
    "size.bound.resistor_max": "[sizing] resistor_max",
    "size.bound.resistor_min": "[sizing] resistor_min",
    "size.bound.capacitor_max": "[sizing] capacitor_max",
    "size.bound.capacitor_min": "[sizing] capacitor_min",
    "size.bound.stage_capacitance": "C >= m x (C_j + stray)",
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
