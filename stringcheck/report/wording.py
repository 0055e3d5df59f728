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

__all__ = ["CHECK_WORDS", "TEMPLATES", "estimator_text", "impossibility_text", "rare_note_text",
           "reason_text", "sentence", "sentences"]

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
    "half_sine_history": "a half-sine pulse of crest {current} per branch, its stored "
                         "charge followed along the sine to the zero",
    "half_sine_crest": "I_F = {current} per branch, the half-sine's crest taken as steady "
                       "(no duty.frequency to follow the sine: an upper bound)",
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
        "C raised from {previous} to {raised} for the time-domain turn-off: no damping resistor "
        "kept the simulated peak within the limit at the smaller value",
    "size.transient_not_run":
        "damping resistor not confirmed in the time domain: {causes}",
    # checks.transient: how the simulated loop was chosen
    "transient.test_current":
        "no duty.forward_current: each branch starts from the parts' test I_F ({current:g} A)",
    "transient.branch_loops":
        "each of the {parallel} branches is simulated as its own loop with {parallel} x L and "
        "1/{parallel} of the current",
    "transient.left_out":
        "leakage and the grading resistor's TCR are left out of the turn-off (microseconds); "
        "junction temperature enters only the thermal voltage",
    # studies.faults: why a kind of fault was not evaluated
    "fault.no_capacitor": "no grading capacitor (grading.capacitor)",
    "fault.no_turn_off": "the dynamic check does not run (no turn-off)",
    "fault.no_damping_resistor": "no damping resistor (grading.damping_resistor)",
    "fault.no_resistor": "no grading resistor (grading.resistor)",
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
    "assumed.c_j_law_one_row":
        "{key}: one row; C_j(V) = C_j0 / (1 + V/phi)^gamma through it with phi = {potential} and "
        "gamma = {exponent:.3g} ({basis}, common practice)",
    "assumed.c_j_law_fitted":
        "{key}: C_j(V) = C_j0 / (1 + V/phi)^gamma fitted to the rows with phi = {potential} held "
        "({basis}, common practice)",
    "assumed.q_rr_capacitive":
        "{key} not given: the junction's typical capacitive charge up to {voltage} (an even share "
        "of the string voltage) stands for it outside the charge balance",
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
    "model.static_ac":
        "static: each device judged by the worse of two solutions, the dc one (the peak reverse "
        "voltage held) and the ac one (the reverse half-period followed in time across grading R, "
        "grading C + C_j and leakage, from the stage voltages the forward half leaves: discharged, "
        "plus the offsets the recovery leaves where the reverse voltage rises from zero after the "
        "turn-off: the charge balance at the string voltage reached by the end of the recovery); at "
        "line frequency an unequal capacitor can make the sharing worse than dc, not only better",
    "model.junction_temperature_equilibrium":
        "junction temperature of each device from the thermal check's electro-thermal "
        "equilibrium (ambient + temperature_rise + its self-heating: conduction, leakage at the "
        "nominal share and recovery loss), solved once and taken by the static check's leakage "
        "(one pass: the equilibrium is not re-solved with the static check's own share); "
        "leakage referred from its datasheet temperature with the part's doubling temperature",
    "model.resistor_tcr_position":
        "grading resistor TCR referred to {reference:g} degC, resistor at ambient + its "
        "position's temperature_rise (not its diode's self-heating)",
    "model.resistor_tcr":
        "grading resistor TCR referred to {reference:g} degC, resistor at its diode's temperature",
    "model.offset_sine_current":
        "offset-sine duty: reverse voltage (V/2)(1 - sin wt), mean square 3/8 V^2; the forward "
        "current is taken as a half-sine pulse of the same average over half the period (a "
        "shorter conduction pulse commutates from a higher crest: give duty.di_dt where known)",
    "model.mixed_stock":
        "mixed stock: {causes}; a mixed position (part A|B) is judged device by device against the "
        "limit of the part drawn, and its per-position limit shown is the lowest of the two",
    "recovery.capacitive":
        "recovery charge of capacitive devices ({parts} typical, up to {voltage}): the junction's "
        "own charge, the integral of C_j dV up to each stage's voltage, not an added Q_rr; the "
        "charge balance follows C_j(V)",
    # checks.recovery_conditions: how the recovery charge was carried to the application
    "recovery.not_rescaled":
        "recovery charge: Q_rr taken at the datasheet's test conditions, not rescaled to the "
        "application ({causes}); " + _RECOVERY_MODEL,
    "recovery.no_fit":
        "recovery charge: Q_rr taken at the datasheet's test conditions: parts.{part}'s typical "
        "q_rr, i_rm or t_rr and at_di_dt fit no recovery waveform; " + _RECOVERY_MODEL,
    **{f"recovery.carried.{basis}":
       "recovery charge: Q_rr carried from the datasheet's test I_F and di/dt to the "
       f"application's ({current}, di/dt = {{di_dt}}{{source:slope_source}}) through the "
       "charge-control model fitted to each part's typical Q_rr and I_RM or t_rr (Lauritzen-Ma), "
       "driven by the duty's forward current up to its zero; the charge balance "
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
    "plausibility.di_dt_far_from_natural":
        "a turn-off slope of {slope_per_us:.3g} A/us is {factor:times} {direction} than the "
        "{waveform} current's own slope at its zero ({natural_per_us:.3g} A/us = omega I_pk at "
        "{frequency:g} Hz), and no duty.stray_inductance says what would force it; the recovery "
        "is carried at the slope given (leave duty.di_dt out to use the natural slope)",
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
    # Why a check did not run (CheckOutcome.reason): studies.check, checks.preconditions,
    # checks.forward, checks.transient
    "not_run.not_requested": "not requested",
    "not_run.needs_dynamic": "needs the dynamic check, which did not run: {causes}",
    "not_run.no_turn_off":
        "dc duty with no turn-off: give duty.di_dt (or an ac waveform) to check the voltage "
        "sharing at turn-off",
    "not_run.no_forward_current":
        "no duty.forward_current: give the average forward current of the whole group "
        "(I_F(AV)) to check current sharing and junction temperatures",
    "not_run.no_forward_line":
        "part(s) {parts} give no v_t0 and r_t (forward characteristic); give them, or a class to "
        "inherit them from",
    "not_run.one_branch": "one branch: no current to share",
    "not_run.no_rated_current":
        "part(s) {parts} give no i_fav (rated average forward current), the limit of this check",
    "not_run.no_junction_to_case": "part(s) {parts} give no r_th_jc",
    "not_run.no_junction_limit": "part(s) {parts} give no t_j_max",
    "not_run.no_heatsink":
        "no thermal.r_th_sa (heatsink to ambient): give it to check junction temperatures",
    "not_run.no_commutation_loop":
        "give duty.stray_inductance or duty.di_dt (the commutation loop)",
    "not_run.inconsistent_recovery":
        "parts.{part}: its typical q_rr, i_rm or t_rr and at_di_dt are not consistent with any "
        "recovery waveform (with t_rr: Q_rr <= di/dt t_rr^2 / 2; with i_rm: Q_rr > I_RM^2 / "
        "(2 di/dt)); check the datasheet values",
    # checks.recovery_conditions.missing_recovery_finding: what the recovery model lacks
    "recovery_data.no_di_dt": "no di/dt",
    "recovery_data.no_charge": "parts.{part} gives no q_rr",
    "recovery_data.no_peak_or_time":
        "parts.{part} gives neither i_rm nor t_rr: the recovery model needs one",
    "recovery_data.no_test_di_dt":
        "parts.{part}.q_rr has no at_di_dt (the datasheet's test di/dt)",
    "recovery_data.test_di_dt_differ":
        "parts.{part}: t_rr and q_rr are given at different test di/dt (the fit needs both at "
        "one test condition)",
    "recovery_data.no_test_current":
        "parts.{part}.q_rr has no at_forward_current and the duty no forward_current",
    # checks.preconditions.no_scatter: inputs drawn without scatter (fixed values)
    "no_scatter.parameter": "parts.{part}.{parameter}",
    "no_scatter.resistor": "grading.resistor (no tolerance given)",
    "no_scatter.capacitor": "grading.capacitor (no tolerance given)",
    # montecarlo.mixed_stock.mix_finding
    "mixed_stock.mix":
        "{part} mixed in at {percent:.4g} % of the devices (each device independently, drawn "
        "anew in every built string)",
    # montecarlo.importance: the estimator (RareEstimate.estimator, joined by "; ")
    "estimator.no_failure_point_pooled":
        "no failure point found within |u| <= {radius:g} (steepest ascent, {pilot:,} plain "
        "pilot samples and rays from the highest of them): the sampler's {samples:,} plain "
        "samples pooled with the check's {trials:,} Monte Carlo trials, exact interval",
    "estimator.no_failure_point_plain":
        "no failure point found within |u| <= {radius:g} (steepest ascent, {pilot:,} plain "
        "pilot samples and rays from the highest of them): plain sampling with the exact interval",
    "estimator.importance_sampling":
        "importance sampling, defensive mixture shifted to the most likely failure point"
        "{regions:regions}{images:images}",
    "estimator.refitted_lots":
        "the resampled lot(s) of {parts} drawn from their fit (per column lognormal or normal, "
        "Gaussian copula)",
    # montecarlo.importance and studies.check: why the estimate does not decide
    # (RareEstimate.note)
    "rare.plain_decides": "{causes}, so the plain interval decides",
    "rare.orbit_incomplete":
        "the failure point found has more than {images:,} rearrangements under the string's "
        "symmetries (its other devices are not alike): the sampler used {images:,} of them and "
        "may miss part of P(fail)",
    "rare.coverage_not_assured":
        "the sampler cannot rule out a failure region it did not search: {causes}",
    "rare.search_capped": "the search stopped at {regions} failure regions and more remained",
    "rare.regions_revealed":
        "its sample still revealed {regions} failure region(s) the search had missed after "
        "{rounds} resampling(s)",
    "rare.no_failing_sample":
        "none of its samples failed, although the search found a failure region",
    "rare.few_effective_samples":
        "the estimate rests on about {effective:.1f} samples' worth of its weight (a region "
        "sampled by chance, not searched)",
    "rare.fit_without_failure_point":
        "no failure point found and the sampler drew the lot's fit, not the lot: the plain run "
        "(the lot itself) decides",
    "rare.estimators_disagree":
        "the importance-sampling upper bound {rare_high:.2g} lies below the plain Monte Carlo "
        "lower bound {plain_low:.2g} ({failures:,} of {trials:,}): the estimators disagree, so "
        "the plain interval decides",
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


# Which setting decided the commutation slope (checks.recovery_conditions.CommutationSlope).
SLOPE_SOURCES = {"di_dt": "duty.di_dt", "stray_inductance": "V_s / duty.stray_inductance",
                 "natural": "the waveform's natural slope at its zero, omega I_pk", "": "unknown"}


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
    "slope_source": lambda source: f", from {SLOPE_SOURCES[source]}",
    # A value that is itself a finding's code without values: its sentence.
    "sentence": lambda code: TEMPLATES[code],
    "regions": lambda count: f" of each of {count} failure regions" if count > 1 else "",
    "images": lambda count: (f" and {count} image(s) under the exchangeable positions"
                             if count > 0 else ""),
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
    causes = "; ".join(sentences(finding.causes, spell=spell))
    return TEMPLATES[finding.code].format(**values, limit=_Shown(finding.limit),
                                          option=_Options(spell), causes=causes)


def sentences(findings, *, spell: Callable[[Setting], str] = str) -> list[str]:
    """Each of ``findings`` in words, in order."""
    return [sentence(finding, spell=spell) for finding in findings]


def reason_text(reason: Finding | None) -> str:
    """Why a check did not run (``CheckOutcome.reason``) in words; "" for a check that ran."""
    return "" if reason is None else sentence(reason)


def estimator_text(rare) -> str:
    """How an importance-sampling estimate (``montecarlo.importance.RareEstimate``) was made:
    its ``estimator`` findings in words, joined by "; "."""
    return "; ".join(sentences(rare.estimator))


def rare_note_text(rare) -> str:
    """Why an importance-sampling estimate does not decide its check (its ``note``), or ""."""
    return "" if rare.note is None else sentence(rare.note)


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
