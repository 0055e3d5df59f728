"""The package's own exceptions.

Every error raised for bad input names the offending key (or argument) and what would be valid,
so that the command line can print it as one line and exit with code 2.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from stringcheck.findings import Finding


@dataclass(frozen=True)
class Setting:
    """A keyword argument of a public function, as an error message names it.

    A study knows its own keywords, not the command line's options, so a message that tells the
    user which setting to change holds one of these and whoever shows the message spells it:
    Python as the keyword (``trials``, ``trials=3000``, :meth:`__str__`), the command line as its
    option (``--trials``, ``--trials 3000``; ``stringcheck.cli.options``).

    Parameters
    ----------
    keyword
        The keyword argument, e.g. ``"trials"`` or ``"find_series"``.
    value
        The value the message proposes or quotes, or None for the setting alone; text is quoted
        as :func:`excerpt` quotes it (the user typed it), a bool names the switch on or off.
    """

    keyword: str
    value: object = None

    def shown_value(self) -> str:
        """The value as a message shows it (text quoted and cut, see :func:`excerpt`)."""
        return excerpt(self.value) if isinstance(self.value, str) else str(self.value)

    def __str__(self) -> str:
        return self.keyword if self.value is None else f"{self.keyword}={self.shown_value()}"


class StringcheckError(ValueError):
    """Base class of every error stringcheck raises on purpose.

    Parameters
    ----------
    *message
        The message, in pieces: text, a :class:`Setting` wherever it names a setting to
        change, so that the command line can name its option instead (:meth:`worded`), and a
        :class:`~stringcheck.findings.Finding` wherever it gives what a check found (worded by
        the report's table). ``str()`` of the error names the Python keyword and the finding's
        code.
    """

    def __init__(self, *message: str | Setting | Finding) -> None:
        self.pieces: tuple[str | Setting | Finding, ...] = message
        super().__init__(self.worded())

    def worded(self, spell: Callable[[Setting], str] = str,
               word: Callable[[Finding], str] | None = None) -> str:
        """The message with each :class:`Setting` in it spelled by ``spell`` and each finding
        said by ``word`` (``report.wording.sentence``; None: its code)."""

        def shown(piece) -> str:
            if isinstance(piece, Setting):
                return spell(piece)
            if isinstance(piece, Finding):
                return piece.code if word is None else word(piece)
            return str(piece)

        return "".join(shown(piece) for piece in self.pieces)


class QuantityError(StringcheckError):
    """A quantity string could not be read, or carries the wrong unit."""


class DesignError(StringcheckError):
    """A design file is missing, unreadable, or holds a key or value that is not valid.

    Parameters
    ----------
    *message
        What is wrong and how to fix it (text and :class:`Setting` pieces, as for
        :class:`StringcheckError`).
    source
        The file (or other origin) the design came from, if known.
    key
        The dotted key path, e.g. ``parts.A.i_r.max``, if the error belongs to one key.
    """

    def __init__(self, *message: str | Setting, source: str | None = None,
                 key: str | None = None) -> None:
        self.source = source
        self.key = key
        self.detail = "".join(str(piece) for piece in message)
        where = ""
        if source and key:
            where = f"{source}: {key}: "
        elif source:
            where = f"{source}: "
        elif key:
            where = f"{key}: "
        super().__init__(where, *message)


class SizingError(StringcheckError):
    """The sizing search was asked something it cannot answer (bad target, unknown series)."""


class ImpossibleDesignError(StringcheckError):
    """The design cannot pass whatever is drawn or sized (e.g. too few devices for the voltage).

    The command line reports it as a failed design (exit code 1), not as bad input.
    """


def excerpt(text: object, limit: int = 40) -> str:
    """How a message quotes text it read from a file or an option: at most ``limit`` characters,
    every non-printable character (control characters, line breaks) as ``?``, in quotes, with
    ``...`` where it was cut. A message stays one short line, and a file the user did not mean to
    name (``/etc/shadow``) is not echoed."""
    raw = str(text)
    clean = "".join(c if c.isprintable() else "?" for c in raw[:limit + 1])
    return repr(clean if len(clean) <= limit else clean[:limit - 3] + "...")
