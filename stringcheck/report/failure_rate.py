"""The failure-rate estimate in words and a table (``check --failure-rate``): terminal and JSON."""

from __future__ import annotations

from typing import Any

from rich.console import Console
from rich.table import Table

from stringcheck.report.wording import reason_text
from stringcheck.studies.failure_rate import FailureRateStudy

__all__ = ["failure_rate_to_dict", "render_failure_rate", "render_failure_rate_summary"]

# How many of the highest-rated positions the terminal table lists.
SHOWN_POSITIONS = 6


def failure_rate_to_dict(study: FailureRateStudy) -> dict[str, Any]:
    """The JSON ``failure_rate`` object: the study's own ``to_dict()``, with the sentence of its
    ``temperature_note`` before the code."""
    out = {}
    for key, value in study.to_dict().items():
        if key == "temperature_note_code":
            out["temperature_note"] = reason_text(study.temperature_note)
        out[key] = value
    return out


def render_failure_rate(study: FailureRateStudy, console: Console, *, parallel: int = 1) -> None:
    """Print the model and its factors, the stack's rate and the highest-rated positions."""
    console.print()
    console.print(f"Failure rate ({study.source}; parts-stress model, on the same "
                  f"{study.trials:,} built strings)")
    console.print(f"  {study.model}")
    memory = " (handbook value from memory: check it against the handbook)" \
        if study.base_rate_from_memory else " (given)"
    console.print(f"  lambda_b = {study.base_rate:g} per 10^6 h, {study.device_type}{memory}; "
                  f"pi_Q = {study.quality_factor:g} ({study.quality}), pi_E = "
                  f"{study.environment_factor:g} ({study.environment}), pi_C = "
                  f"{study.contact_factor:g} ({study.contact})"
                  + ("; factor tables from memory" if study.factors_from_memory else ""))
    if study.temperature_basis == "thermal":
        console.print("  T_j: each device's junction temperature from the thermal check's "
                      "electro-thermal solve; V_S: its static reverse voltage over its V_RRM.")
    else:
        console.print(f"  T_j: taken as each stage's temperature (ambient + position rise), as "
                      f"the thermal check cannot run ({reason_text(study.temperature_note)}); V_S: its static "
                      "reverse voltage over its V_RRM.")
    console.print(f"  Stack (sum over its devices, no credit for redundancy): "
                  f"{study.stack_fit_p50:.4g} FIT median, {study.stack_fit_p99:.4g} FIT at the "
                  f"99th percentile of built strings (FIT = failures per 10^9 h).")
    table = Table(title="Highest-rated positions (median / 99th percentile over built strings)",
                  title_justify="left")
    for column in ("position", "T_j [degC]", "V_S", "FIT"):
        table.add_column(column, justify="left" if column == "position" else "right")
    ranked = sorted(study.positions, key=lambda item: item.fit_p99, reverse=True)
    for item in ranked[:SHOWN_POSITIONS]:
        where = f"b{item.branch} pos {item.index}" if parallel > 1 else f"pos {item.index}"
        table.add_row(where, f"{item.junction_temperature_p50:.1f} / "
                             f"{item.junction_temperature_p99:.1f}",
                      f"{item.voltage_stress_p50:.3f} / {item.voltage_stress_p99:.3f}",
                      f"{item.fit_p50:.3g} / {item.fit_p99:.3g}")
    console.print(table)


def render_failure_rate_summary(study: FailureRateStudy, console: Console) -> None:
    """One line: the stack's rate."""
    console.print(f"failure rate: stack {study.stack_fit_p50:.4g} FIT median, "
                  f"{study.stack_fit_p99:.4g} FIT p99")
