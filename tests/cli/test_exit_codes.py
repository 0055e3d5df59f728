"""Usage errors are exit 2 without a traceback; an internal error is one line, exit 3, with the
hint to --debug; numerical warnings show only with --debug (issue 8).

Sources of the expectations: docs/commands.md and docs/json.md (exit codes); STYLE.md "Errors"; the README
section "Errors and exit codes".
"""

from __future__ import annotations

import warnings

import pytest

import stringcheck.studies.check as check_study
from tests.cli.invocation import BASE, assert_no_traceback, invoke


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
