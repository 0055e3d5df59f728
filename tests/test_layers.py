"""The package's import graph keeps the layer rules of docs/architecture.md: imports point down only,
no import cycle, no module imports another module's underscore names (issue 16)."""

from __future__ import annotations

import ast
import sys
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "stringcheck"

# Bottom to top; a module may import its own layer and the layers below it.
LAYERS = {"errors": 0, "findings": 0, "units": 0, "eseries": 0, "limits": 0, "constants": 0,
          "design": 1,
          "physics": 2, "solvers": 3, "montecarlo": 4, "checks": 5, "studies": 6, "report": 7,
          "cli": 8}
TOP = 9  # stringcheck/__init__.py and __main__.py: the API over every layer


def _modules() -> dict[str, Path]:
    found = {}
    for path in PACKAGE.rglob("*.py"):
        parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        found[name] = path
    return found


def _imports(modules: dict[str, Path]) -> tuple[dict[str, set[str]], list[tuple[str, str, str]]]:
    """Each module's imported package modules, and the underscore names imported across modules."""
    edges: dict[str, set[str]] = {name: set() for name in modules}
    underscore = []
    for name, path in modules.items():
        package = name if path.name == "__init__.py" else name.rpartition(".")[0]
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom):
                if node.level:
                    base = package.split(".")[: len(package.split(".")) - node.level + 1]
                    target = ".".join(base + ([node.module] if node.module else []))
                else:
                    target = node.module or ""
                for alias in node.names:
                    full = f"{target}.{alias.name}"
                    if full in modules:
                        edges[name].add(full)
                    elif target in modules:
                        edges[name].add(target)
                        if alias.name.startswith("_") and target != name:
                            underscore.append((name, target, alias.name))
            elif isinstance(node, ast.Import):
                edges[name].update(alias.name for alias in node.names if alias.name in modules)
    return edges, underscore


def _layer(module: str) -> int:
    parts = module.split(".")
    if len(parts) == 1 or parts[1] == "__main__":
        return TOP
    return LAYERS[parts[1]]


def test_every_module_belongs_to_a_known_layer():
    unknown = sorted(m for m in _modules() if m.count(".") and m.split(".")[1] != "__main__"
                     and m.split(".")[1] not in LAYERS)
    assert not unknown, f"modules outside the layer map (add them to docs/architecture.md): {unknown}"


def test_imports_point_down_only():
    edges, _ = _imports(_modules())
    upward = sorted((a, b) for a, targets in edges.items() for b in targets
                    if _layer(b) > _layer(a))
    assert not upward, f"imports of a higher layer: {upward}"


def test_no_module_imports_another_modules_underscore_names():
    _, underscore = _imports(_modules())
    assert not underscore, f"underscore names imported across modules: {underscore}"


def _cycles(edges: dict[str, set[str]]) -> list[list[str]]:
    """Tarjan's strongly connected components (R. Tarjan, SIAM J. Computing 1(2), 1972): each
    component of more than one module is a cycle."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    cycles = []

    def visit(node: str) -> None:
        index[node] = low[node] = len(index)
        stack.append(node)
        on_stack.add(node)
        for target in edges[node]:
            if target not in index:
                visit(target)
                low[node] = min(low[node], low[target])
            elif target in on_stack:
                low[node] = min(low[node], index[target])
        if low[node] == index[node]:
            component = []
            while True:
                member = stack.pop()
                on_stack.discard(member)
                component.append(member)
                if member == node:
                    break
            if len(component) > 1:
                cycles.append(sorted(component))

    for node in edges:
        if node not in index:
            visit(node)
    return cycles


def test_there_is_no_import_cycle():
    edges, _ = _imports(_modules())
    assert not _cycles(edges), f"import cycles: {_cycles(edges)}"


def test_the_checker_sees_a_planted_cycle_and_an_upward_import(tmp_path, monkeypatch):
    # The checks above must be able to fail: a physics module importing a report module is both
    # upward and (with the report importing physics) a cycle.
    root = tmp_path / "stringcheck"
    for folder in ("physics", "report"):
        (root / folder).mkdir(parents=True)
        (root / folder / "__init__.py").write_text("")
    (root / "__init__.py").write_text("")
    (root / "physics" / "law.py").write_text("from stringcheck.report.page import _render\n")
    (root / "report" / "page.py").write_text("from stringcheck.physics import law\n"
                                            "def _render():\n    pass\n")
    monkeypatch.setattr(sys.modules[__name__], "PACKAGE", root)
    edges, underscore = _imports(_modules())
    assert "stringcheck.report.page" in edges["stringcheck.physics.law"]
    assert "stringcheck.physics.law" in edges["stringcheck.report.page"]
    assert underscore == [("stringcheck.physics.law", "stringcheck.report.page", "_render")]
    assert _layer("stringcheck.report.page") > _layer("stringcheck.physics.law")
    assert _cycles(edges) == [["stringcheck.physics.law", "stringcheck.report.page"]]
