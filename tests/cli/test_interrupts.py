"""Nothing lost (issue 8): an existing output file survives a failed or interrupted run byte for
byte, an interrupted run exits 130 and leaves no file, and Ctrl-C under the live display is held
to the next report.

Sources of the expectations: docs/commands.md and docs/json.md (exit codes: 130 for an interrupt, as a shell
reports 128 + SIGINT); STYLE.md "Errors".
"""

from __future__ import annotations

import os
import pathlib
import signal
import subprocess
import sys
import time

import pytest

import stringcheck.cli.app as cli
import stringcheck.cli.progress as cli_progress
import stringcheck.studies.check as check_study
from tests.cli.invocation import BASE, assert_no_traceback, edited, invoke


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


def test_ctrl_c_under_a_live_display_is_held_to_the_next_report():
    # cli_progress.DeferredInterrupt: the first SIGINT only sets a flag (rich's redraw thread must not be cut
    # at an arbitrary point), check() raises it, a second SIGINT raises at once, and the handler of
    # before is back afterwards. Python's own handler first: a job started in the background has
    # SIGINT ignored, and DeferredInterrupt rightly leaves an ignored SIGINT alone.
    inherited = signal.signal(signal.SIGINT, signal.default_int_handler)
    try:
        _held_ctrl_c()
    finally:
        signal.signal(signal.SIGINT, inherited)


def _held_ctrl_c() -> None:
    before = signal.getsignal(signal.SIGINT)
    with pytest.raises(KeyboardInterrupt):
        with cli_progress.DeferredInterrupt() as interrupt:
            os.kill(os.getpid(), signal.SIGINT)
            time.sleep(0.01)  # the handler has run by now, and raised nothing
            assert interrupt.requested
            interrupt.check()
    assert signal.getsignal(signal.SIGINT) is before
    with pytest.raises(KeyboardInterrupt):
        with cli_progress.DeferredInterrupt():
            os.kill(os.getpid(), signal.SIGINT)
            time.sleep(0.01)
        # leaving the context raises the interrupt still held
    with pytest.raises(KeyboardInterrupt):
        with cli_progress.DeferredInterrupt():
            os.kill(os.getpid(), signal.SIGINT)
            time.sleep(0.01)
            os.kill(os.getpid(), signal.SIGINT)  # the second one is not held
            time.sleep(1.0)
            raise AssertionError("the second Ctrl-C was held too")
    assert signal.getsignal(signal.SIGINT) is before


def _wait_for_library(pid: int, name: str, timeout: float = 60.0) -> None:
    """Wait until process ``pid`` has mapped a shared library whose path holds ``name`` (Linux)."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if name in pathlib.Path(f"/proc/{pid}/maps").read_text():
            return
        time.sleep(0.05)
    raise AssertionError(f"process {pid} never loaded {name}")


@pytest.mark.skipif(not pathlib.Path("/proc/self/maps").exists(), reason="needs Linux /proc")
def test_ctrl_c_of_the_real_command_exits_130_and_keeps_the_old_output(tmp_path):
    # The same through the console entry point and a real SIGINT, not a simulated one.
    old = tmp_path / "keep.json"
    old.write_bytes(OLD_JSON)
    environment = dict(os.environ, PYTHONPATH=os.pathsep.join(
        [str(pathlib.Path(cli.__file__).parents[2]), os.environ.get("PYTHONPATH", "")]))
    process = subprocess.Popen(
        [sys.executable, "-m", "stringcheck", "demo", "--trials", "10000000", "--json", str(old),
         "--csv", str(tmp_path / "new.csv")], cwd=tmp_path, env=environment,
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        # A shell without job control starts background jobs with SIGINT ignored; undo that.
        preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    try:
        # scipy is first imported inside the command's own error handling (the command imports the
        # study), so from then on Ctrl-C is the command's to handle; half a second more is well into
        # the run (10 million trials take minutes). numpy's bundled BLAS is named after scipy too,
        # hence the folder.
        _wait_for_library(process.pid, f"{os.sep}scipy{os.sep}")
        time.sleep(0.5)
        process.send_signal(signal.SIGINT)
        stdout, stderr = process.communicate(timeout=60)
    finally:
        process.kill()
    # A shell reports both as 130: the exit code 130, or death by SIGINT (128 + 2). The second was
    # seen about once in 50 runs with the progress bar shown, after the command's own message; its
    # cause is not found (cli_progress.DeferredInterrupt made it rarer).
    assert process.returncode in (130, -signal.SIGINT), stderr
    assert stdout == "" and "interrupted" in stderr and "Traceback" not in stderr
    assert old.read_bytes() == OLD_JSON
    assert [p.name for p in tmp_path.iterdir()] == ["keep.json"]
