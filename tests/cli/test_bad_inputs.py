"""Every bad design file is one clear line and exit code 2 (issue 8): the file, the key (or the
line) and what is wrong, never a traceback.

Sources of the expectations: docs/design-file.md (schema, ranges, unknown keys with a suggestion)
and section 6 (exit codes); STYLE.md "Errors" (one line, the key and the fix); the README section
"Errors and exit codes". There is no CSV reader yet (measured lots are rejected by the loader), so
there are no CSV-level bad inputs here.
"""

from __future__ import annotations

import os
import pathlib

import pytest

from tests.cli.invocation import BASE, assert_no_traceback, assert_one_line_error, edited, \
    invoke, line_of


def test_base_design_is_valid_and_runs(tmp_path):
    path = tmp_path / "base.toml"
    path.write_text(BASE, encoding="utf-8")
    result = invoke("check", path, "--trials", "200", "--quiet")
    assert result.exit_code in (0, 1), result.output
    assert_no_traceback(result)


# --- the table of bad inputs -----------------------------------------------------------------------

def _missing(tmp_path, monkeypatch):
    return tmp_path / "nowhere.toml"


def _folder(tmp_path, monkeypatch):
    folder = tmp_path / "stack.toml"
    folder.mkdir()
    return folder


def _pipe(tmp_path, monkeypatch):
    # A named pipe would block a plain read for ever (POSIX mkfifo).
    path = tmp_path / "pipe.toml"
    os.mkfifo(path)
    return path


def _unreadable(tmp_path, monkeypatch):
    # chmod 000 does not stop root (the test machine's user), so the refusal is simulated.
    path = tmp_path / "locked.toml"
    path.write_text(BASE, encoding="utf-8")
    real_open = pathlib.Path.open

    def refuse(self, *args, **kwargs):
        if self == path:
            raise PermissionError(13, "Permission denied", str(self))
        return real_open(self, *args, **kwargs)

    monkeypatch.setattr(pathlib.Path, "open", refuse)
    return path


def _too_large(tmp_path, monkeypatch):
    path = tmp_path / "huge.toml"
    with open(path, "wb") as stream:
        stream.truncate(5 * 1024 * 1024)  # sparse: costs no disk
    return path


def _name_too_long(tmp_path, monkeypatch):
    return tmp_path / ("x" * 300 + ".toml")  # NAME_MAX is 255 bytes on Linux file systems


_LONG_NUMBER = edited("seed = 11", "seed = " + "9" * 5000)
_DUTY = BASE[BASE.index("[duty]"):BASE.index("[string]")]
_STRING = BASE[BASE.index("[string]"):BASE.index("[parts.MAIN]")]

BAD_INPUTS = [
    # (id, content: bytes, str, or a function (tmp_path, monkeypatch) -> path; fragments the one
    # line must hold: the key, or the line, or what is wrong with the file)
    # -- file level
    ("missing file", _missing, ["no such file"]),
    ("a folder", _folder, ["is a folder"]),
    ("empty file", b"", ["empty"]),
    ("whitespace only", b" \n\t\n", ["empty"]),
    ("binary file", b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", ["binary"]),
    ("not UTF-8", BASE.replace('"Robustness base stack"', '"Caf\u00e9 stack"').encode("latin-1"),
     ["UTF-8", "line 2"]),
    ("named pipe", _pipe, ["not a regular file"]),
    ("unreadable", _unreadable, ["cannot be read", "Permission denied"]),
    ("too large", _too_large, ["too large"]),
    ("name too long", _name_too_long, ["cannot be read"]),
    # -- TOML syntax: the line is named (and quoted)
    ("unclosed table header", edited("[duty]\n", "[duty\n"), [f"line {line_of(BASE, '[duty]')}"]),
    ("duplicate key", edited("series = 6\n", "series = 6\nseries = 7\n"),
     [f"line {line_of(BASE, 'series = 6') + 1}", "series = 7"]),
    ("unterminated string", edited('"6 kV"', '"6 kV'), [f"line {line_of(BASE, '6 kV')}"]),
    ("unquoted quantity", edited('"6 kV"', "6 kV"), [f"line {line_of(BASE, '6 kV')}"]),
    ("number too long to read", _LONG_NUMBER, [f"line {line_of(_LONG_NUMBER, 'seed = 9')}"]),
    # -- key level
    ("unknown table", edited("[duty]", "[dutty]"), ["dutty", "did you mean 'duty'"]),
    ("unknown key", edited("series = 6", "seires = 6"), ["string.seires", "'series'"]),
    ("unknown spread key", edited('max = "160 nC"', 'mx = "160 nC"'),
     ["parts.MAIN.q_rr.mx", "'max'"]),
    ("missing reverse voltage", edited('reverse_voltage = "6 kV"\n', ""),
     ["duty.reverse_voltage", "missing"]),
    ("missing string table", edited(_STRING, ""), ["string", "missing"]),
    ("missing v_rrm", edited('v_rrm = "1.6 kV"\n', ""), ["parts.MAIN.v_rrm", "missing"]),
    ("undefined default part", edited('part = "MAIN"', 'part = "MIAN"'),
     ["string.part", "did you mean 'MAIN'"]),
    ("undefined position part", edited("index = 1\n", 'index = 1\npart = "SPARE"\n'),
     ["string.position[1].part", "SPARE"]),
    ("empty part name", edited("[parts.MAIN]", '[parts.""]').replace('part = "MAIN"', 'part = ""'),
     ['parts.""', "needs a name"]),
    ("position given twice", edited('temperature_rise = "10 K"\n',
                                    'temperature_rise = "10 K"\n[[string.position]]\nindex = 1\n'
                                    'temperature_rise = "20 K"\n'),
     ["string.position[2]", "already set by string.position[1]"]),
    ("table where a value belongs", edited('"6 kV"', "{ value = 6000 }"),
     ["duty.reverse_voltage", "dict"]),
    ("value where a table belongs", 'duty = "6 kV"\n' + edited(_DUTY, ""),
     ["duty", "must be a table"]),
    # -- value level
    ("wrong unit", edited('"6 kV"', '"6 kA"'), ["duty.reverse_voltage", "not in V"]),
    ("quoted number without unit", edited('"6 kV"', '"6000"'), ["duty.reverse_voltage", "no unit"]),
    ("negative resistor", edited('"3.3 MOhm"', '"-3.3 MOhm"'), ["grading.resistor", "greater"]),
    ("zero capacitor", edited('"2.2 nF"', "0"), ["grading.capacitor", "greater"]),
    ("NaN", edited('"6 kV"', "nan"), ["duty.reverse_voltage", "not finite"]),
    ("infinity", edited('v_rrm = "1.6 kV"', "v_rrm = inf"), ["parts.MAIN.v_rrm", "not finite"]),
    ("infinity with a unit", edited('"2.2 nF"', '"inf nF"'), ["grading.capacitor", "not finite"]),
    ("tolerance 100 %", edited('"10 %"', '"100 %"'), ["grading.capacitor_tolerance", "[0, 1)"]),
    ("negative tolerance", edited('"1 %"', '"-1 %"'), ["grading.resistor_tolerance", "[0, 1)"]),
    ("derating 0", edited("derating = 0.8", "derating = 0"), ["string.derating", "(0, 1]"]),
    ("derating above 1", edited("derating = 0.8", 'derating = "120 %"'),
     ["string.derating", "(0, 1]"]),
    ("typ above max", edited('typ = "0.3 uA"', 'typ = "30 uA"'), ["parts.MAIN.i_r", "typ is above"]),
    ("min above max", edited('typ = "90 nC"', 'min = "200 nC"'),
     ["parts.MAIN.q_rr", "min ('200 nC') is above max"]),
    ("series 0", edited("series = 6", "series = 0"), ["string.series", ">= 1"]),
    ("series as text", edited("series = 6", 'series = "six"'), ["string.series", "whole number"]),
    ("series beyond the tool", edited("series = 6", "series = 9223372036854775807"),
     ["string.series", "at most 10,000"]),
    ("too many devices", edited("parallel = 1", "parallel = 2000"),
     ["string.parallel", "12,000 devices"]),
    ("position beyond the string", edited("index = 1", "index = 7"),
     ["string.position[1].index", "1..6"]),
    ("branch beyond parallel", edited("index = 1\n", "index = 1\nbranch = 2\n"),
     ["string.position[1].branch", "1..1"]),
    ("ambient at t_j_max", edited('"35 degC"', '"140 degC"'), ["duty.ambient", "t_j_max"]),
    ("below absolute zero", edited('at_temperature = "25 degC"', 'at_temperature = "-300 degC"'),
     ["parts.MAIN.i_r.at_temperature", "absolute zero"]),
    ("test voltage zero", edited('at_voltage = "1.6 kV"', "at_voltage = 0"),
     ["parts.MAIN.i_r.at_voltage", "greater than zero"]),
    ("power expression", edited('"6 kV"', '"10**10**10 V"'), ["duty.reverse_voltage", "powers"]),
    ("integer beyond float", edited('"6 kV"', "1" + "0" * 400),
     ["duty.reverse_voltage", "not finite"]),
    ("sigma_at_limit 0.1", edited("seed = 11", "seed = 11\nsigma_at_limit = 0.1"),
     ["monte_carlo.sigma_at_limit", "[1, 10]"]),
    ("TCR makes the resistor negative", edited('"100 ppm/K"', '"-10 %/K"'),
     ["grading.resistor_tcr", "not positive"]),
    ("leakage referred too far", edited('t_j_max = "150 degC"', 'leakage_doubling = "0.05 K"'),
     ["parts.MAIN.leakage_doubling", "doublings"]),
    ("true as a quantity", edited('"3.3 MOhm"', "true"), ["grading.resistor", "true/false"]),
    ("date as a quantity", edited('"50 Hz"', "2024-05-01"), ["duty.frequency", "date"]),
    ("trials as a float", edited("trials = 500", "trials = 500.0"),
     ["monte_carlo.trials", "whole number"]),
    ("unknown waveform", edited('"half-sine"', '"sine"'), ["duty.waveform", "'half-sine'"]),
    ("unknown class", edited('v_rrm = "1.6 kV"', 'class = "si-fast"\nv_rrm = "1.6 kV"'),
     ["parts.MAIN.class", "si-fast-recovery"]),
    ("correlation out of range", edited("seed = 11", "seed = 11\n[monte_carlo.correlation]\n"
                                                     "i_r-q_rr = 1.5"),
     ["monte_carlo.correlation.i_r-q_rr", "(-1, 1)"]),
]


def test_at_least_25_distinct_bad_inputs():
    assert len({case[0] for case in BAD_INPUTS}) == len(BAD_INPUTS) >= 25


@pytest.mark.parametrize(("content", "fragments"), [case[1:] for case in BAD_INPUTS],
                         ids=[case[0] for case in BAD_INPUTS])
def test_bad_input_is_one_line_and_exit_2(tmp_path, monkeypatch, content, fragments):
    if callable(content):
        path = content(tmp_path, monkeypatch)
    else:
        path = tmp_path / "stack.toml"
        path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
    result = invoke("check", path, "--trials", "100")
    line = assert_one_line_error(result, *fragments)
    assert str(path) in line  # the file is named too
