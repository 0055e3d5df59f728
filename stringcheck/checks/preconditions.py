"""What the series check needs of a design before it draws, and what it says about it.

Which checks a design can run (the dynamic check needs a turn-off and capacitance at every stage),
the recovery charge derived from I_RM and t_rr where a part gives only those, the arithmetic that
shows no built string can pass whatever is drawn, and the model assumptions the report lists.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from stringcheck.checks.findings import Finding, Value
from stringcheck.checks.junction import capacitive_charge, capacitive_recovery_note
from stringcheck.constants import RESISTOR_TCR_REFERENCE
from stringcheck.design.model import Design, Spread
from stringcheck.errors import DesignError
from stringcheck.physics.recovery import recovery_charge
from stringcheck.montecarlo.mixed_stock import mix_finding, position_values


def dynamic_check_reason(design: Design) -> Finding | None:
    """Why the dynamic check cannot run (None when it can)."""
    if design.duty.waveform == "dc" and design.duty.di_dt is None:
        return Finding("not_run.no_turn_off")
    if design.grading.capacitor is None:
        bare = [name for name in design.parts_used() if design.parts[name].c_j <= 0]
        if bare:
            raise DesignError(
                "the dynamic check needs capacitance at every stage: give grading.capacitor, or "
                f"the junction capacitance c_j of part(s) {', '.join(bare)}",
                source=design.source, key="grading.capacitor")
    return None


def with_recovery_charge(design: Design) -> Design:
    """Fill in Q_rr from I_RM and t_rr (Q_rr = 1/2 I_RM t_rr) where a part gives those but not Q_rr."""
    if dynamic_check_reason(design):
        return design
    parts = dict(design.parts)
    notes = []
    for name in design.parts_used():
        part = parts[name]
        if part.q_rr is not None:
            continue
        if part.capacitive:
            # The charge balance takes the junction's own charge; the typical Q_c at an even
            # share stands for q_rr where a check needs one figure (the thermal recovery loss).
            share = design.duty.reverse_voltage / design.string.series
            parts[name] = replace(part, q_rr=Spread(typ=capacitive_charge(part, share),
                                                    typ_assumed=True))
            notes.append(Finding("assumed.q_rr_capacitive", {"key": Value(f"parts.{name}.q_rr"),
                                                             "voltage": Value(share, "V")}))
            continue
        if part.i_rm is None or part.t_rr is None:
            raise DesignError("missing; the dynamic check needs the recovery charge, or both i_rm "
                              "and t_rr to derive it", source=design.source,
                              key=f"parts.{name}.q_rr")
        typ = float(recovery_charge(part.i_rm.typ, part.t_rr.typ))
        high = None
        if part.i_rm.high is not None or part.t_rr.high is not None:
            high = float(recovery_charge(part.i_rm.high or part.i_rm.typ,
                                         part.t_rr.high or part.t_rr.typ))
        parts[name] = replace(part, q_rr=Spread(typ=typ, high=high, at_di_dt=part.i_rm.at_di_dt,
                                                typ_assumed=True))
        notes.append(Finding("assumed.q_rr_from_i_rm_t_rr", {"key": Value(f"parts.{name}.q_rr")}))
    if not notes:
        return design
    return replace(design, parts=parts, assumptions=design.assumptions + tuple(notes))


def impossibility(design: Design) -> tuple[Finding, ...]:
    """Why no built string can pass whatever is drawn, as findings with the arithmetic's figures
    (empty when it can). With a mix each position counts with the best of the parts that can
    stand there."""
    layout = design.string
    reasons = []
    capacity = layout.derating * position_values(design, lambda p: p.v_rrm, pick=np.maximum)
    weakest = float(capacity.sum(axis=1).min())
    if design.duty.reverse_voltage > weakest:
        reasons.append(Finding(
            "impossible.string_voltage",
            {"voltage": Value(design.duty.reverse_voltage, "V"), "series": Value(layout.series),
             "derating": Value(layout.derating)}, Value(weakest, "V")))
    current = design.duty.forward_current
    if current is not None and all(design.parts[n].i_fav is not None for n in design.parts_used()):
        # A branch carries no more than its weakest device's I_F(AV); perfect sharing at best
        # brings every branch to that limit at once.
        ratings = position_values(design, lambda p: p.i_fav, pick=np.maximum)
        group = float(ratings.min(axis=1).sum())
        if current > group:
            reasons.append(Finding("impossible.group_current",
                                   {"current": Value(current, "A"),
                                    "parallel": Value(layout.parallel)}, Value(group, "A")))
    return tuple(reasons)


def model_assumptions(design: Design, rescaling_note: Finding | None, *,
                      ac_blocking: bool = False, self_heating: bool = False
                      ) -> tuple[Finding, ...]:
    """The model's assumptions the report lists (findings ``model.*`` and the recovery charge's
    ``recovery.*``). ``ac_blocking``: the static check also followed the reverse half-period in
    time; ``self_heating``: the leakage took the thermal check's junction temperatures."""
    rows = any(len(design.parts[name].rows("i_r")) >= 2 for name in design.parts_used())
    reference = {"reference": Value(RESISTOR_TCR_REFERENCE, "degC")}
    # With leakage rows the leakage is each device's own between its rows, not referred by one
    # doubling temperature.
    junction = "model.junction_temperature_equilibrium" if self_heating else (
        "model.junction_temperature_rows" if rows else "model.junction_temperature")
    notes = [
        Finding("model.static_ac") if ac_blocking else Finding("model.static_dc"),
        Finding(junction),
        Finding("model.resistor_tcr_position", reference) if self_heating else
        Finding("model.resistor_tcr", reference),
    ]
    if design.string.mix is not None:
        notes.append(Finding("model.mixed_stock", causes=(mix_finding(design),)))
    if rescaling_note is not None:
        notes.append(rescaling_note)
    capacitive = capacitive_recovery_note(design)
    if capacitive is not None and not dynamic_check_reason(design):
        notes.append(capacitive)
    if design.duty.waveform == "offset-sine":
        notes.append(Finding("model.offset_sine_current"))
    return tuple(notes)


def no_scatter(design: Design, parameters: tuple[str, ...]) -> tuple[Finding, ...]:
    """The inputs drawn without scatter (fixed values): each part's parameters among
    ``parameters`` with neither limit given, and grading components without a tolerance."""
    notes = []
    for name in design.parts_used():
        for parameter in parameters:
            spread = design.parts[name].spread(parameter)
            if spread is not None and spread.fixed:
                notes.append(Finding("no_scatter.parameter",
                                     {"part": Value(name), "parameter": Value(parameter)}))
    grading = design.grading
    if grading.resistor is not None and grading.resistor_tolerance == 0:
        notes.append(Finding("no_scatter.resistor"))
    if grading.capacitor is not None and grading.capacitor_tolerance == 0:
        notes.append(Finding("no_scatter.capacitor"))
    return tuple(notes)
