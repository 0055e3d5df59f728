"""Capacitive devices in the series checks: each part's junction law and its capacitive recovery.

A part gives C_j as one constant (``c_j = "15 pF"``: the law with gamma = 0) or as datasheet rows
(``design.junction``), to which the junction law C_j0 / (1 + V/phi)^gamma is fitted here
(``physics.junction_capacitance.fit_junction_law``, phi held at the class's default). A capacitive
part (a SiC Schottky diode, or a part giving c_j and no q_rr) stores no minority-carrier charge:
its recovery charge is the junction's own, Q_c = integral of C_j dV up to its stage's voltage,
which the charge balance (``solvers.capacitive_sharing``) takes in place of an added Q_rr.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from stringcheck.design.model import Design, Part
from stringcheck.findings import Finding, Value
from stringcheck.physics.junction_capacitance import fit_junction_law, junction_charge

# phi [V] of a constant capacitance (gamma = 0): any positive value gives C_j0 at every voltage.
_CONSTANT_POTENTIAL = 1.0


@dataclass(frozen=True)
class PartJunction:
    """The junction law of one part: C_j0 [F], phi [V], gamma [1]; ``capacitive``: its recovery
    charge is the junction's."""

    zero_bias_capacitance: float
    built_in_potential: float
    grading_exponent: float
    capacitive: bool


def part_junction(part: Part) -> PartJunction:
    """The junction law of ``part``: fitted to its C_j rows, or its constant c_j."""
    rows = part.junction_rows
    if rows is None:
        return PartJunction(zero_bias_capacitance=part.c_j, built_in_potential=_CONSTANT_POTENTIAL,
                            grading_exponent=0.0, capacitive=part.capacitive)
    law = fit_junction_law([row.at_voltage for row in rows.rows], [row.typ for row in rows.rows],
                           built_in_potential=rows.built_in_potential,
                           default_exponent=rows.default_exponent)
    return PartJunction(zero_bias_capacitance=float(law.zero_bias_capacitance),
                        built_in_potential=float(law.built_in_potential),
                        grading_exponent=float(law.grading_exponent), capacitive=part.capacitive)


def needs_junction_law(design: Design) -> bool:
    """Whether the charge balance needs the nonlinear solver: a part used gives C_j rows or is
    capacitive (else the linear balance with constant capacitances, as before rows)."""
    return any(design.parts[name].junction_rows is not None or design.parts[name].capacitive
               for name in design.parts_used())


def capacitive_charge(part: Part, voltage: float) -> float:
    """Q_c [C] of ``part``'s typical junction from 0 to ``voltage`` [V]."""
    law = part_junction(part)
    return float(junction_charge(voltage, law.zero_bias_capacitance,
                                 built_in_potential=law.built_in_potential,
                                 grading_exponent=law.grading_exponent))


def capacitive_recovery_note(design: Design) -> Finding | None:
    """The assumption the report lists when a part's recovery charge is its junction's
    (``recovery.capacitive``), with each such part's typical Q_c at an even share of the string
    voltage; None when no part used is capacitive."""
    names = [name for name in design.parts_used() if design.parts[name].capacitive]
    if not names:
        return None
    share = design.duty.reverse_voltage / design.string.series
    charges = ", ".join(f"parts.{name} {capacitive_charge(design.parts[name], share):.3g} C"
                        for name in names)
    return Finding("recovery.capacitive", {"parts": Value(charges), "voltage": Value(share, "V")})


def junction_arrays(values) -> dict[str, np.ndarray]:
    """The junction constants per position or device, by ``values(attribute)`` (as the series
    setup reads every part constant): C_j0, phi, gamma, and 0 / 1 for a stored charge."""
    return dict(
        junction_zero_bias=values(lambda p: part_junction(p).zero_bias_capacitance),
        junction_potential=values(lambda p: part_junction(p).built_in_potential),
        junction_exponent=values(lambda p: part_junction(p).grading_exponent),
        stored_charge=values(lambda p: 0.0 if p.capacitive else 1.0))
