"""Reading the ``[parts.NAME]`` tables: device classes, scalar ratings, spreads, measured lots, and
the serial numbers of measured devices placed in positions.
"""

from __future__ import annotations

import difflib
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
        junction_rows = None
        if is_rows(merged.get("c_j")):
            junction_rows = read_junction_rows(reader, merged["c_j"], prefix, device_class)
            # The constant c_j the rows stand for where a check has no C_j(V): the row at the
            # highest voltage, nearest a blocking stage's.
            merged["c_j"] = f"{junction_rows.rows[-1].typ!r} F"
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
            raise reader.error(join_key(prefix, "leakage_voltage_exponent"),
                               f"must lie in [0, 1] (0.5 for generation current), got {exponent:g}")
        spreads = {parameter: reader.spread(merged[parameter], parameter, prefix)
                   if parameter in merged else None for parameter in SPREAD_PARAMETERS}
        lot = _read_lot(reader, table, spreads, prefix)
        spreads["i_r"] = _leakage_conditions(reader, spreads["i_r"], scalars["v_rrm"], prefix)
        # The model names the quantities as the physics does (the file keys carry "leakage_").
        scalars["doubling_temperature"] = scalars.pop("leakage_doubling")
        scalars["voltage_exponent"] = scalars.pop("leakage_voltage_exponent")
        # The recovery charge is the junction's own (integral of C_j dV up to the stage voltage)
        # for a SiC Schottky diode, and for a part giving c_j but no q_rr, nor the i_rm and t_rr
        # a stored charge is derived from.
        capacitive = device_class == "sic-schottky" or (
            "c_j" in merged and "q_rr" not in merged
            and not ("i_rm" in merged and "t_rr" in merged))
        parts[name] = Part(name=name, device_class=device_class, measured=lot, **scalars,
                           **spreads, junction_rows=junction_rows, capacitive=capacitive)
    return parts


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

