"""The package's own exceptions.

Every error raised for bad input names the offending key (or argument) and what would be valid,
so that the command line can print it as one line and exit with code 2.
"""

from __future__ import annotations


class StringcheckError(ValueError):
    """Base class of every error stringcheck raises on purpose."""


class QuantityError(StringcheckError):
    """A quantity string could not be read, or carries the wrong unit."""


class DesignError(StringcheckError):
    """A design file is missing, unreadable, or holds a key or value that is not valid.

    Parameters
    ----------
    message
        What is wrong and how to fix it.
    source
        The file (or other origin) the design came from, if known.
    key
        The dotted key path, e.g. ``parts.A.i_r.max``, if the error belongs to one key.
    """

    def __init__(self, message: str, *, source: str | None = None, key: str | None = None):
        self.source = source
        self.key = key
        self.detail = message
        where = ""
        if source and key:
            where = f"{source}: {key}: "
        elif source:
            where = f"{source}: "
        elif key:
            where = f"{key}: "
        super().__init__(where + message)


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
