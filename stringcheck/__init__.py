"""stringcheck: Monte Carlo checks of voltage and current sharing in strings of power diodes."""

from __future__ import annotations

from stringcheck.design.model import Design
from stringcheck.design.reading import load_design, parse_design_text
from stringcheck.errors import DesignError, QuantityError, SizingError, StringcheckError

__version__ = "0.1.0"


def check(design: Design, **options):
    """Run the series check of ``design``; see :func:`stringcheck.studies.check.run_check`."""
    from stringcheck.studies.check import run_check

    return run_check(design, **options)


def size(design: Design, **options):
    """Propose the grading network of ``design``; see :func:`stringcheck.studies.size.size`."""
    from stringcheck.studies.size import size as run_size

    return run_size(design, **options)


__all__ = ["Design", "DesignError", "QuantityError", "SizingError", "StringcheckError", "check",
           "load_design", "parse_design_text", "size", "__version__"]
