"""The circuit workflow (issue 23): the duty of every stack of a rectifier or multiplier, checked.

A design with a ``[circuit]`` table describes the circuit, not the duty: this study derives, for
every diode stack of the circuit, its peak reverse voltage, reverse-voltage waveform, forward
current and commutation slope (the formulas in :mod:`stringcheck.physics.circuits`), each with a
finding that says how (its sentence and source in ``report.wording``), then checks each distinct
stack duty once with :func:`stringcheck.studies.check.run_check` (stacks carrying the same duty
share one check, with a note). The verdict passes only when every stack's check passes. Nothing
here formats text.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from stringcheck.checks.findings import Finding, Value
from stringcheck.design.model import Circuit, Design, Duty
from stringcheck.errors import DesignError
from stringcheck.physics.circuits import (
    capacitor_input_pulse,
    commutation_slope,
    multiplier_output,
    overlap_angle,
)
from stringcheck.studies.check import CheckResult, run_check

__all__ = ["CircuitResult", "StackDuty", "StackGroup", "circuit_stacks", "run_circuit"]


@dataclass(frozen=True)
class StackDuty:
    """The duty one stack position of the circuit sees, and how it was derived.

    ``label`` names the position (``D1``; ``S2b`` for stage 2's second diode of a multiplier);
    ``reverse_waveform`` is the shape of its reverse voltage (``half-sine``, ``offset-sine``,
    ``square``); currents [A], slope [A/s], angles [rad] (None where the circuit has none).
    ``duty`` is what the checks take; ``findings`` the derivation, each with its source.
    """

    label: str
    reverse_voltage: float
    reverse_waveform: str
    forward_average: float
    forward_peak: float
    forward_rms: float
    conduction_angle: float | None
    overlap_angle: float | None
    di_dt: float
    duty: Duty
    findings: tuple[Finding, ...]


@dataclass(frozen=True)
class StackGroup:
    """Stacks carrying the same duty, checked once."""

    labels: tuple[str, ...]
    stack: StackDuty
    result: CheckResult


@dataclass(frozen=True)
class CircuitResult:
    """What ``stringcheck check`` found for a design with a ``[circuit]`` table."""

    design: Design
    stacks: tuple[StackDuty, ...]
    groups: tuple[StackGroup, ...]
    findings: tuple[Finding, ...]
    verdict: str
    ripple: float | None = None
    drop: float | None = None
    output_voltage: float | None = None

    def to_dict(self) -> dict[str, Any]:
        """The circuit's figures (the JSON's ``circuit`` section; each group's check is added by
        ``report.export``)."""
        circuit = self.design.circuit
        return {
            "topology": circuit.topology, "stages": circuit.stages, "phases": circuit.phases,
            "secondary_peak": circuit.secondary_peak, "frequency": circuit.frequency,
            "load_current": circuit.load_current, "output_voltage": self.output_voltage,
            "ripple": self.ripple, "drop": self.drop,
            "stacks": [{
                "label": s.label, "reverse_voltage": s.reverse_voltage,
                "reverse_waveform": s.reverse_waveform, "forward_average": s.forward_average,
                "forward_peak": s.forward_peak, "forward_rms": s.forward_rms,
                "conduction_angle_deg": None if s.conduction_angle is None else
                math.degrees(s.conduction_angle),
                "overlap_angle_deg": None if s.overlap_angle is None else
                math.degrees(s.overlap_angle),
                "di_dt": s.di_dt, "checked_as": s.duty.waveform,
                "finding_codes": [f.code for f in s.findings]} for s in self.stacks],
            "finding_codes": [f.code for f in self.findings],
        }

    def __repr__(self) -> str:
        return (f"CircuitResult({self.design.title!r}, {self.design.circuit.topology}, "
                f"{len(self.stacks)} stacks in {len(self.groups)} check(s), {self.verdict})")


def _float(value) -> float:
    return float(np.asarray(value))


def _labels(circuit: Circuit) -> tuple[str, ...]:
    if circuit.topology == "half-wave":
        return ("D1",)
    if circuit.topology == "center-tap":
        return ("D1", "D2")
    if circuit.topology == "bridge":
        return tuple(f"D{k}" for k in range(1, (4 if circuit.phases == 1 else 6) + 1))
    stages = 1 if circuit.topology == "doubler" else circuit.stages
    return tuple(f"S{k}{side}" for k in range(1, stages + 1) for side in "ab")


def circuit_stacks(design: Design) -> tuple[tuple[StackDuty, ...], tuple[Finding, ...],
                                              dict[str, float]]:
    """Every stack position's duty of ``design``'s circuit, the circuit's own findings, and the
    multiplier's output figures (``ripple``, ``drop``, ``output_voltage`` [V]; empty otherwise).

    Raises
    ------
    DesignError
        Where the circuit has no steady operation the formulas hold for (a filter or stage
        capacitor that discharges fully between pulses, a commutation that never completes).
    """
    circuit = design.circuit
    peak, current, f = circuit.secondary_peak, circuit.load_current, circuit.frequency
    omega = 2.0 * math.pi * f
    inductance = circuit.commutation_inductance
    topology = circuit.topology
    extra: dict[str, float] = {}
    notes: list[Finding] = []
    findings: list[Finding] = []
    peak_value = Value(peak, "V")
    if topology in ("doubler", "multiplier"):
        stages = 1 if topology == "doubler" else circuit.stages
        output = multiplier_output(peak, stages, current, circuit.stage_capacitor, f)
        extra = {"ripple": _float(output.ripple), "drop": _float(output.drop),
                 "output_voltage": _float(output.output_voltage)}
        if not extra["output_voltage"] > 0.0:
            raise DesignError(f"the regulation drop ({extra['drop']:.4g} V) reaches the no-load "
                              f"output 2 n V_pk ({_float(output.no_load_voltage):.4g} V): the load "
                              "current is too large for these stages; raise the stage capacitor "
                              "or the frequency", source=design.source, key="circuit.stage_capacitor")
        notes.append(Finding("circuit.multiplier_output", {
            "stages": Value(stages), "no_load": Value(_float(output.no_load_voltage), "V"),
            "ripple": Value(extra["ripple"], "V"), "drop": Value(extra["drop"], "V"),
            "output": Value(extra["output_voltage"], "V"), "current": Value(current, "A"),
            "capacitance": Value(circuit.stage_capacitor, "F"), "frequency": Value(f, "Hz")}))
        reverse = _float(output.diode_reverse_voltage)
        findings.append(Finding("circuit.piv.multiplier", {"voltage": Value(reverse, "V"),
                                                           "peak": peak_value}))
        pulse = _pulse(design, peak, current, circuit.stage_capacitor, f, 1, "stage_capacitor")
        findings += [Finding("circuit.waveform.offset_sine", {"peak": peak_value}),
                     _pulse_finding("circuit.forward.multiplier", pulse),
                     Finding("circuit.slope.extinction", {"di_dt": Value(_float(
                         pulse.extinction_slope), "A/s")})]
        stack = _stack(design, reverse, "offset-sine", pulse=pulse, findings=findings,
                       waveform="offset-sine")
        return tuple(replace(stack, label=label) for label in _labels(circuit)), tuple(notes), extra
    capacitor = circuit.filter_capacitor
    pulses = 1 if topology == "half-wave" else 2
    # What blocks: the source crest (a bridge), or the source crest plus what the capacitor holds
    # or the other half of a center-tapped winding drives (twice the crest).
    twice = topology == "center-tap" or (topology == "half-wave" and capacitor is not None)
    reverse = 2.0 * peak if twice else peak
    code = {"half-wave": "circuit.piv.half_wave_capacitor" if capacitor else "circuit.piv.half_wave",
            "center-tap": "circuit.piv.center_tap",
            "bridge": "circuit.piv.bridge" if circuit.phases == 1 else
            "circuit.piv.three_phase_bridge"}[topology]
    findings.append(Finding(code, {"voltage": Value(reverse, "V"), "peak": peak_value}))
    if capacitor is not None:
        pulse = _pulse(design, peak, current, capacitor, f, pulses, "filter_capacitor")
        offset = topology != "bridge"
        findings += [Finding("circuit.waveform.offset_sine" if offset else
                             "circuit.waveform.bridge_capacitor", {"peak": peak_value}),
                     _pulse_finding("circuit.forward.capacitor_input", pulse),
                     Finding("circuit.slope.extinction", {"di_dt": Value(_float(
                         pulse.extinction_slope), "A/s")})]
        stack = _stack(design, reverse, "offset-sine" if offset else "half-sine", pulse=pulse,
                       findings=findings, waveform="offset-sine" if offset else "half-sine")
    elif inductance is not None and topology != "half-wave":
        # A line-commutated rectifier feeding a dc-side inductance: each diode carries the steady
        # dc current for its share of the period and hands it over within the overlap angle.
        voltage = math.sqrt(2.0) * peak if topology == "center-tap" else peak / math.sqrt(2.0)
        u = _float(overlap_angle(voltage, inductance, current, f))
        if not math.isfinite(u):
            raise DesignError("the commutation never completes within a half period (2 omega L "
                              "I_d > 2 sqrt(2) V); check commutation_inductance and load_current",
                              source=design.source, key="circuit.commutation_inductance")
        slope = _float(commutation_slope(voltage, inductance, u))
        share = 1.0 / 3.0 if circuit.phases == 3 else 0.5
        findings += [Finding("circuit.waveform.line_commutated", {"peak": peak_value}),
                     Finding("circuit.forward.current_fed" if circuit.phases == 1 else
                             "circuit.forward.current_fed_three_phase",
                             {"current": Value(current, "A"), "share": Value(share),
                              "average": Value(current * share, "A")}),
                     Finding("circuit.slope.overlap", {
                         "overlap": Value(math.degrees(u), "deg"), "voltage": Value(voltage, "V"),
                         "inductance": Value(inductance, "H"), "current": Value(current, "A"),
                         "frequency": Value(f, "Hz"), "di_dt": Value(slope, "A/s")})]
        # The checks' square wave conducts half the period: with the same peak (I_d) its average
        # I_d / 2 is that of a single-phase diode, and above a three-phase one's (conservative).
        duty = Duty(reverse_voltage=reverse, forward_current=current / 2.0, waveform="square",
                    frequency=f, di_dt=slope, ambient=circuit.ambient,
                    stray_inductance=inductance)
        stack = StackDuty(label="", reverse_voltage=reverse, reverse_waveform="half-sine",
                          forward_average=current * share, forward_peak=current,
                          forward_rms=current * math.sqrt(share), conduction_angle=None,
                          overlap_angle=u, di_dt=slope, duty=duty, findings=tuple(findings))
    else:
        # A resistive load without a filter: each diode carries half-sine pulses.
        average = current / pulses
        crest = math.pi * current / 2.0 if pulses == 2 else math.pi * current
        slope = omega * crest
        findings += [Finding("circuit.waveform.half_sine", {"peak": peak_value}),
                     Finding("circuit.forward.resistive", {"average": Value(average, "A"),
                                                           "crest": Value(crest, "A")}),
                     Finding("circuit.slope.natural", {"di_dt": Value(slope, "A/s"),
                                                       "crest": Value(crest, "A")})]
        duty = Duty(reverse_voltage=reverse, forward_current=average, waveform="half-sine",
                    frequency=f, di_dt=slope, ambient=circuit.ambient,
                    stray_inductance=inductance)
        stack = StackDuty(label="", reverse_voltage=reverse, reverse_waveform="half-sine",
                          forward_average=average, forward_peak=crest, forward_rms=crest / 2.0,
                          conduction_angle=math.pi, overlap_angle=None, di_dt=slope, duty=duty,
                          findings=tuple(findings))
    return tuple(replace(stack, label=label) for label in _labels(circuit)), tuple(notes), extra


def _pulse(design: Design, peak, current, capacitor, f, pulses, key):
    pulse = capacitor_input_pulse(peak, current, capacitor, f, pulses=pulses)
    if not np.isfinite(pulse.start):
        drop = current / (pulses * f * capacitor)
        raise DesignError(f"the capacitor discharges fully between charging pulses (I / (p f C) = "
                          f"{drop:.4g} V against V_pk = {peak:.4g} V): there is no steady "
                          "capacitor-input operation; raise it", source=design.source,
                          key=f"circuit.{key}")
    return pulse


def _pulse_finding(code: str, pulse) -> Finding:
    return Finding(code, {
        "angle": Value(math.degrees(_float(pulse.conduction_angle)), "deg"),
        "ripple": Value(_float(pulse.ripple), "V"),
        "peak": Value(_float(pulse.peak_current), "A"),
        "average": Value(_float(pulse.average_current), "A"),
        "rms": Value(_float(pulse.rms_current), "A"),
        # How much the checks' half-sine of the same average underestimates the rms: pi/2 I_AV.
        "rms_ratio": Value(_float(pulse.rms_current) / (math.pi / 2.0 * _float(
            pulse.average_current)))})


def _stack(design: Design, reverse: float, reverse_waveform: str, *, pulse, findings,
           waveform: str) -> StackDuty:
    circuit = design.circuit
    average = _float(pulse.average_current)
    slope = _float(pulse.extinction_slope)
    duty = Duty(reverse_voltage=reverse, forward_current=average, waveform=waveform,
                frequency=circuit.frequency, di_dt=slope, ambient=circuit.ambient,
                stray_inductance=circuit.commutation_inductance)
    return StackDuty(label="", reverse_voltage=reverse, reverse_waveform=reverse_waveform,
                     forward_average=average, forward_peak=_float(pulse.peak_current),
                     forward_rms=_float(pulse.rms_current),
                     conduction_angle=_float(pulse.conduction_angle), overlap_angle=None,
                     di_dt=slope, duty=duty, findings=tuple(findings))


def run_circuit(design: Design, **check_options) -> CircuitResult:
    """Derive every stack's duty of ``design``'s circuit and check each distinct one.

    Parameters
    ----------
    design
        A validated design with a ``[circuit]`` table.
    **check_options
        Passed to :func:`stringcheck.studies.check.run_check` for every distinct stack duty
        (``trials``, ``seed``, ``workers``, ``transient``, ``rare``, ``drivers``, ``progress``...).
    """
    if design.circuit is None:
        raise DesignError("has no [circuit] table; `check` takes its [duty] directly",
                          source=design.source, key="circuit")
    stacks, notes, extra = circuit_stacks(design)
    groups: list[StackGroup] = []
    seen: dict[Duty, list[str]] = {}
    for stack in stacks:
        seen.setdefault(stack.duty, []).append(stack.label)
    findings = list(notes)
    for duty, labels in seen.items():
        stack = next(s for s in stacks if s.duty == duty)
        result = run_check(replace(design, duty=duty), **check_options)
        groups.append(StackGroup(labels=tuple(labels), stack=stack, result=result))
        if len(labels) > 1:
            findings.append(Finding("circuit.same_duty", {"count": Value(len(labels)),
                                                          "stacks": Value(", ".join(labels))}))
    verdict = "pass" if all(group.result.verdict == "pass" for group in groups) else "fail"
    return CircuitResult(design=design, stacks=stacks, groups=tuple(groups),
                         findings=tuple(findings), verdict=verdict, **extra)
