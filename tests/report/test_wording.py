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
    (Finding("size.capacitor_raised", {"previous": Value(4.7e-10, "F"),
                                       "raised": Value(6.8e-10, "F")}),
     "capacitor raised from 470 pF to 680 pF: no damping resistor kept the simulated "
     "turn-off within the limit"),
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
    (Finding("model.mixed_stock", {"mix": Value("30 % of positions B")}),
     "mixed stock: 30 % of positions B; a mixed position (part A|B) is judged device by device "
     "against the limit of the part drawn, and its per-position limit shown is the lowest of "
     "the two"),
    (Finding("recovery.not_rescaled", {"missing": Value("no di/dt")}),
     "recovery charge: Q_rr taken at the datasheet's test conditions, not rescaled to the "
     "application (no di/dt); " + RECOVERY_MODEL),
    (Finding("recovery.no_fit", {"part": Value("A")}),
     "recovery charge: Q_rr taken at the datasheet's test conditions: parts.A's typical q_rr, "
     "i_rm or t_rr and at_di_dt fit no recovery waveform; " + RECOVERY_MODEL),
    (Finding("recovery.carried.dc", {"current": Value(12.5, "A"), "di_dt": Value(5e7, "A/s"),
                                     "untested": Value("")}),
     "recovery charge: Q_rr carried from the datasheet's test I_F and di/dt to the application's "
     "(I_F = 12.5 A per branch, di/dt = 50 MA/s) through the charge-control model fitted to "
     "each part's typical Q_rr and I_RM or t_rr (Lauritzen-Ma); the charge balance of the "
     "dynamic check and the recovery loss of the thermal check use the same carried value; "
     + RECOVERY_MODEL),
    (Finding("recovery.carried.square_peak", {"current": Value(25.0, "A"),
                                              "di_dt": Value(5e7, "A/s"),
                                              "untested": Value("parts.A, parts.B")}),
     "recovery charge: Q_rr carried from the datasheet's test I_F and di/dt to the application's "
     "(I_F = 25 A per branch, the square wave's peak, di/dt = 50 MA/s) through the "
     "charge-control model fitted to each part's typical Q_rr and I_RM or t_rr (Lauritzen-Ma); "
     "the charge balance of the dynamic check and the recovery loss of the thermal check use the "
     "same carried value; parts.A, parts.B give(s) no q_rr.at_forward_current: Q_rr taken as "
     "given at the turn-off current (not rescaled in current); " + RECOVERY_MODEL),
    (Finding("recovery.carried.half_sine_average", {"current": Value(12.5, "A"),
                                                    "di_dt": Value(1e7, "A/s"),
                                                    "untested": Value("")}),
     "recovery charge: Q_rr carried from the datasheet's test I_F and di/dt to the application's "
     "(I_F = 12.5 A per branch, the half-sine's average (its decay to the zero crossing is not "
     "modelled), di/dt = 10 MA/s) through the charge-control model fitted to each part's "
     "typical Q_rr and I_RM or t_rr (Lauritzen-Ma); the charge balance of the dynamic check and "
     "the recovery loss of the thermal check use the same carried value; " + RECOVERY_MODEL),
    (Finding("recovery.carried.test_current", {"current": Value(10.0, "A"),
                                               "di_dt": Value(5e7, "A/s"),
                                               "untested": Value("")}),
     "recovery charge: Q_rr carried from the datasheet's test I_F and di/dt to the application's "
     "(I_F = the test I_F (10 A; no duty.forward_current), di/dt = 50 MA/s) through the "
     "charge-control model fitted to each part's typical Q_rr and I_RM or t_rr (Lauritzen-Ma); "
     "the charge balance of the dynamic check and the recovery loss of the thermal check use the "
     "same carried value; " + RECOVERY_MODEL),
]
TODAY += CIRCUIT_TODAY  # issue 23 (tests/report/circuit_wording.py)
# The command line's wording of the one code that names a setting (the JSON of `size` has it).
SIZE_DAMPING = (Finding("size.damping_slower_than_recovery", {"time_constant": Value(3.3e-7, "s")},
                        Value(1.5e-7, "s")),
                "R_d C = 330 ns is longer than the shortest typical t_rr (150 ns): the "
                "capacitor may not take the charge in time; `--transient` checks it in the time "
                "domain")


@pytest.mark.parametrize("finding, text", TODAY, ids=[f.code for f, _ in TODAY])
def test_each_code_reads_as_it_did(finding, text):
    assert sentence(finding) == text
    assert sentence(finding, spell=option_wording) == text  # names no setting


def test_a_setting_in_a_sentence_is_spelled_by_whoever_shows_it():
    finding, text = SIZE_DAMPING
    assert sentence(finding, spell=option_wording) == text
    # From Python the setting is the keyword, never a command-line option.
    assert sentence(finding) == text.replace("--transient", "transient")


def test_every_code_has_a_sentence_and_is_tested():
    tested = {finding.code for finding, _ in TODAY} | {SIZE_DAMPING[0].code}
    assert tested == set(TEMPLATES)
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
                    re.fullmatch(r"(rating|advisory|size|plausibility|impossible)\.[a-z_]+",
                                 node.value):
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
    produced = _produced_codes()
    assert produced == set(TEMPLATES), produced ^ set(TEMPLATES)


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
