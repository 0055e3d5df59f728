"""Only the command line knows option names: a study names the keyword to change
(``errors.Setting``), the command line words it as its option, with the messages as before."""

import ast
import math
import pickle
import re
from pathlib import Path

import pytest
from typer.testing import CliRunner

import stringcheck
from stringcheck.cli.app import app
from stringcheck.cli.options import OPTIONS, option_wording
from stringcheck.errors import DesignError, Setting, SizingError, StringcheckError

PACKAGE = Path(stringcheck.__file__).parent
# The layers below the report: none of them may write an option name.
BELOW_REPORT = ("design", "physics", "solvers", "montecarlo", "checks", "studies")

runner = CliRunner()


def invoke(*args: str):
    return runner.invoke(app, [str(arg) for arg in args])


def _modules(folders=None):
    for path in sorted(PACKAGE.rglob("*.py")):
        if folders is None or path.relative_to(PACKAGE).parts[0] in folders:
            yield path, ast.parse(path.read_text(encoding="utf-8"))


def _docstrings(tree) -> set[int]:
    ids = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.ClassDef, ast.FunctionDef, ast.AsyncFunctionDef)):
            body = node.body
            if body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant):
                ids.add(id(body[0].value))
    return ids


# Known exceptions (none since the sizing advisory about R_d C became a finding, issue 16.3).
KNOWN: set[tuple[str, str]] = set()


def test_no_layer_below_the_report_writes_an_option_name():
    found = []
    for path, tree in _modules(BELOW_REPORT):
        docstrings = _docstrings(tree)
        for node in ast.walk(tree):
            if isinstance(node, ast.Constant) and isinstance(node.value, str) and \
                    id(node) not in docstrings and re.search(r"(^|[\s(`'])--[a-z]", node.value) \
                    and not any(where == str(path.relative_to(PACKAGE)) and text in node.value
                                for where, text in KNOWN):
                found.append(f"{path.relative_to(PACKAGE)}:{node.lineno}: {node.value!r}")
    assert not found, "\n".join(found)


def test_every_setting_a_study_names_has_an_option_and_the_option_exists():
    named = set()
    for path, tree in _modules():
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and getattr(node.func, "id", None) == "Setting" and \
                    node.args and isinstance(node.args[0], ast.Constant):
                named.add(node.args[0].value)
    assert {"trials", "workers", "swap", "mix", "find_series", "rare", "trial", "branch"} <= named
    assert named <= set(OPTIONS), named - set(OPTIONS)
    helps = "".join(invoke(command, "--help").stdout
                    for command in ("check", "size", "review", "wave", "demo", "new"))
    for option in OPTIONS.values():
        assert re.search(rf"{re.escape(option)}\b", helps), option


def test_a_setting_is_worded_for_python_and_for_the_command_line():
    assert str(Setting("trials")) == "trials" and option_wording(Setting("trials")) == "--trials"
    assert str(Setting("trials", 3688)) == "trials=3688"
    assert option_wording(Setting("trials", 3688)) == "--trials 3688"
    assert str(Setting("swap", "1-4:B")) == "swap='1-4:B'"
    assert option_wording(Setting("swap", "1-4:B")) == "--swap '1-4:B'"
    assert str(Setting("find_series", True)) == "find_series=True"
    assert option_wording(Setting("find_series", True)) == "--find-series"
    assert option_wording(Setting("rare", False)) == "--no-rare"
    assert option_wording(Setting("not_an_option", 2)) == "not_an_option=2"
    # User text in a setting is quoted and cut as every message quotes it (errors.excerpt).
    assert option_wording(Setting("mix", "x" * 100 + "\n")) == "--mix '" + "x" * 37 + "...'"


def test_an_error_keeps_its_pieces_and_its_key():
    error = DesignError(Setting("trials"), " must be at least 1, got 0", source="a.toml",
                        key="monte_carlo.trials")
    assert str(error) == "a.toml: monte_carlo.trials: trials must be at least 1, got 0"
    assert error.worded(option_wording) == \
        "a.toml: monte_carlo.trials: --trials must be at least 1, got 0"
    assert error.detail == "trials must be at least 1, got 0" and error.key == "monte_carlo.trials"
    # An error raised in a worker process comes back pickled, its pieces with it.
    again = pickle.loads(pickle.dumps(error))
    assert again.worded(option_wording) == error.worded(option_wording) and again.key == error.key
    assert isinstance(StringcheckError("plain"), ValueError) and str(StringcheckError("plain")) == "plain"


def _zero_failure_trials(p_fail: float, confidence: float) -> int:
    # Clopper & Pearson (1934), Biometrika 26(4): with no failure in n trials the two-sided upper
    # limit at confidence c is 1 - ((1 - c) / 2)^(1 / n); the smallest n that brings it to p_fail.
    return math.ceil(math.log((1.0 - confidence) / 2.0) / math.log1p(-p_fail))


def test_too_few_trials_to_size_names_the_keyword_in_python_and_the_option_on_the_command_line():
    example = Path(__file__).resolve().parents[2] / "examples" / "modulator-12kv-fails.toml"
    design = stringcheck.load_design(example)
    needed = _zero_failure_trials(design.sizing.target_p_fail, design.monte_carlo.confidence)
    with pytest.raises(SizingError) as caught:
        stringcheck.size(design, trials=10)
    assert f"; use trials={needed} or more (or raise [sizing] target_p_fail)" in str(caught.value)
    result = invoke("size", example, "--trials", "10")
    assert result.exit_code == 2, result.output
    assert f"; use --trials {needed} or more (or raise [sizing] target_p_fail)" in \
        " ".join(result.stderr.split())


@pytest.mark.parametrize("args, message", [
    (("demo", "--workers", "0", "--trials", "100"), "error: --workers must be at least 1, got 0"),
    (("wave", "{example}", "--branch", "5"), "error: --branch must be in 1..1, got 5"),
    (("wave", "{example}", "--trial", "12", "--trials", "10"),
     "error: --trial must be in 0..9 (the run has 10 trials), got 12"),
    (("review", "{example}", "--swap", "1-99:Q"),
     "error: --swap '1-99:Q': position 99 lies outside 1..10 (the string's series count)"),
    (("review", "{example}", "--mix", "2:FAST16"),
     "error: --mix '2:FAST16': the fraction must lie in 0..1 (or 0%..100%)"),
])
def test_the_command_line_messages_are_worded_with_its_options(args, message):
    example = Path(__file__).resolve().parents[2] / "examples" / "modulator-12kv-fails.toml"
    result = invoke(*(str(example) if arg == "{example}" else arg for arg in args))
    assert result.exit_code == 2, result.output
    assert " ".join(result.stderr.split()) == message
