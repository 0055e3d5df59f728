"""Issue 15, items 11, 12, 14 and 15: options and files that try to run the front end out of memory,
out of stack, or into echoing a file it should not; signals and closed pipes.

Sources of the expectations: POSIX.1-2017 (IEEE Std 1003.1), Shell Command Language 2.8.2 "Exit
Status for Commands": a command ended by signal N reports an exit status above 128 (the shells
report 128 + N, so 141 for SIGPIPE = 13 and 143 for SIGTERM = 15, the numbers of signal(7) on Linux);
the Linux man page pipe(7): a write to a pipe whose read end is closed fails with EPIPE; proc(5):
files under /proc report a size of 0 whatever they hold, and /proc/self/pagemap holds 8 bytes per
page of the virtual address space (far more than 64 MiB); TOML v1.0.0 sets no nesting limit, so the
reader's own limit (the interpreter's recursion limit) is what a design meets.
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stringcheck.cli.app import app

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
LINUX = pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="needs Linux /proc")


def one_line_error(result, *fragments: str, longest: int = 300) -> str:
    """Exit 2, one short line on stderr starting "error:" with every fragment, no traceback."""
    assert result.exit_code == 2, result.output[:2000]
    assert "Traceback" not in result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr[:2000]
    assert lines[0].startswith("error: ") and len(lines[0]) <= longest, lines[0][:2000]
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    return lines[0]


# --- item 11: --swap bounds before the range is built --------------------------------------------

@pytest.mark.parametrize(("swap", "fragments"), [
    ("1-100000000:FR2K", ["--swap", "position 100000000 lies outside 1..24"]),
    ("1-" + "9" * 5000 + ":FR2K", ["--swap", "lies outside 1..24"]),
    ("9" * 30 + ":FR2K", ["--swap", "lies outside 1..24"]),
    ("0-3:FR2K", ["--swap", "position 0 lies outside 1..24"]),
    (",".join(["1"] * 100000) + ":NOPE", ["--swap", "no part 'NOPE'"]),
    ("1-4:" + "Q" * 10000, ["--swap", "no part 'QQQ"]),
], ids=["huge range", "5000 digits", "huge position", "zero", "long list", "long part"])
def test_swap_is_checked_before_a_range_is_built(swap, fragments):
    result = runner.invoke(app, ["review", str(EXAMPLES / "precipitator-30kv.toml"), "--swap",
                                 swap])
    one_line_error(result, *fragments)


# --- item 12: deep nesting -------------------------------------------------------------------------

@pytest.mark.parametrize(("text", "fragment"), [
    ("x = " + "[" * 5000 + "]" * 5000 + "\n", "nesting too deep"),
    ("x = " + "{a = " * 3000 + "1" + "}" * 3000 + "\n", "nesting too deep"),
    ("x = " + "[{a = " * 2000 + "1" + "}]" * 2000 + "\n", "nesting too deep"),
    ("[design]\nnotes = " + "[" * 5000 + "\n", "TOML"),
    ("[" * 5000 + "\n", "TOML syntax error"),
], ids=["arrays", "inline tables", "mixed", "unclosed under a key", "headers"])
def test_deep_nesting_is_one_line_exit_2(tmp_path, text, fragment):
    path = tmp_path / "deep.toml"
    path.write_text(text, encoding="utf-8")
    one_line_error(runner.invoke(app, ["check", str(path)]), str(path), fragment)


# --- item 15: measured lots read at most the cap, quoted at most a short printable excerpt ------

SECRET = "s3cret-" + "k" * 200


def _lot_design(folder: Path, lot: str) -> Path:
    text = (EXAMPLES / "precipitator-30kv-measured.toml").read_text(encoding="utf-8")
    old = 'measured = "lots/fr2k-incoming-lot.csv"'
    assert old in text
    path = folder / "measured.toml"
    path.write_text(text.replace(old, f"measured = {lot!r}".replace("'", '"')), encoding="utf-8")
    return path


def _write(folder: Path, name: str, content: bytes) -> str:
    (folder / name).write_bytes(content)
    return str(folder / name)


@pytest.mark.parametrize(("make", "fragments", "never"), [
    (lambda d: _write(d, "a.csv", (SECRET + "\n1\n").encode()), ["unknown column 1 's3cret-"],
     [SECRET[:41]]),
    (lambda d: _write(d, "b.csv", b"i_r [uA]," + b"\x1b[2J" + b"z" * 300 + b"\n1,2\n"),
     ["unknown column 2 '?[2J"], ["\x1b", "z" * 41]),
    (lambda d: _write(d, "c.csv", b"serial,i_r [uA]\n" + b"A" * 300 + b",x" * 1 + b"\n"),
     ["line 2", "is not a number"], ["A" * 41]),
    (lambda d: _write(d, "d.csv", b"i_r [uA]\n\x00\x01\x02\n"), ["binary file"], []),
    (lambda d: "/proc/self/pagemap", ["larger than 67,108,864 bytes"], []),
], ids=["first line echoed", "escape in a header", "long cell", "binary", "/proc size 0"])
def test_a_lot_is_read_up_to_the_cap_and_quoted_briefly(tmp_path, make, fragments, never):
    lot = make(tmp_path)
    if not os.access(lot, os.R_OK):
        pytest.skip(f"{lot} cannot be read here")
    line = one_line_error(runner.invoke(app, ["check", str(_lot_design(tmp_path, lot))]),
                          *fragments)
    for fragment in never:
        assert fragment not in line, line


# --- item 14: signals and closed pipes, with the real command -------------------------------------

def _command(*args: str) -> list[str]:
    return [sys.executable, "-m", "stringcheck", *args]


def _environment() -> dict:
    return {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}


def _into_closed_pipe(args: list[str]) -> subprocess.CompletedProcess:
    read, write = os.pipe()
    os.close(read)  # the reader is gone before the first byte
    try:
        return subprocess.run(_command(*args), stdout=write, stderr=subprocess.PIPE, text=True,
                              timeout=120, env=_environment())
    finally:
        os.close(write)


@pytest.mark.parametrize("args", [
    ["demo", "--trials", "300", "--no-rare"],
    ["demo", "--trials", "300", "--no-rare", "--quiet"],
    ["demo", "--trials", "300", "--no-rare", "--json", "-", "--quiet"],
], ids=["report", "quiet line", "json"])
def test_a_closed_pipe_exits_141_without_a_traceback(args):
    done = _into_closed_pipe(args)
    assert done.returncode == 141, done.stderr
    assert "Traceback" not in done.stderr and "internal error" not in done.stderr


def _children(pid: int) -> list[int]:
    found = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[1]) == pid and fields[0] != "Z":
                found.append(int(entry.name))
    return found


def _alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


@pytest.mark.slow
@LINUX
def test_sigterm_stops_the_worker_processes_and_exits_143(tmp_path):
    kept = tmp_path / "kept.json"
    kept.write_text("old")
    process = subprocess.Popen(_command("demo", "--workers", "2", "--trials", "20000000",
                                        "--quiet", "--json", str(kept)),
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                               env=_environment())
    try:
        deadline = time.monotonic() + 60
        workers: list[int] = []
        while time.monotonic() < deadline and len(workers) < 3:  # 2 workers + resource tracker
            time.sleep(0.2)
            workers = _children(process.pid)
        assert len(workers) >= 2, "the worker pool never started"
        time.sleep(0.5)
        process.send_signal(signal.SIGTERM)
        stdout, stderr = process.communicate(timeout=60)
    finally:
        if process.poll() is None:
            process.kill()
            process.communicate()
    assert process.returncode == 143, stderr
    assert "terminated" in stderr and "Traceback" not in stderr, stderr
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline and any(_alive(pid) for pid in workers):
        time.sleep(0.1)
    assert not any(_alive(pid) for pid in workers), "a worker outlived the command"
    assert kept.read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["kept.json"]


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="needs /dev/full")
@pytest.mark.parametrize("machine", [False, True], ids=["report", "json on stdout"])
def test_a_full_standard_output_is_exit_2_and_replaces_nothing(tmp_path, machine):
    # null(4): every write to /dev/full fails with ENOSPC, as a full disk would.
    kept = tmp_path / "kept.csv"
    kept.write_text("old")
    args = ["demo", "--trials", "300", "--no-rare", "--quiet", "--csv", str(kept)]
    with open("/dev/full", "w") as full:
        done = subprocess.run(_command(*args, *(["--json", "-"] if machine else [])),
                              stdout=full, stderr=subprocess.PIPE, text=True, timeout=120,
                              env=_environment())
    assert done.returncode == 2, done.stderr
    lines = done.stderr.strip().splitlines()
    assert "standard output" in lines[-1] and "No space left" in lines[-1], done.stderr
    assert "Traceback" not in done.stderr
    assert kept.read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["kept.csv"]


@LINUX
def test_a_design_file_under_proc_is_read_only_up_to_the_cap():
    # proc(5): pagemap reports size 0 and holds 8 bytes per virtual page, far beyond 4 MiB.
    if not os.access("/proc/self/pagemap", os.R_OK):
        pytest.skip("/proc/self/pagemap cannot be read here")
    one_line_error(runner.invoke(app, ["check", "/proc/self/pagemap"]), "/proc/self/pagemap",
                   "too large for a design file")
