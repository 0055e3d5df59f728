"""The ``stringcheck`` command line: parse options, call one study, hand the result to a renderer.

Exit codes: 0 every check passes; 1 a check fails; 2 bad input or usage; 3 internal error;
130 interrupted (Ctrl-C); 141 the reader of standard output went away; 143 terminated (SIGTERM).
"""

from __future__ import annotations

import os
import signal
import sys
import threading
import time
import traceback
import warnings
from importlib import resources
from pathlib import Path
from typing import Callable, Optional

import typer
from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

from stringcheck.errors import ImpossibleDesignError, StringcheckError

EXIT_PASS, EXIT_FAIL, EXIT_INPUT, EXIT_INTERNAL, EXIT_INTERRUPTED = 0, 1, 2, 3, 130
EXIT_BROKEN_PIPE = 141  # 128 + SIGPIPE, what a shell reports for a writer whose reader left
EXIT_TERMINATED = 143  # 128 + SIGTERM, what a shell reports for a process ended by `kill`

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="Monte Carlo checks of voltage sharing in series strings of power diodes.",
    pretty_exceptions_enable=False,
)

_TRIALS = typer.Option(None, "--trials", min=1, help="Number of built strings to draw "
                                                     "(default: the design's monte_carlo.trials).")
_SEED = typer.Option(None, "--seed", min=0, help="Random seed (default: the design's).")
_JSON = typer.Option(None, "--json", help="Write the machine-readable result to PATH ('-' for "
                                          "standard output).", metavar="PATH")
_CSV = typer.Option(None, "--csv", help="Write per-position statistics to PATH as CSV.",
                    metavar="PATH")
_QUIET = typer.Option(False, "--quiet", "-q", help="Print only a one-line verdict.")
_DEBUG = typer.Option(False, "--debug", help="Show the traceback of an internal error.")
_TRANSIENT = typer.Option(False, "--transient", help="Also simulate the turn-off in the time "
                                                    "domain (overshoot, ringing).")
_TRANSIENT_WORST = typer.Option(20, "--transient-worst", min=0, metavar="N",
                                help="With --transient: simulate the N worst charge-balance strings.")
_TRANSIENT_SAMPLE = typer.Option(None, "--transient-sample", min=1, metavar="N",
                                 help="With --transient: random strings to estimate P(fail) on "
                                      "(default: as many as the target needs).")
_DRIVERS = typer.Option(False, "--drivers", help="Rank what drives the worst stress and what "
                                                  "halving each input's spread would buy.")
_RARE = typer.Option(None, "--rare/--no-rare", show_default=False,
                     help="Estimate small P(fail) of every check (static, dynamic, transient, "
                          "parallel, thermal) by importance sampling. Default: only for a check "
                          "whose plain run saw fewer than 10 failures and could not decide it.")
_WORKERS = typer.Option(1, "--workers", help="Processes to run the trials in (the result is the "
                                             "same for any number).")


def _console(stderr: bool = False, *, wrap: bool = True) -> Console:
    from stringcheck.report.display_text import report_console

    return report_console(stderr=stderr, soft_wrap=not wrap)


class _Terminated(BaseException):
    """SIGTERM arrived: unwind like Ctrl-C (worker processes stopped, no output file left), but
    not as an Exception, which some code may catch."""


class _TerminateOnSigterm:
    """While a command runs, turn SIGTERM into :class:`_Terminated` (main thread only, and only
    where SIGTERM would end the process anyway), so that cleanup runs: worker processes are
    stopped and temporary files removed."""

    def __init__(self) -> None:
        self.previous = None

    def __enter__(self) -> "_TerminateOnSigterm":
        if threading.current_thread() is threading.main_thread() and \
                signal.getsignal(signal.SIGTERM) is signal.SIG_DFL:
            self.previous = signal.signal(signal.SIGTERM, self._raise)
        return self

    @staticmethod
    def _raise(signum, frame) -> None:
        raise _Terminated

    def __exit__(self, *exc) -> bool:
        if self.previous is not None:
            signal.signal(signal.SIGTERM, self.previous)
            self.previous = None
        return False


class _DeferredInterrupt:
    """While a live display (progress bar, spinner) runs, hold Ctrl-C until a safe point.

    rich redraws a live display from a thread of its own, holding its lock and standing in for
    standard error. In repeated trials of `python -m stringcheck demo` with a real SIGINT, a
    KeyboardInterrupt raised at an arbitrary point in that state was now and then lost (the run went
    on) or the process ended by SIGINT after its message; with no live display (--quiet) neither
    happened. So the first Ctrl-C only sets a flag, and :meth:`check` raises the KeyboardInterrupt at
    the next progress report, in the main thread, outside rich's code; so does leaving the context.
    A second Ctrl-C interrupts at once, as usual.
    """

    def __init__(self) -> None:
        self.requested = False
        self.previous = None

    def __enter__(self) -> "_DeferredInterrupt":
        # Only where Ctrl-C would raise KeyboardInterrupt anyway (not when ignored, as in a
        # background job, nor off the main thread, where handlers cannot be set).
        if threading.current_thread() is threading.main_thread() and \
                signal.getsignal(signal.SIGINT) is signal.default_int_handler:
            self.previous = signal.signal(signal.SIGINT, self._note)
        return self

    def _note(self, signum, frame) -> None:
        self.requested = True
        signal.signal(signal.SIGINT, signal.default_int_handler)

    def check(self) -> None:
        """Raise the KeyboardInterrupt held since the first Ctrl-C, if any."""
        if self.requested:
            self.requested = False
            raise KeyboardInterrupt

    def __exit__(self, kind, value, trace) -> bool:
        if self.previous is not None:
            signal.signal(signal.SIGINT, self.previous)
            self.previous = None
        if kind is None:
            self.check()
        return False


class _DelayedProgress:
    """A progress bar on stderr that appears only when a run lasts longer than about a second.

    Use it as a context manager: while the bar is shown, Ctrl-C is held to the next report
    (:class:`_DeferredInterrupt`).
    """

    def __init__(self, enabled: bool, label: str):
        self.enabled = enabled
        self.label = label
        self.start = time.monotonic()
        self.bar: Progress | None = None
        self.task = None
        self.interrupt = _DeferredInterrupt()

    def __enter__(self) -> "_DelayedProgress":
        return self

    def __exit__(self, kind, value, trace) -> bool:
        self.close()
        if self.bar is not None:
            self.interrupt.__exit__(kind, value, trace)
        return False

    def __call__(self, done: int, total: int) -> None:
        self.interrupt.check()
        if not self.enabled:
            return
        if self.bar is None:
            elapsed = time.monotonic() - self.start
            if done >= total or elapsed < 0.5 or elapsed * total / max(done, 1) < 1.0:
                return
            self.bar = Progress(TextColumn(self.label), BarColumn(), TextColumn("{task.completed:,}/"
                                                                                "{task.total:,}"),
                                TimeRemainingColumn(), console=_console(stderr=True), transient=True)
            self.interrupt.__enter__()
            self.bar.start()
            self.task = self.bar.add_task(self.label, total=total)
        self.bar.update(self.task, completed=done)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.stop()


def _one_line(error: BaseException) -> str:
    """The message as one line of rich markup: user text in it is escaped, control characters
    shown as '?'."""
    from rich.markup import escape

    from stringcheck.report.display_text import shown

    return escape(shown(" ".join(str(error).split())))


def _run(action: Callable[[], int], debug: bool) -> None:
    """Run ``action`` and turn its outcome into an exit code, never a traceback (unless --debug)."""
    try:
        with warnings.catch_warnings(), _TerminateOnSigterm():
            if not debug:
                # numpy's overflow and invalid-value warnings are not messages for a user: a trial
                # that could not be solved is counted and reported as such. --debug shows them.
                warnings.simplefilter("ignore", RuntimeWarning)
            code = action()
    except ImpossibleDesignError as error:
        _console(stderr=True, wrap=False).print(f"[bold red]impossible design:[/] {_one_line(error)}",
                                                markup=True)
        code = EXIT_FAIL
    except StringcheckError as error:
        _console(stderr=True, wrap=False).print(f"[bold red]error:[/] {_one_line(error)}",
                                                markup=True)
        code = EXIT_INPUT
    except KeyboardInterrupt:
        _console(stderr=True).print("interrupted; no partial output file was left behind")
        code = EXIT_INTERRUPTED
    except _Terminated:
        try:
            _console(stderr=True).print("terminated; no partial output file was left behind")
        except OSError:
            pass
        code = EXIT_TERMINATED
    except BrokenPipeError:
        # The reader of standard output went away (`--json - | head`): not an error of ours.
        # Point stdout at /dev/null so that the interpreter's final flush stays quiet.
        try:
            os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        except (OSError, ValueError, AttributeError):  # stdout is no real file (e.g. in tests)
            pass
        code = EXIT_BROKEN_PIPE
    except Exception as error:  # the last guard: one line, and the way to the traceback
        if debug:
            traceback.print_exc()
        else:
            _console(stderr=True, wrap=False).print(
                f"[bold red]internal error:[/] {type(error).__name__}: {_one_line(error)} "
                "(rerun with --debug for the traceback, and please report it)", markup=True)
        code = EXIT_INTERNAL
    raise typer.Exit(code)


def _read_files(design, path: Path, what: str = "the design file") -> list[tuple[Path, str]]:
    """Every file a run of ``design`` reads, with what it is: no output may replace one."""
    files = [(Path(path), what)]
    for name, part in design.parts.items():
        if part.measured is not None:
            files.append((Path(part.measured.path), f"the measured lot of parts.{name}"))
    return files


def _check(path: Path, *, trials, seed, json_path, csv_path, quiet, workers=1,
           transient=None, drivers=False, rare=None, source_label=None) -> int:
    from stringcheck.design.reading import load_design
    from stringcheck.report.export import (
        atomic_outputs,
        check_output_targets,
        json_text,
        positions_csv,
        result_to_dict,
    )
    from stringcheck.report.terminal import render_check, render_check_summary
    from stringcheck.studies.check import run_check

    design = load_design(path)
    check_output_targets({"--json": json_path, "--csv": csv_path},
                         inputs=_read_files(design, path, "the design file" if source_label is None
                                            else "the bundled demo design"))
    if source_label is not None:
        from dataclasses import replace

        design = replace(design, source=source_label)
    to_stdout = "-" in (json_path, csv_path)
    with _DelayedProgress(enabled=not quiet, label="drawing strings") as progress:
        result = run_check(design, trials=trials, seed=seed, progress=progress, workers=workers,
                           drivers=drivers, rare=rare, **(transient or {}))
    # Both texts are made before either file is touched; both files are replaced together, after
    # the report was printed, so that a report that fails leaves the old files.
    outputs = []
    if json_path is not None:
        outputs.append((json_path, json_text(result_to_dict(result))))
    if csv_path is not None:
        outputs.append((csv_path, positions_csv(result)))
    with atomic_outputs(outputs):
        # With machine output on standard output, the report goes to stderr so the two never mix.
        _print_report(result, quiet=quiet, stderr=to_stdout, full=render_check,
                      summary=render_check_summary)
    return EXIT_PASS if result.verdict == "pass" else EXIT_FAIL


@app.command()
def check(
    file: Path = typer.Argument(..., help="Design file (TOML).", show_default=False),
    trials: Optional[int] = _TRIALS,
    seed: Optional[int] = _SEED,
    json: Optional[str] = _JSON,
    csv: Optional[str] = _CSV,
    quiet: bool = _QUIET,
    workers: int = _WORKERS,
    transient: bool = _TRANSIENT,
    transient_worst: int = _TRANSIENT_WORST,
    transient_sample: Optional[int] = _TRANSIENT_SAMPLE,
    drivers: bool = _DRIVERS,
    rare: Optional[bool] = _RARE,
    debug: bool = _DEBUG,
) -> None:
    """Check a string: static and dynamic voltage sharing, parallel current sharing, junction
    temperatures and runaway, optionally the time-domain turn-off; P(fail), grading ratings."""
    options = _transient_options(transient, transient_worst, transient_sample)
    _run(lambda: _check(file, trials=trials, seed=seed, json_path=json, csv_path=csv, quiet=quiet,
                        workers=workers, transient=options, drivers=drivers, rare=rare), debug)


def _transient_options(transient: bool, worst: int, sample: Optional[int]) -> dict:
    if not transient:
        return {}
    return {"transient": True, "transient_worst": worst, "transient_sample": sample}


def _size(path: Path, *, trials, seed, json_path, quiet, resistor_series, capacitor_series,
          find_series, workers=1, transient=False) -> int:
    from stringcheck.design.reading import load_design
    from stringcheck.report.export import (
        atomic_outputs,
        check_output_targets,
        json_text,
        sizing_to_dict,
    )
    from stringcheck.report.terminal import render_check_summary, render_sizing
    from stringcheck.studies.size import size as run_size

    design = load_design(path)
    check_output_targets({"--json": json_path}, inputs=_read_files(design, path))
    status = _console(stderr=True)
    with _DeferredInterrupt() if not quiet else _nothing() as interrupt, \
            status.status("sizing", spinner="line") if not quiet else _nothing() as spinner:
        def progress(step: str) -> None:
            if spinner is not None:
                interrupt.check()
                spinner.update(f"sizing: {step}")

        result = run_size(design, trials=trials, seed=seed, resistor_series=resistor_series,
                          capacitor_series=capacitor_series, find_series=find_series,
                          progress=progress, workers=workers, transient=transient)
    outputs = [] if json_path is None else [(json_path, json_text(sizing_to_dict(result)))]
    console = _console(stderr=json_path == "-", wrap=not quiet)
    with atomic_outputs(outputs), _report_stream(json_path == "-"):
        if quiet:
            r = result.resistor.chosen.value
            c = result.design.grading.capacitor if result.capacitor else None
            console.print(f"R = {r:.4g} ohm" + (f", C = {c:.4g} F" if c else "")
                          + (f", R_d = {result.damping_resistor:.3g} ohm" if result.damping_resistor
                             else "") + f", n = {result.series_count}; ", end="")
            render_check_summary(result.check, console)
        else:
            render_sizing(result, console)
    return EXIT_PASS if result.check.verdict == "pass" else EXIT_FAIL


class _nothing:
    def __enter__(self):
        return None

    def __exit__(self, *exc):
        return False


@app.command()
def size(
    file: Path = typer.Argument(..., help="Design file (TOML).", show_default=False),
    resistor_series: Optional[str] = typer.Option(
        None, "--resistor-series", help="IEC 60063 series for R (default: [sizing], else E96)."),
    capacitor_series: Optional[str] = typer.Option(
        None, "--capacitor-series", help="IEC 60063 series for C (default: [sizing], else E12)."),
    find_series: bool = typer.Option(False, "--find-series",
                                     help="Also find the smallest device count that passes."),
    trials: Optional[int] = _TRIALS,
    seed: Optional[int] = _SEED,
    json: Optional[str] = _JSON,
    quiet: bool = _QUIET,
    workers: int = _WORKERS,
    transient: bool = typer.Option(False, "--transient",
                                   help="Choose the damping resistor in the time domain and "
                                        "include the transient in the final check."),
    debug: bool = _DEBUG,
) -> None:
    """Propose grading R, C and damping resistor from preferred values, with their ratings."""
    _run(lambda: _size(file, trials=trials, seed=seed, json_path=json, quiet=quiet,
                       resistor_series=resistor_series, capacitor_series=capacitor_series,
                       find_series=find_series, workers=workers, transient=transient), debug)


def _review(base_path: Path, candidate_path: Optional[Path], *, swap, mix, trials, seed,
            json_path, quiet, workers, transient, drivers=False, rare=None) -> int:
    from stringcheck.design.reading import load_design
    from stringcheck.report.export import atomic_outputs, check_output_targets, json_text
    from stringcheck.report.review import render_review, render_review_summary, review_to_dict
    from stringcheck.studies.review import mixed, parse_mix, parse_swap, review, swapped

    baseline = load_design(base_path)
    read = _read_files(baseline, base_path, "the baseline design file")
    if [candidate_path, swap, mix].count(None) != 2:
        raise StringcheckError("give exactly one of a CANDIDATE design file, --swap POSITIONS:PART "
                               "(e.g. --swap 1-4:B) or --mix FRACTION:PART (e.g. --mix 0.25:B)")
    if candidate_path is not None:
        candidate = load_design(candidate_path)
        read += _read_files(candidate, candidate_path, "the candidate design file")
    check_output_targets({"--json": json_path}, inputs=read)
    if mix is not None:
        candidate = mixed(baseline, *parse_mix(mix, baseline))
    elif swap is not None:
        positions, part = parse_swap(swap, baseline)
        candidate = swapped(baseline, positions, part)
    with _DelayedProgress(enabled=not quiet, label="baseline, then candidate") as progress:
        result = review(baseline, candidate, trials=trials, seed=seed, workers=workers,
                        transient=transient, rare=rare, drivers=drivers, progress=progress)
    outputs = [] if json_path is None else [(json_path, json_text(review_to_dict(result)))]
    with atomic_outputs(outputs):
        _print_report(result, quiet=quiet, stderr=json_path == "-", full=render_review,
                      summary=render_review_summary)
    return EXIT_PASS if result.verdict == "accept" else EXIT_FAIL


def _print_report(result, *, quiet: bool, stderr: bool, full, summary) -> None:
    """The report, or its one line with --quiet; on stderr when machine output is on stdout."""
    console = _console(stderr=stderr, wrap=not quiet)
    with _report_stream(stderr):
        (summary if quiet else full)(result, console)


class _report_stream:
    """Turn a report that cannot be written (``> /dev/full``) into an input error; a reader that
    left (BrokenPipeError) goes on to exit 141."""

    def __init__(self, stderr: bool = False) -> None:
        self.name = "standard error" if stderr else "standard output"

    def __enter__(self) -> None:
        return None

    def __exit__(self, kind, value, trace) -> bool:
        if kind is not None and issubclass(kind, OSError) and not issubclass(kind, BrokenPipeError):
            raise StringcheckError(f"the report cannot be written to {self.name} "
                                   f"({value.strerror or kind.__name__}); no output file was "
                                   "replaced") from None
        return False


@app.command()
def review(
    base: Path = typer.Argument(..., help="Baseline design file (TOML).", show_default=False),
    candidate: Optional[Path] = typer.Argument(None, help="Candidate design file (TOML).",
                                               show_default=False),
    swap: Optional[str] = typer.Option(None, "--swap", metavar="POSITIONS:PART",
                                       help="Candidate = BASE with PART (defined in BASE) in these "
                                            "positions of every branch, e.g. 1-4:B or 7,9:B."),
    mix: Optional[str] = typer.Option(None, "--mix", metavar="FRACTION:PART",
                                      help="Candidate = BASE with mixed stock: every device of "
                                           "every built string is PART (defined in BASE) with "
                                           "probability FRACTION, e.g. 0.25:B or 25%:B."),
    trials: Optional[int] = _TRIALS,
    seed: Optional[int] = _SEED,
    json: Optional[str] = _JSON,
    quiet: bool = _QUIET,
    workers: int = _WORKERS,
    transient: bool = _TRANSIENT,
    drivers: bool = _DRIVERS,
    rare: Optional[bool] = _RARE,
    debug: bool = _DEBUG,
) -> None:
    """May a candidate replace the baseline? Both checked on the same draws; exit 0 accept, 1 reject."""
    _run(lambda: _review(base, candidate, swap=swap, mix=mix, trials=trials, seed=seed, json_path=json,
                         quiet=quiet, workers=workers, transient=transient, drivers=drivers,
                         rare=rare), debug)


def _wave(path: Path, *, trial, branch, trials, seed, csv_path, worst, width, height) -> int:
    from stringcheck.design.reading import load_design
    from stringcheck.report.display_text import shown
    from stringcheck.report.export import atomic_outputs, check_output_targets
    from stringcheck.report.waveform import waveform_csv, waveform_plot
    from stringcheck.checks.transient import trial_trace

    design = load_design(path)
    check_output_targets({"--csv": csv_path}, inputs=_read_files(design, path))
    result, notes = trial_trace(design, trial, trials=trials, seed=seed, branch=branch)
    outputs = [] if csv_path is None else \
        [(csv_path, waveform_csv(result.trace, capacitor_voltages=True))]
    console = _console(stderr=csv_path == "-")
    with atomic_outputs(outputs), _report_stream(csv_path == "-"):
        if not bool(result.converged[0]):
            console.print("[bold red]the engine could not finish this trial; the plot shows what "
                          "was reached[/]", markup=True)
        console.print(f"{shown(design.title)}: trial {trial}, branch {branch}; turn-off from "
                      f"{result.trace.time.shape[0]} recorded steps")
        console.print(waveform_plot(result.trace, width=width, height=height, worst=worst),
                      end="")
        for note in notes:
            console.print(f"note: {shown(note)}")
    return EXIT_PASS


@app.command()
def wave(
    file: Path = typer.Argument(..., help="Design file (TOML).", show_default=False),
    trial: int = typer.Option(0, "--trial", min=0, help="Trial (built string) of the run, from 0."),
    branch: int = typer.Option(1, "--branch", min=1, help="Branch of a parallel group, from 1."),
    worst: Optional[int] = typer.Option(6, "--worst", min=1,
                                        help="Plot only the N stages with the highest peaks."),
    width: int = typer.Option(80, "--width", min=40, help="Plot width in characters."),
    height: int = typer.Option(24, "--height", min=12, help="Plot height in lines."),
    trials: Optional[int] = _TRIALS,
    seed: Optional[int] = _SEED,
    csv: Optional[str] = typer.Option(None, "--csv", metavar="PATH",
                                      help="Write the waveforms of the trial as CSV."),
    debug: bool = _DEBUG,
) -> None:
    """Simulate one built string's turn-off and plot its stage voltages and loop current."""
    _run(lambda: _wave(file, trial=trial, branch=branch, trials=trials, seed=seed, csv_path=csv,
                       worst=worst, width=width, height=height), debug)


@app.command()
def demo(
    trials: Optional[int] = _TRIALS,
    seed: Optional[int] = _SEED,
    json: Optional[str] = _JSON,
    csv: Optional[str] = _CSV,
    quiet: bool = _QUIET,
    workers: int = _WORKERS,
    transient: bool = _TRANSIENT,
    transient_worst: int = _TRANSIENT_WORST,
    transient_sample: Optional[int] = _TRANSIENT_SAMPLE,
    drivers: bool = _DRIVERS,
    rare: Optional[bool] = _RARE,
    debug: bool = _DEBUG,
) -> None:
    """Run the check on the bundled example design (an invented 30 kV stack)."""
    options = _transient_options(transient, transient_worst, transient_sample)

    def action() -> int:
        with resources.as_file(resources.files("stringcheck") / "data" / "demo.toml") as path:
            return _check(path, trials=trials, seed=seed, json_path=json, csv_path=csv,
                          quiet=quiet, workers=workers, transient=options, drivers=drivers,
                          rare=rare, source_label="demo (bundled example)")

    _run(action, debug)


@app.command()
def new(
    file: Path = typer.Argument(..., help="Where to write the starter design ('-' for standard "
                                          "output).", show_default=False),
    force: bool = typer.Option(False, "--force", help="Overwrite FILE if it exists."),
    debug: bool = _DEBUG,
) -> None:
    """Write a commented starter design file to edit."""
    def action() -> int:
        from stringcheck.report.export import write_text_atomic
        from stringcheck.report.starter import starter_design

        if str(file) == "-":  # the starter on standard output, and nothing else there
            write_text_atomic("-", starter_design())
            return EXIT_PASS
        if os.path.lexists(file) and not force:
            raise StringcheckError(f"{file}: already exists; choose another name or add --force "
                                   "to overwrite it")
        write_text_atomic(file, starter_design())
        _console().print(f"wrote {file}; edit it, then run: stringcheck check {file}")
        return EXIT_PASS

    _run(action, debug)


def _usage_error_type() -> type[Exception]:
    """The usage-error class of the click that typer runs on (vendored by recent typer)."""
    try:
        from typer._click.exceptions import UsageError
    except ImportError:  # typer releases that depend on the click package
        from click.exceptions import UsageError
    return UsageError


def main() -> None:
    """Console-script entry point: a usage error is one line on stderr and exit code 2."""
    usage_error = _usage_error_type()
    try:
        code = app(standalone_mode=False)
    except usage_error as error:
        if type(error).__name__ == "NoArgsIsHelpError":  # bare `stringcheck`: help was shown
            sys.exit(EXIT_INPUT)
        from stringcheck.report.display_text import shown

        where = error.ctx.command_path if error.ctx is not None else "stringcheck"
        print(f"error: {shown(' '.join(error.format_message().split()))} (see '{where} --help')",
              file=sys.stderr)
        sys.exit(EXIT_INPUT)
    except KeyboardInterrupt:  # pragma: no cover - interrupt outside a command
        sys.exit(EXIT_INTERRUPTED)
    sys.exit(code if isinstance(code, int) else EXIT_PASS)
