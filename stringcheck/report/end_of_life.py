"""The check at the start and at the end of life, side by side (``check --end-of-life``)."""

from __future__ import annotations

import math
from typing import Any

from rich.console import Console
from rich.table import Table
from rich.text import Text

from stringcheck.studies.end_of_life import EndOfLifeStudy

__all__ = ["end_of_life_to_dict", "render_end_of_life", "render_end_of_life_summary"]


def end_of_life_to_dict(study: EndOfLifeStudy) -> dict[str, Any]:
    """The JSON ``end_of_life`` object: settings, verdicts, margins and the end-of-life checks."""
    data = study.to_dict()
    data["checks"] = study.aged.to_dict()["checks"]
    return data


def _number(value: float) -> str:
    return "unsolved" if not math.isfinite(value) else f"{value:.3f}"


def _changes(study: EndOfLifeStudy) -> str:
    aged = study.settings
    out = []
    if aged.resistor_drift:
        out.append(f"resistor drift {aged.resistor_drift:+.3g} ({aged.resistor_drift_mode})"
                   if aged.resistor_drift_mode == "shift" else
                   f"resistor drift +-{abs(aged.resistor_drift):.3g} (band)")
    if aged.resistor_voltage_coefficient:
        out.append(f"voltage coefficient {aged.resistor_voltage_coefficient * 1e6:+.4g} ppm/V")
    if aged.capacitor_dc_bias:
        out.append(f"capacitor loss {aged.capacitor_dc_bias:.3g} at rated voltage")
    if aged.surface_resistance is not None:
        out.append(f"surface shunt {aged.surface_resistance:.3g} ohm on "
                   f"{aged.surface_fraction:.0%} of stages")
    return ", ".join(out)


def render_end_of_life(study: EndOfLifeStudy, console: Console) -> None:
    """Print each check's initial and end-of-life stress, margin and P(fail) bound."""
    console.print()
    table = Table(title=f"End of life ({_changes(study)}; same built strings)",
                  title_justify="left")
    for column in ("check", "stress", "stress EOL", "margin", "margin EOL", "P(fail) <=",
                   "EOL <=", "EOL ok"):
        table.add_column(column, justify="left" if column == "check" else "right")
    for item in study.margins:
        table.add_row(item.check, _number(item.initial_worst_ratio),
                      _number(item.end_of_life_worst_ratio), _number(item.initial_margin),
                      _number(item.end_of_life_margin), f"{item.initial_p_fail_upper:.2g}",
                      f"{item.end_of_life_p_fail_upper:.2g}",
                      Text("yes", style="green") if item.end_of_life_passed
                      else Text("NO", style="bold red"))
    console.print(table)
    console.print("stress = worst device over its limit; margin = 1 - stress (negative: over "
                  "the limit); EOL = at the end of life.")
    passed = study.end_of_life_verdict == "pass"
    console.print(Text(f"At the end of life the design {'passes' if passed else 'FAILS'}.",
                       style="bold green" if passed else "bold red"))


def render_end_of_life_summary(study: EndOfLifeStudy, console: Console) -> None:
    """One line: the end-of-life verdict and the smallest margin."""
    smallest = min((item.end_of_life_margin for item in study.margins), default=math.nan)
    console.print(f"end of life: {study.end_of_life_verdict}; smallest margin {_number(smallest)}")
