"""Robustness (issue 8): every bad input is one clear line and exit code 2, usage errors are exit 2
without a traceback, machine output never mixes with the report, an existing output file survives a
failed or interrupted run byte for byte.

Sources of the expectations: DESIGN.md section 3 (schema, ranges, unknown keys with a suggestion) and
section 6 (exit codes, machine output apart from the progress bar); STYLE.md "Errors" (one line, the
key and the fix); the README section "Errors and exit codes". There is no CSV reader yet (measured
lots are rejected by the loader), so there are no CSV-level bad inputs here.
"""

from __future__ import annotations

import csv
import io
import json
import os
import pathlib
import stat
import warnings

import pytest
from typer.testing import CliRunner

import stringcheck.cli as cli
import stringcheck.report.export as export
import stringcheck.studies.check as check_study
from stringcheck.cli import app
from stringcheck.design import load_design, parse_design_text

runner = CliRunner()

# A small valid design of our own invention: 6 x 1.6 kV at derating 0.8 hold 7.68 kV > 6 kV.
BASE = """\
[design]
title = "Robustness base stack"

[duty]
reverse_voltage = "6 kV"
waveform = "half-sine"
frequency = "50 Hz"
di_dt = "20 A/us"
ambient = "35 degC"

[string]
series = 6
parallel = 1
derating = 0.8
part = "MAIN"

[[string.position]]
index = 1
temperature_rise = "10 K"

[parts.MAIN]
v_rrm = "1.6 kV"
i_r = { typ = "0.3 uA", max = "3 uA", at_temperature = "25 degC", at_voltage = "1.6 kV" }
q_rr = { typ = "90 nC", max = "160 nC" }
c_j = "10 pF"
t_j_max = "150 degC"

[grading]
resistor = "3.3 MOhm"
resistor_tolerance = "1 %"
resistor_tcr = "100 ppm/K"
capacitor = "2.2 nF"
capacitor_tolerance = "10 %"

[monte_carlo]
trials = 500
seed = 11
"""


def edited(old: str, new: str) -> str:
    """BASE with one exact fragment replaced (the fragment must be there)."""
    assert BASE.count(old) == 1, old
    return BASE.replace(old, new)


def line_of(text: str, fragment: str) -> int:
    """1-based line number of the first line holding ``fragment``."""
    return next(number for number, line in enumerate(text.split("\n"), start=1) if fragment in line)


def invoke(*args: str):
    return runner.invoke(app, [str(arg) for arg in args])


def assert_no_traceback(result) -> None:
    assert "Traceback" not in result.output, result.output
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception


def assert_one_line_error(result, *fragments: str) -> str:
    """Exit 2, nothing on stdout, exactly one line on stderr starting "error:" and holding every
    fragment; no traceback (DESIGN.md section 6, STYLE.md "Errors")."""
    assert result.exit_code == 2, result.output
    assert_no_traceback(result)
    assert result.stdout == "", result.stdout
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("error: "), lines[0]
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    return lines[0]


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


def test_a_byte_order_mark_is_accepted(tmp_path):
    # Some editors start UTF-8 files with U+FEFF; TOML 1.0 has no place for it, but it is no error
    # of the user's.
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + BASE.replace("\n", "\r\n").encode("utf-8"))
    assert load_design(path).string.series == 6


def test_branch_entry_wins_over_every_branch_entry_whatever_the_order():
    # Two entries for one device may stand together when one names a branch: the specific one wins
    # (README, [[string.position]]); neither is silently dropped by its order in the file.
    text = edited("parallel = 1", "parallel = 2").replace(
        '[[string.position]]\nindex = 1\ntemperature_rise = "10 K"\n',
        '[[string.position]]\nindex = 1\nbranch = 2\ntemperature_rise = "20 K"\n'
        '[[string.position]]\nindex = 1\ntemperature_rise = "10 K"\n')
    rise = parse_design_text(text).string.temperature_rise_grid()
    assert rise[:, 0].tolist() == [10.0, 20.0]


def test_the_tcr_reference_temperature_is_the_studys():
    from stringcheck import design

    assert design.RESISTOR_TCR_REFERENCE == check_study.RESISTOR_TCR_REFERENCE


# --- usage errors, internal errors, exit codes -----------------------------------------------------

@pytest.mark.parametrize("args", [
    ["check", "{design}", "--bogus"],            # unknown option
    ["check"],                                   # missing argument
    ["chek", "{design}"],                        # unknown command
    ["check", "{design}", "--trials", "many"],   # not a number
    ["check", "{design}", "--trials", "0"],      # out of range
    ["check", "{design}", "--seed", "-1"],
    ["check", "{design}", "extra"],              # extra argument
    ["size", "{design}", "--find-series", "3"],  # a flag given a value
    ["new"],
], ids=lambda args: " ".join(args))
def test_usage_errors_exit_2_without_traceback(tmp_path, args):
    design = tmp_path / "base.toml"
    design.write_text(BASE, encoding="utf-8")
    result = invoke(*[arg.replace("{design}", str(design)) for arg in args])
    assert result.exit_code == 2, result.output
    assert_no_traceback(result)
    assert result.stdout == ""


def test_internal_error_is_one_line_exit_3_with_the_debug_hint(tmp_path, monkeypatch):
    design = tmp_path / "base.toml"
    design.write_text(BASE, encoding="utf-8")

    def broken(*args, **kwargs):
        raise ZeroDivisionError("an engine bug")

    monkeypatch.setattr(check_study, "run_check", broken)
    result = invoke("check", design)
    assert result.exit_code == 3, result.output
    assert_no_traceback(result)
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "internal error" in lines[0] and "--debug" in lines[0], lines
    debug = invoke("check", design, "--debug")
    assert debug.exit_code == 3
    assert "Traceback" in debug.stderr and "an engine bug" in debug.stderr


def test_numerical_warnings_are_shown_only_with_debug(tmp_path, monkeypatch):
    design = tmp_path / "base.toml"
    design.write_text(BASE, encoding="utf-8")
    real = check_study.run_check

    def noisy(*args, **kwargs):
        warnings.warn("overflow encountered in exp", RuntimeWarning)
        return real(*args, **kwargs)

    monkeypatch.setattr(check_study, "run_check", noisy)
    for extra, shown in (((), False), (("--debug",), True)):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            result = invoke("check", design, "--trials", "100", "--quiet", *extra)
        assert result.exit_code in (0, 1), result.output
        assert any(issubclass(w.category, RuntimeWarning) for w in caught) is shown


# --- streams: machine output on stdout never mixes with the report or the progress bar ------------

@pytest.fixture
def design_file(tmp_path):
    path = tmp_path / "base.toml"
    path.write_text(BASE, encoding="utf-8")
    return path


@pytest.fixture
def two_chunks(monkeypatch):
    """Make `check` run 8192 trials in two chunks, with the clock racing so that the progress bar
    appears after the first chunk."""
    real = check_study.run_check

    def run(design, *, trials=None, seed=None, progress=None, **options):
        return real(design, trials=8192, seed=seed, progress=progress, chunk_trials=4096)

    real_init = cli._DelayedProgress.__init__

    def started_long_ago(self, *args, **kwargs):
        real_init(self, *args, **kwargs)
        self.start -= 100.0

    monkeypatch.setattr(check_study, "run_check", run)
    monkeypatch.setattr(cli._DelayedProgress, "__init__", started_long_ago)


def test_json_on_stdout_is_only_json_with_the_progress_bar_shown(design_file, two_chunks):
    result = invoke("check", design_file, "--json", "-")
    assert result.exit_code in (0, 1), result.output
    data = json.loads(result.stdout)
    assert data["trials"] == 8192
    assert "VERDICT" in result.stderr


def test_csv_on_stdout_is_only_csv_and_the_report_goes_to_stderr(design_file, two_chunks):
    result = invoke("check", design_file, "--csv", "-", "--quiet")
    assert result.exit_code in (0, 1), result.output
    rows = list(csv.reader(io.StringIO(result.stdout)))
    assert rows[0] == ["check", "branch", "index", "part", "limit_V", "mean_V", "std_V", "max_V",
                       "failures"]
    assert len(rows) == 1 + 2 * 6  # static and dynamic, 6 positions each
    assert result.stderr.count("\n") == 1 and "static" in result.stderr


@pytest.fixture
def no_study(monkeypatch):
    """Fail the test if a study starts: output problems must be found before a run."""
    def forbidden(*args, **kwargs):
        raise AssertionError("the study ran although an output could not be written")

    monkeypatch.setattr(check_study, "run_check", forbidden)
    monkeypatch.setattr("stringcheck.studies.size.size", forbidden)


@pytest.mark.parametrize(("options", "fragments"), [
    (["--json", "-", "--csv", "-"], ["--json and --csv", "standard output"]),
    (["--json", "{dir}/same", "--csv", "{dir}/same"], ["--csv", "the same file as --json"]),
    (["--json", "{design}"], ["--json", "the design file"]),
    (["--csv", "{dir}/no/such/folder/out.csv"], ["--csv", "does not exist"]),
    (["--json", "{dir}"], ["is a folder"]),
    (["--json", ""], ["--json", "empty path"]),
], ids=["both to stdout", "one file twice", "over the design", "no folder", "a folder", "empty"])
def test_output_problems_are_found_before_the_run(design_file, no_study, options, fragments):
    before = design_file.read_bytes()
    options = [o.replace("{dir}", str(design_file.parent)).replace("{design}", str(design_file))
               for o in options]
    assert_one_line_error(invoke("check", design_file, *options), *fragments)
    assert design_file.read_bytes() == before


def test_size_will_not_write_over_its_design(design_file, no_study):
    before = design_file.read_bytes()
    assert_one_line_error(invoke("size", design_file, "--json", design_file), "the design file")
    assert design_file.read_bytes() == before


def test_new_to_stdout_writes_only_the_starter(tmp_path):
    result = invoke("new", "-")
    assert result.exit_code == 0, result.output
    path = tmp_path / "starter.toml"
    path.write_text(result.stdout, encoding="utf-8")
    assert load_design(path).string.series == 10


# --- nothing lost ----------------------------------------------------------------------------------

OLD_JSON = b'{"verdict": "pass", "mine": true}\n'
OLD_CSV = b"check,branch\r\nkeep,1\r\n"


@pytest.fixture
def old_outputs(tmp_path):
    json_path, csv_path = tmp_path / "keep.json", tmp_path / "keep.csv"
    json_path.write_bytes(OLD_JSON)
    csv_path.write_bytes(OLD_CSV)
    return json_path, csv_path


def _bad_input(monkeypatch, design):
    design.write_text(edited("series = 6", "series = 0"), encoding="utf-8")


def _study_crashes(monkeypatch, design):
    def broken(*args, **kwargs):
        raise FloatingPointError("an engine bug")

    monkeypatch.setattr(check_study, "run_check", broken)


def _interrupted_mid_run(monkeypatch, design):
    # Ctrl-C after the first of two chunks of trials: the study has really started.
    real = check_study.run_check

    def stop(done, total):
        assert 0 < done < total
        raise KeyboardInterrupt

    monkeypatch.setattr(check_study, "run_check", lambda d, **options: real(
        d, trials=8192, chunk_trials=4096, progress=stop))


def _second_file_cannot_be_written(monkeypatch, design):
    # The JSON is staged, then writing the CSV fails (a full disk, say): neither file is replaced.
    real_fsync = os.fsync
    calls = []

    def fsync(descriptor):
        calls.append(descriptor)
        if len(calls) == 2:
            raise OSError(28, "No space left on device")
        return real_fsync(descriptor)

    monkeypatch.setattr(os, "fsync", fsync)


def _interrupted_before_the_rename(monkeypatch, design):
    # Ctrl-C after both temporary files are written, before the first rename.
    def replace(source, target):
        raise KeyboardInterrupt

    monkeypatch.setattr(os, "replace", replace)


@pytest.mark.parametrize(("failure", "code"), [
    (_bad_input, 2), (_study_crashes, 3), (_interrupted_mid_run, 130),
    (_second_file_cannot_be_written, 2), (_interrupted_before_the_rename, 130),
], ids=["bad input", "internal error", "interrupted run", "write fails", "interrupted write"])
def test_existing_outputs_survive_a_failed_run_byte_for_byte(tmp_path, monkeypatch, old_outputs,
                                                            failure, code):
    design = tmp_path / "stack.toml"
    design.write_text(BASE, encoding="utf-8")
    failure(monkeypatch, design)
    json_path, csv_path = old_outputs
    result = invoke("check", design, "--trials", "100", "--json", json_path, "--csv", csv_path)
    assert result.exit_code == code, result.output
    assert_no_traceback(result)
    assert json_path.read_bytes() == OLD_JSON
    assert csv_path.read_bytes() == OLD_CSV
    # No temporary file left beside them.
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.csv", "keep.json", "stack.toml"]


def test_an_interrupted_run_exits_130_and_leaves_no_file(tmp_path, monkeypatch):
    design = tmp_path / "stack.toml"
    design.write_text(BASE, encoding="utf-8")
    _interrupted_mid_run(monkeypatch, design)
    result = invoke("check", design, "--json", tmp_path / "out.json", "--csv", tmp_path / "out.csv")
    assert result.exit_code == 130, result.output
    assert "interrupted" in result.stderr
    assert [p.name for p in tmp_path.iterdir()] == ["stack.toml"]


def test_writer_interrupted_between_temporary_write_and_rename_removes_the_temporary(
        tmp_path, monkeypatch):
    target = tmp_path / "out.json"
    target.write_bytes(OLD_JSON)
    written = []
    real_fsync = os.fsync

    def fsync(descriptor):
        real_fsync(descriptor)
        written.extend(p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp"))

    def replace(source, destination):
        raise KeyboardInterrupt

    monkeypatch.setattr(os, "fsync", fsync)
    monkeypatch.setattr(os, "replace", replace)
    with pytest.raises(KeyboardInterrupt):
        export.write_text_atomic(target, '{"new": true}\n')
    assert written, "the temporary file was never written"
    assert target.read_bytes() == OLD_JSON
    assert [p.name for p in tmp_path.iterdir()] == ["out.json"]


def test_writer_interrupted_between_two_renames_leaves_each_file_whole(tmp_path, monkeypatch):
    first, second = tmp_path / "a.json", tmp_path / "b.csv"
    first.write_bytes(OLD_JSON)
    second.write_bytes(OLD_CSV)
    real_replace = os.replace

    def replace(source, destination):
        if str(destination).endswith("b.csv"):
            raise KeyboardInterrupt
        real_replace(source, destination)

    monkeypatch.setattr(os, "replace", replace)
    with pytest.raises(KeyboardInterrupt):
        export.write_files_atomic([(first, "new json\n"), (second, "new csv\n")])
    assert first.read_text() == "new json\n"
    assert second.read_bytes() == OLD_CSV
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.json", "b.csv"]


def test_replacing_a_file_keeps_its_permissions_and_a_new_file_gets_the_umask(tmp_path):
    kept = tmp_path / "kept.json"
    kept.write_text("old")
    kept.chmod(0o640)
    export.write_text_atomic(kept, "new")
    assert stat.S_IMODE(kept.stat().st_mode) == 0o640
    fresh = tmp_path / "fresh.json"
    export.write_text_atomic(fresh, "new")
    mask = os.umask(0)
    os.umask(mask)
    # What open(..., "w") would have given; mkstemp alone would leave 0600.
    assert stat.S_IMODE(fresh.stat().st_mode) == 0o666 & ~mask


def test_a_symbolic_link_is_followed_not_replaced(tmp_path):
    real = tmp_path / "results" / "run.json"
    real.parent.mkdir()
    real.write_text("old")
    link = tmp_path / "latest.json"
    link.symlink_to(real)
    export.write_text_atomic(link, "new")
    assert link.is_symlink() and real.read_text() == "new"


def test_a_device_is_written_in_place_never_renamed_over(monkeypatch):
    # `--json /dev/null` must not replace the device node with a regular file (as root it could).
    def replace(source, destination):
        raise AssertionError(f"os.replace over {destination}")

    monkeypatch.setattr(os, "replace", replace)
    export.write_text_atomic("/dev/null", "discarded\n")
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)
