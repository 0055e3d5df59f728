"""Machine output on stdout never mixes with the report or the progress bar, and every output
problem is found before the run (issue 8).

Sources of the expectations: docs/commands.md and docs/json.md (machine output apart from the progress bar);
STYLE.md "Errors".
"""

from __future__ import annotations

import csv
import io
import json

import pytest

import stringcheck.cli.app as cli
import stringcheck.cli.progress as cli_progress
import stringcheck.studies.check as check_study
import stringcheck.studies.size as size_study  # imported before any test patches run_check
from stringcheck.design.reading import load_design
from tests.cli.invocation import BASE, assert_one_line_error, invoke


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

    real_init = cli_progress.DelayedProgress.__init__

    def started_long_ago(self, *args, **kwargs):
        real_init(self, *args, **kwargs)
        self.start -= 100.0

    monkeypatch.setattr(check_study, "run_check", run)
    monkeypatch.setattr(cli_progress.DelayedProgress, "__init__", started_long_ago)


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
    monkeypatch.setattr(size_study, "size", forbidden)


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
