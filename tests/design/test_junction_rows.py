"""c_j as one figure, a datasheet row at a voltage, or rows (design.junction): values, class
defaults, capacitive parts, and bad rows as errors naming the key."""

from __future__ import annotations

import math

import pytest
from scipy.integrate import quad

from stringcheck.checks.findings import codes
from stringcheck.checks.junction import capacitive_charge, part_junction
from stringcheck.design.reading import parse_design_text
from stringcheck.errors import DesignError

# A small design of our own invention; PART is replaced per test.
TEXT = """
[duty]
reverse_voltage = "800 V"
waveform = "square"
frequency = "20 kHz"
di_dt = "200 A/us"
[string]
series = 2
part = "A"
[parts.A]
v_rrm = "1.2 kV"
i_r = { typ = "1 uA", at_voltage = "1.2 kV", at_temperature = "25 degC" }
PART
"""


def _part(body: str):
    design = parse_design_text(TEXT.replace("PART", body))
    return design, design.parts["A"]


def test_a_scalar_c_j_stays_a_constant_capacitance():
    _, part = _part('q_rr = { typ = "80 nC", at_di_dt = "100 A/us" }\nc_j = "15 pF"')
    assert part.c_j == 15e-12 and part.junction_rows is None and not part.capacitive
    law = part_junction(part)
    assert (law.zero_bias_capacitance, law.grading_exponent) == (15e-12, 0.0)


def test_one_row_takes_the_silicon_law_and_says_so():
    design, part = _part('q_rr = { typ = "80 nC", at_di_dt = "100 A/us" }\n'
                         'c_j = { typ = "40 pF", max = "50 pF", at_voltage = "400 V" }')
    rows = part.junction_rows
    assert len(rows.rows) == 1 and rows.rows[0].high == 50e-12
    assert (rows.built_in_potential, rows.default_exponent) == (0.7, 0.5)
    assert "assumed.c_j_law_one_row" in codes(design.assumptions)
    assert part.c_j == 40e-12  # the constant stand-in: the row at the highest voltage
    # The fitted law passes through the row: C_j0 = C(400 V) (1 + 400/0.7)^0.5 (junction law).
    law = part_junction(part)
    assert math.isclose(law.zero_bias_capacitance, 40e-12 * math.sqrt(1 + 400 / 0.7),
                        rel_tol=1e-12)


def test_rows_in_any_order_are_sorted_and_fitted():
    design, part = _part('q_rr = { typ = "80 nC", at_di_dt = "100 A/us" }\n'
                         'c_j = [{ typ = "40 pF", at_voltage = "400 V" }, '
                         '{ typ = "380 pF", at_voltage = "1 V" }]')
    assert [row.at_voltage for row in part.junction_rows.rows] == [1.0, 400.0]
    assert "assumed.c_j_law_fitted" in codes(design.assumptions)
    # Two rows, phi = 0.7 V held: gamma = ln(380/40) / ln((1 + 400/0.7) / (1 + 1/0.7)).
    gamma = math.log(380 / 40) / math.log((1 + 400 / 0.7) / (1 + 1 / 0.7))
    assert math.isclose(part_junction(part).grading_exponent, gamma, rel_tol=1e-12)


def test_the_sic_schottky_class_is_capacitive_with_about_20_nC_at_400_V():
    # The class's rows stand for a capacitive charge of about 20 nC at 400 V (its comment, common
    # practice); checked by scipy.integrate.quad of the fitted law.
    design = parse_design_text(TEXT.replace('v_rrm = "1.2 kV"\n', "").replace(
        'i_r = { typ = "1 uA", at_voltage = "1.2 kV", at_temperature = "25 degC" }\n', "")
        .replace("PART", 'class = "sic-schottky"'))
    part = design.parts["A"]
    assert part.capacitive
    law = part_junction(part)
    expected, _ = quad(lambda v: law.zero_bias_capacitance
                       / (1 + v / law.built_in_potential) ** law.grading_exponent, 0, 400,
                       epsabs=0.0, epsrel=1e-12)
    assert math.isclose(capacitive_charge(part, 400.0), expected, rel_tol=1e-9)
    assert 19e-9 < expected < 22e-9


@pytest.mark.parametrize("body, capacitive", [
    ('c_j = "40 pF"', True),  # no q_rr, c_j given: the junction's charge
    ('c_j = { typ = "40 pF", at_voltage = "400 V" }\ni_rm = { typ = "1 A", at_di_dt = "100 A/us" }',
     True),
    # i_rm and t_rr: a stored charge derived as before (1/2 I_RM t_rr)
    ('c_j = "40 pF"\ni_rm = { typ = "1 A", at_di_dt = "100 A/us" }\nt_rr = "100 ns"', False),
    ('c_j = "40 pF"\nq_rr = { typ = "80 nC", at_di_dt = "100 A/us" }', False),
])
def test_which_parts_are_capacitive(body, capacitive):
    assert _part(body)[1].capacitive is capacitive


@pytest.mark.parametrize("c_j, message", [
    ('[{ typ = "20 pF", at_voltage = "1 V" }, { typ = "30 pF", at_voltage = "400 V" }]',
     "C_j rises with voltage (20 pF at 1 V, 30 pF at 400 V)"),
    ('[{ typ = "40 pF", at_voltage = "400 V" }, { typ = "30 pF", at_voltage = "0.4 kV" }]',
     "two rows at 400 V"),
    ('{ typ = "40 pF" }', "give at_voltage"),
    ('{ max = "40 pF", at_voltage = "1 V" }', "give typ"),
    ('[]', "empty list"),
    ('{ typ = "40 pF", max = "30 pF", at_voltage = "1 V" }', "min <= typ <= max"),
])
def test_bad_rows_name_the_key(c_j, message):
    with pytest.raises(DesignError) as error:
        _part(f'q_rr = {{ typ = "80 nC", at_di_dt = "100 A/us" }}\nc_j = {c_j}')
    assert error.value.key == "parts.A.c_j"
    assert message in str(error.value)
