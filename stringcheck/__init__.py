"""stringcheck: Monte Carlo checks of voltage and current sharing in strings of power diodes.

The Python interface, for notebooks and scripts: :func:`check` a design, :func:`size` its grading
network, :func:`review` a substitute part, :func:`trace_turn_off` of one built string. Each takes
a :class:`Design` (or the path of a design file) and the settings the command line's options set,
by the same names. Bad input raises a :class:`StringcheckError` (a ``ValueError``) that names the
key or the keyword to change.

Example (it runs in the tests, ``tests/cli/test_api.py``): the bundled example design, a 30 kV
stack of 24 fast rectifiers, checked and sized; then reviewed with a second source rated 1.6 kV
instead of 2 kV in its four hottest positions; then one built string's turn-off.

>>> from dataclasses import replace
>>> import stringcheck
>>> design = stringcheck.example_design()
>>> design.string.series, design.grading.resistor
(24, 4700000.0)
>>> result = stringcheck.check(design, seed=11)
>>> result.verdict, result.trials
('pass', 20000)
>>> sorted(name for name, outcome in result.checks.items() if outcome.ran)
['dynamic', 'static']
>>> sized = stringcheck.size(design, trials=4000, seed=11)
>>> sized.resistor.chosen.value, sized.capacitor.chosen.value, sized.check.verdict
(140000000.0, 1.8e-10, 'pass')
>>> lower = replace(design.parts["FR2K"], v_rrm=1.6e3)
>>> candidate_parts = {**design.parts, "LOWER": lower}
>>> reviewed = stringcheck.review(replace(design, parts=candidate_parts), swap="1-4:LOWER",
...                               trials=4000, seed=11)
>>> reviewed.verdict, [change.name for change in reviewed.changes if not change.acceptable]
('reject', ['static', 'dynamic'])
>>> turn_off, notes = stringcheck.trace_turn_off(design, 7, trials=4000, seed=11)
>>> turn_off.peak_voltage.shape, bool(turn_off.converged[0])
((1, 24), True)
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING, Callable

from stringcheck.design.model import Design
from stringcheck.design.reading import load_design, parse_design_text
from stringcheck.errors import (
    DesignError,
    ImpossibleDesignError,
    QuantityError,
    Setting,
    SizingError,
    StringcheckError,
)
from stringcheck.report.tool_version import tool_version

if TYPE_CHECKING:
    from stringcheck.montecarlo.executor import WorkerPool
    from stringcheck.solvers.transient import TurnOff
    from stringcheck.studies.check import CheckResult
    from stringcheck.studies.review import ReviewResult
    from stringcheck.studies.size import SizingResult

__version__ = tool_version()

__all__ = ["Design", "DesignError", "ImpossibleDesignError", "QuantityError", "Setting",
           "SizingError", "StringcheckError", "__version__", "check", "example_design",
           "load_design", "parse_design_text", "review", "size", "trace_turn_off"]

# The studies are imported on first call, so that `import stringcheck` (and `stringcheck --help`)
# does not wait for scipy. Their defaults are repeated in the signatures below, for the reader;
# tests/cli/test_api.py keeps them equal to the studies' own.
EXAMPLE_SOURCE = "demo (bundled example)"


def _design(design: Design | str | os.PathLike[str]) -> Design:
    return design if isinstance(design, Design) else load_design(design)


def example_design() -> Design:
    """The bundled example design (the one ``stringcheck demo`` checks): an invented 30 kV
    precipitator stack of 24 fast rectifiers with R-C grading.

    Returns
    -------
    Design
        The validated design; its ``source`` is ``"demo (bundled example)"``.
    """
    from importlib import resources

    text = (resources.files("stringcheck") / "data" / "demo.toml").read_text(encoding="utf-8")
    return parse_design_text(text, source=EXAMPLE_SOURCE)


def check(design: Design | str | os.PathLike[str], *, trials: int | None = None,
          seed: int | None = None, workers: int = 1, transient: bool = False,
          transient_worst: int = 20, transient_sample: int | None = None,
          drivers: bool = False, rare: bool | None | tuple[str, ...] = False,
          rare_samples: int = 20_000, chunk_trials: int | None = None,
          only: tuple[str, ...] | None = None,
          progress: Callable[[int, int], None] | None = None,
          pool: "WorkerPool | None" = None) -> "CheckResult":
    """Check a string: static and dynamic voltage sharing, parallel current sharing, junction
    temperatures and runaway, optionally the time-domain turn-off (``stringcheck check``).

    Parameters
    ----------
    design
        A :class:`Design`, or the path of a design file (TOML) to load.
    trials, seed
        Built strings to draw and the random seed (default: the design's ``monte_carlo``).
        The same seed gives the same result, whatever ``workers`` and ``chunk_trials``.
    workers
        Processes to run the trials in (1: this process); the result does not depend on it.
    transient
        Also simulate the turn-off in the time domain (overshoot, ringing).
    transient_worst
        With ``transient``: the number of worst charge-balance strings to simulate.
    transient_sample
        With ``transient``: random strings to estimate P(fail) on (None: as many as the target
        needs).
    drivers
        Rank what drives each series check's worst stress and what halving each input's
        spread would buy.
    rare
        Estimate small P(fail) by importance sampling: True for every check, False for none,
        None for each check whose plain run could not decide it, or a tuple of check names.
    rare_samples
        Strings the importance sampler draws for each check.
    chunk_trials
        Trials per chunk (None: chosen for memory); the result does not depend on it.
    only
        Run only these of ``("static", "dynamic")``; the others are reported as not run.
    progress
        Called with (trials done, trials in all) after each chunk.
    pool
        An open worker pool (``montecarlo.executor.worker_pool``) to run in instead of
        ``workers`` new processes, so that several calls share one.

    Returns
    -------
    CheckResult
        The verdict, each check's outcome (``checks``), the grading network's ratings, the
        assumptions made and the plausibility warnings.

    Raises
    ------
    StringcheckError
        Bad input (a :class:`DesignError` names the design-file key).
    """
    from stringcheck.studies.check import run_check

    return run_check(_design(design), trials=trials, seed=seed, workers=workers,
                     transient=transient, transient_worst=transient_worst,
                     transient_sample=transient_sample, drivers=drivers, rare=rare,
                     rare_samples=rare_samples, chunk_trials=chunk_trials, only=only,
                     progress=progress, pool=pool)


def size(design: Design | str | os.PathLike[str], *, trials: int | None = None,
         seed: int | None = None, resistor_series: str | None = None,
         capacitor_series: str | None = None, find_series: bool = False,
         progress: Callable[[str], None] | None = None, workers: int = 1,
         transient: bool = False) -> "SizingResult":
    """Propose the grading resistor, capacitor and damping resistor from preferred values, with
    their ratings (``stringcheck size``).

    Parameters
    ----------
    design
        A :class:`Design`, or the path of a design file (TOML) to load; its grading values (if
        any) are replaced by the sized ones, its tolerances, TCR and ratings kept.
    trials, seed
        Built strings to draw for each candidate value and the random seed (default: the
        design's ``monte_carlo``); ``trials`` must be enough to show ``[sizing] target_p_fail``.
    resistor_series, capacitor_series
        IEC 60063 series names, e.g. ``"E96"`` (default: the design's ``[sizing]``).
    find_series
        Also find the smallest device count that passes with the chosen network.
    progress
        Called with a short description of each search step.
    workers
        Processes to run each check's trials in; the answer does not depend on it.
    transient
        Choose the damping resistor in the time domain and include the transient in the final
        check.

    Returns
    -------
    SizingResult
        The chosen values with the search that found them, the ratings they need, and the check
        of the sized design (``check``).

    Raises
    ------
    SizingError
        Too few trials for the target, or no preferred value meets it.
    ImpossibleDesignError
        Too few devices for the string voltage (and ``find_series`` not set).
    """
    from stringcheck.studies.size import size as run_size

    return run_size(_design(design), trials=trials, seed=seed, resistor_series=resistor_series,
                    capacitor_series=capacitor_series, find_series=find_series,
                    progress=progress, workers=workers, transient=transient)


def review(baseline: Design | str | os.PathLike[str],
           candidate: Design | str | os.PathLike[str] | None = None, *,
           swap: str | None = None, mix: str | None = None, trials: int | None = None,
           seed: int | None = None, workers: int = 1, transient: bool = False,
           rare: bool | None = False, drivers: bool = False,
           progress: Callable[[int, int], None] | None = None) -> "ReviewResult":
    """May a candidate replace the baseline? Both are checked on the same draws
    (``stringcheck review``).

    Parameters
    ----------
    baseline
        The approved design (a :class:`Design` or the path of a design file).
    candidate, swap, mix
        Exactly one: the candidate design (or its path); ``swap``, ``"POSITIONS:PART"`` such as
        ``"1-4:B"`` or ``"7,9:B"``, the baseline with PART (one of its parts) in these positions
        of every branch; or ``mix``, ``"FRACTION:PART"`` such as ``"0.25:B"`` or ``"25%:B"``, the
        baseline with every device of every built string PART with probability FRACTION.
    trials, seed
        Built strings to draw and the random seed (default: the baseline's ``monte_carlo``).
    workers
        Processes to run the trials in; the result does not depend on it.
    transient
        Also simulate the turn-off in the time domain for both designs.
    rare
        Importance sampling for both designs, as for :func:`check` (None: where either design's
        plain run could not decide a check).
    drivers
        Rank what drives each series check's worst stress, for both designs.
    progress
        Called with (trials done, trials in all) over both checks.

    Returns
    -------
    ReviewResult
        ``verdict`` ("accept" or "reject"), both designs' results, the change of each check's
        P(fail) bound and the positions that got worse.

    Raises
    ------
    StringcheckError
        Not exactly one of ``candidate``, ``swap`` and ``mix``, a ``swap`` or ``mix`` that cannot
        be read or names no part of the baseline, or designs of different arrangements.
    """
    from stringcheck.studies.review import review as run_review
    from stringcheck.studies.review import substituted

    given = [name for name, value in (("candidate", candidate), ("swap", swap), ("mix", mix))
             if value is not None]
    if len(given) != 1:
        raise StringcheckError("give exactly one of candidate, swap and mix (given: "
                               f"{', '.join(given) or 'none'})")
    base = _design(baseline)
    other = _design(candidate) if candidate is not None else substituted(base, swap=swap, mix=mix)
    return run_review(base, other, trials=trials, seed=seed, workers=workers, transient=transient,
                      rare=rare, drivers=drivers, progress=progress)


def trace_turn_off(design: Design | str | os.PathLike[str], trial: int, *,
                   trials: int | None = None, seed: int | None = None,
                   branch: int = 1) -> "tuple[TurnOff, tuple[str, ...]]":
    """The time-domain turn-off of one built string of the design's Monte Carlo run, every step
    recorded (``stringcheck wave``).

    Parameters
    ----------
    design
        A :class:`Design`, or the path of a design file (TOML) to load.
    trial
        The built string, 0 .. ``trials`` - 1: the same string the check of the same ``trials``
        and ``seed`` drew as that trial.
    trials, seed
        The run the trial belongs to (default: the design's ``monte_carlo``).
    branch
        The branch of a parallel group, 1 .. ``string.parallel``.

    Returns
    -------
    turn_off : TurnOff
        Peak and settled stage voltages [V], the peak reverse current [A], whether the
        integrator converged, and the recorded steps (``turn_off.trace``), for one trial.
    notes : tuple of str
        How the loop was set up (inductance, forward current, what is left out).

    Raises
    ------
    StringcheckError
        The design has no turn-off to simulate, or ``trial`` or ``branch`` is out of range.
    """
    from stringcheck.checks.transient import trial_trace

    return trial_trace(_design(design), trial, trials=trials, seed=seed, branch=branch)
