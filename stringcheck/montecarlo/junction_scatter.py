"""The scatter of each device's junction capacitance: one factor on its whole C_j(V) curve.

A part that gives C_j as datasheet rows with limits (``c_j = { typ, max, at_voltage }``) scatters
like any spread (docs/methods/monte-carlo.md): lognormal about typ, the limit at ``sigma_at_limit``
standard deviations, truncated there when ``screened``; the relative limits of the rows (the
widest of them) set the spread of one factor k that multiplies the device's C_j at every voltage
(one latent draw per device, so that its rank holds at every voltage; its Q_c scales with k).

Random stream: its own component of each sampling block, ``SeedSequence(seed, spawn_key=(b,
JUNCTION_STREAM))``, drawn one block at a time as ``montecarlo.sampling`` draws every component,
so the factors do not depend on the chunking, and no other draw changes.
"""

from __future__ import annotations

import numpy as np

from stringcheck.design.model import Design, Part, Spread
from stringcheck.montecarlo.quantile_maps import spread_quantile
from stringcheck.montecarlo.sampling import BLOCK_TRIALS

# The stream of the junction factors (beside the device parameters' streams and sampling's 1001
# to 1003, 2000 + and 3,000,000 +).
JUNCTION_STREAM = 4001


def relative_spread(part: Part) -> Spread | None:
    """The spread of a device's C_j factor relative to typ (typ 1), from its rows' widest relative
    limits; None where the part's C_j has no scatter (a constant c_j, or rows without limits)."""
    rows = () if part.junction_rows is None else part.junction_rows.rows
    highs = [row.high / row.typ for row in rows if row.high is not None]
    lows = [row.low / row.typ for row in rows if row.low is not None]
    if not highs and not lows:
        return None
    return Spread(typ=1.0, low=min(lows) if lows else None, high=max(highs) if highs else None)


def scatters(design: Design) -> bool:
    """Whether any part used has a scattered C_j."""
    return any(relative_spread(design.parts[name]) is not None for name in design.parts_used())


def junction_factors(design: Design, part_grid: np.ndarray, first_trial: int, count: int,
                     seed: int) -> np.ndarray:
    """Each device's C_j factor [1], (count, parallel, series), for trials ``first_trial`` ..;
    ``part_grid`` names the part of each position (parallel, series) or, under a mix, of each
    drawn device (count, parallel, series). 1 where the part's C_j does not scatter."""
    shape = design.string.part_grid().shape
    width = shape[0] * shape[1]
    scores = np.empty((count, width))
    trial, end = first_trial, first_trial + count
    while trial < end:
        block, offset = divmod(trial, BLOCK_TRIALS)
        take = min(BLOCK_TRIALS - offset, end - trial)
        generator = np.random.Generator(np.random.PCG64(np.random.SeedSequence(
            seed, spawn_key=(block, JUNCTION_STREAM))))
        if offset:
            generator.bit_generator.advance(offset * width)  # one 64-bit step per uniform
        generator.random(out=scores[trial - first_trial:trial - first_trial + take])
        trial += take
    scores = scores.reshape((count,) + shape)
    factors = np.ones_like(scores)
    grid = np.broadcast_to(part_grid, scores.shape)
    for name in design.parts_used():
        spread = relative_spread(design.parts[name])
        mask = grid == name
        if spread is None or not mask.any():
            continue
        factors[mask] = spread_quantile(spread, scores[mask], lognormal=True,
                                        sigma_at_limit=design.monte_carlo.sigma_at_limit,
                                        screened=design.monte_carlo.screened, uniform=True)
    return factors
