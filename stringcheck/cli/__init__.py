"""The ``stringcheck`` command line (commands in :mod:`stringcheck.cli.app`)."""

from stringcheck.cli.app import main

__all__ = ["main"]
