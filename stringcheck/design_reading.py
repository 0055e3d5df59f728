"""Reading a design file: TOML text -> the validated dataclasses of :mod:`stringcheck.design`.

Every error names the file, the dotted key and what would be valid; unknown keys are errors with
the nearest valid key suggested; defaults taken on the user's behalf go into ``Design.assumptions``.
"""

from __future__ import annotations

import difflib
import math
import re
import tomllib
from dataclasses import replace
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from . import presets
from .design import (
    DEFAULT_AMBIENT,
    DEFAULT_CONFIDENCE,
    DEFAULT_DERATING,
    DEFAULT_SEED,
    DEFAULT_SIGMA_AT_LIMIT,
    DEFAULT_TARGET_P_FAIL,
    DEFAULT_TRIALS,
    HEATSINKS,
    LOGNORMAL_PARAMETERS,
    MAX_DEVICES,
    MAX_FILE_BYTES,
    MAX_LEAKAGE_DOUBLINGS,
    RESISTOR_TCR_REFERENCE,
    SIGMA_AT_LIMIT_RANGE,
    SPREAD_PARAMETERS,
    TYP_FRACTION_OF_MAX,
    WAVEFORMS,
    Design,
    Duty,
    Grading,
    MonteCarlo,
    Part,
    PositionOverride,
    Review,
    Sizing,
    Spread,
    StringLayout,
    Thermal,
    correlation_matrix,
)
from .errors import DesignError, QuantityError
from .quantity import (
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
    Unit,
    parse_quantity,
)

_SPREAD_UNITS = {"i_r": AMPERE, "q_rr": COULOMB, "i_rm": AMPERE, "t_rr": SECOND, "v_t0": VOLT,
                 "r_t": OHM}
_CONDITION_UNITS = {"at_temperature": CELSIUS, "at_voltage": VOLT, "at_di_dt": AMPERE_PER_SECOND,
                    "at_forward_current": AMPERE}
_PART_SCALARS = {"v_rrm": VOLT, "i_fav": AMPERE, "c_j": FARAD, "r_th_jc": KELVIN_PER_WATT,
                 "r_th_cs": KELVIN_PER_WATT, "t_j_max": CELSIUS, "leakage_doubling": KELVIN_DIFFERENCE,
                 "leakage_voltage_exponent": DIMENSIONLESS, "tempco_v_t0": VOLT_PER_KELVIN,
                 "tempco_r_t": PER_KELVIN}
_PART_DEFAULTS = {"leakage_doubling": 10.0, "leakage_voltage_exponent": 0.5, "c_j": 0.0,
                  "tempco_v_t0": -2e-3, "tempco_r_t": 0.0}
_PART_DEFAULT_NOTES = {
    "leakage_doubling": "leakage doubles every 10 K (silicon, common practice)",
    "leakage_voltage_exponent": "leakage grows as V^0.5 (generation current, abrupt junction)",
    "c_j": "junction capacitance 0 F (only the grading capacitor counts in the dynamic check)",
    "tempco_v_t0": "V_T0 temperature coefficient -2 mV/K (silicon PN, common practice)",
    "tempco_r_t": "r_T temperature coefficient 0 1/K",
}


_SCHEMA_KEYS = {
    "design": ("title", "notes"),
    "duty": ("reverse_voltage", "forward_current", "waveform", "frequency", "di_dt", "ambient",
             "stray_inductance"),
    "string": ("series", "parallel", "derating", "part", "position"),
    "position": ("index", "branch", "part", "temperature_rise", "serial"),
    "part": ("v_rrm", "i_fav", "i_r", "q_rr", "i_rm", "t_rr", "v_t0", "r_t", "c_j", "r_th_jc",
             "r_th_cs", "t_j_max", "leakage_doubling", "leakage_voltage_exponent", "tempco_v_t0",
             "tempco_r_t", "class", "measured", "fit"),
    "spread": ("min", "typ", "max", "at_temperature", "at_voltage", "at_di_dt", "at_forward_current"),
    "grading": ("resistor", "resistor_tolerance", "resistor_tcr", "resistor_rated_voltage",
                "resistor_rated_power", "capacitor", "capacitor_tolerance", "capacitor_rated_voltage",
                "damping_resistor"),
    "thermal": ("heatsink", "r_th_sa", "path_resistance"),
    "monte_carlo": ("trials", "seed", "confidence", "sigma_at_limit", "screened", "lot_share",
                    "correlation"),
    "sizing": ("target_p_fail", "target_share", "resistor_series", "capacitor_series"),
    "review": ("tolerance",),
}
_TOP_LEVEL = ("design", "duty", "string", "parts", "grading", "thermal", "monte_carlo", "sizing",
              "review")
_SERIES_NAMES = ("E6", "E12", "E24", "E48", "E96", "E192")


class _Reader:
    """Walks the raw TOML tables, converting values and collecting assumptions."""

    def __init__(self, source: str):
        self.source = source
        self.assumptions: list[str] = []

    def error(self, key: str, message: str) -> DesignError:
        return DesignError(message, source=self.source, key=key)

    def check_keys(self, table: Mapping[str, Any], allowed: tuple[str, ...], prefix: str) -> None:
        for key in table:
            if key not in allowed:
                close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
                hint = f"; did you mean '{close[0]}'?" if close else f"; valid keys: {', '.join(allowed)}"
                raise self.error(_join(prefix, key), f"unknown key{hint}")

    def table(self, raw: Mapping[str, Any], key: str, prefix: str = "") -> Mapping[str, Any]:
        value = raw.get(key, {})
        if not isinstance(value, Mapping):
            raise self.error(_join(prefix, key), f"must be a table ([{_join(prefix, key)}]), "
                                                 f"not {type(value).__name__}")
        return value

    def quantity(self, table: Mapping[str, Any], key: str, unit: Unit, prefix: str, *,
                 required: bool = False, default: float | None = None, positive: bool = False,
                 non_negative: bool = False, note: str | None = None) -> float | None:
        dotted = _join(prefix, key)
        if key not in table:
            if required:
                raise self.error(dotted, f"missing; give it in {unit.label}, e.g. {_example(unit)}")
            if default is not None and note:
                self.assumptions.append(f"{dotted} not given: {note}")
            return default
        try:
            value = parse_quantity(table[key], unit, key=dotted)
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
                 note: str | None = None) -> float:
        value = self.quantity(table, key, DIMENSIONLESS, prefix, default=default, note=note)
        assert value is not None
        below = value <= low if low_open else value < low
        above = value >= high if high_open else value > high
        if below or above:
            interval = f"{'(' if low_open else '['}{low:g}, {high:g}{')' if high_open else ']'}"
            raise self.error(_join(prefix, key), f"must lie in {interval}, got {table.get(key)!r}")
        return value

    def integer(self, table: Mapping[str, Any], key: str, prefix: str, *, default: int | None = None,
                minimum: int = 1, maximum: int | None = None, cap: int | None = None) -> int:
        """A whole number in ``minimum..maximum``; ``cap`` is a limit of the tool, not the schema's."""
        dotted = _join(prefix, key)
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
        dotted = _join(prefix, key)
        if key not in table:
            return default
        value = table[key]
        if not isinstance(value, str):
            raise self.error(dotted, f"must be text in quotes, got {value!r}")
        if choices is not None and value not in choices:
            raise self.error(dotted, f"must be one of {', '.join(repr(c) for c in choices)}, "
                                     f"got {value!r}")
        return value

    def spread(self, raw: Any, parameter: str, prefix: str) -> Spread:
        dotted = _join(prefix, parameter)
        unit = _SPREAD_UNITS[parameter]
        if not isinstance(raw, Mapping):
            value = self.quantity({parameter: raw}, parameter, unit, prefix, positive=True)
            assert value is not None
            return Spread(typ=value)
        self.check_keys(raw, _SCHEMA_KEYS["spread"], dotted)
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
                how = "geometric mean" if lognormal else "midpoint"
                self.assumptions.append(f"{dotted}: typ not given, taken as the {how} of min and max")
            else:
                typ = TYP_FRACTION_OF_MAX[parameter] * high
                self.assumptions.append(
                    f"{dotted}: only max given, typ taken as {TYP_FRACTION_OF_MAX[parameter]:g} x max")
            typ_assumed = True
        if low is not None and low > typ:
            raise self.error(dotted, f"min ({raw.get('min')!r}) is above typ; min <= typ <= max")
        if high is not None and high < typ:
            raise self.error(dotted, f"typ is above max ({raw.get('max')!r}); min <= typ <= max")
        if lognormal and typ <= 0:
            raise self.error(dotted, "typ must be greater than zero")
        if low is not None and high is not None and low == high == typ:
            low = high = None
        return Spread(typ=typ, low=low, high=high, typ_assumed=typ_assumed, **conditions)


def _join(prefix: str, key: str) -> str:
    return f"{prefix}.{key}" if prefix else key


def _example(unit: Unit) -> str:
    from .quantity import _example as example

    return f'"{example(unit)}"'


def load_design(path: str | Path) -> Design:
    """Read and validate the design file at ``path``.

    Raises
    ------
    DesignError
        For a missing, unreadable, empty, binary or oversized file, a folder, a pipe or a device, text
        that is not UTF-8, a TOML syntax error (with its line), and every key or value that is not
        valid (naming the key and the fix).
    """
    path = Path(path)
    source = str(path)
    try:
        if not path.exists():
            raise DesignError("no such file; check the path", source=source)
        if path.is_dir():
            raise DesignError("is a folder, not a design file", source=source)
        if not path.is_file():
            # A pipe or a device would block or never end; a design file is a regular file.
            raise DesignError("is not a regular file (a pipe or a device?); give a design file",
                              source=source)
        size = path.stat().st_size
        if size > MAX_FILE_BYTES:
            raise DesignError(f"is {size:,} bytes, too large for a design file (at most "
                              f"{MAX_FILE_BYTES:,}); check the path", source=source)
        with path.open("rb") as stream:
            data = stream.read(MAX_FILE_BYTES + 1)
    except OSError as error:
        reason = error.strerror or type(error).__name__
        raise DesignError(f"cannot be read ({reason})", source=source) from None
    if not data.strip():
        raise DesignError("the file is empty; start from `stringcheck new FILE`", source=source)
    if b"\x00" in data:
        raise DesignError("is a binary file, not a TOML design file", source=source)
    try:
        # utf-8-sig: some editors start a UTF-8 file with a byte-order mark, which TOML does not allow.
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        line = data[:error.start].count(b"\n") + 1
        raise DesignError(f"is not UTF-8 text (line {line}); save it as UTF-8",
                          source=source) from None
    return parse_design_text(text, source=source)


def parse_design_text(text: str, *, source: str = "<design>") -> Design:
    """Validate design-file text (TOML) into a :class:`Design`."""
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise DesignError(f"TOML syntax error: {error}{_quoted_line(text, str(error))}",
                          source=source) from None
    except ValueError:
        # tomllib lets Python's own limit on integer digits through as a plain ValueError.
        line = _line_of_long_number(text)
        raise DesignError(f"TOML syntax error: a number too long to read (line {line}); "
                          "write it in exponent form, e.g. 1e3", source=source) from None
    return parse_design(raw, source=source)


def _quoted_line(text: str, message: str) -> str:
    """``; line N reads: ...`` for a TOML error message that names its line, else ""."""
    found = re.search(r"at line (\d+)", message)
    if not found:
        return ""
    lines = text.split("\n")  # TOML counts lines by "\n" alone
    number = int(found.group(1))
    if not 1 <= number <= len(lines) or not lines[number - 1].strip():
        return ""
    line = "".join(c if c.isprintable() else "?" for c in " ".join(lines[number - 1].split()))
    if len(line) > 60:
        line = line[:57] + "..."
    return f"; line {number} reads: {line}"


def _line_of_long_number(text: str) -> int:
    found = re.search(r"\d[\d_]{4000,}", text)
    return text.count("\n", 0, found.start()) + 1 if found else 1


def parse_design(raw: Mapping[str, Any], *, source: str = "<design>") -> Design:
    """Validate an already-parsed design table into a :class:`Design`."""
    reader = _Reader(source)
    reader.check_keys(raw, _TOP_LEVEL, "")

    design_table = reader.table(raw, "design")
    reader.check_keys(design_table, _SCHEMA_KEYS["design"], "design")
    title = reader.text(design_table, "title", "design", default=Path(source).stem) or ""
    notes = reader.text(design_table, "notes", "design", default="") or ""

    parts = _read_parts(reader, raw)
    duty = _read_duty(reader, raw)
    string = _read_string(reader, raw, parts)
    grading = _read_grading(reader, raw)
    monte_carlo = _read_monte_carlo(reader, raw)
    sizing = _read_sizing(reader, raw)
    thermal = _read_thermal(reader, raw)
    review_table = reader.table(raw, "review")
    reader.check_keys(review_table, _SCHEMA_KEYS["review"], "review")
    review = Review(tolerance=reader.fraction(review_table, "tolerance", "review", default=0.0,
                                              low=0.0, high=1.0))

    design = Design(title=title, notes=notes, source=source, duty=duty, string=string,
                    parts=parts, grading=grading, monte_carlo=monte_carlo, sizing=sizing,
                    thermal=thermal, review=review, assumptions=tuple(reader.assumptions))
    _cross_check(reader, design)
    return design


def _read_parts(reader: _Reader, raw: Mapping[str, Any]) -> dict[str, Part]:
    parts_table = reader.table(raw, "parts")
    if not parts_table:
        raise reader.error("parts", "no parts defined; add a [parts.NAME] table with at least v_rrm "
                                    "(or class = one of " + ", ".join(presets.PRESET_NAMES) + ")")
    parts = {}
    for name, table in parts_table.items():
        prefix = f"parts.{name}"
        if not name.strip():
            raise reader.error(f'parts."{name}"', "a part needs a name; write [parts.NAME] with "
                                                  "a NAME such as MAIN")
        if not isinstance(table, Mapping):
            raise reader.error(prefix, f"must be a table ([{prefix}])")
        reader.check_keys(table, _SCHEMA_KEYS["part"], prefix)
        merged: dict[str, Any] = {}
        device_class = reader.text(table, "class", prefix)
        if device_class is not None:
            if device_class not in presets.PRESET_NAMES:
                close = difflib.get_close_matches(device_class, presets.PRESET_NAMES, n=1)
                hint = f"did you mean '{close[0]}'?" if close else \
                    "valid classes: " + ", ".join(presets.PRESET_NAMES)
                raise reader.error(_join(prefix, "class"), f"unknown device class {device_class!r}; "
                                                           + hint)
            merged.update(presets.preset(device_class))
            inherited = sorted(set(merged) - set(table))
            if inherited:
                reader.assumptions.append(
                    f"{prefix}: {', '.join(inherited)} taken from class '{device_class}'")
        merged.update({k: v for k, v in table.items() if k not in ("class", "measured", "fit")})
        scalars = {}
        for key, unit in _PART_SCALARS.items():
            default = _PART_DEFAULTS.get(key)
            scalars[key] = reader.quantity(
                merged, key, unit, prefix, required=(key == "v_rrm"), default=default,
                positive=key in ("v_rrm", "i_fav", "r_th_jc", "leakage_doubling"),
                non_negative=key in ("c_j", "r_th_cs"),
                note=_PART_DEFAULT_NOTES.get(key))
        exponent = scalars["leakage_voltage_exponent"]
        if not 0.0 <= exponent <= 1.0:
            raise reader.error(_join(prefix, "leakage_voltage_exponent"),
                               f"must lie in [0, 1] (0.5 for generation current), got {exponent:g}")
        spreads = {parameter: reader.spread(merged[parameter], parameter, prefix)
                   if parameter in merged else None for parameter in SPREAD_PARAMETERS}
        lot = _read_lot(reader, table, spreads, prefix)
        spreads["i_r"] = _leakage_conditions(reader, spreads["i_r"], scalars["v_rrm"], prefix)
        parts[name] = Part(name=name, device_class=device_class, measured=lot, **scalars,
                           **spreads)
    return parts


def _read_lot(reader: _Reader, table: Mapping[str, Any], spreads: dict[str, Spread | None],
              prefix: str):
    """The part's measured lot (``measured``, ``fit``), or None; fills in a spread for each
    measured parameter the datasheet does not give (the lot's median, min and max), so that test
    conditions and ratings have one home."""
    from .lots import FITS, read_lot

    fit = reader.text(table, "fit", prefix, choices=FITS)
    path_text = reader.text(table, "measured", prefix)
    if path_text is None:
        if fit is not None:
            raise reader.error(_join(prefix, "fit"), "says how to use a measured lot, but the part "
                                                     "has none; add measured = \"lot.csv\" or "
                                                     "remove fit")
        return None
    if not path_text.strip():
        raise reader.error(_join(prefix, "measured"), "is empty; give the lot's CSV file, e.g. "
                                                      "measured = \"lot42.csv\"")
    path = Path(path_text)
    if not path.is_absolute() and not reader.source.startswith("<"):
        path = Path(reader.source).parent / path
    lot = read_lot(path, key=_join(prefix, "measured"), design_source=reader.source,
                   fit=fit or "resample", datasheet=spreads)
    where = Path(path_text).name
    if fit is None:
        reader.assumptions.append(f"{prefix}: devices resampled from the measured lot {where} "
                                  "(fit not given)")
    for column in lot.columns:
        if spreads[column.parameter] is None:
            spreads[column.parameter] = Spread(typ=column.median,
                                               low=None if column.low == column.high else column.low,
                                               high=None if column.low == column.high else
                                               column.high)
            reader.assumptions.append(
                f"{prefix}.{column.parameter}: no datasheet row; the measured lot's median, min and "
                "max stand for it in the textbook bounds (test conditions as noted)")
    return lot


def _leakage_conditions(reader: _Reader, spread: Spread | None, v_rrm: float,
                        prefix: str) -> Spread | None:
    """Fill in the test conditions of a leakage spread that the datasheet row left out."""
    if spread is None:
        return None
    changes = {}
    if spread.at_voltage is None:
        changes["at_voltage"] = v_rrm
        reader.assumptions.append(f"{prefix}.i_r: at_voltage not given, taken at V_RRM "
                                  f"({v_rrm:g} V)")
    if spread.at_temperature is None:
        changes["at_temperature"] = DEFAULT_AMBIENT
        reader.assumptions.append(f"{prefix}.i_r: at_temperature not given, taken at 25 degC")
    return replace(spread, **changes) if changes else spread


def _read_duty(reader: _Reader, raw: Mapping[str, Any]) -> Duty:
    table = reader.table(raw, "duty")
    reader.check_keys(table, _SCHEMA_KEYS["duty"], "duty")
    if "duty" not in raw:
        raise reader.error("duty", "missing; add a [duty] table with at least reverse_voltage")
    waveform = reader.text(table, "waveform", "duty", default=None, choices=WAVEFORMS)
    if waveform is None:
        waveform = "dc"
        reader.assumptions.append("duty.waveform not given: dc (continuous reverse voltage)")
    return Duty(
        reverse_voltage=reader.quantity(table, "reverse_voltage", VOLT, "duty", required=True,
                                        positive=True),
        forward_current=reader.quantity(table, "forward_current", AMPERE, "duty", positive=True),
        waveform=waveform,
        frequency=reader.quantity(table, "frequency", HERTZ, "duty", positive=True),
        di_dt=reader.quantity(table, "di_dt", AMPERE_PER_SECOND, "duty", positive=True),
        ambient=reader.quantity(table, "ambient", CELSIUS, "duty", default=DEFAULT_AMBIENT,
                                note="ambient 25 degC") or 0.0,
        stray_inductance=reader.quantity(table, "stray_inductance", HENRY, "duty", positive=True),
    )


def _read_string(reader: _Reader, raw: Mapping[str, Any], parts: Mapping[str, Part]) -> StringLayout:
    table = reader.table(raw, "string")
    if "string" not in raw:
        raise reader.error("string", "missing; add a [string] table with at least series = N")
    reader.check_keys(table, _SCHEMA_KEYS["string"], "string")
    series = reader.integer(table, "series", "string", cap=MAX_DEVICES)
    parallel = reader.integer(table, "parallel", "string", default=1, cap=MAX_DEVICES)
    if series * parallel > MAX_DEVICES:
        raise reader.error("string.parallel", f"{parallel} branches of {series} devices make "
                                              f"{series * parallel:,} devices, more than the "
                                              f"{MAX_DEVICES:,} this tool can hold in memory")
    derating = reader.fraction(table, "derating", "string", default=DEFAULT_DERATING, low=0.0,
                               high=1.0, low_open=True, high_open=False,
                               note=f"derating {DEFAULT_DERATING:g} x V_RRM (common practice)")
    default_part = reader.text(table, "part", "string")
    if default_part is None:
        if len(parts) != 1:
            raise reader.error("string.part", "missing; name the default part (one of "
                                              + ", ".join(parts) + ")")
        default_part = next(iter(parts))
    _check_part_name(reader, "string.part", default_part, parts)
    raw_positions = table.get("position", [])
    if not isinstance(raw_positions, list):
        raise reader.error("string.position", "must be an array of tables ([[string.position]])")
    positions = []
    seen: dict[tuple[int, int], int] = {}
    for number, entry in enumerate(raw_positions, start=1):
        prefix = f"string.position[{number}]"
        if not isinstance(entry, Mapping):
            raise reader.error(prefix, "must be a table ([[string.position]])")
        reader.check_keys(entry, _SCHEMA_KEYS["position"], prefix)
        index = reader.integer(entry, "index", prefix, maximum=series)
        branch = reader.integer(entry, "branch", prefix, default=0, minimum=1, maximum=parallel)
        part = reader.text(entry, "part", prefix)
        if part is not None:
            _check_part_name(reader, _join(prefix, "part"), part, parts)
        rise = reader.quantity(entry, "temperature_rise", KELVIN_DIFFERENCE, prefix,
                               non_negative=True)
        serial = reader.text(entry, "serial", prefix)
        if serial is not None:
            serial = serial.strip()
            if not serial:
                raise reader.error(_join(prefix, "serial"), "is empty; give the serial number of "
                                                            "the measured device, or remove it")
            if branch == 0 and parallel > 1:
                raise reader.error(_join(prefix, "serial"), f"names one device, but the entry "
                                                            f"covers all {parallel} branches; "
                                                            "add branch = N")
        # Two entries for the same place would leave one of them silently unused. An entry for every
        # branch (no branch key) and one for a single branch may stand together: the single branch's
        # entry wins, whatever their order (StringLayout._grid).
        if (index, branch) in seen:
            where = f"index {index}" + (f", branch {branch}" if branch else " (every branch)")
            first = seen[index, branch]
            raise reader.error(prefix, f"{where} is already set by string.position[{first}]; "
                                       "merge the two entries")
        seen[index, branch] = number
        positions.append(PositionOverride(index=index, branch=branch or None, part=part,
                                          temperature_rise=rise, serial=serial))
    return StringLayout(series=series, parallel=parallel, derating=derating, part=default_part,
                        positions=tuple(positions))


def _check_part_name(reader: _Reader, key: str, name: str, parts: Mapping[str, Part]) -> None:
    if name not in parts:
        close = difflib.get_close_matches(name, list(parts), n=1)
        hint = f"did you mean '{close[0]}'?" if close else "defined parts: " + ", ".join(parts)
        raise reader.error(key, f"no part named {name!r}; {hint}")


def _read_grading(reader: _Reader, raw: Mapping[str, Any]) -> Grading:
    table = reader.table(raw, "grading")
    reader.check_keys(table, _SCHEMA_KEYS["grading"], "grading")
    prefix = "grading"
    return Grading(
        resistor=reader.quantity(table, "resistor", OHM, prefix, positive=True),
        resistor_tolerance=reader.fraction(table, "resistor_tolerance", prefix, default=0.0,
                                           low=0.0, high=1.0),
        resistor_tcr=reader.quantity(table, "resistor_tcr", PER_KELVIN, prefix, default=0.0) or 0.0,
        resistor_rated_voltage=reader.quantity(table, "resistor_rated_voltage", VOLT, prefix,
                                               positive=True),
        resistor_rated_power=reader.quantity(table, "resistor_rated_power", WATT, prefix,
                                             positive=True),
        capacitor=reader.quantity(table, "capacitor", FARAD, prefix, positive=True),
        capacitor_tolerance=reader.fraction(table, "capacitor_tolerance", prefix, default=0.0,
                                            low=0.0, high=1.0),
        capacitor_rated_voltage=reader.quantity(table, "capacitor_rated_voltage", VOLT, prefix,
                                                positive=True),
        damping_resistor=reader.quantity(table, "damping_resistor", OHM, prefix, positive=True),
    )


def _read_monte_carlo(reader: _Reader, raw: Mapping[str, Any]) -> MonteCarlo:
    table = reader.table(raw, "monte_carlo")
    prefix = "monte_carlo"
    reader.check_keys(table, _SCHEMA_KEYS[prefix], prefix)
    screened = table.get("screened", True)
    if not isinstance(screened, bool):
        raise reader.error("monte_carlo.screened", f"must be true or false, got {screened!r}")
    correlation = []
    raw_correlation = reader.table(table, "correlation", prefix)
    for key, value in raw_correlation.items():
        dotted = f"{prefix}.correlation.{key}"
        names = key.split("-")
        if len(names) != 2 or any(name not in SPREAD_PARAMETERS for name in names) or \
                names[0] == names[1]:
            raise reader.error(dotted, "name two different parameters joined by '-', e.g. "
                                       "q_rr-v_t0 = -0.5; parameters: " + ", ".join(SPREAD_PARAMETERS))
        if isinstance(value, bool) or not isinstance(value, (int, float)) or \
                not -1.0 < float(value) < 1.0:
            raise reader.error(dotted, f"must be a number in (-1, 1), got {value!r}")
        correlation.append((names[0], names[1], float(value)))
    return MonteCarlo(
        trials=reader.integer(table, "trials", prefix, default=DEFAULT_TRIALS),
        seed=reader.integer(table, "seed", prefix, default=DEFAULT_SEED, minimum=0),
        confidence=reader.fraction(table, "confidence", prefix, default=DEFAULT_CONFIDENCE, low=0.0,
                                   high=1.0, low_open=True),
        sigma_at_limit=reader.fraction(table, "sigma_at_limit", prefix,
                                       default=DEFAULT_SIGMA_AT_LIMIT, low=SIGMA_AT_LIMIT_RANGE[0],
                                       high=SIGMA_AT_LIMIT_RANGE[1], high_open=False),
        screened=screened,
        lot_share=reader.fraction(table, "lot_share", prefix, default=0.0, low=0.0, high=1.0),
        correlation=tuple(correlation),
    )


def _read_sizing(reader: _Reader, raw: Mapping[str, Any]) -> Sizing:
    table = reader.table(raw, "sizing")
    prefix = "sizing"
    reader.check_keys(table, _SCHEMA_KEYS[prefix], prefix)
    series = {}
    for key, default in (("resistor_series", "E96"), ("capacitor_series", "E12")):
        value = reader.text(table, key, prefix, default=default)
        assert value is not None
        if value.upper() not in _SERIES_NAMES:
            raise reader.error(_join(prefix, key), f"unknown preferred-value series {value!r}; "
                                                   "one of " + ", ".join(_SERIES_NAMES))
        series[key] = value.upper()
    target_share = reader.quantity(table, "target_share", DIMENSIONLESS, prefix)
    if target_share is not None and not target_share >= 1.0:
        raise reader.error("sizing.target_share", "must be >= 1 (max branch current / mean), "
                                                  f"got {table['target_share']!r}")
    return Sizing(
        target_p_fail=reader.fraction(table, "target_p_fail", prefix, default=DEFAULT_TARGET_P_FAIL,
                                      low=0.0, high=1.0, low_open=True),
        target_share=target_share,
        **series,
    )


def _read_thermal(reader: _Reader, raw: Mapping[str, Any]) -> Thermal:
    table = reader.table(raw, "thermal")
    prefix = "thermal"
    reader.check_keys(table, _SCHEMA_KEYS[prefix], prefix)
    return Thermal(
        heatsink=reader.text(table, "heatsink", prefix, default="separate", choices=HEATSINKS) or "",
        r_th_sa=reader.quantity(table, "r_th_sa", KELVIN_PER_WATT, prefix, non_negative=True),
        path_resistance=reader.quantity(table, "path_resistance", OHM, prefix, default=0.0,
                                        non_negative=True) or 0.0,
    )


def _cross_check(reader: _Reader, design: Design) -> None:
    """Checks that need more than one table: temperatures against limits, what each check needs."""
    if design.monte_carlo.correlation:
        try:
            np.linalg.cholesky(correlation_matrix(design.monte_carlo.correlation, SPREAD_PARAMETERS))
        except np.linalg.LinAlgError:
            raise reader.error("monte_carlo.correlation", "the correlations given do not form a valid "
                                                          "(positive definite) correlation matrix; "
                                                          "make them weaker") from None
    grid = design.string.part_grid()
    rise = design.string.temperature_rise_grid()
    _check_serials(reader, design, grid)
    for name in design.parts_used():
        part = design.parts[name]
        if part.t_j_max is not None:
            hottest = design.duty.ambient + float(rise[grid == name].max())
            if hottest >= part.t_j_max:
                raise reader.error("duty.ambient",
                                   f"ambient plus temperature rise ({hottest:g} degC) is not below "
                                   f"t_j_max of part '{name}' ({part.t_j_max:g} degC); lower it")
        if part.i_r is None:
            raise reader.error(f"parts.{name}.i_r", "missing; the static check needs the reverse "
                                                    "leakage, e.g. i_r = { max = \"0.5 mA\", "
                                                    "at_temperature = \"125 degC\" }")
        temperatures = design.duty.ambient + rise[grid == name]
        reference = part.i_r.at_temperature if part.i_r.at_temperature is not None else \
            DEFAULT_AMBIENT
        farthest = float(temperatures[np.argmax(np.abs(temperatures - reference))])
        doublings = abs(farthest - reference) / part.leakage_doubling
        if doublings > MAX_LEAKAGE_DOUBLINGS:
            raise reader.error(f"parts.{name}.leakage_doubling",
                               f"referring the leakage from {reference:g} degC to "
                               f"{farthest:g} degC takes {doublings:.3g} "
                               f"doublings (factor 2^{doublings:.3g}), more than "
                               f"{MAX_LEAKAGE_DOUBLINGS}; check leakage_doubling (about 10 K for "
                               "silicon), i_r.at_temperature and duty.ambient")
    tcr = design.grading.resistor_tcr
    if design.grading.resistor is not None and tcr != 0.0:
        temperatures = design.duty.ambient + rise
        extreme = float(temperatures.max() if tcr < 0 else temperatures.min())
        factor = 1.0 + tcr * (extreme - RESISTOR_TCR_REFERENCE)
        if not factor > 0.0:
            raise reader.error("grading.resistor_tcr",
                               f"at {extreme:g} degC the grading resistor would be {factor:.3g} x its "
                               f"nominal value (referred to {RESISTOR_TCR_REFERENCE:g} degC), not "
                               "positive; a TCR is usually given in ppm/K, e.g. \"100 ppm/K\"")


def _check_serials(reader: _Reader, design: Design, grid: np.ndarray) -> None:
    """Each serial names a device of its position's lot, once; a resampled lot covers the string."""
    serials = design.string.serial_grid()
    used: dict[tuple[str, str], tuple[int, int]] = {}
    for override_number, override in enumerate(design.string.positions, start=1):
        if override.serial is None:
            continue
        key = f"string.position[{override_number}].serial"
        row = (override.branch or 1) - 1
        name = grid[row, override.index - 1]
        lot = design.parts[name].measured
        if lot is None:
            raise reader.error(key, f"position {override.index} holds part '{name}', which has no "
                                    "measured lot; give that part measured = \"lot.csv\" with a "
                                    "serial column")
        if lot.serials is None:
            raise reader.error(key, f"the lot of part '{name}' ({Path(lot.path).name}) has no "
                                    "'serial' column; add one")
        if lot.row_of(override.serial) is None:
            raise reader.error(key, f"no device {override.serial!r} in the lot of part '{name}' "
                                    f"({Path(lot.path).name}); check the serial number")
        if (name, override.serial) in used:
            branch, index = used[name, override.serial]
            raise reader.error(key, f"device {override.serial!r} already stands in position "
                                    f"{index} (branch {branch}); one device, one position")
        used[name, override.serial] = (row + 1, override.index)
    for name in design.parts_used():
        lot = design.parts[name].measured
        if lot is None or not lot.resampled:
            continue
        drawn = int(np.count_nonzero((grid == name) & (serials == None)))  # noqa: E711
        pinned = int(np.count_nonzero((grid == name) & (serials != None)))  # noqa: E711
        available = lot.devices - pinned
        if drawn > available:
            raise reader.error(f"parts.{name}.measured",
                               f"the lot {Path(lot.path).name} holds {lot.devices} device(s)"
                               + (f", {pinned} of them placed by serial," if pinned else "")
                               + f" but the string draws {drawn} from it; a built string takes "
                               "each device once: measure more devices, or use a fit "
                               "(fit = \"auto\")")
