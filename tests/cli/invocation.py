"""Running the command in the CLI tests and judging its one-line error (a helper module, not a
test module): the small valid stack that each bad input edits in one place (tests/designs/
robustness_base.toml, our own invention: 6 x 1.6 kV at derating 0.8 hold 7.68 kV > 6 kV).

Sources of the expectations: docs/commands.md and docs/json.md (exit codes, machine output apart from the
progress bar); STYLE.md "Errors" (one line, the key and the fix).
"""

from __future__ import annotations

from typer.testing import CliRunner

from stringcheck.cli.app import app
from tests.designs import design_text

runner = CliRunner()

BASE = design_text("robustness_base")


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
    fragment; no traceback (docs/commands.md and docs/json.md, STYLE.md "Errors")."""
    assert result.exit_code == 2, result.output
    assert_no_traceback(result)
    assert result.stdout == "", result.stdout
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("error: "), lines[0]
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    return lines[0]
