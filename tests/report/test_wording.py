"""Findings in words (report.wording): each code's sentence is the text printed before findings
existed (but for the numbers in prose, which now carry an SI prefix like the tables: "470 pF", not
"4.7e-10 F"), and the layers below the report no longer write the sentences they were converted
from."""

from __future__ import annotations

import ast
import re
import string
from pathlib import Path

import pytest

from stringcheck.checks.findings import Finding, Value, codes
from stringcheck.cli.options import OPTIONS, option_wording
from stringcheck.report.wording import (CHECK_WORDS, TEMPLATES, impossibility_text, sentence,
                                        sentences)
from tests.report.circuit_wording import CIRCUIT_TODAY

PACKAGE = Path(__file__).resolve().parents[2] / "stringcheck"

# What every recovery-charge assumption said at its end (checks/preconditions.py).
RECOVERY_MODEL = ("Q_rr at each position's junction temperature (between its rows, or by its "
                  "class's law); the whole string voltage is assumed to appear after recovery (hard "
                  "commutation)")

# One finding per code and the sentence the code printed before it was a finding (the f-strings
# of checks/grading_ratings.py, checks/preconditions.py, checks/plausibility.py and studies/size.py,
# evaluated for these values with units.format_quantity's three significant figures).
TODAY = [
    (Finding("rating.resistor_power", {"power": Value(1.52, "W")}, Value(1.0, "W")),
     "grading resistor dissipates 1.52 W at the worst static voltage, above its rating of 1 W"),
    (Finding("rating.resistor_voltage", {"voltage": Value(1712.3, "V"),
                                         "check": Value("transient")}, Value(1200.0, "V")),
     "grading resistor sees 1.71 kV at worst (simulated turn-off peak), above its "
     "working-voltage rating of 1.2 kV"),
    (Finding("rating.capacitor_voltage", {"voltage": Value(1712.3, "V"),
                                          "check": Value("dynamic")}, Value(1200.0, "V")),
     "grading capacitor sees 1.71 kV at worst (charge-balance turn-off), above its rating of "
     "1.2 kV"),
    (Finding("advisory.resistor_rated_power_missing"),
     "grading.resistor_rated_power not given: resistor power not checked"),
    (Finding("advisory.resistor_rated_voltage_missing"),
     "grading.resistor_rated_voltage not given: resistor working voltage not checked"),
    (Finding("advisory.grading_current_low",
             {"current": Value(5.45e-5, "A"), "leakage": Value(2.1e-5, "A"),
              "multiple": Value(5.0)}, Value(1.05e-4, "A")),
     "grading current 54.5 uA is less than 5 x the hottest maximum leakage (21 uA); several "
     "times is common practice"),
    (Finding("advisory.no_grading_resistors"),
     "no grading resistors: static sharing rests on the leakage alone and the stack has no "
     "bleed path for stored charge"),
    (Finding("advisory.capacitor_rated_voltage_missing"),
     "grading.capacitor_rated_voltage not given: capacitor voltage not checked"),
    (Finding("advisory.damping_resistor_missing"),
     "grading.damping_resistor not given: an undamped grading capacitor rings with the stray "
     "inductance and discharges into the device at turn-on"),
    (Finding("advisory.slow_discharge", {"time": Value(312.0, "s"), "voltage": Value(60.0, "V")},
             Value(5.0, "s")),
     "the stack takes 312 s to fall below 60 V through its grading resistors, longer than the "
     "5 s of IEC 60204-1:2016 clause 6.2.4: provide a discharge device or earthing stick"),
    # checks/preconditions.py (one finding each; the report joins several with "; ")
    (Finding("impossible.string_voltage", {"voltage": Value(9000.0, "V"), "series": Value(6),
                                           "derating": Value(0.9)}, Value(7560.0, "V")),
     "the string cannot hold 9000 V even with perfect sharing: the sum of derating x V_RRM over "
     "the 6 devices of a branch is 7560 V (derating 0.9)"),
    (Finding("impossible.group_current", {"current": Value(50.0, "A"), "parallel": Value(2)},
             Value(40.0, "A")),
     "the group cannot carry 50 A average even with perfect sharing: the 2 branch(es) together "
     "are rated 40 A (the sum over the branches of the weakest device's i_fav)"),
    # checks/plausibility.py
    (Finding("plausibility.string_voltage_low",
             {"voltage": Value(50.0, "V"), "series": Value(4), "share": Value(12.5, "V"),
              "percent": Value(100 * 12.5 / 1200.0), "part": Value("A"),
              "rating": Value(1200.0, "V")}, Value(12.0, "V")),
     "50 V across 4 devices in series is 12.5 V per device, 1 % of the V_RRM of part 'A' "
     "(1.2 kV): orders of magnitude below any rating; a bare number is volts (write \"50 kV\" if "
     "kilovolts were meant)"),
    (Finding("plausibility.slow_turn_off_slope", {"slope": Value(50.0, "A/s"),
                                                  "slope_per_us": Value(5e-5, "A/us")},
             Value(1e3, "A/s")),
     "a turn-off slope of 50 A/s (5e-05 A/us) is orders of magnitude slower than any "
     "commutation (1 to 1000 A/us is usual); a bare number is A/s: write \"50 A/us\" if that "
     "was meant"),
    (Finding("plausibility.slow_test_di_dt", {"slope": Value(50.0, "A/s"),
                                              "slope_per_us": Value(5e-5, "A/us")},
             Value(1e3, "A/s")),
     "a datasheet test di/dt of 50 A/s (5e-05 A/us) is orders of magnitude slower than any "
     "commutation (1 to 1000 A/us is usual); a bare number is A/s: write \"50 A/us\" if that "
     "was meant"),
    (Finding("plausibility.ambient_cold", {"ambient": Value(-70.0, "degC")},
             Value(-60.0, "degC")),
     "-70 degC is colder than -60 degC, below what power devices and grading components are "
     "commonly rated for; check the sign and the unit (a bare number is degC)"),
    (Finding("plausibility.max_far_above_typ",
             {"parameter": Value("i_r"), "high": Value(2e-3, "A"), "typ": Value(1e-6, "A"),
              "ratio": Value(2000.0), "typ_assumed": Value(1)}, Value(1e3)),
     "the maximum leakage 2 mA is 2,000 x its typical value 1 uA (typ assumed from the max); "
     "limits sit within about a decade of typ: check the units of both"),
    (Finding("plausibility.typ_far_above_min",
             {"parameter": Value("v_t0"), "typ": Value(3.0, "V"), "low": Value(0.2, "V"),
              "ratio": Value(15.0)}, Value(10.0)),
     "the typical v_t0 3 V is 15 x its minimum 200 mV; limits sit within some tens of percent of "
     "typ: check the units of both"),
    (Finding("plausibility.grading_loss_large", {"resistor": Value(4.7, "ohm"),
                                                 "loss": Value(2.5e6, "W")}, Value(1e6, "W")),
     "the grading resistors of 4.7 Ohm dissipate 2.5 MW in all at the nominal share, and no "
     "grading.resistor_rated_power is given to check it; a unit slip in the resistance (a bare "
     "number is ohms: write e.g. \"4.7 MOhm\")?"),
    (Finding("plausibility.confidence_low", {"confidence": Value(0.3)}, Value(0.5)),
     "0.3: an upper bound at less than 50% confidence lies below the best estimate of P(fail) "
     "more often than not, so a pass vouches for little; 0.95 is usual"),
    (Finding("plausibility.target_high", {"target": Value(5.0), "as_percent": Value(0.05)},
             Value(0.1)),
     "5 lets more than one built stack in ten fail; targets are usually 1e-3 to 1e-6 (was a "
     "percentage meant? 5 % is 0.05)"),
    # The sentence of size.capacitor_raised now gives the values with their prefixes (issue 18).
    (Finding("size.capacitor_raised", {"previous": Value(4.7e-10, "F"),
                                       "raised": Value(6.8e-10, "F")}),
     "C raised from 470 pF to 680 pF for the time-domain turn-off: no damping resistor kept the "
     "simulated peak within the limit at the smaller value"),
    # design/schema.py, design/reading.py, design/parts.py, design/lots.py: the assumptions made
    # on the user's behalf, as the f-strings there wrote them
    (Finding("assumed.waveform_dc", {"key": Value("duty.waveform")}),
     "duty.waveform not given: dc (continuous reverse voltage)"),
    (Finding("assumed.ambient", {"key": Value("duty.ambient"), "ambient": Value(25.0, "degC")}),
     "duty.ambient not given: ambient 25 degC"),
    (Finding("assumed.derating", {"key": Value("string.derating"), "derating": Value(0.8)}),
     "string.derating not given: derating 0.8 x V_RRM (common practice)"),
    (Finding("assumed.part_leakage_doubling", {"key": Value("parts.A.leakage_doubling")}),
     "parts.A.leakage_doubling not given: leakage doubles every 10 K (silicon, common practice)"),
    (Finding("assumed.part_leakage_voltage_exponent",
             {"key": Value("parts.A.leakage_voltage_exponent")}),
     "parts.A.leakage_voltage_exponent not given: leakage grows as V^0.5 (generation current, "
     "abrupt junction)"),
    (Finding("assumed.part_c_j", {"key": Value("parts.A.c_j")}),
     "parts.A.c_j not given: junction capacitance 0 F (only the grading capacitor counts in the "
     "dynamic check)"),
    (Finding("assumed.part_tempco_v_t0", {"key": Value("parts.A.tempco_v_t0")}),
     "parts.A.tempco_v_t0 not given: V_T0 temperature coefficient -2 mV/K (silicon PN, common "
     "practice)"),
    (Finding("assumed.part_tempco_r_t", {"key": Value("parts.A.tempco_r_t")}),
     "parts.A.tempco_r_t not given: r_T temperature coefficient 0 1/K"),
    (Finding("assumed.typ_geometric_mean", {"key": Value("parts.A.i_r")}),
     "parts.A.i_r: typ not given, taken as the geometric mean of min and max"),
    (Finding("assumed.typ_midpoint", {"key": Value("parts.A.v_t0")}),
     "parts.A.v_t0: typ not given, taken as the midpoint of min and max"),
    (Finding("assumed.typ_from_max", {"key": Value("parts.A.i_r"), "fraction": Value(0.1)}),
     "parts.A.i_r: only max given, typ taken as 0.1 x max"),
    (Finding("assumed.from_class", {"key": Value("parts.A"), "keys": Value("c_j, v_rrm"),
                                    "device_class": Value("si-fast-recovery")}),
     "parts.A: c_j, v_rrm taken from class 'si-fast-recovery'"),
    (Finding("assumed.lot_resampled", {"key": Value("parts.A"), "file": Value("lot.csv")}),
     "parts.A: devices resampled from the measured lot lot.csv (fit not given)"),
    (Finding("assumed.lot_for_row", {"key": Value("parts.A.q_rr")}),
     "parts.A.q_rr: no datasheet row; the measured lot's median, min and max stand for it in the "
     "textbook bounds (test conditions as noted)"),
    (Finding("assumed.lot_note", {"key": Value("parts.A.measured"),
                                  "note": Value("lot.q_rr_derived")}),
     "parts.A.measured: q_rr of each device derived as 1/2 I_RM t_rr from its measured i_rm and "
     "t_rr"),
    (Finding("assumed.leakage_at_v_rrm", {"key": Value("parts.A.i_r"), "v_rrm": Value(1200.0, "V")}),
     "parts.A.i_r: at_voltage not given, taken at V_RRM (1200 V)"),
    (Finding("assumed.leakage_at_datasheet_temperature",
             {"key": Value("parts.A.i_r"), "temperature": Value(25.0, "degC")}),
     "parts.A.i_r: at_temperature not given, taken at 25 degC"),
    (Finding("assumed.q_rr_from_i_rm_t_rr", {"key": Value("parts.A.q_rr")}),
     "parts.A.q_rr derived as 1/2 I_RM t_rr from i_rm and t_rr (max from the product of maxima: "
     "conservative)"),
    (Finding("model.junction_temperature_rows"),
     "junction temperature = ambient + the position's temperature_rise (no self-heating); leakage "
     "of each device at that temperature between its datasheet rows (exponential in T)"),
    # Issue 17 (rows): rows at several temperatures, screening per row, tolerance shapes (new
    # codes; the sentences are new, not converted).
    (Finding("rows.fitted", {"key": Value("parts.A.leakage_doubling"), "value": Value(30.103, "K"),
                             "cool": Value(25.0, "degC"), "hot": Value(125.0, "degC")}),
     "parts.A.leakage_doubling fitted from the typical values of the rows at 25 and 125 degC: "
     "30.1 K"),
    (Finding("rows.extrapolated", {"key": Value("parts.A.q_rr"), "cool": Value(25.0, "degC"),
                                   "hot": Value(125.0, "degC"),
                                   "temperature": Value(140.0, "degC")}),
     "parts.A.q_rr: rows at 25 to 125 degC; a position at 140 degC lies outside them, the end "
     "rows' law extended (each device moved by the typical values' slope)"),
    (Finding("assumed.recovery_law_rising", {"key": Value("parts.A.q_rr"),
                                             "device_class": Value("si-fast-recovery"),
                                             "factor": Value(2.5)}),
     "parts.A.q_rr: one row only; rises 2.5 x per 100 K of junction temperature (class "
     "'si-fast-recovery', silicon stored charge, common practice)"),
    (Finding("assumed.recovery_law_flat", {"key": Value("parts.A.q_rr"),
                                           "device_class": Value("sic-schottky")}),
     "parts.A.q_rr: one row only; independent of junction temperature (class 'sic-schottky': "
     "capacitive charge, no stored minority charge)"),
    (Finding("assumed.recovery_at_datasheet_temperature",
             {"key": Value("parts.A.q_rr"), "temperature": Value(25.0, "degC")}),
     "parts.A.q_rr: at_temperature not given, taken at 25 degC"),
    (Finding("assumed.screening_row", {"screened": Value("parts.A.i_r at 25 degC"),
                                       "unscreened": Value("parts.A.i_r at 125 degC")}),
     "limits truncate the draw (screened, rows at 25 degC +- 10 K or saying screened = true): "
     "parts.A.i_r at 25 degC; not screened (guaranteed by design or characterisation, drawn "
     "untruncated): parts.A.i_r at 125 degC"),
    (Finding("assumed.screening_design", {"screened": Value("parts.A.i_r at 125 degC"),
                                          "unscreened": Value("none")}),
     "monte_carlo.screened decides the rows that do not say: screened: parts.A.i_r at 125 degC; "
     "not screened: none"),
    (Finding("assumed.resistor_distribution_normal",
             {"key": Value("grading.resistor_distribution")}),
     "grading.resistor_distribution not given: resistor values normal about nominal, the "
     "tolerance at sigma_at_limit"),
    (Finding("assumed.resistor_distribution_uniform",
             {"key": Value("grading.resistor_distribution")}),
     "grading.resistor_distribution not given: resistor values uniform over the tolerance band"),
    (Finding("assumed.capacitor_distribution_normal",
             {"key": Value("grading.capacitor_distribution")}),
     "grading.capacitor_distribution not given: capacitor values normal about nominal, the "
     "tolerance at sigma_at_limit"),
    (Finding("assumed.capacitor_distribution_uniform",
             {"key": Value("grading.capacitor_distribution")}),
     "grading.capacitor_distribution not given: capacitor values anywhere in the tolerance band "
     "(uniform; conservative for parts picked from a wider production spread)"),
    (Finding("lot.recovery_for_reference"),
     "i_rm and t_rr are shown for reference; the checks use the measured q_rr"),
    (Finding("lot.q_rr_derived"),
     "q_rr of each device derived as 1/2 I_RM t_rr from its measured i_rm and t_rr"),
    (Finding("lot.below_datasheet_min", {"key": Value("parts.A"), "count": Value(2),
                                         "devices": Value(6), "file": Value("lot.csv"),
                                         "parameter": Value("i_r")}),
     "parts.A: 2 of 6 devices of lot.csv have i_r below the datasheet min"),
    (Finding("lot.above_datasheet_max", {"key": Value("parts.A"), "count": Value(2),
                                         "devices": Value(6), "file": Value("lot.csv"),
                                         "parameter": Value("q_rr")}),
     "parts.A: 2 of 6 devices of lot.csv have q_rr above the datasheet max"),
    # checks/preconditions.py and checks/recovery_conditions.py: the model's assumptions
    (Finding("model.static_dc"),
     "static: the peak reverse voltage is held as dc; at line frequency the grading capacitors "
     "also share the voltage, which this check does not credit"),
    (Finding("model.junction_temperature"),
     "junction temperature = ambient + the position's temperature_rise (no self-heating); "
     "leakage referred from its datasheet temperature with the part's doubling temperature"),
    (Finding("model.resistor_tcr", {"reference": Value(25.0, "degC")}),
     "grading resistor TCR referred to 25 degC, resistor at its diode's temperature"),
    (Finding("model.static_ac"),
     "static: each device judged by the worse of two solutions, the dc one (the peak reverse "
     "voltage held) and the ac one (the reverse half-period followed in time across grading R, "
     "grading C + C_j and leakage, from the stage voltages the forward half leaves: discharged, "
     "plus the offsets the recovery leaves where the reverse voltage rises from zero after the "
     "turn-off: the charge balance at the string voltage reached by the end of the recovery); at "
     "line frequency an unequal capacitor can make the sharing worse than dc, not only better"),
    (Finding("model.junction_temperature_equilibrium"),
     "junction temperature of each device from the thermal check's electro-thermal "
     "equilibrium (ambient + temperature_rise + its self-heating: conduction, leakage at the "
     "nominal share and recovery loss), solved once and taken by the static check's leakage "
     "(one pass: the equilibrium is not re-solved with the static check's own share); "
     "leakage referred from its datasheet temperature with the part's doubling temperature"),
    (Finding("model.resistor_tcr_position", {"reference": Value(25.0, "degC")}),
     "grading resistor TCR referred to 25 degC, resistor at ambient + its position's "
     "temperature_rise (not its diode's self-heating)"),
    (Finding("model.mixed_stock", causes=(Finding("mixed_stock.mix", {
        "part": Value("B"), "percent": Value(30.0)}),)),
     "mixed stock: B mixed in at 30 % of the devices (each device independently, drawn anew in "
     "every built string); a mixed position (part A|B) is judged device by device "
     "against the limit of the part drawn, and its per-position limit shown is the lowest of "
     "the two"),
    (Finding("plausibility.di_dt_far_from_natural",
             {"slope": Value(1e7, "A/s"), "slope_per_us": Value(10.0, "A/us"),
              "natural": Value(493.5, "A/s"), "natural_per_us": Value(4.935e-4, "A/us"),
              "factor": Value(20264.0), "direction": Value("faster"),
              "waveform": Value("half-sine"), "frequency": Value(50.0, "Hz")}, Value(100.0)),
     "a turn-off slope of 10 A/us is 20,264 x faster than the half-sine current's own slope at "
     "its zero (0.000494 A/us = omega I_pk at 50 Hz), and no duty.stray_inductance says what "
     "would force it; the recovery is carried at the slope given (leave duty.di_dt out to use "
     "the natural slope)"),
    (Finding("model.offset_sine_current"),
     "offset-sine duty: reverse voltage (V/2)(1 - sin wt), mean square 3/8 V^2; the forward "
     "current is taken as a half-sine pulse of the same average over half the period (a shorter "
     "conduction pulse commutates from a higher crest: give duty.di_dt where known)"),
    (Finding("recovery_data.no_di_dt"), "no di/dt"),
    (Finding("recovery.not_rescaled", causes=(Finding("recovery_data.no_di_dt"),)),
     "recovery charge: Q_rr taken at the datasheet's test conditions, not rescaled to the "
     "application (no di/dt); " + RECOVERY_MODEL),
    (Finding("recovery.no_fit", {"part": Value("A")}),
     "recovery charge: Q_rr taken at the datasheet's test conditions: parts.A's typical q_rr, "
     "i_rm or t_rr and at_di_dt fit no recovery waveform; " + RECOVERY_MODEL),
    (Finding("recovery.carried.dc", {"current": Value(12.5, "A"), "di_dt": Value(5e7, "A/s"),
                                     "source": Value("di_dt"), "untested": Value("")}),
     "recovery charge: Q_rr carried from the datasheet's test I_F and di/dt to the application's "
     "(I_F = 12.5 A per branch, di/dt = 50 MA/s, from duty.di_dt) through the charge-control "
     "model fitted to each part's typical Q_rr and I_RM or t_rr (Lauritzen-Ma), driven by the "
     "duty's forward current up to its zero; the charge balance of the "
     "dynamic check and the recovery loss of the thermal check use the same carried value; "
     + RECOVERY_MODEL),
    (Finding("recovery.carried.square_peak", {"current": Value(25.0, "A"),
                                              "di_dt": Value(5e7, "A/s"),
                                              "source": Value("stray_inductance"),
                                              "untested": Value("parts.A, parts.B")}),
     "recovery charge: Q_rr carried from the datasheet's test I_F and di/dt to the application's "
     "(I_F = 25 A per branch, the square wave's peak, di/dt = 50 MA/s, from V_s / "
     "duty.stray_inductance) through the charge-control model fitted to each part's typical "
     "Q_rr and I_RM or t_rr (Lauritzen-Ma), driven by the duty's forward current up to its zero; "
     "the charge balance of the dynamic check and the recovery loss of the thermal check use the "
     "same carried value; parts.A, parts.B give(s) no q_rr.at_forward_current: Q_rr taken as "
     "given at the turn-off current (not rescaled in current); " + RECOVERY_MODEL),
    (Finding("recovery.carried.half_sine_history", {"current": Value(12.5, "A"),
                                                    "di_dt": Value(1e7, "A/s"),
                                                    "source": Value("natural"),
                                                    "untested": Value("")}),
     "recovery charge: Q_rr carried from the datasheet's test I_F and di/dt to the application's "
     "(a half-sine pulse of crest 12.5 A per branch, its stored charge followed along the sine "
     "to the zero, di/dt = 10 MA/s, from the waveform's natural slope at its zero, omega I_pk) "
     "through the charge-control model fitted to each part's typical Q_rr and I_RM or t_rr "
     "(Lauritzen-Ma), driven by the duty's forward current up to its zero; the charge balance of "
     "the dynamic check and the recovery loss of the thermal check use the same carried value; "
     + RECOVERY_MODEL),
    (Finding("recovery.carried.half_sine_crest", {"current": Value(31.4, "A"),
                                                  "di_dt": Value(1e8, "A/s"),
                                                  "source": Value("di_dt"),
                                                  "untested": Value("")}),
     "recovery charge: Q_rr carried from the datasheet's test I_F and di/dt to the application's "
     "(I_F = 31.4 A per branch, the half-sine's crest taken as steady (no duty.frequency to follow "
     "the sine: an upper bound), di/dt = 100 MA/s, from duty.di_dt) through the charge-control "
     "model fitted to each part's typical Q_rr and I_RM or t_rr (Lauritzen-Ma), driven by the "
     "duty's forward current up to its zero; the charge balance of the dynamic check and the "
     "recovery loss of the thermal check use the same carried value; " + RECOVERY_MODEL),
    (Finding("recovery.carried.test_current", {"current": Value(10.0, "A"),
                                               "di_dt": Value(5e7, "A/s"),
                                               "source": Value("di_dt"),
                                               "untested": Value("")}),
     "recovery charge: Q_rr carried from the datasheet's test I_F and di/dt to the application's "
     "(I_F = the test I_F (10 A; no duty.forward_current), di/dt = 50 MA/s, from duty.di_dt) "
     "through the charge-control model fitted to each part's typical Q_rr and I_RM or t_rr "
     "(Lauritzen-Ma), driven by the duty's forward current up to its zero; "
     "the charge balance of the dynamic check and the recovery loss of the thermal check use the "
     "same carried value; " + RECOVERY_MODEL),
    # Why a check did not run (the strings of studies/check.py, checks/preconditions.py,
    # checks/forward.py, checks/transient.py and checks/recovery_conditions.py before)
    (Finding("not_run.not_requested"), "not requested"),
    (Finding("not_run.needs_dynamic", causes=(Finding("not_run.no_turn_off"),)),
     "needs the dynamic check, which did not run: dc duty with no turn-off: give duty.di_dt (or "
     "an ac waveform) to check the voltage sharing at turn-off"),
    (Finding("not_run.no_turn_off"),
     "dc duty with no turn-off: give duty.di_dt (or an ac waveform) to check the voltage sharing "
     "at turn-off"),
    (Finding("not_run.no_forward_current"),
     "no duty.forward_current: give the average forward current of the whole group (I_F(AV)) "
     "to check current sharing and junction temperatures"),
    (Finding("not_run.no_forward_line", {"parts": Value("A, B")}),
     "part(s) A, B give no v_t0 and r_t (forward characteristic); give them, or a class to "
     "inherit them from"),
    (Finding("not_run.one_branch"), "one branch: no current to share"),
    (Finding("not_run.no_rated_current", {"parts": Value("A")}),
     "part(s) A give no i_fav (rated average forward current), the limit of this check"),
    (Finding("not_run.no_junction_to_case", {"parts": Value("A")}), "part(s) A give no r_th_jc"),
    (Finding("not_run.no_junction_limit", {"parts": Value("B")}), "part(s) B give no t_j_max"),
    (Finding("not_run.no_heatsink"),
     "no thermal.r_th_sa (heatsink to ambient): give it to check junction temperatures"),
    (Finding("not_run.no_commutation_loop"),
     "give duty.stray_inductance or duty.di_dt (the commutation loop)"),
    (Finding("not_run.inconsistent_recovery", {"part": Value("A")}),
     "parts.A: its typical q_rr, i_rm or t_rr and at_di_dt are not consistent with any recovery "
     "waveform (with t_rr: Q_rr <= di/dt t_rr^2 / 2; with i_rm: Q_rr > I_RM^2 / (2 di/dt)); "
     "check the datasheet values"),
    (Finding("recovery_data.no_charge", {"part": Value("A")}), "parts.A gives no q_rr"),
    (Finding("recovery_data.no_peak_or_time", {"part": Value("A")}),
     "parts.A gives neither i_rm nor t_rr: the recovery model needs one"),
    (Finding("recovery_data.no_test_di_dt", {"part": Value("A")}),
     "parts.A.q_rr has no at_di_dt (the datasheet's test di/dt)"),
    (Finding("recovery_data.test_di_dt_differ", {"part": Value("A")}),
     "parts.A: t_rr and q_rr are given at different test di/dt (the fit needs both at one test "
     "condition)"),
    (Finding("recovery_data.no_test_current", {"part": Value("A")}),
     "parts.A.q_rr has no at_forward_current and the duty no forward_current"),
    # checks/preconditions.no_scatter and montecarlo/mixed_stock.mix_finding
    (Finding("no_scatter.parameter", {"part": Value("A"), "parameter": Value("q_rr")}),
     "parts.A.q_rr"),
    (Finding("no_scatter.resistor"), "grading.resistor (no tolerance given)"),
    (Finding("no_scatter.capacitor"), "grading.capacitor (no tolerance given)"),
    (Finding("mixed_stock.mix", {"part": Value("B"), "percent": Value(100 * 0.125)}),
     "B mixed in at 12.5 % of the devices (each device independently, drawn anew in every "
     "built string)"),
    # montecarlo/importance.py's estimator text and notes, and studies/check.py's notes on them
    (Finding("estimator.no_failure_point_pooled",
             {"radius": Value(12.0), "pilot": Value(10_000), "samples": Value(20_000),
              "trials": Value(4000)}),
     "no failure point found within |u| <= 12 (steepest ascent, 10,000 plain pilot samples and "
     "rays from the highest of them): the sampler's 20,000 plain samples pooled with the check's "
     "4,000 Monte Carlo trials, exact interval"),
    (Finding("estimator.no_failure_point_plain", {"radius": Value(12.0), "pilot": Value(1000)}),
     "no failure point found within |u| <= 12 (steepest ascent, 1,000 plain pilot samples and "
     "rays from the highest of them): plain sampling with the exact interval"),
    (Finding("estimator.importance_sampling", {"regions": Value(1), "images": Value(0)}),
     "importance sampling, defensive mixture shifted to the most likely failure point"),
    (Finding("estimator.importance_sampling", {"regions": Value(4), "images": Value(4)}),
     "importance sampling, defensive mixture shifted to the most likely failure point of each "
     "of 4 failure regions and 4 image(s) under the exchangeable positions"),
    (Finding("estimator.importance_sampling", {"regions": Value(1), "images": Value(23)}),
     "importance sampling, defensive mixture shifted to the most likely failure point and 23 "
     "image(s) under the exchangeable positions"),
    (Finding("estimator.refitted_lots", {"parts": Value("A, B")}),
     "the resampled lot(s) of A, B drawn from their fit (per column lognormal or normal, "
     "Gaussian copula)"),
    (Finding("rare.plain_decides", causes=(
        Finding("rare.orbit_incomplete", {"images": Value(1024)}),
        Finding("rare.coverage_not_assured", causes=(
            Finding("rare.search_capped", {"regions": Value(12)}),
            Finding("rare.regions_revealed", {"regions": Value(2), "rounds": Value(2)}),
            Finding("rare.few_effective_samples", {"effective": Value(3.14)},
                    Value(10.0)))))),
     "the failure point found has more than 1,024 rearrangements under the string's symmetries "
     "(its other devices are not alike): the sampler used 1,024 of them and may miss part of "
     "P(fail); the sampler cannot rule out a failure region it did not search: the search "
     "stopped at 12 failure regions and more remained; its sample still revealed 2 failure "
     "region(s) the search had missed after 2 resampling(s); the estimate rests on about 3.1 "
     "samples' worth of its weight (a region sampled by chance, not searched), so the plain "
     "interval decides"),
    (Finding("rare.orbit_incomplete", {"images": Value(1024)}),
     "the failure point found has more than 1,024 rearrangements under the string's symmetries "
     "(its other devices are not alike): the sampler used 1,024 of them and may miss part of "
     "P(fail)"),
    (Finding("rare.coverage_not_assured", causes=(Finding("rare.no_failing_sample"),)),
     "the sampler cannot rule out a failure region it did not search: none of its samples "
     "failed, although the search found a failure region"),
    (Finding("rare.search_capped", {"regions": Value(12)}),
     "the search stopped at 12 failure regions and more remained"),
    (Finding("rare.regions_revealed", {"regions": Value(1), "rounds": Value(2)}),
     "its sample still revealed 1 failure region(s) the search had missed after 2 "
     "resampling(s)"),
    (Finding("rare.no_failing_sample"),
     "none of its samples failed, although the search found a failure region"),
    (Finding("rare.few_effective_samples", {"effective": Value(7.26)}, Value(10.0)),
     "the estimate rests on about 7.3 samples' worth of its weight (a region sampled by chance, "
     "not searched)"),
    (Finding("rare.fit_without_failure_point"),
     "no failure point found and the sampler drew the lot's fit, not the lot: the plain run "
     "(the lot itself) decides"),
    (Finding("rare.estimators_disagree", {"rare_high": Value(1.234e-7),
                                          "plain_low": Value(2.5e-4), "failures": Value(12),
                                          "trials": Value(20_000)}),
     "the importance-sampling upper bound 1.2e-07 lies below the plain Monte Carlo lower bound "
     "0.00025 (12 of 20,000): the estimators disagree, so the plain interval decides"),
]
# studies/size.py: the limit that bound each proposed value, and why there is no proposal
# (issue 18); sentences written for these findings, checked by hand against the figures.
SIZING = [
    (Finding("size.transient_not_run", causes=(Finding("not_run.no_commutation_loop"),)),
     'damping resistor not confirmed in the time domain: give duty.stray_inductance or duty.di_dt (the commutation loop)'),
    (Finding("transient.test_current", {"current": Value(10.0, "A")}),
     "no duty.forward_current: each branch starts from the parts' test I_F (10 A)"),
    (Finding("transient.branch_loops", {"parallel": Value(3)}),
     "each of the 3 branches is simulated as its own loop with 3 x L and 1/3 of the current"),
    (Finding("transient.left_out"),
     "leakage and the grading resistor's TCR are left out of the turn-off (microseconds); "
     "junction temperature enters only the thermal voltage"),
    (Finding("fault.no_capacitor"), "no grading capacitor (grading.capacitor)"),
    (Finding("fault.no_turn_off"), "the dynamic check does not run (no turn-off)"),
    (Finding("fault.no_damping_resistor"), "no damping resistor (grading.damping_resistor)"),
    (Finding("fault.no_resistor"), "no grading resistor (grading.resistor)"),
    (Finding("size.bound.p_fail", {"item": Value("resistor"), "check": Value("static"), "value": Value(4.7e6, "ohm"), "p_fail_upper": Value(0.00091), "failures": Value(9), "next": Value(5.6e6, "ohm"), "next_p_fail_upper": Value(0.0013)}, Value(1e-3)),
     'R limited by P(fail) (static blocking): 4.7 MOhm gives P(fail) <= 0.00091 (9 failures), the next preferred value 5.6 MOhm gives 0.0013, over the target 0.001'),
    (Finding("size.bound.grading_current", {"item": Value("resistor"), "multiple": Value(5.0), "leakage": Value(22.6e-6, "A"), "stage_voltage": Value(1250.0, "V"), "current": Value(113e-6, "A")}, Value(11.06e6, "ohm")),
     'R limited by grading current >= 5 x max leakage: (V_s / n) / (5 x 22.6 uA) = 11.1 MOhm at 1.25 kV per stage'),
    (Finding("size.bound.discharge", {"item": Value("resistor"), "stage_capacitance": Value(165e-12, "F"), "load_capacitance": Value(10e-9, "F"), "series": Value(24), "time": Value(4.6, "s"), "resistance": Value(3.3e6, "ohm")}, Value(5.0, "s")),
     'R limited by discharge below 60 V within 5 s: R <= 3.3 MOhm with 165 pF per stage and 10 nF across the stack of 24 (4.6 s at the proposed value)'),
    (Finding("size.bound.resistor_max", {"item": Value("resistor")}, Value(1e9, "ohm")),
     'R limited by the largest realisable value ([sizing] resistor_max, 1 GOhm)'),
    (Finding("size.bound.resistor_min", {"item": Value("resistor")}, Value(1e3, "ohm")),
     'R limited by the smallest realisable value ([sizing] resistor_min, 1 kOhm)'),
    (Finding("size.bound.capacitor_max", {"item": Value("capacitor")}, Value(1e-5, "F")),
     'C limited by the largest realisable value ([sizing] capacitor_max, 10 uF)'),
    (Finding("size.bound.capacitor_min", {"item": Value("capacitor")}, Value(1e-12, "F")),
     'C limited by the smallest realisable value ([sizing] capacitor_min, 1 pF)'),
    (Finding("size.bound.stage_capacitance", {"item": Value("capacitor"), "multiple": Value(10.0), "junction": Value(15e-12, "F"), "stray": Value(2e-12, "F")}, Value(170e-12, "F")),
     'C limited by C >= 10 x (C_j + stray) = 10 x (15 pF + 2 pF) = 170 pF'),
    (Finding("size.bound.confirmation", {"item": Value("capacitor"), "check": Value("dynamic"), "first": Value(150e-12, "F"), "first_p_fail_upper": Value(0.0012), "first_failures": Value(12), "value": Value(180e-12, "F"), "p_fail_upper": Value(0.0004), "failures": Value(2), "seed": Value(17)}, Value(1e-3)),
     'C limited by the confirmation on an independent sample (seed 17): 150 pF gave P(fail) <= 0.0012 (12 failures) against 0.001 (charge-balance turn-off); one step further, 180 pF gives 0.0004 (2 failures)'),
    (Finding("size.bound.critical_damping", {"value": Value(1800.0, "ohm"), "critical": Value(1783.0, "ohm"), "inductance": Value(3e-3, "H"), "inductance_source": Value("di_dt"), "series": Value(24), "capacitor": Value(150e-12, "F")}),
     'R_d limited by critical damping of the commutation loop: 2 sqrt(L / (n C)) = 1.78 kOhm with L = 3 mH (V_s / (di/dt)), n = 24, C = 150 pF; rounded up to E12: 1.8 kOhm'),
    (Finding("size.bound.recovery_step", {"value": Value(180.0, "ohm"), "peak_current": Value(1.73, "A"), "step": Value(311.4, "V"), "critical": Value(1826.0, "ohm"), "inductance": Value(3e-3, "H"), "inductance_source": Value("di_dt"), "series": Value(24), "capacitor": Value(150e-12, "F")}, Value(350.0, "V")),
     "R_d limited by the step I_RM x R_d = 1.73 A x 180 Ohm = 311 V within the stage's margin of 350 V (critical damping would ask 1.83 kOhm)"),
    (Finding("size.bound.time_domain", {"value": Value(1000.0, "ohm"), "ratio": Value(0.993), "low": Value(4.7, "ohm"), "high": Value(2200.0, "ohm"), "critical": Value(781.0, "ohm"), "step_limit": Value(202.0, "ohm"), "rule": Value(180.0, "ohm")}),
     'R_d chosen in the time domain: 1 kOhm keeps the worst simulated peak at 0.993 x the limit, the lowest of the values tried from 4.7 Ohm to 2.2 kOhm (critical damping 781 Ohm, recovery-step limit 202 Ohm, rule 180 Ohm)'),
    (Finding("size.damping.no_capacitor"),
     'no grading capacitor: no damping resistor needed'),
    (Finding("size.damping.kept", {"value": Value(1200.0, "ohm")}),
     "R_d kept at the design's 1.2 kOhm (no stray inductance or di/dt to size it)"),
    (Finding("size.damping.not_sized"),
     'R_d not sized: give duty.stray_inductance or duty.di_dt (the commutation loop)'),
    (Finding("size.unmet.range", {"item": Value("resistor"), "low_code": Value("size.bound.resistor_min"), "high_code": Value("size.bound.grading_current"), "low": Value(1e3, "ohm"), "high": Value(93.75, "ohm")}),
     'no R meets every limit: the lower limit ([sizing] resistor_min) 1 kOhm is above the upper limit (grading current >= k x max leakage) 93.8 Ohm'),
    (Finding("size.unmet.p_fail", {"item": Value("capacitor"), "check": Value("dynamic"), "value": Value(1e-9, "F"), "p_fail_upper": Value(1.0), "failures": Value(4000), "low": Value(1e-12, "F"), "high": Value(1e-9, "F")}, Value(1e-3)),
     'no C from 1 pF to 1 nF meets the target on the charge-balance turn-off check: the closest, 1 nF, gives P(fail) <= 1 (4000 failures) against 0.001'),
    (Finding("size.unmet.confirmation", {"item": Value("resistor"), "check": Value("static"), "value": Value(4.64e6, "ohm"), "first": Value(4.75e6, "ohm"), "p_fail_upper": Value(0.0011), "failures": Value(11), "seed": Value(17)}, Value(1e-3)),
     'R 4.75 MOhm fails its confirmation on an independent sample (seed 17, static blocking) even one step further: the closest, 4.64 MOhm, gives P(fail) <= 0.0011 (11 failures) against 0.001'),
    (Finding("size.unmet.transient", {"low": Value(4.7, "ohm"), "high": Value(2200.0, "ohm"), "capacitor": Value(2.2e-9, "F"), "value": Value(470.0, "ohm"), "ratio": Value(1.116)}),
     'no damping resistor from 4.7 Ohm to 2.2 kOhm keeps the simulated turn-off within the limit, even with C raised to 2.2 nF: the closest, 470 Ohm, peaks at 1.116 x the limit'),
    (Finding("size.unmet.damping_margin", {"limit_voltage": Value(1600.0, "V"), "share": Value(1650.0, "V")}),
     'no damping resistor fits: the nominal share 1.65 kV leaves no margin below the limit 1.6 kV for the step I_RM x R_d'),
    (Finding("size.unmet.check", {"check": Value("thermal"), "p_fail_upper": Value(0.02), "ratio": Value(1.3), "resistor": Value(4.7e6, "ohm"), "capacitor": Value(2.2e-9, "F"), "damping_resistor": Value(100.0, "ohm")}, Value(1e-3)),
     'the sized network (R 4.7 MOhm, C 2.2 nF, R_d 100 Ohm) fails the thermal check of the final run: P(fail) <= 0.02 against 0.001, worst stage at 1.300 x the limit'),
    (Finding("size.unmet.verdict", {"verdict": Value("fail"), "resistor": Value(4.7e6, "ohm"), "capacitor": Value(2.2e-9, "F"), "damping_resistor": Value(100.0, "ohm")}),
     'the sized network (R 4.7 MOhm, C 2.2 nF, R_d 100 Ohm) does not pass the final check (verdict fail)'),
    (Finding("size.unmet.series", {"first": Value(8), "last": Value(32)}),
     'no device count from 8 to 32 passes with this network'),
]

# Issue 17 (capj): the junction law of C_j rows and the capacitive recovery charge.
TODAY += [
    (Finding("assumed.c_j_law_one_row", {"key": Value("parts.S.c_j"), "potential": Value(1.2, "V"),
                                         "basis": Value("class 'sic-schottky'"),
                                         "exponent": Value(0.5)}),
     "parts.S.c_j: one row; C_j(V) = C_j0 / (1 + V/phi)^gamma through it with phi = 1.2 V and "
     "gamma = 0.5 (class 'sic-schottky', common practice)"),
    (Finding("assumed.c_j_law_fitted", {"key": Value("parts.S.c_j"), "potential": Value(0.7, "V"),
                                        "basis": Value("silicon p-n")}),
     "parts.S.c_j: C_j(V) = C_j0 / (1 + V/phi)^gamma fitted to the rows with phi = 700 mV held "
     "(silicon p-n, common practice)"),
    (Finding("assumed.q_rr_capacitive", {"key": Value("parts.S.q_rr"),
                                         "voltage": Value(400.0, "V")}),
     "parts.S.q_rr not given: the junction's typical capacitive charge up to 400 V (an even "
     "share of the string voltage) stands for it outside the charge balance"),
    (Finding("recovery.capacitive", {"parts": Value("parts.S 2.06e-08 C"),
                                     "voltage": Value(400.0, "V")}),
     "recovery charge of capacitive devices (parts.S 2.06e-08 C typical, up to 400 V): the "
     "junction's own charge, the integral of C_j dV up to each stage's voltage, not an added "
     "Q_rr; the charge balance follows C_j(V)"),
]
TODAY += CIRCUIT_TODAY  # issue 23 (tests/report/circuit_wording.py)
# The command line's wording of the one code that names a setting (the JSON of `size` has it).
SIZE_DAMPING = (Finding("size.damping_slower_than_recovery", {"time_constant": Value(3.3e-7, "s")},
                        Value(1.5e-7, "s")),
                "R_d C = 330 ns is longer than the shortest typical t_rr (150 ns): the "
                "capacitor may not take the charge in time; `--transient` checks it in the time "
                "domain")


@pytest.mark.parametrize("finding, text", TODAY + SIZING,
                         ids=[f.code for f, _ in TODAY + SIZING])
def test_each_code_reads_as_it_did(finding, text):
    assert sentence(finding) == text
    assert sentence(finding, spell=option_wording) == text  # names no setting


def test_a_setting_in_a_sentence_is_spelled_by_whoever_shows_it():
    finding, text = SIZE_DAMPING
    assert sentence(finding, spell=option_wording) == text
    # From Python the setting is the keyword, never a command-line option.
    assert sentence(finding) == text.replace("--transient", "transient")


def test_every_code_has_a_sentence_and_is_tested():
    tested = {finding.code for finding, _ in TODAY + SIZING} | {SIZE_DAMPING[0].code}
    # The review's codes are tested in tests/report/test_review_wording.py.
    assert tested == {code for code in TEMPLATES if not code.startswith("review.")}
    with pytest.raises(KeyError):
        sentence(Finding("no.such_code"))
    assert sentences([f for f, _ in TODAY]) == [t for _, t in TODAY]
    assert codes([f for f, _ in TODAY]) == [f.code for f, _ in TODAY]


def test_templates_name_only_known_settings_and_check_words():
    for code, template in TEMPLATES.items():
        for _, field, spec, _ in string.Formatter().parse(template):
            if field == "option":
                assert spec in OPTIONS, (code, spec)
            if spec == "check":
                assert field == "check", code
    assert set(CHECK_WORDS) == {"static", "dynamic", "transient"}


def _produced_codes() -> set[str]:
    """The codes the package's modules below the report make findings of (Finding("code", ...))."""
    found = set()
    for path in PACKAGE.rglob("*.py"):
        if path.relative_to(PACKAGE).parts[0] in ("report", "cli"):
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Call) and getattr(node.func, "id", None) == "Finding" \
                    and node.args and isinstance(node.args[0], ast.Constant):
                found.add(node.args[0].value)
            # a code handed to a helper that makes the finding (plausibility's _slope)
            elif isinstance(node, ast.Constant) and isinstance(node.value, str) and \
                    re.fullmatch(r"(rating|advisory|size|plausibility|impossible|not_run|"
                                 r"recovery_data)\.[a-z_]+", node.value):
                found.add(node.value)
            # a code built from a prefix (f"assumed.part_{key}"): every template it can name
            elif isinstance(node, ast.JoinedStr) and node.values and \
                    isinstance(node.values[0], ast.Constant) and \
                    re.fullmatch(r"(assumed|lot|recovery)\.[a-z_.]*", node.values[0].value):
                prefix = node.values[0].value
                found.update(code for code in TEMPLATES if code.startswith(prefix))
            # a circuit code picked by topology before its finding is made (studies.circuit)
            elif isinstance(node, ast.Constant) and isinstance(node.value, str) and \
                    re.fullmatch(r"circuit\.(piv|waveform|forward|slope)\.[a-z_]+", node.value):
                found.add(node.value)
            # a code named by a constant beside the finding (_PART_DEFAULT_NOTES' keys)
            elif isinstance(node, ast.Constant) and isinstance(node.value, str) and \
                    re.fullmatch(r"(assumed|lot|model|recovery)\.[a-z_.]*[a-z]", node.value):
                found.add(node.value)
    return found


def test_every_code_a_layer_below_produces_has_a_sentence():
    # The review's codes are in part made by pattern: tests/report/test_review_wording.py.
    produced = {code for code in _produced_codes() if not code.startswith("review.")}
    worded = {code for code in TEMPLATES if not code.startswith("review.")}
    assert produced == worded, produced ^ worded


def _sentence_constants(tree) -> list[str]:
    """String constants and f-strings of two or more words, outside docstrings and the messages
    of raised errors (errors are worded where they are raised, with errors.Setting)."""
    skip = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.ClassDef, ast.FunctionDef)) and node.body and \
                isinstance(node.body[0], ast.Expr) and isinstance(node.body[0].value, ast.Constant):
            skip.update(id(n) for n in ast.walk(node.body[0]))
        if isinstance(node, ast.Raise):
            skip.update(id(n) for n in ast.walk(node))
    found = []
    for node in ast.walk(tree):
        if id(node) in skip:
            continue
        if isinstance(node, ast.JoinedStr) and any(
                isinstance(v, ast.Constant) and " " in v.value for v in node.values):
            found.append(f"{node.lineno}: f-string")
            skip.update(id(n) for n in ast.walk(node))
        elif isinstance(node, ast.Constant) and isinstance(node.value, str) and \
                re.search(r"[a-z]+ [a-z]+", node.value):
            found.append(f"{node.lineno}: {node.value!r}")
    return found


@pytest.mark.parametrize("module", ("grading_ratings.py", "plausibility.py", "findings.py"))
def test_the_converted_modules_write_no_sentences(module):
    # These checks modules were converted whole: no sentence left in them.
    tree = ast.parse((PACKAGE / "checks" / module).read_text(encoding="utf-8"))
    assert not _sentence_constants(tree)
    # The scan can fail: the module before its conversion held the advisories' f-strings.
    assert _sentence_constants(ast.parse('advisories.append(f"grading current {x} is low")'))


def test_sizing_advisories_are_findings():
    # studies/size.py: whatever is appended to its advisories is a Finding, never text.
    tree = ast.parse((PACKAGE / "studies" / "size.py").read_text(encoding="utf-8"))
    appended = [node for node in ast.walk(tree) if isinstance(node, ast.Call)
                and isinstance(node.func, ast.Attribute) and node.func.attr == "append"
                and getattr(node.func.value, "id", None) in ("advisories", "raised")]
    assert appended
    for call in appended:
        argument = call.args[0]
        assert isinstance(argument, ast.Call) and argument.func.id == "Finding", \
            ast.unparse(call)


def test_an_impossible_design_joins_its_reasons_as_before():
    both = [TODAY[index] for index, (finding, _) in enumerate(TODAY)
            if finding.code.startswith("impossible.")]
    assert impossibility_text([f for f, _ in both]) == "; ".join(t for _, t in both)
    assert impossibility_text(()) is None


def test_the_impossibility_arithmetic_writes_no_sentence():
    # checks/preconditions.py is converted for impossibility() only (its assumptions are text yet).
    tree = ast.parse((PACKAGE / "checks" / "preconditions.py").read_text(encoding="utf-8"))
    (function,) = [node for node in tree.body
                   if isinstance(node, ast.FunctionDef) and node.name == "impossibility"]
    assert not _sentence_constants(function)


# The functions below the report converted to findings (issue 16, item 3): no sentence left.
CONVERTED = [("checks/preconditions.py", "dynamic_check_reason"),
             ("checks/preconditions.py", "no_scatter"),
             ("checks/forward.py", "forward_reasons"),
             ("checks/transient.py", "transient_reason"),
             ("checks/transient.py", "_fits_or_reason"),
             ("checks/recovery_conditions.py", "missing_recovery_finding"),
             ("montecarlo/mixed_stock.py", "mix_finding"),
             ("montecarlo/importance.py", "rare_event_estimate"),
             ("studies/check.py", "_plan"),
             ("studies/check.py", "_needs_dynamic"),
             ("studies/check.py", "_with_rare")]


@pytest.mark.parametrize("path, name", CONVERTED, ids=[name for _, name in CONVERTED])
def test_the_converted_reasons_and_notes_write_no_sentence(path, name):
    tree = ast.parse((PACKAGE / path).read_text(encoding="utf-8"))
    (function,) = [node for node in tree.body
                   if isinstance(node, ast.FunctionDef) and node.name == name]
    assert not _sentence_constants(function), _sentence_constants(function)


def test_a_finding_says_its_causes_in_order():
    # "needs the dynamic check, which did not run: <its reason>", several causes joined by "; ".
    first, second = Finding("rare.no_failing_sample"), Finding("rare.search_capped",
                                                               {"regions": Value(3)})
    joined = sentence(Finding("rare.coverage_not_assured", causes=(first, second)))
    assert joined.endswith(": " + sentence(first) + "; " + sentence(second))
    assert sentence(Finding("rare.plain_decides")) == ", so the plain interval decides"


def test_an_error_that_holds_a_finding_is_worded_by_the_command_line():
    from stringcheck.cli.exit_codes import one_line
    from stringcheck.errors import StringcheckError

    error = StringcheckError("demo.toml: cannot simulate the turn-off: ",
                             Finding("recovery_data.no_charge", {"part": Value("A")}))
    assert str(error) == "demo.toml: cannot simulate the turn-off: recovery_data.no_charge"
    assert one_line(error) == "demo.toml: cannot simulate the turn-off: parts.A gives no q_rr"


def test_the_sizing_study_writes_no_sentences():
    # studies/size.py (issue 16, issue 18): what it found are findings; the only text left is the
    # progress labels handed to `say` (the spinner's step names) and the messages of raised errors.
    tree = ast.parse((PACKAGE / "studies" / "size.py").read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.Call) and getattr(node.func, "id", None) == "say":
            node.args = []
    # _over_cap builds the DesignError it returns to be raised (an error message, file and key).
    tree.body = [node for node in tree.body if getattr(node, "name", "") != "_over_cap"]
    assert not _sentence_constants(tree)
