"""``stringcheck --version`` and ``stringcheck.__version__``: the installed package's metadata, else
the source tree's pyproject.toml."""

import subprocess
import sys
import tomllib
from importlib import metadata
from pathlib import Path

from typer.testing import CliRunner

import stringcheck
import stringcheck.report.tool_version as tool_version_module
from stringcheck.cli.app import app
from stringcheck.report.tool_version import UNKNOWN_VERSION, pyproject_version, tool_version

PYPROJECT = Path(__file__).resolve().parents[2] / "pyproject.toml"


def _declared_version() -> str:
    # The outside reference: the version the project declares (PEP 621 `project.version`), read
    # here with tomllib directly, not through the code under test.
    return tomllib.loads(PYPROJECT.read_text(encoding="utf-8"))["project"]["version"]


def test_version_option_prints_the_installed_version_and_exits_0():
    result = CliRunner().invoke(app, ["--version"])
    assert result.exit_code == 0, result.output
    assert result.stdout == f"stringcheck {metadata.version('stringcheck')}\n"


def test_version_of_the_console_command_is_one_line_on_stdout():
    done = subprocess.run([sys.executable, "-m", "stringcheck", "--version"], capture_output=True,
                          text=True, timeout=60)
    assert done.returncode == 0, done.stderr
    assert done.stdout == f"stringcheck {stringcheck.__version__}\n" and done.stderr == ""


def test_package_version_is_the_metadata_and_the_declared_version():
    assert stringcheck.__version__ == metadata.version("stringcheck") == tool_version()
    assert stringcheck.__version__ == _declared_version()


def test_without_metadata_the_version_comes_from_pyproject(monkeypatch):
    def not_installed(name):
        raise metadata.PackageNotFoundError(name)

    monkeypatch.setattr(tool_version_module.metadata, "version", not_installed)
    assert tool_version() == _declared_version()
    monkeypatch.setattr(tool_version_module, "_PYPROJECT", PYPROJECT.parent / "missing.toml")
    assert tool_version() == UNKNOWN_VERSION


def test_a_pyproject_of_another_project_or_a_broken_one_gives_no_version(tmp_path):
    other = tmp_path / "pyproject.toml"
    other.write_text('[project]\nname = "other"\nversion = "9.9"\n', encoding="utf-8")
    assert pyproject_version(other) is None
    other.write_text('[project\nname = "stringcheck"\n', encoding="utf-8")
    assert pyproject_version(other) is None
    other.write_text('[project]\nname = "stringcheck"\nversion = "2.1.0"\n', encoding="utf-8")
    assert pyproject_version(other) == "2.1.0"
