"""Quantities with units: every spelling the design file promises, every way to get one wrong."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stringcheck.errors import QuantityError, StringcheckError
from stringcheck.units import (
    AMPERE,
    AMPERE_PER_SECOND,
    CELSIUS,
    COULOMB,
    DIMENSIONLESS,
    FARAD,
    HENRY,
    HERTZ,
    KELVIN_DIFFERENCE,
    KELVIN_PER_WATT,
    OHM,
    PER_KELVIN,
    SECOND,
    VOLT,
    VOLT_PER_KELVIN,
    WATT,
    format_quantity,
    parse_quantity,
)

# Prefix factors: SI Brochure (BIPM, 9th edition 2019), table 7. Unit symbols: IEC 60027-1 / SI
# Brochure; "K" for a temperature difference and "degC" for a Celsius temperature: SI Brochure 2.3.1.
SPELLINGS = [
    ("36 kV", VOLT, 36e3),
    ("36kV", VOLT, 36e3),
    ("  36 kV  ", VOLT, 36e3),
    ("1e3 V", VOLT, 1e3),
    ("4.7 MOhm", OHM, 4.7e6),
    ("4.7 Mohm", OHM, 4.7e6),  # "M" is mega in any case of "ohm" (SI Brochure table 7)
    ("4.7 MOHM", OHM, 4.7e6),
    ("4.7 Mohms", OHM, 4.7e6),
    ("470 kohm", OHM, 470e3),
    ("470 kOhm", OHM, 470e3),
    ("100 Ohm", OHM, 100.0),
    ("100 ohm", OHM, 100.0),
    ("1 mOhm", OHM, 1e-3),  # lower-case m stays milli, never mega
    ("1 GOhm", OHM, 1e9),
    ("4.7 M\u03a9", OHM, 4.7e6),  # GREEK CAPITAL LETTER OMEGA
    ("4.7M\u03a9", OHM, 4.7e6),
    ("10 k\u03a9", OHM, 10e3),
    ("4.7 MR", OHM, 4.7e6),  # "R" for ohm as on resistor markings (IEC 60062 letter code)
    ("100 R", OHM, 100.0),
    ("2.2 nF", FARAD, 2.2e-9),
    ("2.2nF", FARAD, 2.2e-9),
    ("30 mA", AMPERE, 30e-3),
    ("1.5 uC", COULOMB, 1.5e-6),
    ("1.5 \u00b5C", COULOMB, 1.5e-6),  # MICRO SIGN
    ("1.5 \u03bcC", COULOMB, 1.5e-6),  # GREEK SMALL LETTER MU
    ("50 A/us", AMPERE_PER_SECOND, 50e6),
    ("50 A/\u00b5s", AMPERE_PER_SECOND, 50e6),
    ("45 degC", CELSIUS, 45.0),
    ("45 \u00b0C", CELSIUS, 45.0),
    ("45\u00b0C", CELSIUS, 45.0),
    ("45 deg C", CELSIUS, 45.0),
    ("318.15 K", CELSIUS, 45.0),  # T/degC = T/K - 273.15 (SI Brochure 2.3.1)
    ("10 K", KELVIN_DIFFERENCE, 10.0),
    ("100 ppm/K", PER_KELVIN, 100e-6),
    ("100ppm/K", PER_KELVIN, 100e-6),
    ("100 ppm / K", PER_KELVIN, 100e-6),
    ("0.004 1/K", PER_KELVIN, 0.004),
    ("5 %", DIMENSIONLESS, 0.05),
    ("5%", DIMENSIONLESS, 0.05),
    ("0.8", DIMENSIONLESS, 0.8),
    ("0.5 K/W", KELVIN_PER_WATT, 0.5),
    ("-2 mV/K", VOLT_PER_KELVIN, -2e-3),
    ("10 uH", HENRY, 10e-6),
    ("50 Hz", HERTZ, 50.0),
    ("2 us", SECOND, 2e-6),
    ("0.5 W", WATT, 0.5),
]


@pytest.mark.parametrize(("text", "unit", "expected"), SPELLINGS, ids=[s[0] for s in SPELLINGS])
def test_promised_spellings_read_to_si(text, unit, expected):
    # Expected values: prefix arithmetic by hand (SI Brochure table 7); 1e-12 relative is the
    # 12-significant-digit rounding the parser documents.
    value = parse_quantity(text, unit, key="k")
    assert value == pytest.approx(expected, rel=1e-12, abs=1e-12)


def test_prefixed_values_are_exact_decimals():
    # The parser promises a typed preferred value comes back as that decimal (2.2 nF -> 2.2e-09
    # exactly, not 2.2000000000000003e-09); IEC 60063 lookups depend on it.
    assert parse_quantity("2.2 nF", FARAD) == 2.2e-9
    assert parse_quantity("4.7 MOhm", OHM) == 4.7e6
    assert parse_quantity("1.5 uC", COULOMB) == 1.5e-6


@pytest.mark.parametrize(("value", "unit"), [(36000, VOLT), (2.2e-9, FARAD), (45, CELSIUS),
                                             (10, KELVIN_DIFFERENCE), (0.05, DIMENSIONLESS),
                                             (-0.002, VOLT_PER_KELVIN)])
def test_bare_numbers_are_taken_in_the_expected_unit(value, unit):
    # docs/design-file.md: bare numbers are SI base units (degC / K for temperatures).
    assert parse_quantity(value, unit, key="k") == float(value)


def test_ohm_sign_code_point_is_read_like_omega():
    # Unicode Standard, U+2126 OHM SIGN has the canonical decomposition U+03A9; a user pasting
    # "4.7 M\u2126" from a datasheet sees exactly what "4.7 M\u03a9" looks like.
    assert parse_quantity("4.7 M\u2126", OHM, key="grading.resistor") == 4.7e6


# --- wrong input -----------------------------------------------------------------------------------

BAD = [
    ("36 kA", VOLT, "not in V"),  # wrong dimension
    ("4.7 MA", OHM, "not in ohm"),
    ("45 V", CELSIUS, "not in degC"),
    ("36 kV", DIMENSIONLESS, "not in 1"),
    ("3 m", VOLT, "not in V"),
    ("36 kV kV", VOLT, "not in V"),
    ("5 %", VOLT, "no unit"),  # a dimensionless quantity where a voltage is expected
    ("36", VOLT, "no unit"),  # quoted number without unit: a slip, not SI
    ("4700000", OHM, "no unit"),
    ("", VOLT, "empty"),
    ("   ", VOLT, "empty"),
    ("banana", VOLT, "cannot read"),
    ("36 bananas", VOLT, "cannot read"),
    ("1/0 V", VOLT, "cannot read"),
    ("nan", VOLT, "not finite"),
    ("nan V", VOLT, "not finite"),
    ("inf kV", VOLT, "not finite"),
    ("inf", DIMENSIONLESS, "not finite"),
    ("1e400 V", VOLT, "not finite"),
    (float("nan"), VOLT, "not finite"),
    (float("inf"), FARAD, "not finite"),
    (-float("inf"), CELSIUS, "not finite"),
    ("10 degC", KELVIN_DIFFERENCE, "temperature difference"),  # SI Brochure 2.3.1: a difference is K
    ("10 \u00b0C", KELVIN_DIFFERENCE, "temperature difference"),
    ("10 degF", KELVIN_DIFFERENCE, "temperature difference"),
    (True, VOLT, "true/false"),
    (None, VOLT, "NoneType"),
    ([36], VOLT, "list"),
    ({"typ": 1}, VOLT, "dict"),
]


@pytest.mark.parametrize(("value", "unit", "fragment"), BAD, ids=[repr(b[0]) for b in BAD])
def test_bad_quantities_raise_quantity_error_naming_the_key(value, unit, fragment):
    key = "parts.FR2K.v_rrm"
    with pytest.raises(QuantityError) as caught:
        parse_quantity(value, unit, key=key)
    message = str(caught.value)
    assert message.startswith(key + ":"), message
    assert fragment in message, message
    # STYLE.md "Errors": the package's exceptions subclass ValueError so callers may catch either.
    assert isinstance(caught.value, StringcheckError)
    assert isinstance(caught.value, ValueError)


def test_wrong_unit_message_suggests_an_example_in_the_right_unit():
    with pytest.raises(QuantityError, match=r'e\.g\. "36 kV"'):
        parse_quantity("36 kA", VOLT, key="duty.reverse_voltage")


def test_unit_without_number_is_rejected():
    # The docstring promises "a string with a number and a unit"; "kV" alone is almost surely an
    # edit that lost its number, and silently meaning 1 kV hides it.
    with pytest.raises(QuantityError, match="duty.reverse_voltage"):
        parse_quantity("kV", VOLT, key="duty.reverse_voltage")


def test_overflowing_integer_expression_is_a_quantity_error():
    with pytest.raises(QuantityError, match="duty.reverse_voltage"):
        parse_quantity("2**2000 V", VOLT, key="duty.reverse_voltage")


# --- properties ------------------------------------------------------------------------------------

_PREFIXES = {"G": 1e9, "M": 1e6, "k": 1e3, "": 1.0, "m": 1e-3, "u": 1e-6, "n": 1e-9, "p": 1e-12}


@settings(max_examples=150)
@given(mantissa=st.floats(min_value=-1e4, max_value=1e4, allow_nan=False, allow_infinity=False),
       prefix=st.sampled_from(sorted(_PREFIXES)),
       unit=st.sampled_from([(VOLT, "V"), (AMPERE, "A"), (FARAD, "F"), (COULOMB, "C"),
                             (SECOND, "s"), (OHM, "Ohm"), (HENRY, "H"), (WATT, "W")]))
def test_prefix_scaling_property(mantissa, prefix, unit):
    # "<x> <prefix><unit>" must equal x times the SI prefix factor (SI Brochure table 7), to the
    # 12 significant digits the parser keeps.
    expected_unit, symbol = unit
    value = parse_quantity(f"{mantissa!r} {prefix}{symbol}", expected_unit, key="k")
    assert value == pytest.approx(mantissa * _PREFIXES[prefix], rel=1e-11, abs=1e-300)


_FORMAT_UNITS = [("V", VOLT), ("A", AMPERE), ("F", FARAD), ("C", COULOMB), ("s", SECOND),
                 ("ohm", OHM), ("W", WATT), ("H", HENRY), ("Hz", HERTZ), ("A/s", AMPERE_PER_SECOND)]


@settings(max_examples=200)
@given(value=st.floats(min_value=1e-11, max_value=1e11),
       sign=st.sampled_from([1.0, -1.0]),
       unit=st.sampled_from(_FORMAT_UNITS))
def test_format_quantity_round_trips_through_the_parser(value, sign, unit):
    # Round trip: what the report prints must read back to the printed precision. With 12 digits
    # the relative error is at most 5e-12 (half a unit in the 12th digit), plus the parser's own
    # 12-digit rounding.
    label, expected_unit = unit
    value *= sign
    text = format_quantity(value, label, digits=12)
    assert parse_quantity(text, expected_unit, key="k") == pytest.approx(value, rel=2e-11)
    # At the default 3 digits: within half a unit of the 3rd significant digit.
    short = format_quantity(value, label)
    assert parse_quantity(short, expected_unit, key="k") == pytest.approx(value, rel=5.01e-3)


@pytest.mark.parametrize(("value", "label", "text"), [
    (4.7e6, "ohm", "4.7 MOhm"), (2.2e-9, "F", "2.2 nF"), (36e3, "V", "36 kV"), (30e-3, "A", "30 mA"),
    (50e6, "A/s", "50 MA/s"), (0.0, "V", "0 V"), (45.0, "degC", "45 degC"), (10.0, "K", "10 K"),
    (999.96, "V", "1 kV"),  # rounds up into the next prefix rather than printing "1e+03 V"
])
def test_format_quantity_examples(value, label, text):
    # Engineering notation: exponent a multiple of 3 (IEC 60027-1 prefixes); examples by hand.
    assert format_quantity(value, label) == text


@pytest.mark.parametrize(("value", "label"), [(45.0, "degC"), (-10.5, "degC"), (10.0, "K")])
def test_format_quantity_temperatures_round_trip(value, label):
    unit = CELSIUS if label == "degC" else KELVIN_DIFFERENCE
    assert parse_quantity(format_quantity(value, label), unit) == value


def test_format_quantity_non_finite_passes_through():
    assert format_quantity(float("inf"), "s") == "inf s"
    assert "nan" in format_quantity(float("nan"), "V")
    assert math.isnan(float(format_quantity(float("nan"), "1").split()[0]))


@pytest.mark.parametrize("value", [1e12, 2e-15])
def test_format_quantity_ohm_extreme_prefixes_round_trip(value):
    text = format_quantity(value, "ohm")
    assert parse_quantity(text, OHM, key="grading.resistor") == pytest.approx(value, rel=5e-3)


# --- text pasted from a datasheet: one number and one unit (issue 15) -----------------------------

# A small valid design of our own invention; the cases below replace one fragment of it.
PASTE_BASE = """\
[duty]
reverse_voltage = "6 kV"
ambient = "35 degC"
[string]
series = 6
part = "MAIN"
[[string.position]]
index = 1
temperature_rise = "10 K"
[parts.MAIN]
v_rrm = "1.6 kV"
i_r = { typ = "0.3 uA", max = "3 uA", at_temperature = "25 degC" }
q_rr = { typ = "90 nC", max = "160 nC" }
t_j_max = "150 degC"
tempco_v_t0 = "-2 mV/K"
[grading]
resistor = "3.3 MOhm"
resistor_tolerance = "1 %"
resistor_tcr = "100 ppm/K"
capacitor = "2.2 nF"
capacitor_tolerance = "10 %"
"""


def pasted(old: str, new: str) -> str:
    assert PASTE_BASE.count(old) == 1, old
    return PASTE_BASE.replace(old, new)


PASTED_BAD = [
    # (id, fragment replaced, replacement, key named, fragments of the one line: what was read and
    # the fix). Item numbers of issue 15.
    # 1: decimal commas, digit groups and second values are refused, not multiplied.
    ("decimal comma", '"6 kV"', '"6,5 kV"', "duty.reverse_voltage",
     ["'6,5 kV'", 'write "6.5 kV"']),
    ("decimal comma with dots grouping", '"6 kV"', '"6.000,5 V"', "duty.reverse_voltage",
     ["'6.000,5 V'", 'write "6000.5 V"']),
    ("comma between three digits", '"6 kV"', '"6,000 V"', "duty.reverse_voltage",
     ['"6.000 V" if the comma is a decimal mark', '"6000 V" if it groups thousands']),
    ("digits grouped by a space", '"6 kV"', '"6 000 V"', "duty.reverse_voltage",
     ["read as 6 and 000", 'write "6000 V"']),
    ("digits grouped by a no-break space", '"6 kV"', '"6\u00a0000 V"', "duty.reverse_voltage",
     ['write "6000 V"']),
    ("digits grouped by a thin space", '"1.6 kV"', '"1\u2009600 V"', "parts.MAIN.v_rrm",
     ['write "1600 V"']),
    ("two numbers before the unit", '"6 kV"', '"6 6 kV"', "duty.reverse_voltage",
     ["two numbers, 6 and 6", '"66 kV" or "6.6 kV"']),
    ("tolerance after a capacitor", '"2.2 nF"', '"2.2 nF 10 %"', "grading.capacitor",
     ["a second value after the unit: 10 %", 'write "2.2 nF"',
      'grading.capacitor_tolerance = "10 %"']),
    ("tolerance after a resistor", '"3.3 MOhm"', '"3.3 MOhm 1%"', "grading.resistor",
     ['write "3.3 MOhm"', 'grading.resistor_tolerance = "1%"']),
    ("second value after a leakage", '"3 uA"', '"3 uA 125 degC"', "parts.MAIN.i_r.max",
     ["a second value after the unit: 125 degC", 'write "3 uA"']),
    ("times a power of ten", '"6 kV"', '"6 x 10^3 V"', "duty.reverse_voltage",
     ['write "6e3 V"']),
    ("ratio beside a unit", '"2.2 nF"', '"2.2 nF %"', "grading.capacitor", ["a ratio, percent"]),
    # 2: a typographic minus is a minus: the sign is kept, so a positive-only key refuses it.
    ("minus sign U+2212 on a resistor", '"3.3 MOhm"', '"\u22123.3 MOhm"', "grading.resistor",
     ["greater than zero"]),
    ("en dash on a capacitor", '"2.2 nF"', '"\u20132.2 nF"', "grading.capacitor",
     ["greater than zero"]),
    # 3: per degree Celsius is per kelvin: -10 %/degC makes the resistor negative 10 K from the
    # reference, as -10 %/K does (read as -10 % / 274.15 K it would pass).
    ("TCR per degC makes the resistor negative", '"100 ppm/K"', '"-10 %/\u00b0C"',
     "grading.resistor_tcr", ["not positive"]),
    ("degree Celsius sign for a difference", '"10 K"', '"10 \u2103"',
     "string.position[1].temperature_rise", ["temperature difference"]),
    # 16: the degree Celsius sign is read as degC.
    ("ambient in U+2103 above t_j_max", '"35 degC"', '"160 \u2103"', "duty.ambient",
     ["t_j_max"]),
]


@pytest.mark.parametrize(("old", "new", "key", "fragments"), [c[1:] for c in PASTED_BAD],
                         ids=[c[0] for c in PASTED_BAD])
def test_pasted_notation_is_refused_by_the_reader_and_the_cli(tmp_path, old, new, key, fragments):
    from typer.testing import CliRunner

    from stringcheck.cli.app import app
    from stringcheck.design.reading import parse_design_text
    from stringcheck.errors import DesignError

    text = pasted(old, new)
    with pytest.raises(DesignError) as caught:
        parse_design_text(text, source="stack.toml")
    assert caught.value.key == key, str(caught.value)
    message = str(caught.value)
    assert message.startswith(f"stack.toml: {key}: ") and "\n" not in message, message
    for fragment in fragments:
        assert fragment in message, (fragment, message)
    path = tmp_path / "stack.toml"
    path.write_text(text, encoding="utf-8")
    result = CliRunner().invoke(app, ["check", str(path), "--trials", "100"])
    assert result.exit_code == 2, result.output  # bad input (STYLE.md "Errors")
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), result.stderr
    assert str(path) in lines[0] and key in lines[0], lines[0]
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])


def test_the_pasted_base_design_is_valid():
    from stringcheck.design.reading import parse_design_text

    design = parse_design_text(PASTE_BASE)
    assert design.grading.capacitor == 2.2e-9 and design.duty.reverse_voltage == 6e3


# Digits and separators as a thousands group or a decimal comma would put them, and second values.
TWO_NUMBERS = [
    ("1,2 kV", VOLT, 'write "1.2 kV"'),
    ("2,5 kV", VOLT, 'write "2.5 kV"'),
    ("12 500 V", VOLT, 'write "12500 V"'),
    ("12'500 V", VOLT, 'write "12500 V"'),
    ("1,000,000 V", VOLT, 'write "1000000 V"'),
    ("2 2 kV", VOLT, '"22 kV" or "2.2 kV"'),
    ("2.2 nF 10 %", FARAD, 'write "2.2 nF"'),
    ("4.7 MOhm 1%", OHM, 'write "4.7 MOhm"'),
    ("4,7 M\u03a9", OHM, 'write "4.7 M\u03a9"'),  # the suggestion keeps the user's spelling
    ("2\u00b710\u00b3 V", VOLT, 'write "2e3 V"'),
    ("1/0 V", VOLT, "a second number"),
    ("-5 V-3", VOLT, "a second number"),
    ("36 kV, 40 kV", VOLT, "a second value after the unit"),
    ("0.004 1/K 2", PER_KELVIN, "a second value after the unit: 2"),
    ("45 degC 10 %", CELSIUS, 'write "45 degC"'),
    ("2.2 nF \u00b1 10 %", FARAD, 'write "2.2 nF";'),
    ("2.2nF+/-10%", FARAD, 'write "2.2 nF";'),
    ("1_000 V", VOLT, 'write "1000 V"'),
]


@pytest.mark.parametrize(("text", "unit", "fix"), TWO_NUMBERS, ids=[c[0] for c in TWO_NUMBERS])
def test_two_numbers_are_refused_showing_what_was_read_and_the_fix(text, unit, fix):
    with pytest.raises(QuantityError) as caught:
        parse_quantity(text, unit, key="duty.reverse_voltage")
    message = str(caught.value)
    assert message.startswith("duty.reverse_voltage: cannot read " + repr(text)), message
    assert fix in message and "\n" not in message, message


def test_a_long_text_is_cut_short_in_the_message():
    # STYLE.md "Errors": one short line, whatever was pasted.
    text = "1 " + "000 " * 20000 + "V"
    with pytest.raises(QuantityError) as caught:
        parse_quantity(text, VOLT, key="duty.reverse_voltage")
    message = str(caught.value)
    assert len(message) < 300 and f"{len(text):,} characters" in message, message


@pytest.mark.parametrize("text", ["45 \u00b0", "45 deg"])
def test_a_degree_sign_alone_is_named_as_an_angle(text):
    # pint reads a lone degree as the plane angle (SI Brochure table 8: 1 deg = pi/180 rad).
    with pytest.raises(QuantityError, match=r"an angle.*e\.g\. \"45 degC\""):
        parse_quantity(text, CELSIUS, key="duty.ambient")


@pytest.mark.parametrize("dash", ["\u2010", "\u2011", "\u2012", "\u2013", "\u2014", "\u2015",
                                  "\u2212", "\ufe63", "\uff0d", "-"])
def test_every_dash_in_the_number_is_a_minus(dash):
    # A PDF copy gives U+2212 MINUS SIGN or a dash for "-"; the sign is never dropped. Expected
    # values: the ASCII spelling, by hand.
    assert parse_quantity(f"{dash}6 mV/K", VOLT_PER_KELVIN) == -6e-3
    assert parse_quantity(f"{dash} 6 mV/K", VOLT_PER_KELVIN) == -6e-3
    assert parse_quantity(f"{dash}20 {chr(0xb0)}C", CELSIUS) == -20.0
    assert parse_quantity(f"1e{dash}3 V", VOLT) == 1e-3


# Every spelling of the degree Celsius the reader accepts, and of the degree Fahrenheit.
CELSIUS_SPELLINGS = ["degC", "deg C", "\u00b0C", "\u00b0 C", "\u2103", "\u00baC", "\u02daC",
                     "degree_Celsius"]
FAHRENHEIT_SPELLINGS = ["degF", "\u00b0F", "\u2109"]
# Every temperature-bearing unit of the schema with a degree in it, and its per-kelvin twin.
TEMPERATURE_COMPOUNDS = [
    ("0.5 {T}/W", "0.5 K/W", KELVIN_PER_WATT),  # r_th_jc, r_th_cs, r_th_sa
    ("-6 mV/{T}", "-6 mV/K", VOLT_PER_KELVIN),  # tempco_v_t0
    ("100 ppm/{T}", "100 ppm/K", PER_KELVIN),  # resistor_tcr, tempco_r_t
    ("0.4 %/{T}", "0.4 %/K", PER_KELVIN),
    ("0.004 1/{T}", "0.004 1/K", PER_KELVIN),
    ("-6 mV {T}^-1", "-6 mV K^-1", VOLT_PER_KELVIN),
    ("100 ppm {T}\u207b\u00b9", "100 ppm K\u207b\u00b9", PER_KELVIN),
]


@pytest.mark.parametrize("spelling", CELSIUS_SPELLINGS)
@pytest.mark.parametrize(("text", "twin", "unit"), TEMPERATURE_COMPOUNDS,
                         ids=[c[1] for c in TEMPERATURE_COMPOUNDS])
def test_per_degree_celsius_is_per_kelvin(spelling, text, twin, unit):
    # SI Brochure (BIPM, 9th ed. 2019) 2.3.1: a temperature difference has the same value in degC
    # and in K, so a coefficient per degC equals the one per K exactly. Read as an absolute
    # temperature, "-6 mV/degC" would be -6 mV / 274.15 K = -2.2e-5 V/K.
    value = parse_quantity(text.format(T=spelling), unit, key="k")
    assert value == parse_quantity(twin, unit, key="k")


@pytest.mark.parametrize("spelling", FAHRENHEIT_SPELLINGS)
@pytest.mark.parametrize(("text", "twin", "unit"), TEMPERATURE_COMPOUNDS,
                         ids=[c[1] for c in TEMPERATURE_COMPOUNDS])
def test_per_degree_fahrenheit_is_per_five_ninths_kelvin(spelling, text, twin, unit):
    # NIST SP 811 (2008) appendix B.9, temperature interval: 1 degF = 5/9 K (from memory). A unit
    # per degree is 9/5 of it per kelvin; K/W with the degree in the numerator is 5/9 of it.
    value = parse_quantity(text.format(T=spelling), unit, key="k")
    factor = 5.0 / 9.0 if unit is KELVIN_PER_WATT else 9.0 / 5.0
    assert value == pytest.approx(parse_quantity(twin, unit, key="k") * factor, rel=1e-11)


@pytest.mark.parametrize("spelling", CELSIUS_SPELLINGS)
def test_degree_celsius_spellings_of_a_temperature(spelling):
    # Unicode Standard: U+2103 DEGREE CELSIUS is the degree-Celsius sign; U+00BA (masculine
    # ordinal) and U+02DA (ring above) are what keyboards and PDF copies give for the degree sign.
    assert parse_quantity(f"45 {spelling}", CELSIUS, key="duty.ambient") == 45.0
    with pytest.raises(QuantityError, match="temperature difference"):
        parse_quantity(f"10 {spelling}", KELVIN_DIFFERENCE, key="leakage_doubling")


@pytest.mark.parametrize("spelling", FAHRENHEIT_SPELLINGS)
def test_degree_fahrenheit_spellings_of_a_temperature(spelling):
    # NIST SP 811 (2008) 4.2.1.1: t/degC = (t/degF - 32) / 1.8; 113 degF = 45 degC by hand.
    assert parse_quantity(f"113 {spelling}", CELSIUS, key="duty.ambient") == 45.0


def test_kelvin_sign_and_micro_and_ohm_code_points():
    # Unicode Standard: U+212A KELVIN SIGN decomposes canonically to K; U+00B5 MICRO SIGN and
    # U+03BC GREEK SMALL LETTER MU are both micro; U+2126 OHM SIGN decomposes to U+03A9.
    assert parse_quantity("10 \u212a", KELVIN_DIFFERENCE) == 10.0
    assert parse_quantity("-2 mV/\u212a", VOLT_PER_KELVIN) == -2e-3
    assert parse_quantity("2 \u00b5s", SECOND) == parse_quantity("2 \u03bcs", SECOND) == 2e-6
    assert parse_quantity("10 k\u2126", OHM) == parse_quantity("10 k\u03a9", OHM) == 10e3


def test_unit_powers_are_read_but_powers_of_the_number_are_not():
    # The unit may carry its own power (K^-1, K**-1, K⁻¹); the number may not (1e3 is the way).
    assert parse_quantity("100 ppm K^-1", PER_KELVIN) == 100e-6
    assert parse_quantity("100 ppm K**-1", PER_KELVIN) == 100e-6
    assert parse_quantity("-2 mV K\u207b\u00b9", VOLT_PER_KELVIN) == -2e-3
    for text in ("10^3 V", "10**3 V", "10\u00b3 V", "2**2000 V"):
        with pytest.raises(QuantityError, match="powers"):
            parse_quantity(text, VOLT, key="k")
    with pytest.raises(QuantityError, match="below 100"):
        parse_quantity("1 V^999999999", VOLT, key="k")


def test_design_with_degrees_celsius_equals_its_kelvin_twin():
    # SI Brochure 2.3.1 (a difference of 1 degC is 1 K): every coefficient and thermal resistance
    # the schema takes reads the same per degC as per K.
    from stringcheck.design.reading import parse_design_text

    keys = {"r_th_jc": "0.5 {K}/W", "r_th_cs": "0.1 {K}/W", "tempco_v_t0": "-2.5 mV/{K}",
            "tempco_r_t": "0.4 %/{K}"}
    celsius = {name: text.format(K="\u00b0C") for name, text in keys.items()}
    kelvin = {name: text.format(K="K") for name, text in keys.items()}
    celsius["tempco_r_t"] = "0.4 %/\u2103"

    def read(values, tcr, r_th_sa):
        lines = "\n".join(f'{name} = "{text}"' for name, text in values.items())
        text = pasted('tempco_v_t0 = "-2 mV/K"\n', lines + "\n")
        text = text.replace('"100 ppm/K"', f'"{tcr}"') + f'[thermal]\nr_th_sa = "{r_th_sa}"\n'
        return parse_design_text(text)

    hot = read(celsius, "100 ppm/\u00b0C", "2 \u2103/W")
    cold = read(kelvin, "100 ppm/K", "2 K/W")
    for name in keys:
        assert getattr(hot.parts["MAIN"], name) == getattr(cold.parts["MAIN"], name), name
    assert hot.parts["MAIN"].tempco_v_t0 == -2.5e-3
    assert hot.grading.resistor_tcr == cold.grading.resistor_tcr == 100e-6
    assert hot.thermal.r_th_sa == cold.thermal.r_th_sa == 2.0


# --- properties: one number and one unit -----------------------------------------------------------

# (spelling, expected unit, the formatter's label, factor to the SI value; offset for temperatures).
# Factors: SI Brochure table 7 prefixes; degF: NIST SP 811 (2008) 4.2.1.1 and B.9 (from memory).
_ACCEPTED_UNITS = [
    ("kV", VOLT, "V", 1e3, 0.0), ("mV", VOLT, "V", 1e-3, 0.0), ("V", VOLT, "V", 1.0, 0.0),
    ("mA", AMPERE, "A", 1e-3, 0.0), ("\u00b5A", AMPERE, "A", 1e-6, 0.0),
    ("nF", FARAD, "F", 1e-9, 0.0), ("pF", FARAD, "F", 1e-12, 0.0),
    ("\u03bcC", COULOMB, "C", 1e-6, 0.0), ("nC", COULOMB, "C", 1e-9, 0.0),
    ("us", SECOND, "s", 1e-6, 0.0), ("ns", SECOND, "s", 1e-9, 0.0),
    ("kHz", HERTZ, "Hz", 1e3, 0.0), ("uH", HENRY, "H", 1e-6, 0.0), ("mW", WATT, "W", 1e-3, 0.0),
    ("MOhm", OHM, "ohm", 1e6, 0.0), ("k\u03a9", OHM, "ohm", 1e3, 0.0),
    ("M\u2126", OHM, "ohm", 1e6, 0.0), ("R", OHM, "ohm", 1.0, 0.0),
    ("A/us", AMPERE_PER_SECOND, "A/s", 1e6, 0.0), ("A/\u00b5s", AMPERE_PER_SECOND, "A/s", 1e6, 0.0),
    ("mV/K", VOLT_PER_KELVIN, "V/K", 1e-3, 0.0), ("mV/\u00b0C", VOLT_PER_KELVIN, "V/K", 1e-3, 0.0),
    ("mV/\u2103", VOLT_PER_KELVIN, "V/K", 1e-3, 0.0),
    ("K/W", KELVIN_PER_WATT, "K/W", 1.0, 0.0), ("\u00b0C/W", KELVIN_PER_WATT, "K/W", 1.0, 0.0),
    ("\u2109/W", KELVIN_PER_WATT, "K/W", 5.0 / 9.0, 0.0),
    ("ppm/K", PER_KELVIN, "1/K", 1e-6, 0.0), ("ppm/\u00b0C", PER_KELVIN, "1/K", 1e-6, 0.0),
    ("%/\u2103", PER_KELVIN, "1/K", 1e-2, 0.0), ("1/K", PER_KELVIN, "1/K", 1.0, 0.0),
    ("degC", CELSIUS, "degC", 1.0, 0.0), ("\u00b0C", CELSIUS, "degC", 1.0, 0.0),
    ("\u2103", CELSIUS, "degC", 1.0, 0.0), ("K", CELSIUS, "degC", 1.0, -273.15),
    ("\u2109", CELSIUS, "degC", 5.0 / 9.0, -32.0 * 5.0 / 9.0),
    ("K", KELVIN_DIFFERENCE, "K", 1.0, 0.0), ("mK", KELVIN_DIFFERENCE, "K", 1e-3, 0.0),
    ("%", DIMENSIONLESS, "1", 1e-2, 0.0), ("", DIMENSIONLESS, "1", 1.0, 0.0),
]
_NUMBER_STYLES = [repr, "{:.6g}".format, "{:.3e}".format, "{:.4f}".format, "{:E}".format]


@st.composite
def accepted_quantities(draw):
    """A quantity string as a user might write it, with its expected value by hand."""
    number = draw(st.floats(min_value=1e-6, max_value=1e6))
    style = draw(st.sampled_from(_NUMBER_STYLES))
    sign = draw(st.sampled_from(["", "+", "-", "\u2212", "\u2013"]))
    spelling, unit, label, factor, offset = draw(st.sampled_from(_ACCEPTED_UNITS))
    # No gap before "1/K": "1.01/K" is the number 1.01.
    gap = draw(st.sampled_from([" ", "  "] if spelling[:1].isdigit() else [" ", "", "  "]))
    digits = style(number)
    text = f"{sign}{digits}{gap}{spelling}" if spelling else f"{sign}{digits}"
    magnitude = float(digits) * (1.0 if sign in ("", "+") else -1.0)
    return text, unit, label, magnitude * factor + offset


@settings(max_examples=300)
@given(case=accepted_quantities())
def test_every_accepted_quantity_round_trips_through_the_formatter(case):
    # Read, print with the project's formatter at 17 significant digits (enough for any float,
    # IEEE 754-2008 clause 5.12.2), read again: the same float. The first reading is checked against
    # the value by hand (SI prefixes, NIST SP 811 for degF) to the parser's 12 significant digits.
    text, unit, label, expected = case
    try:
        value = parse_quantity(text, unit, key="k")
    except QuantityError as error:
        # Only a temperature below absolute zero may be refused.
        assert unit is CELSIUS and expected <= -273.15 + 1e-6, str(error)
        return
    assert value == pytest.approx(expected, rel=1e-11, abs=1e-9)
    printed = format_quantity(value, label, digits=17)
    assert parse_quantity(printed, unit, key="k") == value, printed


_PLAIN_NUMBERS = st.one_of(st.integers(min_value=0, max_value=99999).map(str),
                           st.floats(min_value=0.001, max_value=1e4).map("{:.4g}".format),
                           st.floats(min_value=1e-9, max_value=1e9).map("{:.2e}".format))


@st.composite
def two_number_texts(draw):
    """A text that holds two numbers: grouped digits, a decimal comma, a second value."""
    first, second = draw(_PLAIN_NUMBERS), draw(_PLAIN_NUMBERS)
    spelling, unit, *_ = draw(st.sampled_from([u for u in _ACCEPTED_UNITS if u[0]]))
    other = draw(st.sampled_from(_ACCEPTED_UNITS))[0]
    separator = draw(st.sampled_from([" ", ",", ", ", "\u00a0", "\u2009", "\u202f", "'", " x ",
                                      "/", " / ", "*"]))
    form = draw(st.sampled_from(["before", "after", "twice"]))
    if form == "before":  # "12 500 V", "1,2 kV", "2 2 kV"
        text = f"{first}{separator}{second} {spelling}"
    elif form == "after":  # "2.2 nF 10 %", "4.7 MOhm 1%"
        text = f"{first} {spelling}{separator}{second}{' ' if other else ''}{other}"
    else:  # "36 kV, 40 kV"
        text = f"{first} {spelling}{separator}{second} {spelling}"
    return text, unit


@settings(max_examples=300)
@given(case=two_number_texts())
def test_no_accepted_string_holds_two_numbers(case):
    # docs/design-file.md: a quantity is one number and one unit; pint alone would multiply
    # juxtaposed terms. Every text with a second number is refused, naming what was read.
    text, unit = case
    with pytest.raises(QuantityError) as caught:
        parse_quantity(text, unit, key="grading.capacitor")
    message = str(caught.value)
    assert message.startswith("grading.capacitor: ") and repr(text) in message, message
    assert "\n" not in message
