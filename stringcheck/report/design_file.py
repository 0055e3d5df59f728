"""The design file with a proposed grading network written in, comments and layout kept.

``size --write`` hands the original text and the sizing result here. With ``tomlkit`` installed
(a dependency of the package), the text is edited as a TOML document that keeps every comment,
blank line and key order; without it a line editor does the same for the few keys the proposal
sets (``[grading] resistor, capacitor, damping_resistor`` and, with ``--find-series``,
``[string] series``). Either way the new text is read back and must give the proposed values, or
nothing is written.
"""

from __future__ import annotations

import re
import tomllib
from typing import TYPE_CHECKING, Any

from stringcheck.errors import StringcheckError
from stringcheck.units import format_quantity

if TYPE_CHECKING:
    from stringcheck.studies.size import SizingResult

__all__ = ["proposed_keys", "sized_design_text"]


def proposed_keys(result: "SizingResult") -> dict[str, dict[str, Any]]:
    """The keys the proposal sets, by table: quantities as unit strings ("4.87 MOhm")."""
    grading = result.design.grading
    keys: dict[str, Any] = {"resistor": format_quantity(grading.resistor, "ohm", digits=4)}
    if grading.capacitor is not None:
        keys["capacitor"] = format_quantity(grading.capacitor, "F", digits=4)
    if grading.damping_resistor is not None:
        keys["damping_resistor"] = format_quantity(grading.damping_resistor, "ohm", digits=4)
    tables: dict[str, dict[str, Any]] = {"grading": keys}
    if result.series_searched:
        tables["string"] = {"series": int(result.series_count)}
    return tables


def sized_design_text(text: str, result: "SizingResult", *, source: str = "design") -> str:
    """``text`` (the design file read) with the proposal's keys set (:func:`proposed_keys`)."""
    tables = proposed_keys(result)
    try:
        import tomlkit
    except ImportError:
        edited = _edited_by_lines(text, tables, source)
    else:
        document = tomlkit.parse(text)
        for table, keys in tables.items():
            if table not in document:
                document.add(table, tomlkit.table())
            for key, value in keys.items():
                document[table][key] = value
        edited = tomlkit.dumps(document)
    read = tomllib.loads(edited)
    for table, keys in tables.items():
        for key, value in keys.items():
            if read.get(table, {}).get(key) != value:
                raise StringcheckError(f"{source}: {table}.{key} could not be written in place "
                                       f"(the file defines [{table}] in a way this editor does "
                                       "not change); set it by hand to " + repr(value))
    return edited


_HEADER = re.compile(r"^\s*\[\s*([A-Za-z0-9_.\-\"' ]+?)\s*\]\s*(#.*)?$")
_ARRAY_HEADER = re.compile(r"^\s*\[\[")


def _value_text(value: Any) -> str:
    return f'"{value}"' if isinstance(value, str) else str(value)


def _edited_by_lines(text: str, tables: dict[str, dict[str, Any]], source: str) -> str:
    """Set ``key = value`` lines in each ``[table]`` of ``text``, keeping everything else: a key
    present has its value replaced (its comment kept), a missing key goes after the table's last
    key, a missing table goes at the end."""
    lines = text.splitlines(keepends=True)
    newline = "\r\n" if text.endswith("\r\n") else "\n"
    for table, keys in tables.items():
        start = None
        for number, line in enumerate(lines):
            match = _HEADER.match(line)
            if match and not _ARRAY_HEADER.match(line) and match.group(1) == table:
                start = number
                break
        if start is None:
            if lines and not lines[-1].endswith(("\n", "\r")):
                lines[-1] += newline
            lines += [newline, f"[{table}]{newline}"] + [
                f"{key} = {_value_text(value)}{newline}" for key, value in keys.items()]
            continue
        end = len(lines)
        for number in range(start + 1, len(lines)):
            if lines[number].lstrip().startswith("["):
                end = number
                break
        last_key = start
        for key, value in keys.items():
            pattern = re.compile(rf"^(\s*{re.escape(key)}\s*=\s*)(\"[^\"]*\"|'[^']*'|[^\s#]+)(.*)$",
                                 re.DOTALL)
            for number in range(start + 1, end):
                match = pattern.match(lines[number])
                if match:
                    lines[number] = match.group(1) + _value_text(value) + match.group(3)
                    last_key = max(last_key, number)
                    break
            else:
                for number in range(start + 1, end):
                    if re.match(r"^\s*[A-Za-z0-9_\-]+\s*=", lines[number]):
                        last_key = max(last_key, number)
                lines.insert(last_key + 1, f"{key} = {_value_text(value)}{newline}")
                last_key += 1
                end += 1
    return "".join(lines)
