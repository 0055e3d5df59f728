"""The options and arguments several commands share, declared once as typer ``Annotated`` aliases,
and how a message names the option of a study's keyword.

A study names the setting a user should change by its Python keyword (``errors.Setting``); only
the command line knows which option sets it (:data:`OPTIONS`, :func:`option_wording`).
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer

from stringcheck.errors import Setting

__all__ = ["CsvPath", "Debug", "DesignFile", "Drivers", "JsonPath", "NEGATED_OPTIONS", "OPTIONS",
           "Quiet", "Rare", "ReportPath", "Seed", "TRANSIENT_WORST", "Transient", "TransientSample",
           "TransientWorst", "Trials", "Workers", "option_wording"]

DesignFile = Annotated[Path, typer.Argument(help="Design file (TOML).", show_default=False)]
Trials = Annotated[Optional[int], typer.Option(
    "--trials", min=1, help="Number of built strings to draw (default: the design's "
                            "monte_carlo.trials).")]
Seed = Annotated[Optional[int], typer.Option("--seed", min=0,
                                             help="Random seed (default: the design's).")]
JsonPath = Annotated[Optional[str], typer.Option(
    "--json", help="Write the machine-readable result to PATH ('-' for standard output).",
    metavar="PATH")]
ReportPath = Annotated[Optional[str], typer.Option(
    "--report", help="Write a self-contained HTML report to PATH (figures inline, opens offline, "
                     "prints to A4 from a browser).", metavar="PATH")]
CsvPath = Annotated[Optional[str], typer.Option(
    "--csv", help="Write per-position statistics to PATH as CSV.", metavar="PATH")]
Quiet = Annotated[bool, typer.Option("--quiet", "-q", help="Print only a one-line verdict.")]
Debug = Annotated[bool, typer.Option("--debug", help="Show the traceback of an internal error.")]
Transient = Annotated[bool, typer.Option(
    "--transient", help="Also simulate the turn-off in the time domain (overshoot, ringing).")]
# The default of --transient-worst: checks.transient.DEFAULT_WORST, which is not imported here
# because its module loads scipy, and `stringcheck --help` should not wait for that (a test keeps
# the two equal).
TRANSIENT_WORST = 20
TransientWorst = Annotated[int, typer.Option(
    "--transient-worst", min=0, metavar="N",
    help="With --transient: simulate the N worst charge-balance strings.")]
TransientSample = Annotated[Optional[int], typer.Option(
    "--transient-sample", min=1, metavar="N",
    help="With --transient: random strings to estimate P(fail) on (default: as many as the target "
         "needs).")]
Drivers = Annotated[bool, typer.Option(
    "--drivers", help="Rank what drives the worst stress and what halving each input's spread "
                      "would buy.")]
Rare = Annotated[Optional[bool], typer.Option(
    "--rare/--no-rare", show_default=False,
    help="Estimate small P(fail) of every check (static, dynamic, transient, parallel, thermal) by "
         "importance sampling. Default: only for a check whose plain run saw fewer than 10 "
         "failures and could not decide it.")]
Workers = Annotated[int, typer.Option(
    "--workers", help="Processes to run the trials in (the result is the same for any number).")]

# The option that sets each keyword a study names in a message (``errors.Setting``), and for a
# switch the option that turns it off.
OPTIONS: dict[str, str] = {
    "branch": "--branch",
    "find_series": "--find-series",
    "mix": "--mix",
    "rare": "--rare",
    "swap": "--swap",
    "transient": "--transient",
    "trial": "--trial",
    "trials": "--trials",
    "workers": "--workers",
}
NEGATED_OPTIONS: dict[str, str] = {"rare": "--no-rare"}


def option_wording(setting: Setting) -> str:
    """How the command line names ``setting``: ``--trials``, ``--trials 3000``, ``--swap '1-4:B'``,
    ``--find-series`` (a switch on), ``--no-rare`` (off); a keyword no option sets keeps its
    Python spelling."""
    option = OPTIONS.get(setting.keyword)
    if option is None:
        return str(setting)
    if setting.value is None or setting.value is True:
        return option
    if setting.value is False:
        return NEGATED_OPTIONS.get(setting.keyword, str(setting))
    return f"{option} {setting.shown_value()}"
