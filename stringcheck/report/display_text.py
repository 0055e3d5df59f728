"""Text from files shown on a terminal: never markup, never a control sequence.

A design file (or a candidate someone else wrote, under ``review``) chooses its title, part names,
serial numbers and file names. Shown as they are, ``[bold]`` would be taken for rich markup (and
``[/]`` crash the report), ``:name:`` for an emoji code, and an escape sequence could move the cursor
and overwrite the verdict. So the report's console reads no markup and no emoji codes in what it
prints (:func:`report_console`), every control character (C0 including newline and tab, DEL, C1) in
a user string becomes ``?`` (:func:`shown`), and, as a last guard, the console replaces any control
character left in the text it renders (its own line breaks and styles are not text, so they stay).
"""

from __future__ import annotations

import re
from typing import IO, List

from rich.console import Console, ConsoleOptions, ConsoleRenderable, RenderHook, RenderResult
from rich.segment import Segment

__all__ = ["CONTROL_CHARACTERS", "report_console", "shown"]

# C0 (U+0000-U+001F, newline and tab included), DEL (U+007F) and C1 (U+0080-U+009F): the code
# points ECMA-48 (5th edition, 1991), clause 5, reserves for control functions.
CONTROL_CHARACTERS = re.compile("[\x00-\x1f\x7f-\x9f]")
_CONTROL_BUT_NEWLINE = re.compile("[\x00-\x09\x0b-\x1f\x7f-\x9f]")


def shown(text: object) -> str:
    """``text`` as one printable line: every control character replaced by ``?``."""
    return CONTROL_CHARACTERS.sub("?", str(text))


class _Clean:
    """A renderable whose text segments have their control characters replaced."""

    def __init__(self, inner: ConsoleRenderable) -> None:
        self.inner = inner

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        for segment in console.render(self.inner, options):
            if segment.control is None and _CONTROL_BUT_NEWLINE.search(segment.text):
                yield Segment(_CONTROL_BUT_NEWLINE.sub("?", segment.text), segment.style)
            else:
                yield segment


class _ControlFilter(RenderHook):
    def process_renderables(self, renderables: List[ConsoleRenderable]) -> List[ConsoleRenderable]:
        return [_Clean(renderable) for renderable in renderables]


class _ReportConsole(Console):
    def on_broken_pipe(self) -> None:
        # rich's own handling ends the program with exit code 1, the code of a failed check; the
        # command line turns a BrokenPipeError into 141 (128 + SIGPIPE) instead.
        raise BrokenPipeError(32, "Broken pipe")


def report_console(stderr: bool = False, *, soft_wrap: bool = False,
                   file: IO[str] | None = None, width: int | None = None) -> Console:
    """A console for the report: no markup, no emoji codes, no highlighting read into what it
    prints, control characters replaced, and a closed pipe raised as :class:`BrokenPipeError`.

    A message that wants markup of its own passes ``markup=True`` to ``print`` and escapes every
    user string in it (``rich.markup.escape``).
    """
    console = _ReportConsole(stderr=stderr, file=file, width=width, highlight=False, markup=False,
                             emoji=False, soft_wrap=soft_wrap)
    console.push_render_hook(_ControlFilter())
    return console
