"""The design-file loader: the bundled files load, values and assumptions, and every bad input
raises a DesignError that names its key (and its file)."""

from __future__ import annotations

import dataclasses
from importlib import resources

import numpy as np
import pytest

from stringcheck.design.model import (
    DEFAULT_AMBIENT,
    DEFAULT_DERATING,
    TYP_FRACTION_OF_MAX,
    Design,
    Part,
    Spread,
)
from stringcheck.design.reading import load_design, parse_design_text
from stringcheck.errors import DesignError
from stringcheck.design.device_classes import preset
from stringcheck.report.starter import starter_design
from stringcheck.report.wording import sentences
from tests import designs

# A small valid design; tests replace whole tables of it. Values of our own invention.
BASE = {
    "duty": 'reverse_voltage = "4 kV"\nambient = "40 degC"',
    "string": 'series = 4\npart = "A"',
    "parts.A": ('v_rrm = "1.6 kV"\n'
                'i_r = { typ = "0.2 uA", max = "2 uA", at_temperature = "25 degC" }\n'
                'q_rr = { typ = "80 nC", max = "150 nC" }\n'
                't_j_max = "150 degC"'),
    "grading": 'resistor = "4.7 MOhm"\nresistor_tolerance = "1 %"',
}


def design_text(**tables: str | None) -> str:
    """BASE with some tables replaced (a value of None drops the table). Keyword "parts_A" stands
    for the table [parts.A]."""
    merged = dict(BASE)
    for name, body in tables.items():
        merged[name.replace("_A", ".A").replace("_B", ".B")] = body
    return "\n".join(f"[{name}]\n{body}" for name, body in merged.items() if body is not None) + "\n"


def test_base_design_loads():
    design = parse_design_text(design_text())
    assert design.duty.reverse_voltage == 4000.0
    assert design.string.series == 4
    assert design.parts["A"].v_rrm == 1600.0


# --- the bundled files -----------------------------------------------------------------------------

def test_demo_loads_with_its_values():
    with resources.as_file(resources.files("stringcheck") / "data" / "demo.toml") as path:
        design = load_design(path)
    # Values as written in stringcheck/data/demo.toml, converted by hand (SI Brochure prefixes).
    assert design.duty.reverse_voltage == 30e3
    assert design.duty.waveform == "half-sine"
    assert design.duty.ambient == 40.0
    assert design.string.series == 24 and design.string.parallel == 1
    part = design.parts["FR2K"]
    assert part.device_class == "si-fast-recovery"
    assert part.v_rrm == 2e3
    assert part.i_r.typ == 0.2e-6 and part.i_r.high == 2e-6
    assert part.q_rr.typ == 80e-9 and part.q_rr.high == 150e-9
    assert design.grading.resistor == 4.7e6 and design.grading.capacitor == 2.2e-9
    assert design.grading.resistor_tcr == pytest.approx(100e-6)
    assert design.monte_carlo.lot_share == 0.3
    # Four hot positions, the rest at ambient (demo.toml [[string.position]] entries).
    rise = design.string.temperature_rise_grid()
    assert rise.shape == (1, 24)
    assert rise[0, :4].tolist() == [20.0, 20.0, 15.0, 15.0]
    assert not rise[0, 4:].any()
    # The class supplies the keys the part leaves out, and the report is told so.
    assert part.v_t0 is not None
    assert any("taken from class 'si-fast-recovery'" in line for line in sentences(design.assumptions))


def test_starter_design_loads():
    design = parse_design_text(starter_design(), source="starter.toml")
    assert design.title == "My stack"
    assert design.string.series == 10
    assert design.grading.damping_resistor == 100.0
    assert design.parts_used() == ("MAIN",)


def test_title_defaults_to_the_file_stem(tmp_path):
    path = tmp_path / "stack_b.toml"
    path.write_text(design_text(), encoding="utf-8")
    design = load_design(path)
    assert design.title == "stack_b"
    assert design.source == str(path)


# --- frozen results --------------------------------------------------------------------------------

def test_dataclasses_are_frozen():
    design = parse_design_text(design_text())
    for obj, attribute in ((design, "title"), (design.duty, "reverse_voltage"),
                           (design.string, "series"), (design.parts["A"], "v_rrm"),
                           (design.parts["A"].i_r, "typ"), (design.grading, "resistor"),
                           (design.monte_carlo, "trials")):
        assert dataclasses.is_dataclass(obj)
        with pytest.raises(dataclasses.FrozenInstanceError):
            setattr(obj, attribute, 1)


# --- spreads and assumptions -----------------------------------------------------------------------

@pytest.mark.parametrize("parameter", sorted(TYP_FRACTION_OF_MAX))
def test_max_only_spread_takes_the_documented_typ(parameter):
    # docs/design-file.md: "{max} alone takes typ from a documented per-parameter assumption".
    units = {"i_r": "uA", "q_rr": "nC", "i_rm": "A", "t_rr": "us", "v_t0": "V", "r_t": "mOhm"}
    extra = f'\n{parameter} = {{ max = "2 {units[parameter]}" }}' if parameter != "i_r" else ""
    ir = 'i_r = { max = "2 uA" }' if parameter == "i_r" else 'i_r = { typ = "0.2 uA" }'
    design = parse_design_text(design_text(parts_A=f'v_rrm = "1.6 kV"\n{ir}{extra}'))
    spread = design.parts["A"].spread(parameter)
    scale = {"uA": 1e-6, "nC": 1e-9, "A": 1.0, "us": 1e-6, "V": 1.0, "mOhm": 1e-3}[units[parameter]]
    assert spread.high == pytest.approx(2 * scale)
    assert spread.typ == pytest.approx(TYP_FRACTION_OF_MAX[parameter] * 2 * scale)
    assert spread.typ_assumed and not spread.fixed
    assert f"parts.A.{parameter}: only max given, typ taken as " \
           f"{TYP_FRACTION_OF_MAX[parameter]:g} x max" in sentences(design.assumptions)


def test_leakage_typ_fraction_is_a_decade_below_max():
    # Common practice: datasheet leakage limits sit about a decade above the typical lot.
    assert TYP_FRACTION_OF_MAX["i_r"] == 0.1


def test_min_and_max_without_typ_take_the_geometric_mean_or_midpoint():
    # Lognormal median between two limits at equal log distance: geometric mean; normal: midpoint
    # (properties of the lognormal / normal distributions, any statistics text).
    body = ('v_rrm = "1.6 kV"\ni_r = { min = "0.1 uA", max = "10 uA" }\n'
            'v_t0 = { min = "0.9 V", max = "1.1 V" }')
    design = parse_design_text(design_text(parts_A=body))
    assert design.parts["A"].i_r.typ == pytest.approx(1e-6)
    assert design.parts["A"].v_t0.typ == pytest.approx(1.0)
    assert any("geometric mean" in line for line in sentences(design.assumptions))
    assert any("midpoint" in line for line in sentences(design.assumptions))


@pytest.mark.parametrize("body", ['q_rr = { typ = "80 nC" }', 'q_rr = "80 nC"', 'q_rr = 80e-9',
                                  'q_rr = { min = "80 nC", typ = "80 nC", max = "80 nC" }'])
def test_typ_alone_is_fixed(body):
    # docs/design-file.md: "{typ} alone is a fixed value (no scatter)".
    design = parse_design_text(design_text(parts_A='v_rrm = "1.6 kV"\ni_r = { max = "2 uA" }\n'
                                                   + body))
    spread = design.parts["A"].q_rr
    assert spread.fixed
    assert spread.typ == pytest.approx(80e-9)
    assert not spread.typ_assumed


def test_spread_conditions_are_kept_and_leakage_conditions_defaulted():
    body = ('v_rrm = "1.6 kV"\ni_r = { max = "2 uA" }\n'
            'q_rr = { typ = "80 nC", at_di_dt = "10 A/us", at_forward_current = "0.5 A", '
            'at_temperature = "125 degC" }')
    design = parse_design_text(design_text(parts_A=body))
    part = design.parts["A"]
    assert part.q_rr.at_di_dt == 10e6
    assert part.q_rr.at_forward_current == 0.5
    assert part.q_rr.at_temperature == 125.0
    # Leakage without test conditions: taken at V_RRM and 25 degC, and listed as assumptions.
    assert part.i_r.at_voltage == 1600.0
    assert part.i_r.at_temperature == DEFAULT_AMBIENT
    assert any("at_voltage not given" in line for line in sentences(design.assumptions))
    assert any("at_temperature not given" in line for line in sentences(design.assumptions))


def test_defaults_are_recorded_as_assumptions():
    design = parse_design_text(design_text(duty='reverse_voltage = "4 kV"'))
    assert design.duty.ambient == DEFAULT_AMBIENT
    assert design.duty.waveform == "dc"
    assert design.string.derating == DEFAULT_DERATING
    assert design.string.parallel == 1
    lines = "\n".join(sentences(design.assumptions))
    assert "duty.ambient not given" in lines
    assert "duty.waveform not given" in lines
    assert "string.derating not given" in lines
    assert "parts.A.leakage_doubling not given" in lines
    assert "parts.A.leakage_voltage_exponent not given" in lines
    part = design.parts["A"]
    # Defaults of the part (design/model.py _PART_DEFAULTS): 10 K doubling for silicon (common practice),
    # m = 0.5 for generation current in an abrupt junction (Sze, Physics of Semiconductor Devices).
    assert part.doubling_temperature == 10.0
    assert part.voltage_exponent == 0.5
    assert part.c_j == 0.0


def test_scaled_spread_keeps_conditions():
    spread = Spread(typ=2.0, low=1.0, high=4.0, at_temperature=25.0, typ_assumed=True)
    doubled = spread.scaled(2.0)
    assert (doubled.typ, doubled.low, doubled.high) == (4.0, 2.0, 8.0)
    assert doubled.at_temperature == 25.0 and doubled.typ_assumed
    assert Spread(typ=3.0).scaled(2.0).fixed


# --- presets inheritance ---------------------------------------------------------------------------

def test_part_key_overrides_the_class_key_whole():
    # design/device_classes.py: "a key the part sets replaces the class's key whole (a spread table is not merged
    # field by field)". The class gives q_rr {typ, max, conditions}; the part gives typ only.
    body = ('class = "si-fast-recovery"\nv_rrm = "1.6 kV"\nq_rr = { typ = "100 nC" }\n'
            'i_r = { max = "5 uA" }')
    design = parse_design_text(design_text(parts_A=body))
    part = design.parts["A"]
    assert part.q_rr.typ == pytest.approx(100e-9)
    assert part.q_rr.fixed  # no "max" merged in from the class
    assert part.q_rr.at_di_dt is None  # nor its test condition
    # Keys the part leaves out come from the class.
    assert part.i_fav == 30.0  # si-fast-recovery "30 A"
    assert part.t_rr.typ == pytest.approx(0.2e-6)
    assert part.device_class == "si-fast-recovery"
    inherited = [line for line in sentences(design.assumptions) if "taken from class" in line]
    assert len(inherited) == 1
    assert "t_rr" in inherited[0] and "q_rr" not in inherited[0] and "v_rrm" not in inherited[0]


def test_class_alone_gives_the_class_values():
    design = parse_design_text(design_text(parts_A='class = "si-rectifier"'))
    part = design.parts["A"]
    raw = preset("si-rectifier")
    assert part.v_rrm == 4500.0 and raw["v_rrm"] == "4.5 kV"
    assert part.t_j_max == 150.0


# --- positions -------------------------------------------------------------------------------------

def test_part_grid_and_temperature_rise_grid_with_overrides():
    string = ('series = 5\nparallel = 3\npart = "A"\n'
              '[[string.position]]\nindex = 1\npart = "B"\n'              # every branch
              '[[string.position]]\nindex = 5\nbranch = 2\npart = "B"\ntemperature_rise = "12 K"\n'
              '[[string.position]]\nindex = 3\ntemperature_rise = "7 K"\n')
    body_b = 'v_rrm = "1.6 kV"\ni_r = { max = "3 uA" }'
    design = parse_design_text(design_text(string=string, parts_B=body_b))
    grid = design.string.part_grid()
    assert grid.shape == (3, 5)
    expected = np.array([["B", "A", "A", "A", "A"],
                         ["B", "A", "A", "A", "B"],
                         ["B", "A", "A", "A", "A"]], dtype=object)
    assert (grid == expected).all()
    rise = design.string.temperature_rise_grid()
    expected_rise = np.zeros((3, 5))
    expected_rise[:, 2] = 7.0
    expected_rise[1, 4] = 12.0
    np.testing.assert_array_equal(rise, expected_rise)
    assert design.parts_used() == ("B", "A")
    override = design.string.positions[0]
    assert override.index == 1 and override.branch is None


# --- bad input -------------------------------------------------------------------------------------

_CORRELATION_NOT_PD = ('[monte_carlo.correlation]\ni_r-q_rr = 0.9\nq_rr-v_t0 = 0.9\n'
                       'i_r-v_t0 = -0.9')  # determinant < 0: no such correlation matrix

BAD_TEXT = [
    # (id, tables replaced, key named, fragment of the message)
    ("unknown key", {"duty": 'reverse_votage = "4 kV"'}, "duty.reverse_votage",
     "did you mean 'reverse_voltage'"),
    ("unknown top table", {"desing": 'title = "x"'}, "desing", "did you mean 'design'"),
    ("unknown spread key", {"parts_A": 'v_rrm = "1.6 kV"\ni_r = { max = "2 uA", at_temp = 25 }'},
     "parts.A.i_r.at_temp", "did you mean 'at_temperature'"),
    ("missing reverse_voltage", {"duty": 'ambient = "40 degC"'}, "duty.reverse_voltage", "missing"),
    ("missing duty", {"duty": None}, "duty", "missing"),
    ("negative resistor", {"grading": 'resistor = "-4.7 MOhm"'}, "grading.resistor",
     "greater than zero"),
    ("tolerance 1", {"grading": 'resistor = "4.7 MOhm"\nresistor_tolerance = 1.0'},
     "grading.resistor_tolerance", "[0, 1)"),
    ("tolerance 100 %", {"grading": 'resistor = "4.7 MOhm"\ncapacitor = "1 nF"\n'
                                    'capacitor_tolerance = "100 %"'},
     "grading.capacitor_tolerance", "[0, 1)"),
    ("derating 0", {"string": 'series = 4\nderating = 0'}, "string.derating", "(0, 1]"),
    ("derating 1.5", {"string": 'series = 4\nderating = 1.5'}, "string.derating", "(0, 1]"),
    ("typ above max", {"parts_A": 'v_rrm = "1.6 kV"\ni_r = { typ = "3 uA", max = "2 uA" }'},
     "parts.A.i_r", "typ is above max"),
    ("min above typ", {"parts_A": 'v_rrm = "1.6 kV"\n'
                                  'i_r = { min = "1 uA", typ = "0.2 uA", max = "2 uA" }'},
     "parts.A.i_r", "min ('1 uA') is above typ"),
    ("lone min", {"parts_A": 'v_rrm = "1.6 kV"\ni_r = { min = "1 uA" }'}, "parts.A.i_r",
     "at least 'typ' or 'max'"),
    ("position index 0", {"string": 'series = 4\n[[string.position]]\nindex = 0'},
     "string.position[1].index", "1..4"),
    ("position index > series", {"string": 'series = 4\n[[string.position]]\nindex = 5'},
     "string.position[1].index", "1..4"),
    ("position branch > parallel",
     {"string": 'series = 4\nparallel = 2\n[[string.position]]\nindex = 1\nbranch = 3'},
     "string.position[1].branch", "got 3"),
    ("position branch 0",
     {"string": 'series = 4\nparallel = 2\n[[string.position]]\nindex = 1\nbranch = 0'},
     "string.position[1].branch", "1..2"),
    ("undefined part", {"string": 'series = 4\npart = "B"'}, "string.part", "no part named 'B'"),
    ("undefined position part", {"string": 'series = 4\n[[string.position]]\nindex = 2\n'
                                           'part = "AA"'},
     "string.position[1].part", "did you mean 'A'"),
    ("unknown class", {"parts_A": 'class = "si-fast-recovry"\nv_rrm = "1.6 kV"'},
     "parts.A.class", "did you mean 'si-fast-recovery'"),
    ("ambient above t_j_max", {"duty": 'reverse_voltage = "4 kV"\nambient = "160 degC"'},
     "duty.ambient", "t_j_max"),
    ("hot position reaches t_j_max", {"string": 'series = 4\n[[string.position]]\nindex = 2\n'
                                                'temperature_rise = "110 K"'},
     "duty.ambient", "t_j_max"),
    ("correlation not positive definite", {"monte_carlo": _CORRELATION_NOT_PD},
     "monte_carlo.correlation", "positive definite"),
    ("correlation 1", {"monte_carlo": '[monte_carlo.correlation]\ni_r-q_rr = 1.0'},
     "monte_carlo.correlation.i_r-q_rr", "(-1, 1)"),
    ("correlation unknown parameter", {"monte_carlo": '[monte_carlo.correlation]\ni_r-qrr = 0.3'},
     "monte_carlo.correlation.i_r-qrr", "two different parameters"),
    ("exponent above 1", {"parts_A": BASE["parts.A"] + "\nleakage_voltage_exponent = 1.5"},
     "parts.A.leakage_voltage_exponent", "[0, 1]"),
    ("exponent below 0", {"parts_A": BASE["parts.A"] + "\nleakage_voltage_exponent = -0.1"},
     "parts.A.leakage_voltage_exponent", "[0, 1]"),
    ("series 0", {"string": "series = 0"}, "string.series", ">= 1"),
    ("series ten", {"string": 'series = "ten"'}, "string.series", "whole number"),
    ("series 2.5", {"string": "series = 2.5"}, "string.series", "whole number"),
    ("measured", {"parts_A": BASE["parts.A"] + '\nmeasured = "x.csv"'}, "parts.A.measured",
     "no such lot file"),
    ("wrong unit", {"duty": 'reverse_voltage = "4 kA"'}, "duty.reverse_voltage", "not in V"),
    ("no unit", {"duty": 'reverse_voltage = "4000"'}, "duty.reverse_voltage", "no unit"),
    ("temperature for a difference",
     {"string": 'series = 4\n[[string.position]]\nindex = 1\ntemperature_rise = "10 degC"'},
     "string.position[1].temperature_rise", "temperature difference"),
    ("missing v_rrm", {"parts_A": 'i_r = { max = "2 uA" }'}, "parts.A.v_rrm", "missing"),
    ("missing leakage", {"parts_A": 'v_rrm = "1.6 kV"'}, "parts.A.i_r", "missing"),
    ("waveform", {"duty": 'reverse_voltage = "4 kV"\nwaveform = "sine"'}, "duty.waveform",
     "'half-sine'"),
    ("trials 0", {"monte_carlo": "trials = 0"}, "monte_carlo.trials", ">= 1"),
    ("confidence 1", {"monte_carlo": "confidence = 1.0"}, "monte_carlo.confidence", "(0, 1)"),
    ("lot_share 1", {"monte_carlo": "lot_share = 1.0"}, "monte_carlo.lot_share", "[0, 1)"),
    ("screened text", {"monte_carlo": 'screened = "yes"'}, "monte_carlo.screened", "true or false"),
    ("position as one table", {"string": 'series = 4\n[string.position]\nindex = 1'},
     "string.position", "array of tables"),
    ("unknown series name", {"sizing": 'resistor_series = "E7"'}, "sizing.resistor_series", "E96"),
    ("zero lognormal typ", {"parts_A": 'v_rrm = "1.6 kV"\ni_r = { typ = 0 }'}, "parts.A.i_r.typ",
     "greater than zero"),
]


@pytest.mark.parametrize(("tables", "key", "fragment"), [case[1:] for case in BAD_TEXT],
                         ids=[case[0] for case in BAD_TEXT])
def test_bad_design_text_names_the_key(tables, key, fragment):
    # Every error names key + fix (docs/commands.md). Expected keys and fixes from
    # docs/design-file.md (ranges: derating a fraction of V_RRM in (0, 1], tolerances below 100 %, ...).
    with pytest.raises(DesignError) as caught:
        parse_design_text(design_text(**tables), source="stack.toml")
    message = str(caught.value)
    assert message.startswith("stack.toml: "), message
    assert key + ":" in message, message
    assert fragment in message, message
    assert "\n" not in message.strip()  # the CLI prints it as one line


def test_at_least_fifteen_distinct_bad_inputs():
    assert len({case[0] for case in BAD_TEXT}) >= 15


def test_toml_syntax_error_names_the_line():
    text = design_text(duty='reverse_voltage = "4 kV')  # unterminated string on line 2
    with pytest.raises(DesignError, match=r"stack\.toml: TOML syntax error: .*line 2"):
        parse_design_text(text, source="stack.toml")


def test_empty_table_for_part_is_rejected():
    with pytest.raises(DesignError, match="parts: no parts defined"):
        parse_design_text('[duty]\nreverse_voltage = "4 kV"\n[string]\nseries = 4\n')


def test_quantity_errors_carry_the_key_attribute():
    # errors.DesignError documents key as "the dotted key path, e.g. parts.A.i_r.max".
    with pytest.raises(DesignError) as caught:
        parse_design_text(design_text(duty='reverse_voltage = "4 kA"'))
    assert caught.value.key == "duty.reverse_voltage"


# --- correlations: one entry per pair (issue 15 item 4) --------------------------------------------

CORRELATION_TWICE = [
    # (id, [monte_carlo.correlation] body, key named, fragments: both entries as written)
    ("reversed pair, opposite sign", "r_t-v_t0 = 0.9\nv_t0-r_t = -0.9",
     "monte_carlo.correlation.v_t0-r_t", ["monte_carlo.correlation.r_t-v_t0 = 0.9",
                                          "v_t0-r_t = -0.9", "keep one"]),
    ("reversed pair, same value", "q_rr-i_r = 0.5\ni_r-q_rr = 0.5",
     "monte_carlo.correlation.i_r-q_rr", ["monte_carlo.correlation.q_rr-i_r = 0.5",
                                          "i_r-q_rr = 0.5"]),
    ("reversed pair among others", "i_r-q_rr = 0.3\nr_t-v_t0 = 0.2\nq_rr-i_r = -0.3",
     "monte_carlo.correlation.q_rr-i_r", ["monte_carlo.correlation.i_r-q_rr = 0.3",
                                          "q_rr-i_r = -0.3"]),
]


@pytest.mark.parametrize(("body", "key", "fragments"), [case[1:] for case in CORRELATION_TWICE],
                         ids=[case[0] for case in CORRELATION_TWICE])
def test_a_correlation_pair_given_twice_is_refused_naming_both(tmp_path, body, key, fragments):
    # A correlation coefficient is symmetric (rho_ab = rho_ba), so "a-b" and "b-a" set one number;
    # keeping the last silently would drop the other.
    from typer.testing import CliRunner

    from stringcheck.cli.app import app

    text = design_text(monte_carlo="[monte_carlo.correlation]\n" + body)
    with pytest.raises(DesignError) as caught:
        parse_design_text(text, source="stack.toml")
    message = str(caught.value)
    assert caught.value.key == key and "\n" not in message, message
    for fragment in fragments:
        assert fragment in message, (fragment, message)
    path = tmp_path / "stack.toml"
    path.write_text(text, encoding="utf-8")
    result = CliRunner().invoke(app, ["check", str(path), "--trials", "100"])
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and str(path) in lines[0] and key in lines[0], result.stderr
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])


def test_the_same_key_twice_is_a_toml_error_with_its_line():
    # TOML 1.0 (section "Keys"): defining a key twice is invalid; a quoted and a bare key are the
    # same key.
    text = design_text(monte_carlo='[monte_carlo.correlation]\nr_t-v_t0 = 0.9\n"r_t-v_t0" = 0.8')
    with pytest.raises(DesignError, match="TOML syntax error"):
        parse_design_text(text)


def test_a_pair_in_either_order_gives_the_same_matrix():
    from stringcheck.design.model import SPREAD_PARAMETERS, correlation_matrix

    def matrix(body):
        design = parse_design_text(design_text(monte_carlo="[monte_carlo.correlation]\n" + body))
        return correlation_matrix(design.monte_carlo.correlation, SPREAD_PARAMETERS)

    forward, backward = matrix("r_t-v_t0 = -0.4"), matrix("v_t0-r_t = -0.4")
    np.testing.assert_array_equal(forward, backward)
    i, j = SPREAD_PARAMETERS.index("r_t"), SPREAD_PARAMETERS.index("v_t0")
    assert forward[i, j] == forward[j, i] == -0.4


def test_branch_out_of_range_message_offers_only_valid_branches():
    text = design_text(string='series = 4\nparallel = 2\n[[string.position]]\nindex = 1\n'
                              'branch = 3')
    with pytest.raises(DesignError, match=r"in 1\.\.2, got 3"):
        parse_design_text(text)


# --- files -----------------------------------------------------------------------------------------

BAD_FILES = [
    ("empty", b"", "empty"),
    ("whitespace only", b"  \n\t\n", "empty"),
    ("binary", b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "binary"),
    ("not utf-8", '[design]\ntitle = "Caf\u00e9"\n'.encode("latin-1"), "UTF-8"),
    ("syntax", b"[duty\nreverse_voltage = 1\n", "line 1"),
    ("bad key", design_text(duty='reverse_votage = "4 kV"').encode(), "duty.reverse_votage"),
]


@pytest.mark.parametrize(("content", "fragment"), [case[1:] for case in BAD_FILES],
                         ids=[case[0] for case in BAD_FILES])
def test_bad_files_name_the_file(tmp_path, content, fragment):
    path = tmp_path / "stack.toml"
    path.write_bytes(content)
    with pytest.raises(DesignError) as caught:
        load_design(path)
    message = str(caught.value)
    assert message.startswith(f"{path}: "), message
    assert fragment in message, message
    assert caught.value.source == str(path)


def test_missing_file_and_folder(tmp_path):
    missing = tmp_path / "nope.toml"
    with pytest.raises(DesignError, match=r"nope\.toml: no such file"):
        load_design(missing)
    with pytest.raises(DesignError, match="is a folder"):
        load_design(tmp_path)


def test_loaded_design_is_a_design_of_parts():
    design = parse_design_text(design_text())
    assert isinstance(design, Design)
    assert all(isinstance(part, Part) for part in design.parts.values())


# The CLI tests' base stack (tests/designs/robustness_base.toml): series = 6, parallel = 1, one
# [[string.position]] entry at index 1 with a 10 K rise.
ROBUSTNESS_BASE = designs.design_text("robustness_base")


def test_a_byte_order_mark_is_accepted(tmp_path):
    # Some editors start UTF-8 files with U+FEFF; TOML 1.0 has no place for it, but it is no error
    # of the user's.
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + ROBUSTNESS_BASE.replace("\n", "\r\n").encode("utf-8"))
    assert load_design(path).string.series == 6


def test_branch_entry_wins_over_every_branch_entry_whatever_the_order():
    # Two entries for one device may stand together when one names a branch: the specific one wins
    # (README, [[string.position]]); neither is silently dropped by its order in the file.
    assert ROBUSTNESS_BASE.count("parallel = 1") == 1
    text = ROBUSTNESS_BASE.replace("parallel = 1", "parallel = 2").replace(
        '[[string.position]]\nindex = 1\ntemperature_rise = "10 K"\n',
        '[[string.position]]\nindex = 1\nbranch = 2\ntemperature_rise = "20 K"\n'
        '[[string.position]]\nindex = 1\ntemperature_rise = "10 K"\n')
    rise = parse_design_text(text).string.temperature_rise_grid()
    assert rise[:, 0].tolist() == [10.0, 20.0]
