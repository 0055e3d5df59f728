"""The ``stringcheck`` commands: parse options, call one study, hand the result to a renderer.

Shared options are declared in :mod:`stringcheck.cli.options`, progress and Ctrl-C in
:mod:`stringcheck.cli.progress`, output files in :mod:`stringcheck.cli.output_files`, exit codes and
the guard that turns errors into one line and a code in :mod:`stringcheck.cli.exit_codes`.

Exit codes: 0 every check passes; 1 a check fails; 2 bad input or usage; 3 internal error;
130 interrupted (Ctrl-C); 141 the reader of standard output went away; 143 terminated (SIGTERM).
"""

from __future__ import annotations

import os
import sys
from importlib import resources
from pathlib import Path
from typing import Annotated, Optional

import typer

from stringcheck.cli import output_files
from stringcheck.cli.exit_codes import (
    EXIT_FAIL,
    EXIT_INPUT,
    EXIT_INTERRUPTED,
    EXIT_PASS,
    console,
    run_guarded,
)
from stringcheck.cli.options import (
    CsvPath,
    Debug,
    DesignFile,
    Drivers,
    JsonPath,
    Quiet,
    Rare,
    ReportPath,
    Seed,
    TRANSIENT_WORST,
    Transient,
    TransientSample,
    TransientWorst,
    Trials,
    Workers,
    option_wording,
)
from stringcheck.cli.progress import DelayedProgress, StepSpinner
from stringcheck.errors import StringcheckError

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="Monte Carlo checks of voltage sharing in series strings of power diodes.",
    pretty_exceptions_enable=False,
    # Help text is plain text: "[sizing]" names a design-file table, not rich markup.
    rich_markup_mode=None,
    context_settings={"help_option_names": ["-h", "--help"]},
)


def _show_version(shown: bool) -> None:
    if shown:
        from stringcheck.report.tool_version import tool_version

        typer.echo(f"stringcheck {tool_version()}")
        raise typer.Exit(EXIT_PASS)


@app.callback()
def _options(
    version: Annotated[bool, typer.Option("--version", is_eager=True, callback=_show_version,
                                          help="Print the version and exit.")] = False,
) -> None:
    """Monte Carlo checks of voltage sharing in series strings of power diodes."""


def _command_line() -> list[str]:
    """The command as typed (for the HTML report's header)."""
    return ["stringcheck", *sys.argv[1:]]


def _check(path: Path, *, trials, seed, json_path, csv_path, quiet, workers=1,
           transient=None, drivers=False, rare=None, source_label=None, faults=False,
           failure_rate=False, end_of_life=False, report_path=None) -> int:
    from stringcheck.design.reading import load_design
    from stringcheck.report.export import json_text, positions_csv, result_to_dict
    from stringcheck.report.terminal import render_check, render_check_summary
    from stringcheck.studies.check import run_check

    design = load_design(path)
    if design.circuit is not None:
        return _check_circuit(design, path, trials=trials, seed=seed, json_path=json_path,
                              csv_path=csv_path, quiet=quiet, workers=workers,
                              transient=transient, drivers=drivers, rare=rare,
                              report_path=report_path)
    output_files.check_output_targets(
        {"--json": json_path, "--csv": csv_path, "--report": report_path},
        inputs=output_files.design_inputs(design, path, "the design file" if source_label is None
                                          else "the bundled demo design"))
    if source_label is not None:
        from dataclasses import replace

        design = replace(design, source=source_label)
    to_stdout = "-" in (json_path, csv_path, report_path)
    aged = None
    if end_of_life or design.end_of_life.enabled:
        from stringcheck.studies.end_of_life import run_end_of_life

        with DelayedProgress(enabled=not quiet, label="start and end of life") as progress:
            aged = run_end_of_life(design, trials=trials, seed=seed, progress=progress,
                                   workers=workers, drivers=drivers, rare=rare,
                                   **(transient or {}))
        result = aged.initial
    else:
        with DelayedProgress(enabled=not quiet, label="drawing strings") as progress:
            result = run_check(design, trials=trials, seed=seed, progress=progress,
                               workers=workers, drivers=drivers, rare=rare, **(transient or {}))
    study = None
    if faults:
        from stringcheck.studies.faults import run_faults

        with DelayedProgress(enabled=not quiet, label="single faults") as progress:
            study = run_faults(design, trials=trials, seed=seed, progress=progress)
    rates = None
    if failure_rate:
        from stringcheck.studies.failure_rate import run_failure_rate

        with DelayedProgress(enabled=not quiet, label="failure rate") as progress:
            rates = run_failure_rate(design, trials=trials, seed=seed, progress=progress)
    # Both texts are made before either file is touched; both files are replaced together, after
    # the report was printed, so that a report that fails leaves the old files.
    outputs = []
    # The studies' JSON objects, made once for the JSON and the HTML report.
    studies = _studies_to_dict(study, aged, rates)
    if json_path is not None:
        outputs.append((json_path, json_text({**result_to_dict(result), **studies})))
    if csv_path is not None:
        outputs.append((csv_path, positions_csv(result)))
    if report_path is not None:
        from stringcheck.report.html_page import check_page

        outputs.append((report_path, check_page(result, command_line=_command_line(),
                                                spell=option_wording,
                                                extra={**studies, **_worst_turn_off(result)})))
    trace = None if source_label is not None else (
        lambda trial, seed, trials: f"stringcheck wave {path} --trial {trial} --trials {trials} "
                                    f"--seed {seed}")
    full, summary = _with_faults(study, result.design.string,
                                 lambda shown, on: render_check(shown, on, spell=option_wording,
                                                                trace=trace),
                                 render_check_summary)
    full, summary = _with_failure_rate(rates, result.design.string, full, summary)
    full, summary = _with_end_of_life(aged, full, summary)
    with output_files.atomic_outputs(outputs):
        # With machine output on standard output, the report goes to stderr so the two never mix.
        _print_report(result, quiet=quiet, stderr=to_stdout, full=full, summary=summary)
    verdict = result.verdict if aged is None else aged.verdict
    return EXIT_PASS if verdict == "pass" else EXIT_FAIL


def _worst_turn_off(result) -> dict:
    """For the HTML report of a run with ``--transient``: the simulated turn-off of the transient
    check's worst string (each branch's stages, zoomed to the event) as a figure, traced again on
    the same draws (``checks.transient.trial_trace``)."""
    check = result.checks.get("transient")
    if check is None or not check.ran or check.worst_trial < 0:
        return {}
    from stringcheck.checks.transient import trial_limits, trial_trace
    from stringcheck.report.figures import wave_figure
    from stringcheck.report.waveform import event_window, trial_waveform

    design = result.design
    figures = []
    for branch in range(1, design.string.parallel + 1):
        traced, _ = trial_trace(design, check.worst_trial, trials=result.trials, seed=result.seed,
                                branch=branch)
        limits = trial_limits(design, check.worst_trial, trials=result.trials, seed=result.seed,
                              branch=branch)
        waveform = trial_waveform(traced.trace)
        figures.append(wave_figure(waveform, limits=list(limits), window=event_window(waveform),
                                   title=f"trial {check.worst_trial:,}, branch {branch}"))
    return {"worst_turn_off": {"trial": check.worst_trial, "figures": figures}}


def _studies_to_dict(study, aged, rates) -> dict:
    """The JSON objects of the studies that ran beside the check (``faults``, ``end_of_life``,
    ``failure_rate``, in that order)."""
    out = {}
    if study is not None:
        from stringcheck.report.faults import faults_to_dict

        out["faults"] = faults_to_dict(study)
    if aged is not None:
        from stringcheck.report.end_of_life import end_of_life_to_dict

        out["end_of_life"] = end_of_life_to_dict(aged)
    if rates is not None:
        from stringcheck.report.failure_rate import failure_rate_to_dict

        out["failure_rate"] = failure_rate_to_dict(rates)
    return out


def _followed_by(full, summary, more_full, more_summary):
    """The check's renderers (full report, --quiet line), each followed by a study's own."""
    def full_then(result, on):
        full(result, on)
        more_full(on)

    def summary_then(result, on):
        summary(result, on)
        more_summary(on)

    return full_then, summary_then


def _with_end_of_life(aged, full, summary):
    """The renderers, followed by the end-of-life comparison when there is one."""
    if aged is None:
        return full, summary
    from stringcheck.report.end_of_life import render_end_of_life, render_end_of_life_summary

    return _followed_by(full, summary, lambda on: render_end_of_life(aged, on),
                        lambda on: render_end_of_life_summary(aged, on))


def _with_faults(study, layout, full, summary):
    """The check's renderers, followed by the fault study's when there is one."""
    if study is None:
        return full, summary
    from stringcheck.report.faults import render_faults, render_faults_summary

    return _followed_by(full, summary,
                        lambda on: render_faults(study, on, parallel=layout.parallel,
                                                 derating=layout.derating),
                        lambda on: render_faults_summary(study, on))


def _with_failure_rate(rates, layout, full, summary):
    """The renderers, followed by the failure rate's when there is one."""
    if rates is None:
        return full, summary
    from stringcheck.report.failure_rate import render_failure_rate, render_failure_rate_summary

    return _followed_by(full, summary,
                        lambda on: render_failure_rate(rates, on, parallel=layout.parallel),
                        lambda on: render_failure_rate_summary(rates, on))


def _check_circuit(design, path: Path, *, trials, seed, json_path, csv_path, quiet, workers,
                   transient, drivers, rare, report_path) -> int:
    """``check`` of a design with a [circuit] table: every distinct stack duty (issue 23)."""
    from stringcheck.report.circuit import (
        circuit_csv,
        circuit_to_dict,
        render_circuit,
        render_circuit_summary,
    )
    from stringcheck.report.export import json_text
    from stringcheck.studies.circuit import run_circuit

    if report_path is not None:
        raise StringcheckError(f"{path}: --report (HTML) is not yet written for a design with a "
                               "[circuit] table; use --json or --csv")
    output_files.check_output_targets({"--json": json_path, "--csv": csv_path},
                                      inputs=output_files.design_inputs(design, path))
    with DelayedProgress(enabled=not quiet, label="drawing strings") as progress:
        result = run_circuit(design, trials=trials, seed=seed, progress=progress,
                             workers=workers, drivers=drivers, rare=rare, **(transient or {}))
    outputs = []
    if json_path is not None:
        outputs.append((json_path, json_text(circuit_to_dict(result))))
    if csv_path is not None:
        outputs.append((csv_path, circuit_csv(result)))
    with output_files.atomic_outputs(outputs):
        _print_report(result, quiet=quiet, stderr="-" in (json_path, csv_path),
                      full=lambda shown, on: render_circuit(shown, on, spell=option_wording),
                      summary=render_circuit_summary)
    return EXIT_PASS if result.verdict == "pass" else EXIT_FAIL


def _needs_duty(design, path: Path, command: str) -> None:
    """``command`` takes a [duty]; a [circuit] design is checked by ``check`` only so far."""
    if design.circuit is not None:
        raise StringcheckError(f"{path}: `stringcheck {command}` takes a design with a [duty] "
                               "table; a [circuit] design is checked by `stringcheck check` (give "
                               "the stack's [duty] for this command)")


def _print_report(result, *, quiet: bool, stderr: bool, full, summary) -> None:
    """The report, or its one line with --quiet; on stderr when machine output is on stdout."""
    shown_on = console(stderr=stderr, wrap=not quiet)
    with output_files.report_stream(stderr):
        (summary if quiet else full)(result, shown_on)


def _transient_options(transient: bool, worst: int, sample: Optional[int]) -> dict:
    if not transient:
        return {}
    return {"transient": True, "transient_worst": worst, "transient_sample": sample}


@app.command()
def check(
    file: DesignFile,
    trials: Trials = None,
    seed: Seed = None,
    json: JsonPath = None,
    csv: CsvPath = None,
    report: ReportPath = None,
    quiet: Quiet = False,
    workers: Workers = 1,
    transient: Transient = False,
    transient_worst: TransientWorst = TRANSIENT_WORST,
    transient_sample: TransientSample = None,
    drivers: Drivers = False,
    rare: Rare = None,
    faults: Annotated[bool, typer.Option(
        "--faults", help="Also rerun the series checks on the same draws with every single fault "
                         "([faults] kinds: shorted devices, open resistors, open or shorted "
                         "capacitors, open damping resistors) and count the shorted devices the "
                         "string tolerates.")] = False,
    failure_rate: Annotated[bool, typer.Option(
        "--failure-rate", help="Also estimate each device's and the stack's failure rate in FIT "
                               "(MIL-HDBK-217F N2 section 6.1 parts stress; [reliability] "
                               "factors) from the built strings' stresses.")] = False,
    end_of_life: Annotated[bool, typer.Option(
        "--end-of-life", help="Also run every check with the [end_of_life] changes (resistor "
                              "drift and voltage coefficient, capacitor dc-bias loss, surface "
                              "leakage) on the same draws; report both margins.")] = False,
    debug: Debug = False,
) -> None:
    """Check a string: static and dynamic voltage sharing, parallel current sharing, junction
    temperatures and runaway, optionally the time-domain turn-off; P(fail), grading ratings."""
    options = _transient_options(transient, transient_worst, transient_sample)
    run_guarded(lambda: _check(file, trials=trials, seed=seed, json_path=json, csv_path=csv,
                               quiet=quiet, workers=workers, transient=options, drivers=drivers,
                               rare=rare, faults=faults, failure_rate=failure_rate,
                               end_of_life=end_of_life, report_path=report), debug)


def _size(path: Path, *, trials, seed, json_path, quiet, resistor_series, capacitor_series,
          find_series, workers=1, transient=None, write_path=None, force=False,
          report_path=None) -> int:
    from stringcheck.design.reading import load_design
    from stringcheck.report.design_file import sized_design_text
    from stringcheck.report.export import json_text, no_proposal_to_dict, sizing_to_dict
    from stringcheck.report.terminal import (
        render_no_proposal,
        render_sizing,
        render_sizing_summary,
    )
    from stringcheck.studies.size import NoProposal
    from stringcheck.studies.size import size as run_size

    design = load_design(path)
    _needs_duty(design, path, "size")
    output_files.check_output_targets({"--json": json_path, "--report": report_path},
                                      inputs=output_files.design_inputs(design, path))
    if write_path is not None:
        output_files.check_write_target(write_path, force=force, json_path=json_path)
    try:
        with StepSpinner(enabled=not quiet, label="sizing") as progress:
            result = run_size(design, trials=trials, seed=seed, resistor_series=resistor_series,
                              capacitor_series=capacitor_series, find_series=find_series,
                              progress=progress, workers=workers, transient=transient)
    except NoProposal as error:
        # Not a proposal: say which limit or check cannot be met and what came closest; nothing
        # is written to --write, the JSON says the same.
        outputs = [] if json_path is None else [
            (json_path, json_text(no_proposal_to_dict(error.findings, spell=option_wording)))]
        shown_on = console(stderr=json_path == "-", wrap=not quiet)
        with output_files.atomic_outputs(outputs), output_files.report_stream(json_path == "-"):
            render_no_proposal(error.findings, shown_on, quiet=quiet, spell=option_wording)
        return EXIT_FAIL
    outputs = [] if json_path is None else [
        (json_path, json_text(sizing_to_dict(result, spell=option_wording)))]
    if write_path is not None:
        outputs.append((write_path, sized_design_text(Path(path).read_text(encoding="utf-8"),
                                                      result, source=str(path))))
    if report_path is not None:
        from stringcheck.report.html_page import sizing_page

        outputs.append((report_path, sizing_page(result, command_line=_command_line(),
                                                 spell=option_wording)))
    shown_on = console(stderr=json_path == "-", wrap=not quiet)
    with output_files.atomic_outputs(outputs), output_files.report_stream(json_path == "-"):
        if quiet:
            render_sizing_summary(result, shown_on)
        else:
            render_sizing(result, shown_on, spell=option_wording)
    return EXIT_PASS if result.check.verdict == "pass" else EXIT_FAIL


@app.command()
def size(
    file: DesignFile,
    resistor_series: Annotated[Optional[str], typer.Option(
        "--resistor-series", help="IEC 60063 series for R (default: [sizing], else E96).")] = None,
    capacitor_series: Annotated[Optional[str], typer.Option(
        "--capacitor-series", help="IEC 60063 series for C (default: [sizing], else E12).")] = None,
    find_series: Annotated[bool, typer.Option(
        "--find-series", help="Also find the smallest device count that passes.")] = False,
    trials: Trials = None,
    seed: Seed = None,
    json: JsonPath = None,
    report: ReportPath = None,
    quiet: Quiet = False,
    workers: Workers = 1,
    transient: Annotated[Optional[bool], typer.Option(
        "--transient/--no-transient", show_default=False,
        help="Choose the damping resistor in the time domain and include the transient in the "
             "final check. Default: whenever the design has the recovery data it needs.")] = None,
    write: Annotated[Optional[Path], typer.Option(
        "--write", metavar="PATH",
        help="Write the design file with the proposed network to PATH (comments and layout "
             "kept); an existing file only with --force.")] = None,
    force: Annotated[bool, typer.Option(
        "--force", help="With --write: replace an existing file.")] = False,
    debug: Debug = False,
) -> None:
    """Propose grading R, C and damping resistor from preferred values, with their ratings."""
    run_guarded(lambda: _size(file, trials=trials, seed=seed, json_path=json, quiet=quiet,
                              resistor_series=resistor_series, capacitor_series=capacitor_series,
                              find_series=find_series, workers=workers, transient=transient,
                              write_path=write, force=force, report_path=report),
                debug)


def _review(base_path: Path, candidate_path: Optional[Path], *, swap, mix, trials, seed,
            json_path, quiet, workers, transient, drivers=False, rare=None,
            csv_path=None, report_path=None) -> int:
    from stringcheck.design.reading import load_design
    from stringcheck.report.export import json_text
    from stringcheck.report.review import (
        render_review,
        render_review_summary,
        review_positions_csv,
        review_to_dict,
    )
    from stringcheck.studies.review import review, substituted

    baseline = load_design(base_path)
    _needs_duty(baseline, base_path, "review")
    read = output_files.design_inputs(baseline, base_path, "the baseline design file")
    if [candidate_path, swap, mix].count(None) != 2:
        raise StringcheckError("give exactly one of a CANDIDATE design file, --swap POSITIONS:PART "
                               "(e.g. --swap 1-4:B) or --mix FRACTION:PART (e.g. --mix 0.25:B)")
    if candidate_path is not None:
        candidate = load_design(candidate_path)
        _needs_duty(candidate, candidate_path, "review")
        read += output_files.design_inputs(candidate, candidate_path, "the candidate design file")
    output_files.check_output_targets({"--json": json_path, "--csv": csv_path,
                                       "--report": report_path}, inputs=read)
    if candidate_path is None:
        candidate = substituted(baseline, swap=swap, mix=mix)
    with DelayedProgress(enabled=not quiet, label="baseline, then candidate") as progress:
        result = review(baseline, candidate, trials=trials, seed=seed, workers=workers,
                        transient=transient, rare=rare, drivers=drivers, progress=progress)
    outputs = [] if json_path is None else [(json_path, json_text(review_to_dict(result)))]
    if csv_path is not None:
        outputs.append((csv_path, review_positions_csv(result)))
    if report_path is not None:
        from stringcheck.report.html_page import review_page

        outputs.append((report_path, review_page(result, command_line=_command_line())))
    with output_files.atomic_outputs(outputs):
        _print_report(result, quiet=quiet, stderr="-" in (json_path, csv_path, report_path),
                      full=render_review, summary=render_review_summary)
    return EXIT_PASS if result.verdict == "accept" else EXIT_FAIL


@app.command()
def review(
    base: Annotated[Path, typer.Argument(help="Baseline design file (TOML).",
                                         show_default=False)],
    candidate: Annotated[Optional[Path], typer.Argument(help="Candidate design file (TOML).",
                                                        show_default=False)] = None,
    swap: Annotated[Optional[str], typer.Option(
        "--swap", metavar="POSITIONS:PART",
        help="Candidate = BASE with PART (defined in BASE) in these positions of every branch, "
             "e.g. 1-4:B or 7,9:B.")] = None,
    mix: Annotated[Optional[str], typer.Option(
        "--mix", metavar="FRACTION:PART",
        help="Candidate = BASE with mixed stock: every device of every built string is PART "
             "(defined in BASE) with probability FRACTION, e.g. 0.25:B or 25%:B.")] = None,
    trials: Trials = None,
    seed: Seed = None,
    json: JsonPath = None,
    csv: CsvPath = None,
    report: ReportPath = None,
    quiet: Quiet = False,
    workers: Workers = 1,
    transient: Transient = False,
    drivers: Drivers = False,
    rare: Rare = None,
    debug: Debug = False,
) -> None:
    """May a candidate replace the baseline? Both checked on the same draws; exit 0 accept, 1 reject."""
    run_guarded(lambda: _review(base, candidate, swap=swap, mix=mix, trials=trials, seed=seed,
                                json_path=json, quiet=quiet, workers=workers, transient=transient,
                                drivers=drivers, rare=rare, csv_path=csv, report_path=report),
                debug)


def _window_end(text: str) -> float:
    """``--window`` as a duration [s] (one-line error, exit 2, for anything else)."""
    from stringcheck.errors import QuantityError
    from stringcheck.units import SECOND, parse_quantity

    try:
        value = parse_quantity(text, SECOND, key="--window")
    except QuantityError as error:
        raise StringcheckError(str(error)) from None
    if not value > 0:
        raise StringcheckError(f"--window: must be a duration above zero, got {text!r}")
    return value


def _wave(path: Path, *, trial, branch, trials, seed, csv_path, worst, width, height,
          png_path=None, svg_path=None, window=None) -> int:
    from stringcheck.checks.transient import trial_limits, trial_trace
    from stringcheck.design.reading import load_design
    from stringcheck.report.waveform import render_wave, waveform_csv

    window_end = None if window is None else _window_end(window)
    design = load_design(path)
    _needs_duty(design, path, "wave")
    output_files.check_output_targets({"--csv": csv_path, "--png": png_path, "--svg": svg_path},
                                      inputs=output_files.design_inputs(design, path))
    result, notes = trial_trace(design, trial, trials=trials, seed=seed, branch=branch)
    limit = trial_limits(design, trial, trials=trials, seed=seed, branch=branch)
    outputs = [] if csv_path is None else \
        [(csv_path, waveform_csv(result.trace, capacitor_voltages=True))]
    if png_path is not None or svg_path is not None:
        outputs += _wave_images(design, result, trial, branch, limit, png_path, svg_path,
                                window_end)
    shown_on = console(stderr=csv_path == "-")
    with output_files.atomic_outputs(outputs), output_files.report_stream(csv_path == "-"):
        render_wave(design.title, trial, branch, result, notes, shown_on, width=width,
                    height=height, worst=worst, limit=limit)
    return EXIT_PASS


def _wave_images(design, result, trial, branch, limits, png_path, svg_path, window_end):
    """The PNG and SVG of one trial's turn-off (``limits``: each stage's, of the trial's own
    devices), as (path, content) for the atomic outputs."""
    from stringcheck.report.figures import wave_figure
    from stringcheck.report.waveform import event_window, trial_waveform

    waveform = trial_waveform(result.trace)
    span = event_window(waveform) if window_end is None else (0.0, window_end)
    title = f"{design.title}: trial {trial}, branch {branch}"
    images = []
    for path, kind in ((png_path, "png"), (svg_path, "svg")):
        if path is not None:
            images.append((path, wave_figure(waveform, limits=list(limits), window=span,
                                             title=title, image=kind)))
    return images


@app.command()
def wave(
    file: DesignFile,
    trial: Annotated[int, typer.Option("--trial", min=0,
                                       help="Trial (built string) of the run, from 0.")] = 0,
    branch: Annotated[int, typer.Option("--branch", min=1,
                                        help="Branch of a parallel group, from 1.")] = 1,
    worst: Annotated[Optional[int], typer.Option(
        "--worst", min=1, help="A panel for each of the N stages with the highest peak over "
                               "limit, and one for the median stage.")] = 6,
    width: Annotated[Optional[int], typer.Option(
        "--width", min=40, help="Plot width in characters (default: the terminal's, 80 when "
                                "piped).", show_default=False)] = None,
    height: Annotated[int, typer.Option("--height", min=12, help="The most lines the plot takes.")] = 24,
    trials: Trials = None,
    seed: Seed = None,
    csv: Annotated[Optional[str], typer.Option(
        "--csv", metavar="PATH", help="Write the waveforms of the trial as CSV.")] = None,
    png: Annotated[Optional[str], typer.Option(
        "--png", metavar="PATH", help="Also draw the turn-off as a PNG image.")] = None,
    svg: Annotated[Optional[str], typer.Option(
        "--svg", metavar="PATH", help="Also draw the turn-off as an SVG image.")] = None,
    window: Annotated[Optional[str], typer.Option(
        "--window", metavar="TIME",
        help="Time span of the PNG/SVG from the source reversal, e.g. '2 us' (default: the event, "
             "until the stages settle).")] = None,
    debug: Debug = False,
) -> None:
    """Simulate one built string's turn-off and plot its stage voltages and loop current."""
    run_guarded(lambda: _wave(file, trial=trial, branch=branch, trials=trials, seed=seed,
                              csv_path=csv, worst=worst, width=width, height=height,
                              png_path=png, svg_path=svg, window=window), debug)


@app.command()
def demo(
    trials: Trials = None,
    seed: Seed = None,
    json: JsonPath = None,
    csv: CsvPath = None,
    report: ReportPath = None,
    quiet: Quiet = False,
    workers: Workers = 1,
    transient: Transient = False,
    transient_worst: TransientWorst = TRANSIENT_WORST,
    transient_sample: TransientSample = None,
    drivers: Drivers = False,
    rare: Rare = None,
    debug: Debug = False,
) -> None:
    """Run the check on the bundled example design (an invented 30 kV stack)."""
    options = _transient_options(transient, transient_worst, transient_sample)

    def action() -> int:
        with resources.as_file(resources.files("stringcheck") / "data" / "demo.toml") as path:
            return _check(path, trials=trials, seed=seed, json_path=json, csv_path=csv,
                          quiet=quiet, workers=workers, transient=options, drivers=drivers,
                          rare=rare, source_label="demo (bundled example)",
                          report_path=report)

    run_guarded(action, debug)


@app.command()
def new(
    file: Annotated[Path, typer.Argument(
        help="Where to write the starter design ('-' for standard output).", show_default=False)],
    force: Annotated[bool, typer.Option("--force", help="Overwrite FILE if it exists.")] = False,
    circuit: Annotated[Optional[str], typer.Option(
        "--circuit", metavar="TOPOLOGY",
        help="Start from a [circuit] table instead of [duty]: half-wave, center-tap, bridge, "
             "doubler or multiplier.")] = None,
    debug: Debug = False,
) -> None:
    """Write a commented starter design file to edit."""
    def action() -> int:
        from stringcheck.report.starter import circuit_starter_design
        from stringcheck.report.starter import starter_design as plain_starter

        def starter_design() -> str:
            return plain_starter() if circuit is None else circuit_starter_design(circuit)

        if str(file) == "-":  # the starter on standard output, and nothing else there
            output_files.write_text_atomic("-", starter_design())
            return EXIT_PASS
        if os.path.lexists(file) and not force:
            raise StringcheckError(f"{file}: already exists; choose another name or add --force "
                                   "to overwrite it")
        output_files.write_text_atomic(file, starter_design())
        console().print(f"wrote {file}; edit it, then run: stringcheck check {file}")
        return EXIT_PASS

    run_guarded(action, debug)


# typer exports one usage-error class, BadParameter; its base is the usage error every parse error
# (a missing argument, an unknown option, a value out of range) is raised as, whether typer carries
# its own click or depends on the click package.
_USAGE_ERROR: type[Exception] = typer.BadParameter.__base__


def main() -> None:
    """Console-script entry point: a usage error is one line on stderr and exit code 2."""
    try:
        code = app(standalone_mode=False)
    except _USAGE_ERROR as error:
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
