"""Issue 15, items 6-8: an output never replaces a file the run reads, outputs are published all
or nothing after the report, and a target that is not a regular file is decided before the run.

Sources of the expectations: POSIX.1-2017 (IEEE Std 1003.1), rename(): "If the link named by the new
argument exists, it shall be removed and old renamed to new" atomically, so a temporary file beside
the target renamed over it never leaves a partial file; the Linux man page fifo(7): opening a FIFO
for writing blocks until a reader opens it (so a FIFO output with no reader would hang a finished
run); the Linux man page null(4): /dev/full returns ENOSPC on every write, /dev/null discards.
"""

from __future__ import annotations

import os
import shutil
import socket
import stat
from importlib import resources
from pathlib import Path

import pytest
from typer.testing import CliRunner

import stringcheck.report.terminal as terminal
import stringcheck.studies.check as check_study
import stringcheck.studies.review as review_study
from stringcheck.cli.app import app

runner = CliRunner()
EXAMPLES = Path(__file__).resolve().parents[2] / "examples"
OLD = b'{"mine": true}\n'


def invoke(*args):
    return runner.invoke(app, [str(a) for a in args])


def one_line_error(result, *fragments: str) -> str:
    """Exit 2, one line on stderr starting "error:" holding every fragment, no traceback."""
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("error: "), lines[0]
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    return lines[0]


@pytest.fixture
def measured(tmp_path):
    """The measured-lot example copied to tmp_path: (design, lot)."""
    design = tmp_path / "measured.toml"
    shutil.copy(EXAMPLES / "precipitator-30kv-measured.toml", design)
    (tmp_path / "lots").mkdir()
    lot = tmp_path / "lots" / "fr2k-incoming-lot.csv"
    shutil.copy(EXAMPLES / "lots" / "fr2k-incoming-lot.csv", lot)
    return design, lot


@pytest.fixture
def no_study(monkeypatch):
    """Fail if a study starts: every refusal here must come before the run."""
    def forbidden(*args, **kwargs):
        raise AssertionError("the study ran although an output was refused")

    monkeypatch.setattr(check_study, "run_check", forbidden)
    monkeypatch.setattr(review_study, "review", forbidden)


def _symlink(folder: Path, lot: Path) -> Path:
    link = folder / "link.csv"
    link.symlink_to(lot)
    return link


def _hardlink(folder: Path, lot: Path) -> Path:
    link = folder / "hard.csv"
    os.link(lot, link)
    return link


# (command and options with {design}/{lot}/{dir} placeholders, extra setup, fragments of the line)
READ_FILES = [
    (["check", "{design}", "--csv", "{lot}"], None, ["--csv", "the measured lot of parts.FR2K"]),
    (["check", "{design}", "--json", "{lot}"], None, ["--json", "the measured lot of parts.FR2K"]),
    (["check", "{design}", "--json", "{link}"], _symlink, ["--json", "measured lot"]),
    (["check", "{design}", "--json", "{link}"], _hardlink, ["--json", "measured lot"]),
    (["check", "{design}", "--json", "{design}"], None, ["--json", "the design file"]),
    (["size", "{design}", "--json", "{lot}"], None, ["--json", "measured lot of parts.FR2K"]),
    (["wave", "{design}", "--csv", "{lot}"], None, ["--csv", "measured lot of parts.FR2K"]),
    (["review", "{design}", "--swap", "1-2:FR2K", "--json", "{lot}"], None,
     ["--json", "measured lot of parts.FR2K"]),
    (["review", "{plain}", "{design}", "--json", "{design}"], None,
     ["--json", "the candidate design file"]),
    (["review", "{plain}", "{design}", "--json", "{lot}"], None,
     ["--json", "measured lot of parts.FR2K"]),
]


@pytest.mark.parametrize(("args", "setup", "fragments"), READ_FILES,
                         ids=["csv over lot", "json over lot", "symlink to lot", "hard link to lot",
                              "over design", "size over lot", "wave over lot",
                              "review over base lot", "review over candidate",
                              "review over candidate lot"])
def test_no_output_replaces_a_file_the_run_reads(measured, tmp_path, no_study, args, setup,
                                                 fragments):
    design, lot = measured
    plain = tmp_path / "plain.toml"
    shutil.copy(EXAMPLES / "precipitator-30kv.toml", plain)
    link = setup(tmp_path, lot) if setup else lot
    before = {p: p.read_bytes() for p in (design, lot, plain)}
    filled = [a.format(design=design, lot=lot, link=link, plain=plain) for a in args]
    one_line_error(invoke(*filled), *fragments)
    assert {p: p.read_bytes() for p in before} == before


def test_demo_will_not_write_over_the_bundled_design(no_study):
    with resources.as_file(resources.files("stringcheck") / "data" / "demo.toml") as bundled:
        before = bundled.read_bytes()
        one_line_error(invoke("demo", "--json", bundled), "--json", "the bundled demo design")
        one_line_error(invoke("demo", "--csv", bundled), "--csv", "the bundled demo design")
        assert bundled.read_bytes() == before


# --- item 8: targets that are not regular files, decided before the run ---------------------------

def _fifo(folder: Path) -> str:
    path = folder / "pipe"
    os.mkfifo(path)
    return str(path)


def _socket(folder: Path) -> str:
    path = folder / "sock"
    server = socket.socket(socket.AF_UNIX)
    server.bind(str(path))
    server.close()  # the socket file stays
    return str(path)


@pytest.mark.parametrize(("target", "fragments"), [
    (_fifo, ["--json", "a named pipe (FIFO)", "'-'"]),
    (_socket, ["--json", "a socket"]),
    (lambda folder: "/dev/full", ["--json /dev/full", "a device"]),
    (lambda folder: "/dev/stdout", ["--json /dev/stdout", "standard output", "'-'"]),
    (lambda folder: "/dev/stderr", ["--json /dev/stderr", "standard error"]),
], ids=["fifo", "socket", "device", "/dev/stdout", "/dev/stderr"])
def test_a_target_that_is_not_a_regular_file_is_refused_before_the_run(measured, tmp_path,
                                                                       no_study, target, fragments):
    if target is not _fifo and target is not _socket and not os.path.exists(target(tmp_path)):
        pytest.skip("no such device here")
    design, _ = measured
    one_line_error(invoke("check", design, "--json", target(tmp_path)), *fragments)


def test_dev_null_is_still_an_output(measured, tmp_path):
    design, _ = measured
    kept = tmp_path / "kept.csv"
    kept.write_bytes(OLD)
    result = invoke("check", design, "--trials", "300", "--json", "/dev/null", "--csv", kept,
                    "--quiet")
    assert result.exit_code in (0, 1), result.output
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)
    assert kept.read_bytes() != OLD  # the CSV was written


# --- item 7: all or nothing, the terminal report included -----------------------------------------

def _report_crashes(monkeypatch):
    def broken(*args, **kwargs):
        raise ZeroDivisionError("a report bug")

    monkeypatch.setattr(terminal, "render_check", broken)
    monkeypatch.setattr(terminal, "render_check_summary", broken)


def _report_pipe_closes(monkeypatch):
    def closed(*args, **kwargs):
        raise BrokenPipeError(32, "Broken pipe")

    monkeypatch.setattr(terminal, "render_check", closed)
    monkeypatch.setattr(terminal, "render_check_summary", closed)


def _interrupted_in_the_report(monkeypatch):
    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(terminal, "render_check", interrupted)
    monkeypatch.setattr(terminal, "render_check_summary", interrupted)


@pytest.mark.parametrize(("csv_target", "failure", "code"), [
    ("/dev/full", None, 2),
    ("{dir}/keep.csv", _report_crashes, 3),
    ("{dir}/keep.csv", _report_pipe_closes, 141),
    ("{dir}/keep.csv", _interrupted_in_the_report, 130),
], ids=["csv to /dev/full", "report crashes", "report pipe closed", "ctrl-c in report"])
def test_no_output_is_replaced_unless_everything_succeeded(measured, tmp_path, monkeypatch,
                                                           csv_target, failure, code):
    design, _ = measured
    json_path, csv_path = tmp_path / "keep.json", tmp_path / "keep.csv"
    json_path.write_bytes(OLD)
    csv_path.write_bytes(OLD)
    if failure is not None:
        failure(monkeypatch)
    before = sorted(p.name for p in tmp_path.iterdir())
    result = invoke("check", design, "--trials", "300", "--json", json_path,
                    "--csv", csv_target.format(dir=tmp_path))
    assert result.exit_code == code, result.output
    assert "Traceback" not in result.output
    assert json_path.read_bytes() == OLD and csv_path.read_bytes() == OLD
    assert sorted(p.name for p in tmp_path.iterdir()) == before  # no temporary file left


def test_both_outputs_are_replaced_after_a_report_that_succeeded(measured, tmp_path):
    design, _ = measured
    json_path, csv_path = tmp_path / "keep.json", tmp_path / "keep.csv"
    json_path.write_bytes(OLD)
    csv_path.write_bytes(OLD)
    result = invoke("check", design, "--trials", "300", "--json", json_path, "--csv", csv_path)
    assert result.exit_code in (0, 1), result.output
    assert json_path.read_bytes() != OLD and csv_path.read_text().startswith("check,branch")
