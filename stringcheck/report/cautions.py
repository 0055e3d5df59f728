"""High-voltage safety cautions shown with every report (DESIGN.md section 7).

The text lives here only; the figures (stored energy, discharge time) come from the study's result.
"""

from __future__ import annotations

import math

from ..quantity import format_quantity


def safety_cautions(*, string_voltage: float, stage_energy: float | None, total_energy: float | None,
                    discharge_time: float, safe_voltage: float = 60.0,
                    allowed_time: float = 5.0) -> list[str]:
    """The cautions, as plain sentences, filled in with the design's figures.

    Parameters
    ----------
    string_voltage
        Peak reverse voltage of the string [V].
    stage_energy
        Energy stored in one grading capacitor at the worst stage voltage [J], None without capacitors.
    total_energy
        Energy stored in the whole stack at the nominal share [J].
    discharge_time
        Time for the stack to fall below ``safe_voltage`` through its grading resistors [s].
    """
    lines = [
        f"LETHAL VOLTAGE: this stack works at {format_quantity(string_voltage, 'V')}. Only trained, "
        "authorised people may build, test or service it, with the supply isolated, locked off "
        "and proven dead.",
    ]
    stored = "Grading capacitors and junction capacitance hold charge after power-off"
    if stage_energy is not None:
        stored += f": {format_quantity(stage_energy, 'J')} per stage at the worst stage voltage"
    if total_energy is not None:
        stored += f", {format_quantity(total_energy, 'J')} in the whole stack at the nominal share"
    lines.append(stored + ".")
    if math.isinf(discharge_time):
        lines.append(f"There is no grading-resistor bleed path: the stack can stay above "
                     f"{safe_voltage:g} V indefinitely. Discharge and earth every stage before touching.")
    else:
        verdict = "within" if discharge_time <= allowed_time else "LONGER than"
        lines.append(
            f"Through its grading resistors the stack falls below {safe_voltage:g} V (the IEC 61010-1 "
            f"hazardous-live level) in {format_quantity(discharge_time, 's')}, {verdict} the "
            f"{allowed_time:g} s that IEC 60204-1 clause 6.2.4 allows for residual voltage on "
            "machinery. Resistors fail open: always discharge and earth the stack before touching it.")
    lines += [
        "Grading resistors must be rated for the working voltage and power shown, with margin; "
        "HV resistor ratings fall with temperature and altitude.",
        "Creepage and clearance (IEC 60664-1), insulation coordination and partial discharge are "
        "NOT checked by this tool.",
        "These are computed predictions from datasheet spreads. Verify the built stack by "
        "measurement (voltage sharing, leakage, temperatures) before it goes into service.",
        "Local electrical codes and licensed engineering practice take precedence over anything in "
        "this report.",
    ]
    return lines
