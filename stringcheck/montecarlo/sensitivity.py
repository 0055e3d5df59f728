"""What drives the worst stress of a check, and what tightening each input would buy.

For the first :data:`DRIVER_TRIALS` trials of a run the check keeps, per trial, the *mismatch* of
each scattered input across the string: the range (max - min over all positions) of the latent
standard-normal value of each device parameter, and of the drawn grading resistor and capacitor
relative to their nominal values. A series string suffers from mismatch, not from the level of a
parameter, so the range is the feature that carries the physics (one fast device among slow ones).
Each input is ranked by the absolute Spearman rank correlation of its mismatch with the trial's
worst stress ratio (scipy.stats.spearmanr). For the top inputs the check is run again on the same
draws with that input's spread halved (device limits halfway to typ, in the log domain for the
lognormal parameters; a grading tolerance halved), and the new 99th-percentile stress and P(fail)
bound show what the tightening would buy. The parallel and thermal checks rank V_T0, r_T, I_R and
Q_rr the same way. The ambient does not scatter, so it is not ranked: the checks that depend on it
(static, parallel, thermal) are rerun with it :data:`COOLER_BY` kelvin lower. With ``--rare``, each
input's share of the most likely failure point (``rare_events.FailurePointShare``) stands beside it.
Under a mix (``review --mix``) the number of substituted devices in each string is one more input
("mix"), ranked for every check; its rerun halves the mixed-in fraction.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy import stats

from stringcheck.design.model import LOGNORMAL_PARAMETERS, Design, Spread
from stringcheck.montecarlo.sampling import DrawnStrings

DRIVER_TRIALS = 20_000
TOP_DRIVERS = 3
# The inputs each check's physics depends on (docs/methods/): the blocking-state sharing on
# leakage against the resistors and, for a periodic duty, the capacitors and the offsets the
# recovery leaves; the turn-off sharing on recovery charge against the capacitors.
CHECK_INPUTS = {"static": ("i_r", "resistor", "capacitor", "q_rr", "mix"),
                "dynamic": ("q_rr", "capacitor", "mix"),
                "parallel": ("v_t0", "r_t", "i_r", "q_rr", "mix"),
                "thermal": ("v_t0", "r_t", "i_r", "q_rr", "mix"),
                "transient": ("q_rr", "capacitor", "resistor", "mix")}
# The checks whose physics depends on the temperature (leakage doubling, forward temperature
# coefficients, the thermal balance); the dynamic check's Q_rr does not.
TEMPERATURE_CHECKS = ("static", "parallel", "thermal")
COOLER_BY = 10.0  # [K] the ambient change the drivers table shows

_LABELS = {"i_r": "leakage I_R", "q_rr": "recovery charge Q_rr", "v_t0": "threshold voltage V_T0",
           "r_t": "slope resistance r_T", "i_rm": "peak recovery current I_RM",
           "t_rr": "recovery time t_rr", "resistor": "grading resistor tolerance",
           "capacitor": "grading capacitor tolerance",
           "ambient": f"ambient -{COOLER_BY:g} K", "mix": "substituted devices (mix; rerun at "
                                                          "half the fraction)"}


@dataclass(frozen=True)
class Driver:
    """One input's influence on one check's worst stress."""

    check: str
    input: str
    label: str
    rank_correlation: float
    tightened_p99_ratio: float | None
    tightened_p_fail_upper: float | None
    failure_point_share: float | None = None


def chunk_features(drawn: DrawnStrings, design: Design, count: int) -> dict[str, np.ndarray]:
    """Per-trial mismatch of every scattered input for the first ``count`` trials of a chunk."""
    features = {}
    for name in drawn.latent:
        values = drawn.latent_normals(name, count).reshape(count, -1)
        features[name] = values.max(axis=1) - values.min(axis=1)
    grading = design.grading
    for name, values, nominal in (("resistor", drawn.resistance, grading.resistor),
                                  ("capacitor", drawn.capacitance, grading.capacitor)):
        if values is not None and nominal:
            flat = values[:count].reshape(count, -1) / nominal
            features[name] = flat.max(axis=1) - flat.min(axis=1)
    mix = design.string.mix
    if drawn.part_index is not None and mix is not None and mix.part in drawn.part_names:
        substituted = drawn.part_index[:count] == drawn.part_names.index(mix.part)
        features["mix"] = substituted.reshape(count, -1).sum(axis=1).astype(float)
    return features


def rank_inputs(check: str, features: dict[str, np.ndarray],
                ratios: np.ndarray) -> list[tuple[str, float]]:
    """(input, Spearman rho) sorted by |rho|, inputs with no variation left out."""
    # A string that could not be solved or ran away is the worst of all: it ranks above every
    # finite ratio (rank correlation needs only the order).
    ratios = np.asarray(ratios, dtype=float)
    finite_max = np.max(ratios[np.isfinite(ratios)], initial=0.0)
    ratios = np.where(np.isposinf(ratios), finite_max + 1.0, ratios)
    finite = np.isfinite(ratios)
    ranked = []
    for name, values in features.items():
        if name not in CHECK_INPUTS.get(check, (name,)):
            continue
        x, y = values[finite], ratios[finite]
        if x.size < 10 or np.ptp(x) == 0 or np.ptp(y) == 0:
            continue
        rho = float(stats.spearmanr(x, y).statistic)
        if math.isfinite(rho):
            ranked.append((name, rho))
    ranked.sort(key=lambda item: abs(item[1]), reverse=True)
    return ranked


def cooler(design: Design, kelvin: float = COOLER_BY) -> Design:
    """The design with the ambient ``kelvin`` [K] lower."""
    return replace(design, duty=replace(design.duty, ambient=design.duty.ambient - kelvin))


def tightenable(design: Design, name: str) -> bool:
    """Whether halving input ``name``'s spread changes the draws: not for a parameter that comes
    only from measured lots (a measured device is what it is)."""
    if name in ("resistor", "capacitor"):
        return True
    if name == "mix":
        return design.string.mix is not None
    for part_name in design.parts_used():
        part = design.parts[part_name]
        spread = part.spread(name)
        measured = part.measured is not None and name in part.measured.parameters
        if spread is not None and not spread.fixed and not measured:
            return True
    return False


def tightened(design: Design, name: str) -> Design:
    """The design with input ``name``'s spread halved (see the module docstring)."""
    if name == "resistor":
        grading = replace(design.grading, resistor_tolerance=design.grading.resistor_tolerance / 2)
        return replace(design, grading=grading)
    if name == "capacitor":
        grading = replace(design.grading,
                          capacitor_tolerance=design.grading.capacitor_tolerance / 2)
        return replace(design, grading=grading)
    if name == "mix":
        layout = design.string
        return replace(design, string=replace(layout, mix=replace(layout.mix,
                                                                  fraction=layout.mix.fraction / 2)))
    parts = dict(design.parts)
    for part_name in design.parts_used():
        part = parts[part_name]
        spread = part.spread(name)
        if spread is not None and not spread.fixed:
            lognormal = name in LOGNORMAL_PARAMETERS
            # Rows at several temperatures: every row halved (the part's own row is the hottest).
            rows = tuple((parameter, tuple(row if row.fixed else _halved(row, lognormal)
                                           for row in rows) if parameter == name else rows)
                         for parameter, rows in part.temperature_rows)
            parts[part_name] = replace(part, temperature_rows=rows,
                                       **{name: _halved(spread, lognormal)})
    return replace(design, parts=parts)


def _halved(spread: Spread, lognormal: bool) -> Spread:
    def toward(limit: float | None) -> float | None:
        if limit is None:
            return None
        if lognormal:
            return spread.typ * math.sqrt(limit / spread.typ)
        return spread.typ + (limit - spread.typ) / 2

    return replace(spread, low=toward(spread.low), high=toward(spread.high))


def label(name: str) -> str:
    return _LABELS.get(name, name)
