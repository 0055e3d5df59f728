"""Issue 15, item 13: strings from a design file reach the terminal as written, never as rich markup,
emoji codes or control sequences.

Sources of the expectations: ECMA-48 (5th edition, June 1991), clause 5: the C0 set is
U+0000-U+001F (with DEL, U+007F) and the C1 set U+0080-U+009F, and ESC (U+001B) or CSI (U+009B) starts
a control sequence such as "ESC [ 2 J" (erase in page) or "ESC [ H" (cursor position); rich's
markup syntax (rich documentation, "Console Markup"): "[bold]" opens a style and "[/]" closes the
last one, and ":name:" is an emoji code.
"""

from __future__ import annotations

import io

import pytest
from rich.text import Text
from typer.testing import CliRunner

from stringcheck.cli.app import app
from stringcheck.report.display_text import CONTROL_CHARACTERS, report_console, shown

runner = CliRunner()

BASE = """\
[design]
title = "TITLE"

[duty]
reverse_voltage = "6 kV"
waveform = "half-sine"
frequency = "50 Hz"
di_dt = "20 A/us"
ambient = "35 degC"

[string]
series = 6
derating = 0.8
part = "PART"

[parts."PART"]
v_rrm = "1.6 kV"
i_r = { typ = "0.3 uA", max = "3 uA", at_temperature = "25 degC", at_voltage = "1.6 kV" }
q_rr = { typ = "90 nC", max = "160 nC" }
c_j = "10 pF"
t_j_max = "150 degC"

[grading]
resistor = "3.3 MOhm"
resistor_tolerance = "1 %"
capacitor = "2.2 nF"
capacitor_tolerance = "10 %"

[monte_carlo]
trials = 300
seed = 11
"""

ESCAPES = "\\u001b[2J\\u001b[H\\u009b31m"  # TOML escapes: ESC [2J, ESC [H, CSI 31m


def design(tmp_path, *, title="A stack", part="MAIN", name="stack.toml"):
    path = tmp_path / name
    path.write_text(BASE.replace("TITLE", title).replace("PART", part), encoding="utf-8")
    return path


def flat(text: str) -> str:
    return " ".join(text.split())


# (title in TOML, part name in TOML, file name, command, what must be shown, what must not)
CASES = [
    ("A stack", "[/]", "stack.toml", "check", ["part(s) [/]", "[/]"], []),
    ("A stack", "[/]", "stack.toml", "size", ["[/]"], []),
    ("[bold]Bold[/bold] stack", "MAIN", "stack.toml", "check", ["[bold]Bold[/bold] stack"], []),
    ("x" + ESCAPES + " VERDICT: PASS", "MAIN", "stack.toml", "check", ["x?[2J?[H?31m"],
     ["\x1b", "\x9b"]),
    ("two\\nVERDICT: PASS", "MAIN", "stack.toml", "check", ["two?VERDICT: PASS"], []),
    ("A stack", "MAIN", ":smile:.toml", "check", [":smile:.toml"],
     ["\N{SMILING FACE WITH OPEN MOUTH}"]),
    ("A stack", "M\\u0007A\\u007fIN", "stack.toml", "check", ["M?A?IN"], ["\x07", "\x7f"]),
]


@pytest.mark.parametrize(("title", "part", "name", "command", "present", "absent"), CASES,
                         ids=["part [/] check", "part [/] size", "markup title", "escape title",
                              "newline title", "emoji file name", "BEL and DEL in a part"])
def test_design_strings_are_shown_as_written(tmp_path, title, part, name, command, present,
                                             absent):
    path = design(tmp_path, title=title, part=part, name=name)
    args = [command, str(path)] + (["--trials", "4000"] if command == "size" else [])
    result = runner.invoke(app, args, terminal_width=200)
    assert result.exit_code in (0, 1), result.output
    for fragment in present:
        assert fragment in result.output, (fragment, result.output)
    for fragment in absent:
        assert fragment not in result.output
    lines = result.output.split("\n")
    assert not any(CONTROL_CHARACTERS.search(line) for line in lines), \
        "a control character reached the terminal"
    if command == "check":
        # Only the report's own verdict line starts with VERDICT.
        verdicts = [line for line in result.output.splitlines() if line.lstrip().startswith(
            "VERDICT")]
        assert len(verdicts) == 1, verdicts


def test_an_error_naming_a_markup_part_is_one_line_as_written(tmp_path):
    path = tmp_path / "stack.toml"
    path.write_text(BASE.replace("TITLE", "x").replace("PART", "[/]").replace(
        'c_j = "10 pF"', 'c_j = "10 pF"\nbogus_key = 1'), encoding="utf-8")
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "parts.[/].bogus_key" in flat(lines[0]), result.stderr


@pytest.mark.parametrize(("text", "expected"), [
    ("plain", "plain"), ("a\x1b[2Jb", "a?[2Jb"), ("tab\there", "tab?here"), ("nl\nx", "nl?x"),
    ("del\x7f", "del?"), ("csi\x9b1m", "csi?1m"), ("nel\x85", "nel?"), ("ünïcode µ", "ünïcode µ"),
])
def test_shown_replaces_every_c0_c1_and_del_character(text, expected):
    assert shown(text) == expected


def test_the_report_console_replaces_control_characters_it_is_handed():
    # The last guard: a Text (which rich does not strip of ESC) printed as it is.
    out = io.StringIO()
    console = report_console(file=out, width=80)
    console.print(Text("before\x1b[2J\x1b[Hafter"), "[bold]x[/]", ":smile:")
    assert out.getvalue() == "before?[2J?[Hafter [bold]x[/] :smile:\n"
