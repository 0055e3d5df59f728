"""Quantities with units: every spelling the design file promises, every way to get one wrong."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stringcheck.errors import QuantityError, StringcheckError
from stringcheck.quantity import (
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
    # DESIGN.md section 3: bare numbers are SI base units (degC / K for temperatures).
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
