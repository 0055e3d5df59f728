"""Bad C_j rows on the command line (issue 17, capacitive devices): one line naming the file and
the key, exit 2, never a traceback (docs/design-file.md, c_j; STYLE.md "Errors")."""

from __future__ import annotations

import pytest

from tests.cli.invocation import assert_one_line_error, edited, invoke


@pytest.mark.parametrize("rows, fragment", [
    ('[{ typ = "10 pF", at_voltage = "1 V" }, { typ = "20 pF", at_voltage = "1 kV" }]',
     "rises with voltage"),
    ('[{ typ = "20 pF", at_voltage = "1 kV" }, { typ = "10 pF", at_voltage = "1000 V" }]',
     "two rows at 1 kV"),
    ('{ typ = "10 pF", max = "12 pF" }', "give at_voltage"),
])
def test_bad_c_j_rows_are_one_line_naming_the_key(tmp_path, rows, fragment):
    path = tmp_path / "stack.toml"
    path.write_text(edited('c_j = "10 pF"', f"c_j = {rows}"), encoding="utf-8")
    result = invoke("check", path, "--trials", "100", "--quiet")
    assert_one_line_error(result, "stack.toml", "parts.MAIN.c_j", fragment)


def test_good_c_j_rows_run(tmp_path):
    path = tmp_path / "stack.toml"
    path.write_text(edited('c_j = "10 pF"', 'c_j = [{ typ = "60 pF", at_voltage = "1 V" }, '
                                            '{ typ = "10 pF", max = "12 pF", at_voltage = "1 kV" }]'),
                    encoding="utf-8")
    result = invoke("check", path, "--trials", "200", "--quiet")
    assert result.exit_code in (0, 1), result.output
