"""Reading a part's junction capacitance ``c_j``: one figure, a datasheet row at a voltage, or rows.

* ``c_j = "15 pF"``: a constant capacitance (the form before rows; no voltage dependence).
* ``c_j = { typ = "26 pF", max = "31 pF", at_voltage = "400 V" }``: one datasheet row; the
  junction law C_j0 / (1 + V/phi)^gamma (``physics.junction_capacitance``) takes phi and gamma
  from the part's class (or the silicon default), both listed among the assumptions.
* ``c_j = [ {...}, {...} ]``: rows at several voltages; gamma is fitted to them, phi held.

The rows are kept as data here (the design layer does not fit): ``checks.junction`` fits the law.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

from stringcheck.design import device_classes as presets
from stringcheck.findings import Finding, Value
from stringcheck.units import FARAD, VOLT, format_quantity

from stringcheck.design.schema import Reader, join_key

ROW_KEYS = ("min", "typ", "max", "at_voltage")


@dataclass(frozen=True)
class CapacitanceRow:
    """One datasheet row of C_j: typ [F] with its limits (None where not given) at a reverse
    voltage [V]."""

    typ: float
    low: float | None
    high: float | None
    at_voltage: float


@dataclass(frozen=True)
class JunctionRows:
    """A part's C_j rows, by rising voltage, and the law's held parameters.

    Attributes
    ----------
    rows
        The datasheet rows, at distinct voltages, C_j typ falling (or level) with voltage.
    built_in_potential
        phi [V] held in the fit (the class's default).
    default_exponent
        gamma [1] taken where one row gives no slope (the class's default).
    """

    rows: tuple[CapacitanceRow, ...]
    built_in_potential: float
    default_exponent: float


def is_rows(raw: Any) -> bool:
    """Whether the raw ``c_j`` value is a row or a list of rows (else a plain quantity)."""
    return isinstance(raw, (Mapping, list, tuple))


def read_junction_rows(reader: Reader, raw: Any, prefix: str,
                       device_class: str | None) -> JunctionRows:
    """The rows of ``c_j`` (a table or a list of tables); raises DesignError naming the key."""
    key = join_key(prefix, "c_j")
    tables = [raw] if isinstance(raw, Mapping) else list(raw)
    if not tables:
        raise reader.error(key, "is an empty list; give one row or more, e.g. "
                                "c_j = [{ typ = \"26 pF\", at_voltage = \"400 V\" }]")
    rows = []
    for number, table in enumerate(tables, start=1):
        row_key = key if isinstance(raw, Mapping) else f"{key}[{number}]"
        if not isinstance(table, Mapping):
            raise reader.error(row_key, "must be a row { typ = \"26 pF\", at_voltage = \"400 V\" }, "
                                        f"not {type(table).__name__}")
        reader.check_keys(table, ROW_KEYS, row_key)
        typ = reader.quantity(table, "typ", FARAD, row_key, positive=True)
        low = reader.quantity(table, "min", FARAD, row_key, positive=True)
        high = reader.quantity(table, "max", FARAD, row_key, positive=True)
        voltage = reader.quantity(table, "at_voltage", VOLT, row_key, non_negative=True)
        if typ is None:
            raise reader.error(row_key, "give typ (the datasheet's typical C_j at at_voltage)")
        if voltage is None:
            raise reader.error(row_key, "give at_voltage (the reverse voltage of the row), e.g. "
                                        "at_voltage = \"400 V\"")
        if (low is not None and low > typ) or (high is not None and high < typ):
            raise reader.error(row_key, "min <= typ <= max")
        rows.append(CapacitanceRow(typ=typ, low=low, high=high, at_voltage=voltage))
    rows.sort(key=lambda row: row.at_voltage)
    for lower, upper in zip(rows, rows[1:]):
        if upper.at_voltage == lower.at_voltage:
            raise reader.error(key, f"two rows at {format_quantity(lower.at_voltage, 'V')}; give "
                                    "one row per voltage")
        if upper.typ > lower.typ:
            raise reader.error(key, f"C_j rises with voltage ({format_quantity(lower.typ, 'F')} "
                                    f"at {format_quantity(lower.at_voltage, 'V')}, "
                                    f"{format_quantity(upper.typ, 'F')} at "
                                    f"{format_quantity(upper.at_voltage, 'V')}); a junction's "
                                    "capacitance falls with reverse voltage: check the rows' "
                                    "values and units")
    phi, gamma, basis = presets.junction_law_defaults(device_class)
    values = {"key": Value(key), "potential": Value(phi, "V"), "basis": Value(basis)}
    if len(rows) == 1:
        reader.assumptions.append(Finding("assumed.c_j_law_one_row",
                                          {**values, "exponent": Value(gamma)}))
    else:
        reader.assumptions.append(Finding("assumed.c_j_law_fitted", values))
    return JunctionRows(rows=tuple(rows), built_in_potential=phi, default_exponent=gamma)
