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

# What every recovery-charge assumption ends with.
_RECOVERY_MODEL = ("Q_rr at each position's junction temperature (between its rows, or by its "
                   "class's law); the whole string voltage is assumed to appear after recovery (hard "
                   "commutation)")

# Where the turn-off current comes from (``checks.recovery_conditions.TurnOffCurrent.basis``).
_TURN_OFF_CURRENT = {
    "test_current": "I_F = the test I_F ({current}; no duty.forward_current)",
    "square_peak": "I_F = {current} per branch, the square wave's peak",
    "half_sine_average": "I_F = {current} per branch, the half-sine's average (its decay "
                         "to the zero crossing is not modelled)",
    "dc": "I_F = {current} per branch",
}

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
        "capacitor raised from {previous} to {raised}: no damping resistor kept the "
        "simulated turn-off within the limit",
    "size.damping_slower_than_recovery":
        "R_d C = {time_constant} is longer than the shortest typical t_rr ({limit}): "
        "the capacitor may not take the charge in time; `{option:transient}` checks it in the "
        "time domain",
    # design.reading: what was assumed on the user's behalf ({key}: the design-file key)
    "assumed.waveform_dc": "{key} not given: dc (continuous reverse voltage)",
    "assumed.ambient": "{key} not given: ambient {ambient:g} degC",
    "assumed.derating": "{key} not given: derating {derating:g} x V_RRM (common practice)",
    "assumed.part_leakage_doubling":
        "{key} not given: leakage doubles every 10 K (silicon, common practice)",
    "assumed.part_leakage_voltage_exponent":
        "{key} not given: leakage grows as V^0.5 (generation current, abrupt junction)",
    "assumed.part_c_j":
        "{key} not given: junction capacitance 0 F (only the grading capacitor counts in the "
        "dynamic check)",
    "assumed.part_tempco_v_t0":
        "{key} not given: V_T0 temperature coefficient -2 mV/K (silicon PN, common practice)",
    "assumed.part_tempco_r_t": "{key} not given: r_T temperature coefficient 0 1/K",
    "assumed.typ_geometric_mean": "{key}: typ not given, taken as the geometric mean of min and max",
    "assumed.typ_midpoint": "{key}: typ not given, taken as the midpoint of min and max",
    "assumed.typ_from_max": "{key}: only max given, typ taken as {fraction:g} x max",
    "assumed.from_class": "{key}: {keys} taken from class '{device_class}'",
    "assumed.lot_resampled": "{key}: devices resampled from the measured lot {file} (fit not given)",
    "assumed.lot_for_row":
        "{key}: no datasheet row; the measured lot's median, min and max stand for it in the "
        "textbook bounds (test conditions as noted)",
    "assumed.lot_note": "{key}: {note:sentence}",
    "assumed.leakage_at_v_rrm": "{key}: at_voltage not given, taken at V_RRM ({v_rrm:g} V)",
    "assumed.leakage_at_datasheet_temperature":
        "{key}: at_temperature not given, taken at {temperature:g} degC",
    # design.parts / design.reading: rows at several temperatures, screening, tolerance shapes
    "rows.fitted":
        "{key} fitted from the typical values of the rows at {cool:g} and {hot:g} degC: {value}",
    "rows.extrapolated":
        "{key}: rows at {cool:g} to {hot:g} degC; a position at {temperature:g} degC lies outside "
        "them, the end rows' law extended (each device moved by the typical values' slope)",
    "assumed.recovery_law_rising":
        "{key}: one row only; rises {factor:.2g} x per 100 K of junction temperature (class "
        "'{device_class}', silicon stored charge, common practice)",
    "assumed.recovery_law_flat":
        "{key}: one row only; independent of junction temperature (class '{device_class}': "
        "capacitive charge, no stored minority charge)",
    "assumed.recovery_at_datasheet_temperature":
        "{key}: at_temperature not given, taken at {temperature:g} degC",
    "assumed.screening_row":
        "limits truncate the draw (screened, rows at 25 degC +- 10 K or saying screened = true): "
        "{screened}; not screened (guaranteed by design or characterisation, drawn untruncated): "
        "{unscreened}",
    "assumed.screening_design":
        "monte_carlo.screened decides the rows that do not say: screened: {screened}; not "
        "screened: {unscreened}",
    "assumed.resistor_distribution_normal":
        "{key} not given: resistor values normal about nominal, the tolerance at sigma_at_limit",
    "assumed.resistor_distribution_uniform":
        "{key} not given: resistor values uniform over the tolerance band",
    "assumed.capacitor_distribution_normal":
        "{key} not given: capacitor values normal about nominal, the tolerance at sigma_at_limit",
    "assumed.capacitor_distribution_uniform":
        "{key} not given: capacitor values anywhere in the tolerance band (uniform; conservative "
        "for parts picked from a wider production spread)",
    "assumed.q_rr_from_i_rm_t_rr":
        "{key} derived as 1/2 I_RM t_rr from i_rm and t_rr (max from the product of maxima: "
        "conservative)",
    # design.lots: what a measured lot's reading derived or found
    "lot.recovery_for_reference":
        "i_rm and t_rr are shown for reference; the checks use the measured q_rr",
    "lot.q_rr_derived":
        "q_rr of each device derived as 1/2 I_RM t_rr from its measured i_rm and t_rr",
    "lot.below_datasheet_min":
        "{key}: {count} of {devices} devices of {file} have {parameter} below the datasheet min",
    "lot.above_datasheet_max":
        "{key}: {count} of {devices} devices of {file} have {parameter} above the datasheet max",
    # checks.preconditions: the model's assumptions
    "model.static_dc":
        "static: the peak reverse voltage is held as dc; at line frequency the grading capacitors "
        "also share the voltage, which this check does not credit",
    "model.junction_temperature":
        "junction temperature = ambient + the position's temperature_rise (no self-heating); "
        "leakage referred from its datasheet temperature with the part's doubling temperature",
    "model.junction_temperature_rows":
        "junction temperature = ambient + the position's temperature_rise (no self-heating); "
        "leakage of each device at that temperature between its datasheet rows (exponential in T)",
    "model.resistor_tcr":
        "grading resistor TCR referred to {reference:g} degC, resistor at its diode's temperature",
    "model.mixed_stock":
        "mixed stock: {mix}; a mixed position (part A|B) is judged device by device against the "
        "limit of the part drawn, and its per-position limit shown is the lowest of the two",
    # checks.recovery_conditions: how the recovery charge was carried to the application
    "recovery.not_rescaled":
        "recovery charge: Q_rr taken at the datasheet's test conditions, not rescaled to the "
        "application ({missing}); " + _RECOVERY_MODEL,
    "recovery.no_fit":
        "recovery charge: Q_rr taken at the datasheet's test conditions: parts.{part}'s typical "
        "q_rr, i_rm or t_rr and at_di_dt fit no recovery waveform; " + _RECOVERY_MODEL,
    **{f"recovery.carried.{basis}":
       "recovery charge: Q_rr carried from the datasheet's test I_F and di/dt to the "
       f"application's ({current}, di/dt = {{di_dt}}) through the charge-control model "
       "fitted to each part's typical Q_rr and I_RM or t_rr (Lauritzen-Ma); the charge balance "
       "of the dynamic check and the recovery loss of the thermal check use the same carried "
       "value{untested:untested_current}; " + _RECOVERY_MODEL
       for basis, current in _TURN_OFF_CURRENT.items()},
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
    # studies.circuit (issue 23): how each stack's duty follows from the circuit, with sources
    "assumed.circuit_load_from_resistance":
        "load current {current} taken as the no-load output {voltage} over circuit.load_resistance "
        "({resistance}): an upper bound",
    "circuit.piv.half_wave":
        "peak reverse voltage {voltage} = V_pk ({peak}): the diode blocks the secondary's negative "
        "crest (Mohan, Undeland and Robbins, Power Electronics, 3rd ed., 2003, ch. 5)",
    "circuit.piv.half_wave_capacitor":
        "peak reverse voltage {voltage} = 2 V_pk (V_pk = {peak}): the capacitor holds V_pk while the "
        "secondary swings to -V_pk (Sedra and Smith, Microelectronic Circuits, 6th ed., ch. 4)",
    "circuit.piv.center_tap":
        "peak reverse voltage {voltage} = 2 V_pk (V_pk = {peak} per half): the conducting half's "
        "crest plus this half's (Mohan, Undeland and Robbins, Power Electronics, 3rd ed., 2003, ch. 5)",
    "circuit.piv.bridge":
        "peak reverse voltage {voltage} = V_pk ({peak}): each diode blocks the secondary through "
        "the conducting pair (Mohan, Undeland and Robbins, Power Electronics, 3rd ed., 2003, ch. 5)",
    "circuit.piv.three_phase_bridge":
        "peak reverse voltage {voltage} = sqrt(2) V_LL ({peak}): each diode blocks the line-to-line "
        "crest (Mohan, Undeland and Robbins, Power Electronics, 3rd ed., 2003, ch. 5)",
    "circuit.piv.multiplier":
        "peak reverse voltage {voltage} = 2 V_pk (V_pk = {peak}) on every stack: each diode blocks "
        "the two capacitors it bridges less the input (Kuffel, Zaengl and Kuffel, High Voltage "
        "Engineering Fundamentals, 2nd ed., 2000, ch. 2, from memory)",
    "circuit.waveform.offset_sine":
        "reverse voltage V_pk (1 - sin wt) (V_pk = {peak}): an offset sine from 0 to 2 V_pk, "
        "checked as offset-sine",
    "circuit.waveform.half_sine":
        "reverse voltage a half sine of crest {peak} over the blocking half period, checked as "
        "half-sine",
    "circuit.waveform.bridge_capacitor":
        "reverse voltage near the capacitor voltage ({peak}) while the other pair conducts, "
        "checked as half-sine (Mohan, Undeland and Robbins, Power Electronics, 3rd ed., 2003, ch. 5)",
    "circuit.waveform.line_commutated":
        "reverse voltage the secondary's crest {peak} in segments of the line voltage, checked as "
        "a square wave of the same peak (Mohan, Undeland and Robbins, Power Electronics, 3rd ed., 2003, ch. 5)",
    "circuit.forward.capacitor_input":
        "capacitor input: conduction angle {angle:.3g} deg, ripple {ripple}, diode current "
        "{average} average, {peak} peak, {rms} rms (ideal source; Mohan, Undeland and Robbins, Power Electronics, 3rd ed., 2003, ch. 5, idealized rectifier with "
        "a dc-side capacitor); the checks take a half-sine pulse of the same average (the pulse's rms "
        "is {rms_ratio:.3g} x the half-sine's: their conduction loss is low)",
    "circuit.forward.multiplier":
        "each stack charges its stage capacitor once a period as a peak rectifier does "
        "(an approximation): conduction angle {angle:.3g} deg, diode current {average} average, "
        "{peak} peak, {rms} rms; the checks take a half-sine pulse of the same average (the pulse's rms "
        "is {rms_ratio:.3g} x the half-sine's: their conduction loss is low)",
    "circuit.forward.current_fed":
        "line-commutated: each diode carries I_d = {current} for {share:.3g} of the period "
        "({average} average), checked as a square wave",
    "circuit.forward.current_fed_three_phase":
        "line-commutated three-phase bridge: each diode carries I_d = {current} for {share:.3g} "
        "of the period ({average} average); checked as a square wave of the same peak over half "
        "the period (average I_d / 2: conservative for the losses)",
    "circuit.forward.resistive":
        "resistive load: half-sine pulses of {average} average, crest {crest}",
    "circuit.slope.overlap":
        "overlap angle u = {overlap:.3g} deg from cos u = 1 - 2 omega L I_d / (sqrt(2) V) "
        "(V = {voltage}, L = {inductance}, I_d = {current}, f = {frequency}); commutation slope "
        "sqrt(2) V sin u / (2 L) = {di_dt} (Mohan, Undeland and Robbins, Power Electronics, 3rd ed., 2003, ch. 5)",
    "circuit.slope.extinction":
        "turn-off slope {di_dt} where the charging pulse ends, omega^2 C V_pk sin(theta_end) "
        "(ideal source; Mohan, Undeland and Robbins, Power Electronics, 3rd ed., 2003, ch. 5)",
    "circuit.slope.natural":
        "turn-off slope {di_dt} = omega x crest ({crest}) at the half-sine's zero",
    "circuit.multiplier_output":
        "{stages} stage(s): no-load output {no_load}; ripple I n (n + 1) / (2 f C) = {ripple}, "
        "regulation drop (I / (6 f C)) (4 n^3 + 3 n^2 - n) = {drop}, output {output} at "
        "{current} (C = {capacitance}, f = {frequency}; Kuffel, Zaengl and Kuffel, High Voltage "
        "Engineering Fundamentals, 2nd ed., 2000, ch. 2, from memory)",
    "circuit.same_duty":
        "{count} stacks ({stacks}) carry the same duty: checked once",
}


def _times(ratio: float) -> str:
    return f"{ratio:,.0f} x" if ratio < 1e9 else f"{ratio:.2g} x"


def _within(parameter: str) -> str:
    """How close to typ a datasheet puts the limits of ``parameter`` (common practice)."""
    return "about a decade" if parameter == "i_r" else (
        "a factor of 2 or 3" if parameter in LOGNORMAL_PARAMETERS else "some tens of percent")


def _untested_current(parts: str) -> str:
    return "" if not parts else (f"; {parts} give(s) no q_rr.at_forward_current: Q_rr taken as "
                                 "given at the turn-off current (not rescaled in current)")


# Format specs that word a value rather than format its number.
_WORDED = {
    "check": lambda name: CHECK_WORDS.get(name, name),
    "what": lambda parameter: "leakage" if parameter == "i_r" else parameter,
    "within": _within,
    "times": _times,
    "typ_note": lambda assumed: " (typ assumed from the max)" if assumed else "",
    "untested_current": _untested_current,
    # A value that is itself a finding's code without values: its sentence.
    "sentence": lambda code: TEMPLATES[code],
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
