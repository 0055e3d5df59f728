"""Reading the ``[parts.NAME]`` tables: device classes, scalar ratings, spreads, measured lots, and
the serial numbers of measured devices placed in positions.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import replace
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from stringcheck.constants import DATASHEET_TEMPERATURE
from stringcheck.design import device_classes as presets
from stringcheck.design.junction import is_rows, read_junction_rows
from stringcheck.design.model import SPREAD_PARAMETERS, Design, Part, Spread
from stringcheck.findings import Finding, Value
from stringcheck.units import (
    AMPERE,
    CELSIUS,
    DIMENSIONLESS,
    FARAD,
    KELVIN_DIFFERENCE,
    KELVIN_PER_WATT,
    PER_KELVIN,
    VOLT,
    VOLT_PER_KELVIN,
)

from stringcheck.design.schema import SCHEMA_KEYS, Reader, join_key

_PART_SCALARS = {"v_rrm": VOLT, "i_fav": AMPERE, "c_j": FARAD, "r_th_jc": KELVIN_PER_WATT,
                 "r_th_cs": KELVIN_PER_WATT, "t_j_max": CELSIUS, "leakage_doubling": KELVIN_DIFFERENCE,
                 "leakage_voltage_exponent": DIMENSIONLESS, "tempco_v_t0": VOLT_PER_KELVIN,
                 "tempco_r_t": PER_KELVIN}
_PART_DEFAULTS = {"leakage_doubling": 10.0, "leakage_voltage_exponent": 0.5, "c_j": 0.0,
                  "tempco_v_t0": -2e-3, "tempco_r_t": 0.0}
# The assumption each default stands for (its sentence in ``report.wording``).
_PART_DEFAULT_NOTES = {key: Finding(f"assumed.part_{key}") for key in (
    "leakage_doubling", "leakage_voltage_exponent", "c_j", "tempco_v_t0", "tempco_r_t")}


def read_parts(reader: Reader, raw: Mapping[str, Any]) -> dict[str, Part]:
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
        reader.check_keys(table, SCHEMA_KEYS["part"], prefix)
        merged: dict[str, Any] = {}
        device_class = reader.text(table, "class", prefix)
        if device_class is not None:
            if device_class not in presets.PRESET_NAMES:
                close = difflib.get_close_matches(device_class, presets.PRESET_NAMES, n=1)
                hint = f"did you mean '{close[0]}'?" if close else \
                    "valid classes: " + ", ".join(presets.PRESET_NAMES)
                raise reader.error(join_key(prefix, "class"), f"unknown device class {device_class!r}; "
                                                           + hint)
            merged.update(presets.preset(device_class))
            inherited = sorted(set(merged) - set(table))
            if inherited:
                reader.assumptions.append(Finding(
                    "assumed.from_class", {"key": Value(prefix), "keys": Value(", ".join(inherited)),
                                           "device_class": Value(device_class)}))
        merged.update({k: v for k, v in table.items() if k not in ("class", "measured", "fit")})
        row_lists = {parameter: _read_rows(reader, merged[parameter], parameter, prefix)
                     for parameter in SPREAD_PARAMETERS
                     if isinstance(merged.get(parameter), list)}
        fitted = {_FITTED_FROM_ROWS[parameter]: parameter for parameter, rows in row_lists.items()
                  if parameter in _FITTED_FROM_ROWS and len(rows) >= 2}
        for key, parameter in fitted.items():
            if key in table:
                raise reader.error(join_key(prefix, key),
                                   f"is fitted from the {len(row_lists[parameter])} rows of "
                                   f"{join_key(prefix, parameter)}; give either the rows or "
                                   f"{key}, not both")
            merged.pop(key, None)  # a class's value gives way to the rows
        junction_rows = None
        if is_rows(merged.get("c_j")):
            junction_rows = read_junction_rows(reader, merged["c_j"], prefix, device_class)
            # The constant c_j the rows stand for where a check has no C_j(V): the row at the
            # highest voltage, nearest a blocking stage's.
            merged["c_j"] = f"{junction_rows.rows[-1].typ!r} F"
        scalars = {}
        for key, unit in _PART_SCALARS.items():
            if key in fitted:
                scalars[key] = _fit_from_rows(reader, key, row_lists[fitted[key]], prefix)
                continue
            default = _PART_DEFAULTS.get(key)
            scalars[key] = reader.quantity(
                merged, key, unit, prefix, required=(key == "v_rrm"), default=default,
                positive=key in ("v_rrm", "i_fav", "r_th_jc", "leakage_doubling"),
                non_negative=key in ("c_j", "r_th_cs"),
                note=_PART_DEFAULT_NOTES.get(key))
        exponent = scalars["leakage_voltage_exponent"]
        if not 0.0 <= exponent <= 1.0:
            raise reader.error(join_key(prefix, "leakage_voltage_exponent"),
                               f"must lie in [0, 1] (0.5 for generation current), got {exponent:g}")
        spreads = {parameter: row_lists[parameter][-1] if parameter in row_lists else
                   reader.spread(merged[parameter], parameter, prefix)
                   if parameter in merged else None for parameter in SPREAD_PARAMETERS}
        lot = _read_lot(reader, table, spreads, prefix)
        if "i_r" in row_lists:
            row_lists["i_r"] = _leakage_rows(reader, row_lists["i_r"], scalars["v_rrm"], prefix)
            spreads["i_r"] = row_lists["i_r"][-1]
        else:
            spreads["i_r"] = _leakage_conditions(reader, spreads["i_r"], scalars["v_rrm"], prefix)
        # The model names the quantities as the physics does (the file keys carry "leakage_").
        scalars["doubling_temperature"] = scalars.pop("leakage_doubling")
        scalars["voltage_exponent"] = scalars.pop("leakage_voltage_exponent")
        rates = _recovery_law(reader, device_class, spreads, row_lists, prefix)
        # The recovery charge is the junction's own (integral of C_j dV up to the stage voltage)
        # for a SiC Schottky diode, and for a part giving c_j but no q_rr, nor the i_rm and t_rr
        # a stored charge is derived from.
        capacitive = device_class == "sic-schottky" or (
            "c_j" in merged and "q_rr" not in merged
            and not ("i_rm" in merged and "t_rr" in merged))
        parts[name] = Part(name=name, device_class=device_class, measured=lot, **scalars,
                           **spreads,
                           temperature_rows=tuple((parameter, rows)
                                                  for parameter, rows in row_lists.items()
                                                  if len(rows) >= 2),
                           recovery_rates=rates, junction_rows=junction_rows,
                           capacitive=capacitive)
    return parts


# The scalar key each parameter's rows replace when two or more are given (fitted from them).
_FITTED_FROM_ROWS = {"i_r": "leakage_doubling", "v_t0": "tempco_v_t0", "r_t": "tempco_r_t"}
_RECOVERY_PARAMETERS = ("q_rr", "i_rm", "t_rr")


def _read_rows(reader: Reader, raw: list, parameter: str, prefix: str) -> tuple[Spread, ...]:
    """A list of datasheet rows of ``parameter``, each with its ``at_temperature``, sorted by it."""
    dotted = join_key(prefix, parameter)
    if not raw:
        raise reader.error(dotted, "is an empty list; give one row, or a list of rows at different "
                                   "at_temperature")
    rows = []
    for number, entry in enumerate(raw, start=1):
        key = f"{dotted}[{number}]"
        if not isinstance(entry, Mapping):
            raise reader.error(key, "must be a row { typ = ..., max = ..., at_temperature = ... }")
        row = reader.spread(entry, parameter, prefix, key=key)
        if len(raw) > 1 and row.at_temperature is None:
            raise reader.error(key, "needs at_temperature: the rows of a list differ by their "
                                    "junction temperature")
        rows.append((number, row))
    rows.sort(key=lambda item: -np.inf if item[1].at_temperature is None
              else item[1].at_temperature)
    for (first, cool), (second, hot) in zip(rows, rows[1:]):
        if cool.at_temperature == hot.at_temperature:
            raise reader.error(f"{dotted}[{second}]",
                               f"is at {hot.at_temperature:g} degC like {dotted}[{first}]; each "
                               "row of the list at its own at_temperature (merge the two rows)")
        if parameter == "i_r" and not hot.typ > cool.typ:
            raise reader.error(f"{dotted}[{second}]",
                               f"leakage at {hot.at_temperature:g} degC (typ {hot.typ:.3g} A) is "
                               f"not above the row at {cool.at_temperature:g} degC "
                               f"(typ {cool.typ:.3g} A); leakage rises with temperature, check "
                               "the rows' values and at_temperature")
    return tuple(row for _, row in rows)


def _fit_from_rows(reader: Reader, key: str, rows: tuple[Spread, ...], prefix: str) -> float:
    """``key`` (leakage_doubling [K], tempco_v_t0 [V/K], tempco_r_t [1/K]) through the typical
    values of the coolest and the hottest row, referred to the hottest (the part's own row)."""
    cool, hot = rows[0], rows[-1]
    span = hot.at_temperature - cool.at_temperature
    if key == "leakage_doubling":
        # x(T) = x_cool 2^((T - T_cool) / T_double) through both rows (the design layer sits
        # below physics, so the arithmetic of physics.temperature_laws is written out here).
        value = span * math.log(2.0) / math.log(hot.typ / cool.typ)
        unit = "K"
    elif key == "tempco_v_t0":
        value, unit = (hot.typ - cool.typ) / span, "V/K"
    else:  # r(T) = r_hot (1 + alpha (T - T_hot)) through r_cool
        value, unit = (1.0 - cool.typ / hot.typ) / span, "1/K"
    reader.assumptions.append(Finding("rows.fitted", {
        "key": Value(join_key(prefix, key)), "value": Value(value, unit),
        "cool": Value(cool.at_temperature, "degC"), "hot": Value(hot.at_temperature, "degC")}))
    return value


def _leakage_rows(reader: Reader, rows: tuple[Spread, ...], v_rrm: float,
                  prefix: str) -> tuple[Spread, ...]:
    """Leakage rows at one reverse voltage (each taken at V_RRM where it gives none)."""
    filled = []
    for row in rows:
        if row.at_voltage is None:
            row = replace(row, at_voltage=v_rrm)
        filled.append(row)
    voltages = {row.at_voltage for row in filled}
    if len(voltages) > 1:
        raise reader.error(join_key(prefix, "i_r"),
                           "rows at different at_voltage; give every leakage row at one reverse "
                           "voltage (refer them with leakage_voltage_exponent by hand)")
    if any(row.at_voltage is None for row in rows):
        reader.assumptions.append(Finding("assumed.leakage_at_v_rrm",
                                          {"key": Value(f"{prefix}.i_r"),
                                           "v_rrm": Value(v_rrm, "V")}))
    return tuple(filled)


def _recovery_law(reader: Reader, device_class: str | None, spreads: Mapping[str, Spread | None],
                  row_lists: Mapping[str, tuple[Spread, ...]], prefix: str
                  ) -> tuple[tuple[str, float], ...]:
    """The one-row temperature law of the recovery parameters, from the device class (no class:
    the silicon law), with the assumption listed for each parameter given in one row."""
    rates = presets.recovery_temperature_rates(device_class)
    for parameter in _RECOVERY_PARAMETERS:
        if spreads[parameter] is None or len(row_lists.get(parameter, ())) >= 2:
            continue
        rate = rates[parameter]
        values = {"key": Value(join_key(prefix, parameter)),
                  "device_class": Value(device_class or presets.DEFAULT_RECOVERY_CLASS)}
        if rate == 0.0:
            reader.assumptions.append(Finding("assumed.recovery_law_flat", values))
        else:
            reader.assumptions.append(Finding("assumed.recovery_law_rising", {
                **values, "factor": Value(float(np.exp(100.0 * rate)))}))
            if spreads[parameter].at_temperature is None:
                reader.assumptions.append(Finding(
                    "assumed.recovery_at_datasheet_temperature",
                    {"key": Value(join_key(prefix, parameter)),
                     "temperature": Value(DATASHEET_TEMPERATURE, "degC")}))
    return tuple(rates.items())


def _read_lot(reader: Reader, table: Mapping[str, Any], spreads: dict[str, Spread | None],
              prefix: str):
    """The part's measured lot (``measured``, ``fit``), or None; fills in a spread for each
    measured parameter the datasheet does not give (the lot's median, min and max), so that test
    conditions and ratings have one home."""
    from stringcheck.design.lots import FITS, read_lot

    fit = reader.text(table, "fit", prefix, choices=FITS)
    path_text = reader.text(table, "measured", prefix)
    if path_text is None:
        if fit is not None:
            raise reader.error(join_key(prefix, "fit"), "says how to use a measured lot, but the part "
                                                     "has none; add measured = \"lot.csv\" or "
                                                     "remove fit")
        return None
    if not path_text.strip():
        raise reader.error(join_key(prefix, "measured"), "is empty; give the lot's CSV file, e.g. "
                                                      "measured = \"lot42.csv\"")
    path = Path(path_text)
    if not path.is_absolute() and not reader.source.startswith("<"):
        path = Path(reader.source).parent / path
    lot = read_lot(path, key=join_key(prefix, "measured"), design_source=reader.source,
                   fit=fit or "resample", datasheet=spreads)
    where = Path(path_text).name
    if fit is None:
        reader.assumptions.append(Finding("assumed.lot_resampled",
                                          {"key": Value(prefix), "file": Value(where)}))
    for column in lot.columns:
        if spreads[column.parameter] is None:
            # A charge derived from I_RM and t_rr was measured at their test conditions.
            source = spreads["i_rm"] or spreads["t_rr"] if column.parameter == "q_rr" else None
            conditions = {} if source is None else {
                "at_temperature": source.at_temperature, "at_di_dt": source.at_di_dt,
                "at_forward_current": source.at_forward_current}
            fixed = column.low == column.high
            spreads[column.parameter] = Spread(typ=column.median,
                                               low=None if fixed else column.low,
                                               high=None if fixed else column.high, **conditions)
            reader.assumptions.append(Finding("assumed.lot_for_row",
                                              {"key": Value(f"{prefix}.{column.parameter}")}))
    for note in lot.notes:
        reader.assumptions.append(Finding("assumed.lot_note", {"key": Value(f"{prefix}.measured"),
                                                               "note": Value(note.code)}))
    return lot


def _leakage_conditions(reader: Reader, spread: Spread | None, v_rrm: float,
                        prefix: str) -> Spread | None:
    """Fill in the test conditions of a leakage spread that the datasheet row left out."""
    if spread is None:
        return None
    changes = {}
    if spread.at_voltage is None:
        changes["at_voltage"] = v_rrm
        reader.assumptions.append(Finding("assumed.leakage_at_v_rrm",
                                          {"key": Value(f"{prefix}.i_r"), "v_rrm": Value(v_rrm, "V")}))
    if spread.at_temperature is None:
        changes["at_temperature"] = DATASHEET_TEMPERATURE
        reader.assumptions.append(Finding(
            "assumed.leakage_at_datasheet_temperature",
            {"key": Value(f"{prefix}.i_r"), "temperature": Value(DATASHEET_TEMPERATURE, "degC")}))
    return replace(spread, **changes) if changes else spread


def check_serials(reader: Reader, design: Design, grid: np.ndarray) -> None:
    """Each serial names a device of its position's lot, once; a resampled lot covers the string."""
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
    check_lot_sizes(design, reader)


def check_lot_sizes(design: Design, reader: Reader | None = None) -> None:
    """A resampled lot holds every device a built string may draw from it (with a mix, every
    position that may hold the part in either of ``Design.mix_variants``); raises DesignError."""
    reader = Reader(design.source) if reader is None else reader
    placed = design.string.placed_by_serial()
    for name in design.parts_used():
        lot = design.parts[name].measured
        if lot is None or not lot.resampled:
            continue
        pinned = int(np.count_nonzero((design.string.part_grid() == name) & placed))
        drawn = int(np.count_nonzero(design.lot_positions(name)))
        available = lot.devices - pinned
        if drawn > available:
            raise reader.error(f"parts.{name}.measured",
                               f"the lot {Path(lot.path).name} holds {lot.devices} device(s)"
                               + (f", {pinned} of them placed by serial," if pinned else "")
                               + f" but the string draws {drawn} from it; a built string takes "
                               "each device once: measure more devices, or use a fit "
                               "(fit = \"auto\")")

