"""Rows at several temperatures, screening per row and the grading parts' tolerance shape, as the
design reader takes them (issue 17, rows), and their bad inputs (one-line errors naming the key,
exit 2)."""

from __future__ import annotations

import math

import pytest

from stringcheck.design.model import row_screened
from stringcheck.design.reading import parse_design_text
from stringcheck.errors import DesignError
from stringcheck.report.wording import sentences
from tests.cli.invocation import BASE, assert_one_line_error, edited, invoke

ONE_ROW = 'i_r = { typ = "0.3 uA", max = "3 uA", at_temperature = "25 degC", at_voltage = "1.6 kV" }'
TWO_ROWS = ('i_r = [{ typ = "5 uA", max = "50 uA", at_temperature = "25 degC" },\n'
            '       { typ = "50 uA", max = "500 uA", at_temperature = "125 degC" }]')


def design(text: str):
    return parse_design_text(text, source="rows.toml")


def codes(found) -> list[str]:
    return [finding.code for finding in found.assumptions]


def test_two_leakage_rows_fit_the_doubling_temperature():
    found = design(edited(ONE_ROW, TWO_ROWS))
    part = found.parts["MAIN"]
    # Plain arithmetic: a factor 10 over 100 K doubles every 100 K / log2(10) = 30.1 K.
    assert part.doubling_temperature == pytest.approx(100.0 / math.log2(10.0), rel=1e-12)
    rows = part.rows("i_r")
    assert [row.at_temperature for row in rows] == [25.0, 125.0]
    # The part's own row is the hottest; both rows at V_RRM (none given).
    assert part.i_r.at_temperature == 125.0 and part.i_r.typ == pytest.approx(50e-6)
    assert {row.at_voltage for row in rows} == {1600.0}
    assert "rows.fitted" in codes(found)
    assert "assumed.part_leakage_doubling" not in codes(found)
    assert any("30.1 K" in text for text in sentences(found.assumptions))


def test_rows_in_any_order_are_sorted_by_temperature():
    reversed_rows = ('i_r = [{ typ = "50 uA", max = "500 uA", at_temperature = "125 degC" },\n'
                     '       { typ = "5 uA", max = "50 uA", at_temperature = "25 degC" }]')
    part = design(edited(ONE_ROW, reversed_rows)).parts["MAIN"]
    assert [row.at_temperature for row in part.rows("i_r")] == [25.0, 125.0]


def test_forward_rows_fit_the_tempcos():
    text = edited('c_j = "10 pF"', 'c_j = "10 pF"\n'
                  'v_t0 = [{ typ = "1.0 V", at_temperature = "25 degC" },'
                  ' { typ = "0.8 V", at_temperature = "125 degC" }]\n'
                  'r_t = [{ typ = "10 mOhm", at_temperature = "25 degC" },'
                  ' { typ = "12.5 mOhm", at_temperature = "125 degC" }]')
    part = design(text).parts["MAIN"]
    # (0.8 - 1.0) V / 100 K; r(T) = r_hot (1 + a (T - T_hot)) through 10 mOhm at 25 degC.
    assert part.tempco_v_t0 == pytest.approx(-2e-3)
    assert part.tempco_r_t == pytest.approx((1.0 - 10.0 / 12.5) / 100.0)


@pytest.mark.parametrize("rows, key, fragment", [
    ('i_r = [{ typ = "5 uA", at_temperature = "25 degC" }, { typ = "9 uA", '
     'at_temperature = "25 degC" }]', "parts.MAIN.i_r[2]", "at 25 degC like parts.MAIN.i_r[1]"),
    ('i_r = [{ typ = "50 uA", at_temperature = "25 degC" }, { typ = "5 uA", '
     'at_temperature = "125 degC" }]', "parts.MAIN.i_r[2]", "leakage rises with temperature"),
    ('i_r = [{ typ = "5 uA", at_temperature = "25 degC" }, { typ = "50 uA" }]',
     "parts.MAIN.i_r[2]", "needs at_temperature"),
    ('i_r = []', "parts.MAIN.i_r", "empty list"),
    ('i_r = [{ typ = "5 uA", at_temperature = "25 degC", at_voltage = "1 kV" }, '
     '{ typ = "50 uA", at_temperature = "125 degC", at_voltage = "1.6 kV" }]', "parts.MAIN.i_r",
     "at_voltage"),
    ('i_r = [{ typ = "5 uA", at_temperature = "25 degC", screened = "yes" }]',
     "parts.MAIN.i_r[1].screened", "true or false"),
])
def test_bad_rows_are_one_line_errors_naming_the_key(tmp_path, rows, key, fragment):
    text = edited(ONE_ROW, rows)
    with pytest.raises(DesignError) as error:
        design(text)
    assert error.value.key == key and fragment in str(error.value)
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    assert_one_line_error(invoke("check", path), key, fragment)


def test_explicit_doubling_beside_two_rows_names_both_keys(tmp_path):
    text = edited(ONE_ROW, TWO_ROWS + '\nleakage_doubling = "10 K"')
    path = tmp_path / "both.toml"
    path.write_text(text, encoding="utf-8")
    assert_one_line_error(invoke("check", path), "parts.MAIN.leakage_doubling", "parts.MAIN.i_r",
                          "not both")
    # One row in a list is one row: the doubling key stands beside it.
    one = edited(ONE_ROW, 'i_r = [{ typ = "5 uA", at_temperature = "25 degC" }]\n'
                          'leakage_doubling = "20 K"')
    assert design(one).parts["MAIN"].doubling_temperature == 20.0


def test_one_row_takes_the_class_law_and_says_so():
    found = design(BASE)  # q_rr in one row, no class: the silicon law
    assert "assumed.recovery_law_rising" in codes(found)
    assert "assumed.recovery_at_datasheet_temperature" in codes(found)
    part = found.parts["MAIN"]
    assert part.recovery_rate("q_rr") == pytest.approx(math.log(2.5) / 100.0)
    sic = design(edited('v_rrm = "1.6 kV"', 'class = "sic-schottky"\nv_rrm = "1.6 kV"'))
    assert "assumed.recovery_law_flat" in codes(sic)
    assert sic.parts["MAIN"].recovery_rate("q_rr") == 0.0
    # Two recovery rows: no class law, no such assumption.
    rows = edited('q_rr = { typ = "90 nC", max = "160 nC" }',
                  'q_rr = [{ typ = "90 nC", max = "160 nC", at_temperature = "25 degC" },'
                  ' { typ = "200 nC", max = "350 nC", at_temperature = "125 degC" }]')
    assert not {"assumed.recovery_law_rising", "assumed.recovery_law_flat"} & set(codes(design(rows)))


def test_screening_defaults_by_row_temperature_and_the_design_wide_override():
    found = design(edited(ONE_ROW, TWO_ROWS))
    cool, hot = found.parts["MAIN"].rows("i_r")
    assert row_screened(cool, found.monte_carlo) and not row_screened(hot, found.monte_carlo)
    assert "assumed.screening_row" in codes(found)
    # [monte_carlo] screened decides the rows that do not say.
    wide = design(edited(ONE_ROW, TWO_ROWS).replace("seed = 11", "seed = 11\nscreened = true"))
    cool, hot = wide.parts["MAIN"].rows("i_r")
    assert row_screened(hot, wide.monte_carlo) and "assumed.screening_design" in codes(wide)
    # The row's own key decides first.
    own = TWO_ROWS.replace('at_temperature = "125 degC" }', 'at_temperature = "125 degC", '
                                                               'screened = false }')
    mine = design(edited(ONE_ROW, own).replace("seed = 11", "seed = 11\nscreened = true"))
    assert not row_screened(mine.parts["MAIN"].rows("i_r")[1], mine.monte_carlo)


def test_tolerance_shapes_default_and_bad_value(tmp_path):
    found = design(BASE)
    assert found.grading.resistor_distribution == "normal"
    assert found.grading.capacitor_distribution == "uniform"
    assert {"assumed.resistor_distribution_normal",
            "assumed.capacitor_distribution_uniform"} <= set(codes(found))
    given = design(BASE.replace('capacitor_tolerance = "10 %"', 'capacitor_tolerance = "10 %"\n'
                                'capacitor_distribution = "normal"'))
    assert given.grading.capacitor_distribution == "normal"
    assert "assumed.capacitor_distribution_uniform" not in codes(given)
    path = tmp_path / "shape.toml"
    path.write_text(BASE.replace('capacitor_tolerance = "10 %"', 'capacitor_tolerance = "10 %"\n'
                                 'capacitor_distribution = "flat"'), encoding="utf-8")
    assert_one_line_error(invoke("check", path), "grading.capacitor_distribution", "'uniform'")


def test_the_model_assumption_names_the_leakage_rows():
    from stringcheck.checks.preconditions import model_assumptions

    one = [f.code for f in model_assumptions(design(BASE), None)]
    rows = [f.code for f in model_assumptions(design(edited(ONE_ROW, TWO_ROWS)), None)]
    assert "model.junction_temperature" in one and "model.junction_temperature_rows" not in one
    assert "model.junction_temperature_rows" in rows and "model.junction_temperature" not in rows


def test_a_position_outside_the_rows_is_noted():
    # Rows at 50 and 125 degC; the stack sits at 35-45 degC, below them.
    rows = TWO_ROWS.replace('at_temperature = "25 degC"', 'at_temperature = "50 degC"')
    found = design(edited(ONE_ROW, rows))
    (note,) = [f for f in found.assumptions if f.code == "rows.extrapolated"]
    assert note.values["key"].number == "parts.MAIN.i_r"
    assert note.values["temperature"].number == 35.0
    assert "rows.extrapolated" not in codes(design(edited(ONE_ROW, TWO_ROWS)))
