"""The report of a design with a ``[circuit]`` table (issue 23): each stack's derived duty with its
sources, then the check of every distinct stack duty, and one verdict over all of them."""

from __future__ import annotations

import math
from typing import Any, Callable

from rich.console import Console
from rich.panel import Panel
from rich.table import Table

from stringcheck.errors import Setting
from stringcheck.report.display_text import shown
from stringcheck.report.export import positions_csv, result_to_dict
from stringcheck.report.terminal import render_check, render_check_summary
from stringcheck.report.wording import sentences
from stringcheck.studies.check import SCHEMA_VERSION
from stringcheck.studies.circuit import CircuitResult
from stringcheck.units import format_quantity

__all__ = ["circuit_csv", "circuit_to_dict", "render_circuit", "render_circuit_summary"]


def _angle(value: float | None) -> str:
    return "-" if value is None else f"{math.degrees(value):.3g} deg"


def _labels(labels) -> str:
    """Stack labels as a table cell: all of a few, else the first and last with the count."""
    return ", ".join(labels) if len(labels) <= 4 else f"{labels[0]}..{labels[-1]} ({len(labels)})"


def _circuit_line(result: CircuitResult) -> str:
    circuit = result.design.circuit
    what = circuit.topology + (f" of {circuit.stages} stages" if circuit.stages else "") + \
        (" (three-phase)" if circuit.phases == 3 else "")
    return (f"{what}, secondary {format_quantity(circuit.secondary_peak, 'V')} peak at "
            f"{format_quantity(circuit.frequency, 'Hz')}, load "
            f"{format_quantity(circuit.load_current, 'A')}; {len(result.stacks)} stack(s) in "
            f"{len(result.groups)} distinct duty(ies)")


def render_circuit(result: CircuitResult, console: Console, *,
                   spell: Callable[[Setting], str] = str, trace=None) -> None:
    """Print the circuit's derivation, every distinct stack's check and the verdict."""
    design = result.design
    console.print(Panel(f"{shown(design.title)}\nfile {shown(design.source)}\n"
                        f"{_circuit_line(result)}", title="stringcheck check (circuit)",
                        title_align="left"))
    table = Table(title="Duty of each stack, derived from the circuit", title_justify="left")
    table.add_column("stacks")
    for group in result.groups:
        table.add_column(_labels(group.labels), justify="right")
    rows = (("peak reverse voltage", lambda s: format_quantity(s.reverse_voltage, "V")),
            ("reverse-voltage waveform", lambda s: s.reverse_waveform),
            ("forward current, average", lambda s: format_quantity(s.forward_average, "A")),
            ("forward current, peak", lambda s: format_quantity(s.forward_peak, "A")),
            ("forward current, rms", lambda s: format_quantity(s.forward_rms, "A")),
            ("conduction angle", lambda s: _angle(s.conduction_angle)),
            ("overlap angle", lambda s: _angle(s.overlap_angle)),
            ("turn-off slope -di/dt", lambda s: format_quantity(s.di_dt, "A/s")),
            ("checked as waveform", lambda s: s.duty.waveform))
    for name, value in rows:
        table.add_row(name, *(value(group.stack) for group in result.groups))
    console.print(table)
    for group in result.groups:
        console.print(f"How the duty of {', '.join(group.labels)} follows from the circuit:")
        for text in sentences(group.stack.findings, spell=spell):
            console.print(f"  - {shown(text)}", highlight=False)
    for text in sentences(result.findings, spell=spell):
        console.print(f"  - {shown(text)}", highlight=False)
    for group in result.groups:
        console.rule(f"stack(s) {', '.join(group.labels)}")
        render_check(group.result, console, spell=spell, trace=trace)
    console.print(f"circuit verdict: {result.verdict} (every stack of the circuit)",
                  highlight=False)


def render_circuit_summary(result: CircuitResult, console: Console) -> None:
    """``--quiet``: the circuit's verdict, then each distinct stack duty's one line."""
    console.print(f"{result.verdict}: {_circuit_line(result)}", highlight=False)
    for group in result.groups:
        console.print(f"  {', '.join(group.labels)}: ", end="", highlight=False)
        render_check_summary(group.result, console)


def circuit_to_dict(result: CircuitResult) -> dict[str, Any]:
    """The JSON of a circuit design's check: the circuit's derivation (codes and sentences) and
    each distinct stack duty's full check result (docs/json.md)."""
    circuit = result.to_dict()
    for stack, entry in zip(result.stacks, circuit["stacks"]):
        entry["derivation"] = sentences(stack.findings)
    circuit["notes"] = sentences(result.findings)
    return {
        "schema": SCHEMA_VERSION,
        "design": {"title": result.design.title, "file": result.design.source},
        "verdict": result.verdict,
        "circuit": circuit,
        "checked_stacks": [{"stacks": list(group.labels), "result": result_to_dict(group.result)}
                           for group in result.groups],
    }


def circuit_csv(result: CircuitResult) -> str:
    """The per-position CSV of every distinct stack duty's check (``export.positions_csv``), with a
    first column ``stacks`` naming the stacks that carry the duty."""
    rows = []
    for group in result.groups:
        lines = positions_csv(group.result).splitlines()
        if not rows:
            rows.append("stacks," + lines[0])
        rows += [f"{' '.join(group.labels)},{line}" for line in lines[1:]]
    return "\n".join(rows) + "\n"
