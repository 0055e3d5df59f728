"""The dynamic check with capacitive devices and C_j rows (checks.junction, checks.series): the
recovery charge of a capacitive part is its junction's, up to its own stage voltage."""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import brentq

from stringcheck.checks.findings import codes
from stringcheck.checks.preconditions import model_assumptions, with_recovery_charge
from stringcheck.design.reading import parse_design_text
from stringcheck.studies.check import run_check

# Two capacitive parts of our own invention (no q_rr: the junction's charge), one row each at
# 400 V, the silicon default law (phi = 0.7 V, gamma = 1/2: Q_c grows about as sqrt(V)), sized
# so that Q_c(400 V) = 18 nC and 20 nC. No grading capacitor, 800 V across the pair.
PHI = 0.7


def _row(charge: float) -> float:
    """C_j(400 V) [F] of the law with gamma = 1/2 whose charge at 400 V is ``charge``:
    Q_c = 2 C_j0 phi (sqrt(1 + V/phi) - 1) and C_j(V) = C_j0 / sqrt(1 + V/phi)."""
    root = math.sqrt(1 + 400 / PHI)
    return charge / (2 * PHI * (root - 1)) / root


TEXT = f"""
[duty]
reverse_voltage = "800 V"
waveform = "square"
frequency = "20 kHz"
di_dt = "200 A/us"
[string]
series = 2
part = "SMALL"
[[string.position]]
index = 2
part = "LARGE"
[parts.SMALL]
v_rrm = "1.2 kV"
i_r = {{ typ = "1 uA", at_voltage = "1.2 kV", at_temperature = "25 degC" }}
c_j = {{ typ = "{_row(18e-9)!r} F", at_voltage = "400 V" }}
[parts.LARGE]
v_rrm = "1.2 kV"
i_r = {{ typ = "1 uA", at_voltage = "1.2 kV", at_temperature = "25 degC" }}
c_j = {{ typ = "{_row(20e-9)!r} F", at_voltage = "400 V" }}
"""


def test_two_capacitive_devices_share_by_their_junction_charge():
    design = parse_design_text(TEXT)
    result = run_check(design, trials=64)
    dynamic = result.checks["dynamic"]
    small, large = dynamic.positions
    # Independent solution by scipy's brentq: the same charge in both junctions,
    # Q_c,1(V1) = Q_c,2(800 - V1), Q_c,k = k_k (sqrt(1 + V/phi) - 1) with k_1 / k_2 = 18 / 20.
    def excess(v1):
        return 18 * (math.sqrt(1 + v1 / PHI) - 1) - 20 * (math.sqrt(1 + (800 - v1) / PHI) - 1)
    v1 = brentq(excess, 0.0, 800.0, xtol=1e-12)
    assert math.isclose(small.mean_voltage, v1, rel_tol=1e-9)
    assert math.isclose(large.mean_voltage, 800 - v1, rel_tol=1e-9)
    # The check value: Q_c ~ sqrt(V) exactly gives V1 = 800 * 400 / (400 + 324),
    # +10.5 % over the half; phi = 0.7 V moves it by well under 1 %.
    assert math.isclose(small.mean_voltage, 800 * 400 / 724, rel_tol=5e-3)
    assert 0.09 < small.mean_voltage / 400 - 1 < 0.11
    # The report lists that the recovery charge is the junction's, the law taken through the
    # rows, and what stood for q_rr.
    listed = codes(result.assumptions)
    for code in ("recovery.capacitive", "assumed.c_j_law_one_row", "assumed.q_rr_capacitive"):
        assert code in listed, listed


def test_the_capacitive_note_is_a_model_assumption():
    design = with_recovery_charge(parse_design_text(TEXT))
    notes = codes(model_assumptions(design, None))
    assert "recovery.capacitive" in notes
    assert "assumed.q_rr_capacitive" in codes(design.assumptions)


def test_scattered_rows_scatter_the_sharing_and_typ_rows_do_not():
    # C_j max 20 % over typ: the devices' junction factors scatter the charge balance; one seed
    # gives one answer; the same rows without max share exactly.
    small_row = f"{_row(18e-9)!r} F"
    scattered = TEXT.replace(f'typ = "{small_row}", at_voltage',
                             f'typ = "{small_row}", max = "{1.2 * _row(18e-9)!r} F", at_voltage')
    design = parse_design_text(scattered)
    first = run_check(design, trials=300, seed=5).checks["dynamic"].positions[0]
    again = run_check(design, trials=300, seed=5).checks["dynamic"].positions[0]
    assert first.std_voltage > 1.0
    assert first.std_voltage == again.std_voltage and first.max_voltage == again.max_voltage
    steady = run_check(parse_design_text(TEXT), trials=300, seed=5).checks["dynamic"].positions[0]
    assert steady.std_voltage < 1e-6
    assert np.isfinite(first.max_voltage)
