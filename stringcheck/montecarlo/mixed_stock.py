"""Constants that follow a device's part, per position or per drawn device (mixed stock).

Without a mix every position holds one part, so a part's constants (V_RRM, the leakage reference
conditions, C_j, the forward and thermal data) are arrays of shape (parallel, series), built once per
run. With a mix (``StringLayout.mix``) the part of a device varies from built string to built string:
``sampling.draw_strings`` gives the part of every drawn device, and its constants are arrays of shape
(trials, parallel, series), built per chunk; the solvers broadcast either.

The per-position figures of a report (a position's limit) take the extreme over the parts that can
stand there: the lowest limit of a mixed position, as the conservative one to show beside its
voltages. Pass and fail are decided device by device with the limit of the part actually drawn.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from stringcheck.findings import Finding, Value
from stringcheck.design.model import Design, Part
from stringcheck.montecarlo.sampling import DrawnStrings

Attribute = Callable[[Part], float]


def position_values(design: Design, attribute: Attribute, *, pick=np.minimum) -> np.ndarray:
    """``attribute`` of the part at each position, (parallel, series); with a mix, ``pick``
    (np.minimum or np.maximum) over the parts that can stand there."""
    out = None
    for grid in design.string.part_grids():
        values = np.array([[attribute(design.parts[name]) for name in row] for row in grid],
                          dtype=float)
        out = values if out is None else pick(out, values)
    return out


def device_values(design: Design, drawn: DrawnStrings, attribute: Attribute) -> np.ndarray:
    """``attribute`` of the part of every drawn device: (trials, parallel, series) with a mix,
    else (and where every part has the same value) a per-position (parallel, series) array."""
    if drawn.part_index is None:
        return position_values(design, attribute)
    table = np.array([attribute(design.parts[name]) for name in drawn.part_names], dtype=float)
    if np.all(table == table[0]):  # the same for every part: no need for a per-trial array
        return np.full(drawn.part_index.shape[1:], table[0])
    return table[drawn.part_index]


def device_part_grid(design: Design, drawn: DrawnStrings) -> np.ndarray:
    """The part name of every drawn device: (trials, parallel, series) object array with a mix,
    else ``part_grid()``."""
    if drawn.part_index is None:
        return design.string.part_grid()
    return np.array(drawn.part_names, dtype=object)[drawn.part_index]


def mix_finding(design: Design) -> Finding | None:
    """The mix of ``design`` (``mixed_stock.mix``: the part mixed in and the percentage of the
    devices it takes), or None without a mix."""
    mix = design.string.mix
    if mix is None:
        return None
    return Finding("mixed_stock.mix", {"part": Value(mix.part),
                                       "percent": Value(100 * mix.fraction)})
