"""The documentation in docs/ keeps up with the code: every design-file key is in the design-file
reference, every command and option of the command line is in the commands page, and every page the
README links to exists."""

from __future__ import annotations

import importlib
import pkgutil
import re
from pathlib import Path

import pytest
import typer
import typer.main

import stringcheck.cli
from stringcheck.design.schema import SCHEMA_KEYS, TOP_LEVEL

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"


def _code_words(page: Path) -> set[str]:
    """Every word inside a `code span` or a fenced block of a Markdown page."""
    text = page.read_text(encoding="utf-8")
    spans = re.findall(r"```.*?```|`[^`\n]+`", text, flags=re.DOTALL)
    return {word for span in spans for word in re.findall(r"[A-Za-z_][A-Za-z0-9_]*", span)}


def _typer_app() -> typer.Typer:
    """The Typer application of the command line, wherever in the cli package it is declared."""
    found = []
    for module_info in pkgutil.walk_packages(stringcheck.cli.__path__, "stringcheck.cli."):
        module = importlib.import_module(module_info.name)
        found += [value for value in vars(module).values() if isinstance(value, typer.Typer)]
    found += [value for value in vars(stringcheck.cli).values() if isinstance(value, typer.Typer)]
    assert found, "no typer.Typer application found in stringcheck.cli"
    return found[0]


def _cli_names() -> tuple[list[str], list[tuple[str, str]]]:
    """(command names, (command, option string) pairs), read from the click command typer builds."""
    group = typer.main.get_command(_typer_app())
    commands, options = [], []
    for name, command in group.commands.items():
        commands.append(name)
        for parameter in command.params:
            for opt in (*parameter.opts, *parameter.secondary_opts):
                if opt.startswith("-"):
                    options.append((name, opt))
    for parameter in group.params:  # options of the program itself (e.g. --version)
        for opt in (*parameter.opts, *parameter.secondary_opts):
            if opt.startswith("-"):
                options.append(("stringcheck", opt))
    return commands, options


def test_every_schema_key_is_in_the_design_file_reference():
    words = _code_words(DOCS / "design-file.md")
    missing = sorted({f"{table}.{key}" for table, keys in SCHEMA_KEYS.items() for key in keys
                      if key not in words})
    missing += sorted(table for table in TOP_LEVEL if table not in words)
    assert not missing, f"docs/design-file.md lacks: {', '.join(missing)}"


def test_the_key_check_can_fail():
    # The check above must see a key that is not documented: a made-up key is not in the page.
    assert "no_such_design_key" not in _code_words(DOCS / "design-file.md")


def test_every_command_and_option_is_in_the_commands_page():
    text = (DOCS / "commands.md").read_text(encoding="utf-8")
    commands, options = _cli_names()
    assert {"check", "size", "review", "wave", "new", "demo"} <= set(commands)
    missing = [f"stringcheck {name}" for name in commands
               if not re.search(rf"`stringcheck {re.escape(name)}\b", text)]
    missing += [f"{command} {opt}" for command, opt in options
                if not re.search(rf"(?<![\w-]){re.escape(opt)}(?![\w-])", text)]
    assert not missing, f"docs/commands.md lacks: {', '.join(missing)}"


def test_every_exit_code_is_in_the_commands_page():
    text = (DOCS / "commands.md").read_text(encoding="utf-8")
    for code in (0, 1, 2, 3, 130, 141, 143):
        assert re.search(rf"\*\*{code}\*\*", text), f"exit code {code} not documented"


def _anchors(page: Path) -> set[str]:
    """The heading anchors of a Markdown page as the repository page makes them: lower case,
    punctuation dropped, spaces as hyphens."""
    text = re.sub(r"```.*?```", "", page.read_text(encoding="utf-8"), flags=re.DOTALL)
    headings = re.findall(r"^#+ (.+)$", text, flags=re.MULTILINE)
    return {re.sub(r"[^\w\- ]", "", heading.strip().lower()).replace(" ", "-")
            for heading in headings}


def test_anchor_slugs_follow_the_headings():
    # The slug rule above, on a heading of this repository's kind (backticks, brackets, apostrophe).
    page = DOCS / "commands.md"
    assert "stringcheck-review-base-candidate" in _anchors(page)
    assert "exit-codes" in _anchors(page)


@pytest.mark.parametrize("page", ["README.md", *sorted(
    str(path.relative_to(ROOT)) for path in DOCS.rglob("*.md"))])
def test_relative_links_lead_to_files_and_headings(page):
    path = ROOT / page
    text = re.sub(r"```.*?```", "", path.read_text(encoding="utf-8"), flags=re.DOTALL)
    broken = []
    for target, anchor in re.findall(r"\]\(([^)\s#]*)(?:#([^)\s]*))?\)", text):
        if "://" in target or target.startswith("mailto:"):
            continue
        linked = path if not target else path.parent / target
        if not linked.exists():
            broken.append(target)
        elif anchor and linked.suffix == ".md" and anchor not in _anchors(linked):
            broken.append(f"{target}#{anchor}")
    assert not broken, f"{page} links to missing files or headings: {', '.join(broken)}"


def test_module_paths_named_in_the_docs_exist():
    # A path such as stringcheck/solvers/series_static.py written in a page must be a file.
    missing = []
    for page in [ROOT / "README.md", *DOCS.rglob("*.md")]:
        if page.name == "changelog.md":  # history names what was there then
            continue
        for name in re.findall(r"\b((?:stringcheck|tests|benchmarks|examples)/[\w/.-]*\w)",
                               page.read_text(encoding="utf-8")):
            if not (ROOT / name).exists():
                missing.append(f"{page.relative_to(ROOT)}: {name}")
    assert not missing, "paths that do not exist: " + "; ".join(missing)


def test_readme_is_a_short_tour_that_links_every_page():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert len(readme.splitlines()) <= 150
    for page in DOCS.rglob("*.md"):
        link = str(page.relative_to(ROOT))
        assert f"({link})" in readme, f"README.md does not link {link}"
