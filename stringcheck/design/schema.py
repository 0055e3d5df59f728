"""The design file's key lists and the value reader shared by the table readers.

:class:`Reader` walks raw TOML tables: it converts quantities (checked against their unit), fractions,
integers, text and spreads, collects the assumptions made on the user's behalf, and raises a
:class:`~stringcheck.errors.DesignError` naming the file, the dotted key and the fix.
"""

from __future__ import annotations

import difflib
import math
from typing import Any, Mapping

from stringcheck.design.model import LOGNORMAL_PARAMETERS, SPREAD_UNITS, TYP_FRACTION_OF_MAX, Spread
from stringcheck.errors import DesignError, QuantityError
from stringcheck.findings import Finding, Value
from stringcheck.units import (
    AMPERE,
    AMPERE_PER_SECOND,
    CELSIUS,
    DIMENSIONLESS,
    VOLT,
    Unit,
    example,
    parse_quantity,
)

_CONDITION_UNITS = {"at_temperature": CELSIUS, "at_voltage": VOLT, "at_di_dt": AMPERE_PER_SECOND,
                    "at_forward_current": AMPERE}
SCHEMA_KEYS = {
    "design": ("title", "notes"),
    "duty": ("reverse_voltage", "forward_current", "waveform", "frequency", "di_dt", "ambient",
             "stray_inductance", "load_capacitance"),
    "circuit": ("topology", "stages", "phases", "secondary_voltage", "secondary_peak", "frequency",
                "load_current", "load_resistance", "commutation_inductance", "filter_capacitor",
                "stage_capacitor", "ambient"),
    "string": ("series", "parallel", "derating", "part", "position"),
    "position": ("index", "branch", "part", "temperature_rise", "serial"),
    "part": ("v_rrm", "i_fav", "i_r", "q_rr", "i_rm", "t_rr", "v_t0", "r_t", "c_j", "r_th_jc",
             "r_th_cs", "t_j_max", "leakage_doubling", "leakage_voltage_exponent", "tempco_v_t0",
             "tempco_r_t", "class", "measured", "fit"),
    "spread": ("min", "typ", "max", "at_temperature", "at_voltage", "at_di_dt", "at_forward_current",
               "screened"),
    "grading": ("resistor", "resistor_tolerance", "resistor_tcr", "resistor_rated_voltage",
                "resistor_rated_power", "capacitor", "capacitor_tolerance", "capacitor_rated_voltage",
                "damping_resistor", "resistor_distribution", "capacitor_distribution"),
    "thermal": ("heatsink", "r_th_sa", "path_resistance"),
    "monte_carlo": ("trials", "seed", "confidence", "sigma_at_limit", "screened", "lot_share",
                    "correlation"),
    "sizing": ("target_p_fail", "target_share", "resistor_series", "capacitor_series",
               "grading_current_multiple", "discharge_time", "capacitance_multiple",
               "stray_capacitance", "resistor_min", "resistor_max", "capacitor_min",
               "capacitor_max"),
    "review": ("tolerance", "stress_tolerance"),
    "faults": ("kinds",),
    "reliability": ("device_type", "base_rate", "quality", "environment", "contact"),
    "end_of_life": ("enabled", "resistor_drift", "resistor_drift_mode",
                    "resistor_voltage_coefficient", "capacitor_dc_bias", "surface_resistance",
                    "surface_fraction"),
}
TOP_LEVEL = ("design", "duty", "circuit", "string", "parts", "grading", "thermal", "monte_carlo",
             "sizing", "review", "faults", "reliability", "end_of_life")


class Reader:
    """Walks the raw TOML tables, converting values and collecting assumptions."""

    def __init__(self, source: str):
        self.source = source
        self.assumptions: list[Finding] = []

    def error(self, key: str, message: str) -> DesignError:
        return DesignError(message, source=self.source, key=key)

    def check_keys(self, table: Mapping[str, Any], allowed: tuple[str, ...], prefix: str) -> None:
        for key in table:
            if key not in allowed:
                close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
                hint = f"; did you mean '{close[0]}'?" if close else f"; valid keys: {', '.join(allowed)}"
                raise self.error(join_key(prefix, key), f"unknown key{hint}")

    def table(self, raw: Mapping[str, Any], key: str, prefix: str = "") -> Mapping[str, Any]:
        value = raw.get(key, {})
        if not isinstance(value, Mapping):
            raise self.error(join_key(prefix, key), f"must be a table ([{join_key(prefix, key)}]), "
                                                 f"not {type(value).__name__}")
        return value

    def quantity(self, table: Mapping[str, Any], key: str, unit: Unit, prefix: str, *,
                 required: bool = False, default: float | None = None, positive: bool = False,
                 non_negative: bool = False, note: Finding | None = None) -> float | None:
        """The quantity ``key`` of ``table`` in SI; ``note``: the assumption a ``default`` stands
        for (its values get the dotted ``key``)."""
        dotted = join_key(prefix, key)
        if key not in table:
            if required:
                raise self.error(dotted, f"missing; give it in {unit.label}, e.g. {_example(unit)}")
            if default is not None and note:
                self.assumptions.append(Finding(note.code, {"key": Value(dotted), **note.values}))
            return default
        # A value's tolerance key in the same table ("capacitor" -> "capacitor_tolerance"), named
        # when the text carries one after its unit ("2.2 nF 10 %").
        tolerance = f"{key}_tolerance"
        tolerance_key = join_key(prefix, tolerance) if tolerance in SCHEMA_KEYS.get(prefix, ()) \
            else None
        try:
            value = parse_quantity(table[key], unit, key=dotted, tolerance_key=tolerance_key)
        except QuantityError as error:
            message = str(error).removeprefix(f"{dotted}: ")
            raise DesignError(message, source=self.source, key=dotted) from None
        if positive and not value > 0:
            raise self.error(dotted, f"must be greater than zero, got {table[key]!r}")
        if non_negative and value < 0:
            raise self.error(dotted, f"must not be negative, got {table[key]!r}")
        return value

    def fraction(self, table: Mapping[str, Any], key: str, prefix: str, *, default: float,
                 low: float, high: float, low_open: bool = False, high_open: bool = True,
                 note: Finding | None = None) -> float:
        value = self.quantity(table, key, DIMENSIONLESS, prefix, default=default, note=note)
        assert value is not None
        below = value <= low if low_open else value < low
        above = value >= high if high_open else value > high
        if below or above:
            interval = f"{'(' if low_open else '['}{low:g}, {high:g}{')' if high_open else ']'}"
            raise self.error(join_key(prefix, key), f"must lie in {interval}, got {table.get(key)!r}")
        return value

    def integer(self, table: Mapping[str, Any], key: str, prefix: str, *, default: int | None = None,
                minimum: int = 1, maximum: int | None = None, cap: int | None = None) -> int:
        """A whole number in ``minimum..maximum``; ``cap`` is a limit of the tool, not the schema's."""
        dotted = join_key(prefix, key)
        if key not in table:
            if default is None:
                raise self.error(dotted, f"missing; give a whole number >= {minimum}")
            return default
        value = table[key]
        if isinstance(value, bool) or not isinstance(value, int):
            raise self.error(dotted, f"must be a whole number (no quotes, no unit), got {value!r}")
        if value < minimum or (maximum is not None and value > maximum):
            limit = f">= {minimum}" if maximum is None else f"in {minimum}..{maximum}"
            raise self.error(dotted, f"must be a whole number {limit}, got {value}")
        if cap is not None and value > cap:
            raise self.error(dotted, f"must be at most {cap:,} (the largest string this tool holds "
                                     f"in memory), got {value:,}")
        return value

    def text(self, table: Mapping[str, Any], key: str, prefix: str, *, default: str | None = None,
             choices: tuple[str, ...] | None = None) -> str | None:
        dotted = join_key(prefix, key)
        if key not in table:
            return default
        value = table[key]
        if not isinstance(value, str):
            raise self.error(dotted, f"must be text in quotes, got {value!r}")
        if choices is not None and value not in choices:
            raise self.error(dotted, f"must be one of {', '.join(repr(c) for c in choices)}, "
                                     f"got {value!r}")
        return value

    def spread(self, raw: Any, parameter: str, prefix: str, *, key: str | None = None) -> Spread:
        """One datasheet row of ``parameter``; ``key``: its dotted key where it is not
        ``prefix.parameter`` (a row of a list, ``parts.D.i_r[2]``)."""
        dotted = join_key(prefix, parameter) if key is None else key
        unit = SPREAD_UNITS[parameter]
        if not isinstance(raw, Mapping):
            value = self.quantity({parameter: raw}, parameter, unit, prefix, positive=True)
            assert value is not None
            return Spread(typ=value)
        self.check_keys(raw, SCHEMA_KEYS["spread"], dotted)
        lognormal = parameter in LOGNORMAL_PARAMETERS
        values = {}
        for bound in ("min", "typ", "max"):
            values[bound] = self.quantity(raw, bound, unit, dotted, positive=lognormal,
                                          non_negative=not lognormal)
        conditions = {name: self.quantity(raw, name, condition_unit, dotted,
                                          positive=name != "at_temperature")
                      for name, condition_unit in _CONDITION_UNITS.items()}
        low, typ, high = values["min"], values["typ"], values["max"]
        if low is not None and high is not None and low > high:
            raise self.error(dotted, f"min ({raw.get('min')!r}) is above max ({raw.get('max')!r}); "
                                     "min <= typ <= max")
        typ_assumed = False
        if typ is None:
            if high is None:
                raise self.error(dotted, "give at least 'typ' or 'max' (a lone 'min' says too little)")
            if low is not None:
                typ = math.sqrt(low * high) if lognormal else 0.5 * (low + high)
                how = "geometric_mean" if lognormal else "midpoint"
                self.assumptions.append(Finding(f"assumed.typ_{how}", {"key": Value(dotted)}))
            else:
                typ = TYP_FRACTION_OF_MAX[parameter] * high
                self.assumptions.append(Finding(
                    "assumed.typ_from_max",
                    {"key": Value(dotted), "fraction": Value(TYP_FRACTION_OF_MAX[parameter])}))
            typ_assumed = True
        if low is not None and low > typ:
            raise self.error(dotted, f"min ({raw.get('min')!r}) is above typ; min <= typ <= max")
        if high is not None and high < typ:
            raise self.error(dotted, f"typ is above max ({raw.get('max')!r}); min <= typ <= max")
        if lognormal and typ <= 0:
            raise self.error(dotted, "typ must be greater than zero")
        if low is not None and high is not None and low == high == typ:
            low = high = None
        screened = raw.get("screened")
        if screened is not None and not isinstance(screened, bool):
            raise self.error(join_key(dotted, "screened"),
                             f"must be true or false (no quotes), got {screened!r}")
        return Spread(typ=typ, low=low, high=high, typ_assumed=typ_assumed, screened=screened,
                      **conditions)


def join_key(prefix: str, key: str) -> str:
    return f"{prefix}.{key}" if prefix else key


def _example(unit: Unit) -> str:
    return f'"{example(unit)}"'


