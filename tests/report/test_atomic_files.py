"""The atomic output writer (report.export): an interrupted write leaves the old file or the new
one whole, never a part; permissions, symbolic links and devices are respected (issue 8).

Sources of the expectations: POSIX.1-2017 rename() (the target is replaced atomically); open(2)
and umask(2) (a new file gets 0666 & ~umask).
"""

from __future__ import annotations

import os
import stat

import pytest

import stringcheck.cli.output_files as output_files

OLD_JSON = b'{"verdict": "pass", "mine": true}\n'
OLD_CSV = b"check,branch\r\nkeep,1\r\n"


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
        output_files.write_text_atomic(target, '{"new": true}\n')
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
        output_files.write_files_atomic([(first, "new json\n"), (second, "new csv\n")])
    assert first.read_text() == "new json\n"
    assert second.read_bytes() == OLD_CSV
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.json", "b.csv"]


def test_replacing_a_file_keeps_its_permissions_and_a_new_file_gets_the_umask(tmp_path):
    kept = tmp_path / "kept.json"
    kept.write_text("old")
    kept.chmod(0o640)
    output_files.write_text_atomic(kept, "new")
    assert stat.S_IMODE(kept.stat().st_mode) == 0o640
    fresh = tmp_path / "fresh.json"
    output_files.write_text_atomic(fresh, "new")
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
    output_files.write_text_atomic(link, "new")
    assert link.is_symlink() and real.read_text() == "new"


def test_a_device_is_written_in_place_never_renamed_over(monkeypatch):
    # `--json /dev/null` must not replace the device node with a regular file (as root it could).
    def replace(source, destination):
        raise AssertionError(f"os.replace over {destination}")

    monkeypatch.setattr(os, "replace", replace)
    output_files.write_text_atomic("/dev/null", "discarded\n")
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)
