"""The measured-lot section of the reports: what each lot holds, its fit, and devices outside the
datasheet limits (terminal and JSON)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
from rich.console import Console
from rich.table import Table
from rich.text import Text

from stringcheck.design.model import SPREAD_UNITS, Design
from stringcheck.units import format_quantity
from stringcheck.checks.outcome import json_number
from stringcheck.report.display_text import shown
from stringcheck.report.wording import sentences

_HOW = {"resample": "devices drawn from the lot itself, without replacement in a string "
                    "(measured correlations kept exactly)",
        "lognormal": "devices drawn from a lognormal fitted to each column, joined by the lot's "
                     "correlation (Gaussian copula)",
        "normal": "devices drawn from a normal fitted to each column, joined by the lot's "
                  "correlation (Gaussian copula)",
        "auto": "devices drawn from a fit to each column (lognormal for leakage and recovery, "
                "normal for V_T0 and r_T), joined by the lot's correlation (Gaussian copula)"}


def _lots(design: Design, skip: frozenset = frozenset()):
    for name in design.parts_used():
        lot = design.parts[name].measured
        if lot is not None and (name, lot.path) not in skip:
            yield name, lot


def _placed(design: Design, name: str) -> int:
    layout = design.string
    return int(np.count_nonzero((layout.part_grid() == name) & layout.placed_by_serial()))


def render_lots(design: Design, console: Console, *, also: Design | None = None) -> None:
    """Print one table per measured lot (nothing when the design has none); with ``also`` (the
    review's other design), its lots too, each lot once."""
    if also is not None:
        render_lots(design, console)
        listed = frozenset((name, lot.path) for name, lot in _lots(design))
        design, lots = also, list(_lots(also, listed))
    else:
        lots = list(_lots(design))
    for name, lot in lots:
        console.print(Text(f"Measured lot of part {shown(name)}: {shown(Path(lot.path).name)}, "
                           f"{lot.devices} devices", style="bold"))
        console.print(f"  {_HOW[lot.fit]}.", highlight=False)
        placed = _placed(design, name)
        if placed:
            console.print(f"  {placed} position(s) hold a device placed by serial number.",
                          highlight=False)
        table = Table(show_edge=False, box=None, padding=(0, 1))
        fitted = "fit (for reference)" if lot.resampled else "fit (drawn from)"
        for column in ("parameter", "median", "min", "max", fitted, "KS p", "outside limits"):
            table.add_column(column, justify="left" if column in ("parameter", fitted) else "right")
        for column in lot.columns:
            unit = SPREAD_UNITS[column.parameter].label
            if column.scale == 0:
                fit = "fixed (no scatter)"
            elif column.family == "lognormal":
                fit = (f"lognormal {format_quantity(float(np.exp(column.location)), unit)}, "
                       f"s_ln {column.scale:.2g}")
            else:
                fit = (f"normal {format_quantity(column.location, unit)}, sd "
                       f"{format_quantity(column.scale, unit)}")
            outside = column.below + column.above
            table.add_row(column.parameter, format_quantity(column.median, unit),
                          format_quantity(column.low, unit), format_quantity(column.high, unit),
                          fit, "-" if np.isnan(column.ks_p_value) else f"{column.ks_p_value:.2g}",
                          Text(str(outside), style="bold yellow") if outside else "0")
        console.print(table)
        console.print("  fit: maximum likelihood (s_ln = standard deviation of ln x); KS p: "
                      "Kolmogorov-Smirnov against the fit, approximate as the fit used the same "
                      "devices", highlight=False)
        if len(lot.parameters) > 1:
            pairs = [f"{a}-{b} {lot.correlation[i, j]:+.2f}"
                     for i, a in enumerate(lot.parameters)
                     for j, b in enumerate(lot.parameters) if j > i]
            console.print("  correlation of the normal scores: " + ", ".join(pairs),
                          highlight=False)
        for note in sentences(lot.notes):
            console.print(f"  {shown(note)}.", highlight=False)
        for warning in sentences(lot.outside_limits(name)):
            console.print(Text(f"  ! {shown(warning)}: the lot lies outside the datasheet limits (the "
                               "check uses the devices as measured)", style="yellow"))
        console.print()


def lots_to_list(design: Design) -> list[dict[str, Any]]:
    """The measured lots as JSON-ready dictionaries (SI units)."""
    out = []
    for name, lot in _lots(design):
        out.append({
            "part": name,
            "file": lot.path,
            "devices": lot.devices,
            "fit": lot.fit,
            "placed_by_serial": _placed(design, name),
            "columns": [{"parameter": c.parameter, "family": c.family, "location": c.location,
                         "scale": c.scale, "ks_p_value": json_number(c.ks_p_value),
                         "median": c.median, "min": c.low, "max": c.high,
                         "below_datasheet_min": c.below, "above_datasheet_max": c.above}
                        for c in lot.columns],
            "correlation": {"parameters": list(lot.parameters),
                            "matrix": lot.correlation.tolist()},
            "warnings": sentences(lot.outside_limits(name)),
            "notes": sentences(lot.notes),
        })
    return out
