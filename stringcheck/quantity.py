"""Quantities with units: ``"36 kV"``, ``"4.7 MOhm"``, ``"50 A/us"``, ``"45 degC"`` -> float in SI.

Parsing and the dimension check use pint, the ecosystem's unit library, so that every prefix and
compound unit it knows is accepted. pint is imported on first use only: ``stringcheck --help`` and the
other commands that read no design file do not pay its import time.

Temperatures are the one exception to "SI": absolute temperatures come back in [degC] (the unit the
trade and the design file use) and temperature differences in [K]. A bare number is taken as already
being in the expected unit (SI base, or degC / K for temperatures).
"""

from __future__ import annotations

import math
import re
import unicodedata
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

from .errors import QuantityError


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
CELSIUS = Unit("degC", "degC", absolute_temperature=True)
KELVIN_DIFFERENCE = Unit("K", "kelvin")
DIMENSIONLESS = Unit("1", "dimensionless")

# Spellings the trade writes that pint does not read as they stand.
_SPELLINGS = (
    (re.compile(r"(?<![A-Za-z])([kMGTmunpfµμ]?)(?:Ohm|OHM|ohms|Ohms)\b"), r"\1ohm"),
    (re.compile(r"Ω"), "ohm"),
    (re.compile(r"(?<![A-Za-z])([kMGTmunpfµμ]?)R\b"), r"\1ohm"),
    (re.compile(r"°C"), "degC"),
    (re.compile(r"\bdeg\s?C\b"), "degC"),
    (re.compile(r"µ|μ"), "u"),
    (re.compile(r"%"), "percent"),
    (re.compile(r"\bppm\s*/\s*K\b"), "ppm / kelvin"),
)


@lru_cache(maxsize=1)
def _registry() -> Any:
    import pint  # deferred: see the module docstring

    registry = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return registry


def _normalise(text: str) -> str:
    # NFC maps U+2126 OHM SIGN onto U+03A9 and the compatibility micro sign stays as it is.
    text = unicodedata.normalize("NFC", text)
    for pattern, replacement in _SPELLINGS:
        text = pattern.sub(replacement, text)
    return text.strip()


def parse_quantity(value: Any, unit: Unit, *, key: str = "value") -> float:
    """Read ``value`` as a quantity in ``unit`` and return the float in that unit.

    Parameters
    ----------
    value
        A string with a number and a unit (``"2.2 nF"``), or a bare int/float already in ``unit``.
    unit
        The expected unit (one of the module constants). A value of a different dimension is an error.
    key
        The design-file key the value belongs to, used in the error message.

    Returns
    -------
    float
        The value in the SI unit (absolute temperatures in [degC], differences in [K]).

    Raises
    ------
    QuantityError
        When the text is not a quantity, the unit has the wrong dimension, a unit is missing where the
        number alone would be ambiguous, the text holds a power (``**``, ``^``), the value is not
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
            f"{key}: expected a quantity in {unit.label} such as \"{_example(unit)}\", "
            f"got {type(value).__name__}"
        )
    text = _normalise(value)
    if not text:
        raise QuantityError(f"{key}: empty value; give a quantity such as \"{_example(unit)}\"")
    try:
        number = float(text)
    except ValueError:
        number = None
    if number is not None:
        if not math.isfinite(number):
            raise QuantityError(f"{key}: the value {value!r} is not finite; give a finite number")
        if unit is not DIMENSIONLESS:
            # A quoted number without a unit is more likely a slip than a deliberate SI value;
            # a bare TOML number (no quotes) is the way to give SI.
            raise QuantityError(
                f"{key}: {value!r} has no unit; write it with a unit in {unit.label}, "
                f"e.g. \"{_example(unit)}\", or as a bare number in {unit.label}"
            )
        return number
    if _POWER.search(text):
        # pint evaluates powers of integers exactly: "10**10**10 V" would never finish. No unit of
        # the design file needs a power, so none is read.
        raise QuantityError(
            f"{key}: cannot read {value!r} as a quantity: powers (**, ^) are not accepted; write a "
            f"number and a unit, e.g. \"{_example(unit)}\" (1e3 for a thousand)"
        )
    if not re.search(r"\d|\b(?:nan|inf)", text, re.IGNORECASE):
        # "kV" alone is almost surely an edit that lost its number; pint would read it as 1 kV.
        raise QuantityError(
            f"{key}: cannot read {value!r} as a quantity: it has no number; write a number and a "
            f"unit, e.g. \"{_example(unit)}\""
        )
    try:
        number = _convert_with_pint(text, value, unit, key)
    except OverflowError:
        number = math.inf
    if not math.isfinite(number):
        raise QuantityError(f"{key}: the value {value!r} is not finite; give a finite number")
    return _checked_temperature(number, value, unit, key)


# Absolute zero in [degC] (SI Brochure 2.3.1: T/degC = T/K - 273.15).
ABSOLUTE_ZERO = -273.15
_POWER = re.compile(r"\*\*|\^|[\u2070\u00b9\u00b2\u00b3\u2074-\u207f]")


def _checked_temperature(number: float, value: Any, unit: Unit, key: str) -> float:
    """An absolute temperature must lie above absolute zero."""
    if unit.absolute_temperature and not number > ABSOLUTE_ZERO:
        raise QuantityError(f"{key}: {value!r} is not above absolute zero ({ABSOLUTE_ZERO:g} degC); "
                            f"give a temperature such as \"{_example(unit)}\"")
    return number


def _shown(value: Any) -> str:
    """``repr`` of a number; a huge integer is described (its repr may be too long, or refused)."""
    if isinstance(value, int) and abs(value) >= 10**30:
        digits = int(value.bit_length() * math.log10(2)) + 1
        return f"(an integer of about {digits} digits)"
    return repr(value)


def _convert_with_pint(text: str, value: Any, unit: Unit, key: str) -> float:
    """Read normalised ``text`` with pint and convert it to ``unit``; may raise OverflowError."""
    registry = _registry()
    try:
        quantity = registry.Quantity(text)
    except Exception as error:  # pint raises several unrelated types for unreadable text
        raise QuantityError(
            f"{key}: cannot read {value!r} as a quantity ({type(error).__name__}); "
            f"write a number and a unit, e.g. \"{_example(unit)}\""
        ) from None
    if not hasattr(quantity, "units"):
        return parse_quantity(float(quantity), unit, key=key)
    if quantity.dimensionless and unit is not DIMENSIONLESS:
        raise QuantityError(
            f"{key}: {value!r} has no unit; write it with a unit in {unit.label}, "
            f"e.g. \"{_example(unit)}\""
        )
    if unit is KELVIN_DIFFERENCE and str(quantity.units) in ("degree_Celsius", "degree_Fahrenheit"):
        raise QuantityError(
            f"{key}: {value!r} is a temperature, not a temperature difference; write it in K, "
            f"e.g. \"{_example(unit)}\""
        )
    try:
        converted = quantity.to(unit.pint_unit)
    except Exception:
        raise QuantityError(
            f"{key}: {value!r} is not in {unit.label} (it is in {quantity.units:~}); "
            f"write it as e.g. \"{_example(unit)}\""
        ) from None
    # 12 significant digits drop the binary noise of prefix arithmetic (2.2 nF -> 2.2e-09 exactly),
    # so that a preferred value typed by the user is recognised as one.
    return float(f"{float(converted.magnitude):.12g}")


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


def _example(unit: Unit) -> str:
    return _EXAMPLES.get(unit.label, unit.label)


def format_quantity(value: float, unit_label: str, *, digits: int = 3) -> str:
    """Format ``value`` [SI] with an engineering prefix, e.g. ``format_quantity(4.7e6, "ohm")``.

    Temperatures ([degC], [K]) and dimensionless numbers are printed without a prefix.
    """
    if value is None or not math.isfinite(value):
        return f"{value} {unit_label}".strip()
    if unit_label in ("degC", "K", "1", "%", ""):
        return f"{value:.{digits}g} {unit_label}".strip()
    if value == 0:
        return f"0 {unit_label}"
    prefixes = ((1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"),
                (1e-6, "u"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f"))
    magnitude = abs(value)
    for scale, prefix in prefixes:
        if magnitude >= scale * 0.9995:
            break
    text = f"{value / scale:.{digits}g}"
    if unit_label == "ohm":
        unit_label = "Ohm"
    return f"{text} {prefix}{unit_label}"
