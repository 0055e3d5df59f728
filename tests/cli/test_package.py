"""The command line as a package: only cli/ uses typer, and only typer's public interface; the
report renders text and the command line writes the files."""

import ast
from pathlib import Path

import stringcheck

PACKAGE = Path(stringcheck.__file__).parent


def _imports(path: Path) -> set[str]:
    names = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            names.add(node.module)
    return names


def test_only_the_command_line_imports_typer_and_never_its_private_modules():
    for path in PACKAGE.rglob("*.py"):
        where = path.relative_to(PACKAGE)
        for name in _imports(path):
            root, _, rest = name.partition(".")
            if root in ("typer", "click"):
                assert where.parts[0] == "cli", (where, name)
                assert name == "typer", (where, name)  # typer.core, typer.main, typer._click: no


def test_the_json_export_writes_no_file():
    imported = _imports(PACKAGE / "report" / "export.py")
    assert not imported & {"os", "tempfile", "stat", "sys", "stringcheck.cli.output_files"}
