"""The version of stringcheck that made a result, as a report or ``stringcheck --version`` names it."""

from __future__ import annotations

import tomllib
from importlib import metadata
from pathlib import Path

__all__ = ["DISTRIBUTION", "UNKNOWN_VERSION", "pyproject_version", "tool_version"]

DISTRIBUTION = "stringcheck"
UNKNOWN_VERSION = "0+unknown"  # a PEP 440 local version: no metadata and no pyproject.toml
_PYPROJECT = Path(__file__).resolve().parents[2] / "pyproject.toml"


def tool_version() -> str:
    """The installed package's version (its metadata), else the version in the ``pyproject.toml``
    of the source tree the package was imported from (a checkout run without installing), else
    :data:`UNKNOWN_VERSION`."""
    try:
        return metadata.version(DISTRIBUTION)
    except metadata.PackageNotFoundError:
        return pyproject_version(_PYPROJECT) or UNKNOWN_VERSION


def pyproject_version(path: Path) -> str | None:
    """``project.version`` of the stringcheck ``pyproject.toml`` at ``path``, or None when the file
    is missing, unreadable, or describes another project."""
    try:
        project = tomllib.loads(path.read_text(encoding="utf-8")).get("project", {})
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError):
        return None
    version = project.get("version")
    return version if project.get("name") == DISTRIBUTION and isinstance(version, str) else None
