"""High-voltage safety cautions shown with every report (docs/safety.md).

The text lives here only; the figures (stored energy, discharge time) come from the study's result.
"""

from __future__ import annotations

import math

from stringcheck.constants import SAFE_DISCHARGE_TIME, SAFE_VOLTAGE
from stringcheck.units import format_quantity


def safety_cautions(*, string_voltage: float, stage_energy: float | None, total_energy: float | None,
                    discharge_time: float, safe_voltage: float = SAFE_VOLTAGE,
                    allowed_time: float = SAFE_DISCHARGE_TIME) -> list[str]:
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
    # The criterion: stringcheck.constants.SAFE_VOLTAGE and SAFE_DISCHARGE_TIME. IEC 61010-1's hazardous-live levels differ between editions (from memory: 60 V dc
    # in the 2001 edition, 70 V dc in normal condition in the 2010 edition): cited with theirs.
    criterion = (f"{safe_voltage:g} V within {allowed_time:g} s is the residual-voltage criterion "
                 "of IEC 60204-1:2016 clause 6.2.4 for machinery; the hazardous-live levels of "
                 "IEC 61010-1 differ by edition: 60 V dc in IEC 61010-1:2001, 70 V dc in normal "
                 "condition in IEC 61010-1:2010")
    own = ("This counts only the stack's own capacitance (grading capacitors and junctions): a "
           "filter or smoothing capacitor across the output, or the load, holds its charge far "
           "longer and is not in this figure.")
    if math.isinf(discharge_time):
        lines.append(f"There is no grading-resistor bleed path: the stack can stay above "
                     f"{safe_voltage:g} V indefinitely ({criterion}). {own} Discharge and earth "
                     "every stage before touching.")
    else:
        verdict = "within" if discharge_time <= allowed_time else "LONGER than"
        lines.append(
            f"Through its grading resistors alone the stack falls below {safe_voltage:g} V in "
            f"{format_quantity(discharge_time, 's')}, {verdict} {allowed_time:g} s ({criterion}). "
            f"{own} Resistors fail open: whatever this time, discharge and earth the stack and "
            "everything connected to it, and prove it dead, before touching it.")
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
