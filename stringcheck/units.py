"""Quantities with units: ``"36 kV"``, ``"4.7 MOhm"``, ``"50 A/us"``, ``"45 degC"`` -> float in SI.

Parsing and the dimension check use pint, the ecosystem's unit library, so that every prefix and
compound unit it knows is accepted. pint is imported on first use only: ``stringcheck --help`` and the
other commands that read no design file do not pay its import time.

Temperatures are the one exception to "SI": absolute temperatures come back in [degC] (the unit the
trade and the design file use) and temperature differences in [K]. A bare number is taken as already
being in the expected unit (SI base, or degC / K for temperatures).

A quantity is one number and one unit. The number is read here, not by pint: pint evaluates a text
as an expression, so juxtaposed terms would multiply ("12 500 V" as 6 kV, "2.2 nF 10 %" as 0.22 nF)
and a degree Celsius inside a compound unit would be converted as a temperature ("-6 mV/degC" as
-6 mV / 274.15 K). pint reads only the unit expression, where it takes an offset unit inside a
compound as a difference (1 degC = 1 K, SI Brochure 2.3.1).
"""

from __future__ import annotations

import math
import re
import unicodedata
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

from stringcheck.errors import QuantityError


@dataclass(frozen=True)
class Unit:
    """An expected unit: the name shown to users and the pint expression it converts to."""

    label: str
    pint_unit: str
    absolute_temperature: bool = False


# The units the design file uses, by the name the schema refers to them with.
VOLT = Unit("V", "volt")
AMPERE = Unit("A", "ampere")
OHM = Unit("ohm", "ohm")
FARAD = Unit("F", "farad")
COULOMB = Unit("C", "coulomb")
SECOND = Unit("s", "second")
HERTZ = Unit("Hz", "hertz")
HENRY = Unit("H", "henry")
WATT = Unit("W", "watt")
AMPERE_PER_SECOND = Unit("A/s", "ampere / second")
KELVIN_PER_WATT = Unit("K/W", "kelvin / watt")
VOLT_PER_KELVIN = Unit("V/K", "volt / kelvin")
PER_KELVIN = Unit("1/K", "1 / kelvin")
PER_VOLT = Unit("1/V", "1 / volt")
CELSIUS = Unit("degC", "degC", absolute_temperature=True)
KELVIN_DIFFERENCE = Unit("K", "kelvin")
DIMENSIONLESS = Unit("1", "dimensionless")

# Spellings the trade writes that pint does not read as they stand; applied to the unit only.
_SPELLINGS = (
    (re.compile(r"(?<![A-Za-z])([kMGTmunpfµμ]?)(?:Ohm|OHM|ohms|Ohms)\b"), r"\1ohm"),
    (re.compile(r"Ω"), "ohm"),
    (re.compile(r"(?<![A-Za-z])([kMGTmunpfµμ]?)R\b"), r"\1ohm"),
    # DEGREE CELSIUS / FAHRENHEIT signs, and a degree written with the degree sign, the masculine
    # ordinal or the ring above (what a PDF copy or a keyboard without the degree sign gives).
    (re.compile("\u2103"), "degC"),
    (re.compile("\u2109"), "degF"),
    (re.compile(r"[\u00b0\u00ba\u02da]\s?C\b"), "degC"),
    (re.compile(r"[\u00b0\u00ba\u02da]\s?F\b"), "degF"),
    (re.compile(r"[\u00b0\u00ba\u02da]\s?K\b"), "K"),
    (re.compile(r"\bdeg\s?C\b"), "degC"),
    (re.compile(r"\bdeg\s?F\b"), "degF"),
    (re.compile(r"µ|μ"), "u"),
    (re.compile(r"%"), "percent"),
    (re.compile(r"\bppm\s*/\s*K\b"), "ppm / kelvin"),
)

# Minus signs a datasheet copy gives instead of U+002D: HYPHEN .. HORIZONTAL BAR (U+2010-2015),
# MINUS SIGN (U+2212), SMALL HYPHEN-MINUS (U+FE63), FULLWIDTH HYPHEN-MINUS (U+FF0D).
_DASHES = re.compile("[\u2010-\u2015\u2212\ufe63\uff0d]")
# One number: optional sign, digits with an optional decimal point, an optional exponent; then the
# unit. "nan" and "inf" are read so that they can be refused by name.
_LEADING_NUMBER = re.compile(
    r"(?P<number>[+-]?\s*(?:(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
    r"|(?:nan|inf(?:inity)?)(?![A-Za-z_])))(?P<rest>.*)", re.IGNORECASE | re.DOTALL)
_SUPERSCRIPT = "\u207a\u207b\u2070\u00b9\u00b2\u00b3\u2074-\u2079"
# A power of the number itself ("10**3 V", "10^3 V", "10³ V"): pint would evaluate integer powers
# exactly, and "10**10**10 V" would never finish.
_NUMBER_POWER = re.compile(rf"\s*(?:\*\*|\^|[{_SUPERSCRIPT}])")
# The unit's own powers ("m^2", "K**-1", "K⁻¹") follow a unit name, a unit sign or a parenthesis.
_UNIT_POWER = re.compile(rf"(?<=[^\W\d]|[)%\u00b0\u2103\u2109])\s*"
                         rf"(?:(?:\*\*|\^)\s*[+-]?[0-9]{{1,2}}(?![0-9])|[{_SUPERSCRIPT}]+)")
# "1/K" and "0.004 1/K": the 1 of a reciprocal unit.
_RECIPROCAL = re.compile(r"^\s*1\s*/")
# A number written in scientific notation the long way: "2 x 10^3 V", "2·10³ V".
_TIMES_TEN = re.compile(rf"\s*[x×·*]\s*10\s*(?:(?:\*\*|\^)\s*(?P<power>[+-]?[0-9]+)"
                        rf"|(?P<superscript>[{_SUPERSCRIPT}]+))(?P<unit>.*)", re.DOTALL)
_SUPERSCRIPT_DIGITS = str.maketrans("\u207a\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077"
                                    "\u2078\u2079", "+-0123456789")


@lru_cache(maxsize=1)
def _registry() -> Any:
    import pint  # deferred: see the module docstring

    registry = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return registry


def _spelled(unit_text: str) -> str:
    """The unit as pint reads it: the trade's spellings replaced."""
    for pattern, replacement in _SPELLINGS:
        unit_text = pattern.sub(replacement, unit_text)
    return unit_text.strip()


def parse_quantity(value: Any, unit: Unit, *, key: str = "value",
                   tolerance_key: str | None = None) -> float:
    """Read ``value`` as a quantity in ``unit`` and return the float in that unit.

    A quantity is one number and one unit: an optional sign (``-`` or a typographic minus such as
    U+2212), digits with an optional decimal point and an optional exponent, then a unit expression
    that holds no other number than its own powers (``m^2``, ``K⁻¹``) and the 1 of ``1/K``. A degree
    Celsius (or Fahrenheit) standing alone is a temperature; inside a compound unit (``mV/°C``,
    ``ppm/℃``, ``°C/W``) it is a temperature difference, 1 degC = 1 K.

    Parameters
    ----------
    value
        A string with a number and a unit (``"2.2 nF"``), or a bare int/float already in ``unit``.
    unit
        The expected unit (one of the module constants). A value of a different dimension is an
        error.
    key
        The design-file key the value belongs to, used in the error message.
    tolerance_key
        The key that holds this value's tolerance, if there is one; named when the text carries a
        percentage after its unit (``"2.2 nF 10 %"``).

    Returns
    -------
    float
        The value in the SI unit (absolute temperatures in [degC], differences in [K]).

    Raises
    ------
    QuantityError
        When the text is not one number and one unit (a decimal comma, digits grouped by spaces, a
        second number), the unit has the wrong dimension, a unit is missing where the number alone
        would be ambiguous, the number is raised to a power (``**``, ``^``), the value is not
        finite, or an absolute temperature is not above absolute zero.
    """
    if isinstance(value, bool):
        raise QuantityError(f"{key}: expected a quantity in {unit.label}, got a true/false value")
    if isinstance(value, (int, float)):
        try:
            number = float(value)
        except OverflowError:  # a TOML integer beyond the float range
            number = math.inf
        if not math.isfinite(number):
            raise QuantityError(f"{key}: the value {_shown(value)} is not finite; give a finite "
                                "number")
        return _checked_temperature(number, value, unit, key)
    if not isinstance(value, str):
        raise QuantityError(
            f"{key}: expected a quantity in {unit.label} such as \"{example(unit)}\", "
            f"got {type(value).__name__}"
        )
    shown = _quoted(value)
    # NFC maps U+2126 OHM SIGN onto U+03A9 and U+212A KELVIN SIGN onto K; the micro sign stays.
    text = _DASHES.sub("-", unicodedata.normalize("NFC", value)).strip()
    if not text:
        raise QuantityError(f"{key}: empty value; give a quantity such as \"{example(unit)}\"")
    found = _LEADING_NUMBER.fullmatch(text)
    if found is None:
        if re.search(r"\d", text):
            raise QuantityError(
                f"{key}: cannot read {shown} as a quantity: write the number first, then its "
                f"unit, e.g. \"{example(unit)}\"")
        # "kV" alone is almost surely an edit that lost its number; pint would read it as 1 kV.
        raise QuantityError(
            f"{key}: cannot read {shown} as a quantity: it has no number; write a number and a "
            f"unit, e.g. \"{example(unit)}\""
        )
    number_text = re.sub(r"\s+", "", found["number"])
    rest = found["rest"]
    number = float(number_text)
    if not math.isfinite(number):
        raise QuantityError(f"{key}: the value {shown} is not finite; give a finite number")
    _check_one_number(number_text, rest, value, unit, key, tolerance_key)
    unit_text = _spelled(rest)
    if not unit_text:
        if unit is not DIMENSIONLESS:
            # A quoted number without a unit is more likely a slip than a deliberate SI value;
            # a bare TOML number (no quotes) is the way to give SI.
            raise QuantityError(
                f"{key}: {shown} has no unit; write it with a unit in {unit.label}, "
                f"e.g. \"{example(unit)}\", or as a bare number in {unit.label}"
            )
        return number
    if unit_text.startswith("/"):
        unit_text = "1" + unit_text  # "100 /K" as "100 1/K"
    try:
        number = _convert_with_pint(number, unit_text, value, unit, key)
    except OverflowError:
        number = math.inf
    if not math.isfinite(number):
        raise QuantityError(f"{key}: the value {shown} is not finite; give a finite number")
    return _checked_temperature(number, value, unit, key)


def _check_one_number(number_text: str, rest: str, value: str, unit: Unit, key: str,
                      tolerance_key: str | None) -> None:
    """Refuse a text whose unit part holds another number, saying what was read and what to write.

    pint reads juxtaposed terms as a product: "12 500 V" would be 6 kV and "2.2 nF 10 %" 0.22 nF.
    """
    shown = _quoted(value)
    if _NUMBER_POWER.match(rest):
        raise QuantityError(
            f"{key}: cannot read {shown} as a quantity: powers (**, ^) of the number are not "
            f"accepted; write a number and a unit, e.g. \"{example(unit)}\" (1e3 for a thousand)")
    body = _masked(rest)
    if re.search(r"(?:\*\*|\^)\s*[+-]?[0-9]{3,}", body):
        raise QuantityError(
            f"{key}: cannot read {shown} as a quantity: a unit's power must be a whole number "
            f"below 100; write a number and a unit, e.g. \"{example(unit)}\"")
    if not re.search(r"\d", body):
        if re.search(r"[+-]", body):
            raise QuantityError(
                f"{key}: cannot read {shown} as a quantity: a sign inside the unit; write one "
                f"number and one unit, e.g. \"{example(unit)}\"")
        return
    if len(rest) > _SHOWN_LENGTH:
        what = "more than one number"
        fix = f"write one number and one unit, e.g. \"{example(unit)}\""
    else:
        what, fix = _one_number_hint(number_text, rest, unit, tolerance_key)
    raise QuantityError(f"{key}: cannot read {shown} as one quantity ({what}); {fix}")


def _masked(rest: str) -> str:
    """``rest`` with the numbers a unit may hold (its powers, the 1 of 1/K) blanked out, each
    character kept in its place."""
    def blank(match: re.Match) -> str:
        return re.sub(r"[^/]", " ", match[0])

    return _UNIT_POWER.sub(blank, _RECIPROCAL.sub(blank, rest))


def _one_number_hint(number_text: str, rest: str, unit: Unit,
                     tolerance_key: str | None) -> tuple[str, str]:
    """What a text with a second number was read as, and the likely intent."""
    integer = re.fullmatch(r"[+-]?[0-9]+", number_text) is not None
    grouped = re.fullmatch(r"[+-]?[0-9]{1,3}", number_text) is not None
    # Digits grouped in threes by spaces, apostrophes or commas: "12 500 V", "1,000,000 V".
    groups = re.match(r"((?:(?:\s+|'|\u2019|,|_)[0-9]{3})+)(\.[0-9]+)?(?![0-9])(?P<unit>.*)", rest,
                      re.DOTALL)
    if grouped and groups and not re.search(r"\d", groups["unit"]):
        joined = number_text + re.sub(r"[^0-9]", "", groups[1]) + (groups[2] or "")
        unit_part = groups["unit"].strip()
        if "," in groups[1] and not groups[2] and len(groups[1]) == 4:
            # "1,200 V": a thousands separator or a decimal comma; both are written.
            decimal = f"{number_text}.{groups[1][1:]}"
            return ("a comma inside the number",
                    f"write \"{decimal} {unit_part}\" if the comma is a decimal mark, or "
                    f"\"{joined} {unit_part}\" if it groups thousands")
        how = "commas" if "," in groups[1] else "spaces" if groups[1][0].isspace() else \
            "underscores" if "_" in groups[1] else "apostrophes"
        return (f"digits grouped with {how}, read as {number_text} and "
                f"{' and '.join(re.findall(r'[0-9]+', groups[1]))}",
                f"write \"{joined} {unit_part}\"")
    # A decimal comma: "1,2 kV"; with dots grouping thousands: "1.200,5 V".
    comma = re.match(r",([0-9]+)(?![0-9.,])(?P<unit>.*)", rest, re.DOTALL)
    if comma and not re.search(r"\d", comma["unit"]):
        whole = number_text
        if not integer:
            if not re.fullmatch(r"[+-]?[0-9]{1,3}(?:\.[0-9]{3})+", number_text):
                return _second_number(number_text, rest, unit, tolerance_key)
            whole = number_text.replace(".", "")
        return ("a decimal comma", f"write \"{whole}.{comma[1]} {comma['unit'].strip()}\" "
                                   "(a decimal point)")
    # "2 x 10^3 V", "2·10³ V".
    times = _TIMES_TEN.match(rest)
    if times and not re.search(r"\d", times["unit"]):
        power = times["power"] or times["superscript"].translate(_SUPERSCRIPT_DIGITS)
        return (f"{number_text} times a power of ten",
                f"write \"{number_text}e{int(power)} {times['unit'].strip()}\"")
    # Two numbers side by side before the unit: "2 2 kV".
    pair = re.match(r"\s+([0-9]+)(?![0-9.,])(?P<unit>\D*)$", rest)
    if integer and pair:
        unit_part = pair["unit"].strip()
        return (f"two numbers, {number_text} and {pair[1]}",
                f"write one number and one unit, e.g. \"{number_text}{pair[1]} {unit_part}\" or "
                f"\"{number_text}.{pair[1]} {unit_part}\"")
    return _second_number(number_text, rest, unit, tolerance_key)


def _second_number(number_text: str, rest: str, unit: Unit,
                   tolerance_key: str | None) -> tuple[str, str]:
    """A second value after the unit ("2.2 nF 10 %"), or some other second number."""
    first_digit = re.search(r"[0-9.]*\d", _masked(rest))
    assert first_digit is not None
    # The unit before the second value, without what joined the two ("2.2 nF, 10 %", "± 10 %").
    head = re.sub(r"(?:[\s,;\u00b1]|\+/-|\+-)*$", "", rest[:first_digit.start()]).strip()
    tail = " ".join(rest[first_digit.start():].split())
    if head and re.search(r"[^\W\d_]", head) and not re.search(r"[-+/*(^.,]\s*$", head):
        read = f"a second value after the unit: {tail}"
        if tolerance_key is not None and re.search(r"%|percent|ppm", tail):
            return read, (f"write \"{number_text} {head}\" and give the tolerance as "
                          f"{tolerance_key} = \"{tail}\"")
        return read, (f"write \"{number_text} {head}\"; a second value (tolerance, rating, test "
                      "condition) has its own key")
    return (f"a second number: {tail}",
            f"write one number and one unit, e.g. \"{example(unit)}\"")


# Absolute zero in [degC] (SI Brochure 2.3.1: T/degC = T/K - 273.15).
ABSOLUTE_ZERO = -273.15


def _checked_temperature(number: float, value: Any, unit: Unit, key: str) -> float:
    """An absolute temperature must lie above absolute zero."""
    shown = _quoted(value)
    if unit.absolute_temperature and not number > ABSOLUTE_ZERO:
        raise QuantityError(f"{key}: {shown} is not above absolute zero ({ABSOLUTE_ZERO:g} degC); "
                            f"give a temperature such as \"{example(unit)}\"")
    return number


def _quoted(value: Any) -> str:
    """``repr`` of the value as written, a long text cut short so that an error stays one short
    line."""
    if not isinstance(value, str) or len(value) <= _SHOWN_LENGTH:
        return repr(value)
    return repr(value[:_SHOWN_LENGTH - 20]) + f" (cut, {len(value):,} characters)"


# Texts longer than this are cut in messages and get no suggestion built from them.
_SHOWN_LENGTH = 80


def _shown(value: Any) -> str:
    """``repr`` of a number; a huge integer is described (its repr may be too long, or refused)."""
    if isinstance(value, int) and abs(value) >= 10**30:
        digits = int(value.bit_length() * math.log10(2)) + 1
        return f"(an integer of about {digits} digits)"
    return repr(value)


# Ratios pint reads as units of dimension one; beside another unit they scale it silently
# ("2.2 nF %" would be 0.022 nF). Allowed where the expected unit is a ratio or a coefficient.
_RATIO_UNITS = (DIMENSIONLESS, PER_KELVIN, PER_VOLT)


def _convert_with_pint(number: float, unit_text: str, value: Any, unit: Unit, key: str) -> float:
    """``number`` times the unit expression ``unit_text`` converted to ``unit``; may raise
    OverflowError.

    pint's ``parse_units`` reads an offset unit inside a compound as its difference unit
    (``mV/degC`` is ``mV/delta_degC``), whereas a whole-text ``Quantity("-6 mV/degC")`` would
    convert the degree Celsius as a temperature (-6 mV / 274.15 K).
    """
    shown = _quoted(value)
    registry = _registry()
    try:
        units = registry.parse_units(unit_text)
    except Exception as error:  # pint raises several unrelated types for unreadable text
        raise QuantityError(
            f"{key}: cannot read {shown} as a quantity ({type(error).__name__}); "
            f"write a number and a unit, e.g. \"{example(unit)}\""
        ) from None
    if units.dimensionless and unit is not DIMENSIONLESS:
        if unit.absolute_temperature and "degree" in str(units):
            raise QuantityError(
                f"{key}: {shown} is an angle (a degree sign alone); write the scale too, e.g. "
                f"\"{example(unit)}\"")
        raise QuantityError(
            f"{key}: {shown} has no unit; write it with a unit in {unit.label}, "
            f"e.g. \"{example(unit)}\""
        )
    if unit not in _RATIO_UNITS and not units.dimensionless:
        ratios = [name for name in re.findall(r"[^\W\d]\w*", str(units))
                  if registry.parse_units(name).dimensionless]
        if ratios:
            raise QuantityError(
                f"{key}: cannot read {shown} as one quantity (a ratio, {ratios[0]}, beside "
                f"the unit scales it); write one number and a unit in {unit.label}, e.g. "
                f"\"{example(unit)}\"")
    quantity = registry.Quantity(number, units)
    offset = _is_offset(registry, units)
    if unit is KELVIN_DIFFERENCE and offset:
        raise QuantityError(
            f"{key}: {shown} is a temperature, not a temperature difference; write it in K, "
            f"e.g. \"{example(unit)}\""
        )
    try:
        converted = quantity.to(unit.pint_unit)
    except OverflowError:
        raise
    except Exception:
        raise QuantityError(
            f"{key}: {shown} is not in {unit.label} (it is in {units:~}); "
            f"write it as e.g. \"{example(unit)}\""
        ) from None
    # 12 significant digits drop the binary noise of prefix arithmetic (2.2 nF -> 2.2e-09 exactly),
    # so that a preferred value typed by the user is recognised as one.
    return float(f"{float(converted.magnitude):.12g}")


def _is_offset(registry: Any, units: Any) -> bool:
    """True for a temperature scale with an offset zero (degC, degF): 0 of it is not 0 K."""
    if units.dimensionality != registry.kelvin.dimensionality:
        return False
    return registry.Quantity(0.0, units).to("kelvin").magnitude != 0.0


_EXAMPLES = {
    "V": "36 kV",
    "A": "30 mA",
    "ohm": "4.7 MOhm",
    "F": "2.2 nF",
    "C": "1.5 uC",
    "s": "2 us",
    "Hz": "50 Hz",
    "H": "10 uH",
    "W": "2 W",
    "A/s": "50 A/us",
    "K/W": "0.5 K/W",
    "V/K": "-2 mV/K",
    "1/K": "0.004 1/K",
    "degC": "45 degC",
    "K": "10 K",
    "1": "0.8",
}


def example(unit: Unit) -> str:
    """A quantity written in ``unit`` as a design file would, for error messages."""
    return _EXAMPLES.get(unit.label, unit.label)


# The SI prefixes of whole powers of 10^3 from tera to femto, largest first, "u" for micro (SI
# Brochure, 9th ed., 2019, chapter 3).
ENGINEERING_PREFIXES = ((1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"),
                        (1e-6, "u"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f"))


def format_quantity(value: float, unit_label: str, *, digits: int = 3) -> str:
    """Format ``value`` [SI] with an engineering prefix, e.g. ``format_quantity(4.7e6, "ohm")``.

    Temperatures ([degC], [K]), coefficients per kelvin ([1/K]) and dimensionless numbers are
    printed without a prefix.
    """
    if value is None or not math.isfinite(value):
        return f"{value} {unit_label}".strip()
    if unit_label in ("degC", "K", "1", "1/K", "%", ""):
        # A dimensionless number is printed bare, as the parser reads it back ("0.8", not "0.8 1").
        return f"{value:.{digits}g} {'' if unit_label == '1' else unit_label}".strip()
    if value == 0:
        return f"0 {unit_label}"
    magnitude = abs(value)
    for scale, prefix in ENGINEERING_PREFIXES:
        if magnitude >= scale * 0.9995:
            break
    text = f"{value / scale:.{digits}g}"
    if unit_label == "ohm":
        unit_label = "Ohm"
    return f"{text} {prefix}{unit_label}"
