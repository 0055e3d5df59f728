"""Machine-readable output: JSON (stable keys, DESIGN.md section 6) and per-position CSV.

Files are written all or nothing (:func:`atomic_outputs`): each to a temporary file in its target's
folder, renamed over the targets together only after the whole run, the terminal report included,
has succeeded; an interrupt or an error before that leaves every old file as it was and no temporary
file behind. The output paths are checked before a run (:func:`check_output_targets`): an output may
not be a file the run reads, and must be a regular file, ``/dev/null`` or ``-`` (standard output), so
a long run does not end in an error about where to write, nor block on a pipe nobody reads.
"""

from __future__ import annotations

import json
import os
import stat
import sys
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterator, Mapping, Sequence

from stringcheck.errors import StringcheckError
from stringcheck.checks.outcome import CheckOutcome, json_number
from stringcheck.checks.series import SERIES_CHECKS
from stringcheck.studies.check import SCHEMA_VERSION, CheckResult
from stringcheck.report.cautions import safety_cautions
from stringcheck.report.lots import lots_to_list

if TYPE_CHECKING:
    from stringcheck.studies.size import SizingResult

__all__ = ["SCHEMA_VERSION", "check_to_dict", "json_text", "positions_csv", "result_to_dict",
           "sizing_to_dict", "write_files_atomic", "write_text_atomic"]


def check_to_dict(check: CheckOutcome) -> dict[str, Any]:
    """The JSON object of one check that ran (generated from its fields)."""
    return check.to_dict()


def result_to_dict(result: CheckResult) -> dict[str, Any]:
    """The whole result of ``check`` as a JSON-ready dictionary (SI units, temperatures in degC):
    the result's own ``to_dict()`` with the sections the report writes in words, the measured lots
    and the safety cautions."""
    data = result.to_dict()
    design = result.design
    grading = result.grading
    out: dict[str, Any] = {}
    for key, value in data.items():
        out[key] = value
        if key == "drivers":
            out["lots"] = lots_to_list(design)
    out.setdefault("lots", lots_to_list(design))
    out["cautions"] = safety_cautions(string_voltage=design.duty.reverse_voltage,
                                      stage_energy=grading.stage_energy,
                                      total_energy=grading.total_energy,
                                      discharge_time=grading.discharge_time)
    return out


def positions_csv(result: CheckResult) -> str:
    """Per-position voltage statistics of every series check that ran, one row per check and
    position (the forward checks' per-branch and per-device figures are in the JSON)."""
    header = "check,branch,index,part,limit_V,mean_V,std_V,max_V,failures"
    rows = [header]
    for name, check in result.checks.items():
        if name not in SERIES_CHECKS:
            continue
        for p in check.per_position():
            rows.append(f"{name},{p.branch},{p.index},{_csv_text(p.part)},{p.limit:.6g},"
                        f"{p.mean_voltage:.6g},{p.std_voltage:.6g},{p.max_voltage:.6g},{p.failures}")
    return "\n".join(rows) + "\n"


def _csv_text(text: str) -> str:
    return '"' + text.replace('"', '""') + '"' if any(c in text for c in ',"\n') else text


def check_output_targets(targets: Mapping[str, str | Path | None], *,
                         inputs: Sequence[str | Path | tuple[str | Path, str]] = ()) -> None:
    """Check, before a run, that every requested output can be written, so that a long run never
    ends in an error about its output.

    Parameters
    ----------
    targets
        Option name (``"--json"``) -> path, ``"-"`` for standard output, or None when not requested.
    inputs
        Files the run reads, each a path or a ``(path, what)`` pair (``what`` names it in the
        message, e.g. ``"the measured lot of parts.B"``; a bare path is "the design file"): an
        output must not replace them. Two names of one file (a symbolic or a hard link) count as
        the same file.

    Raises
    ------
    StringcheckError
        When two outputs go to standard output or to the same file, an output would replace an
        input, a path is empty or is a folder, lies in a folder that does not exist or cannot be
        written, or is not a regular file: a named pipe, a socket, a device other than
        ``/dev/null``, or one of this process's standard streams under another name than ``-``
        (``/dev/stdout``).
    """
    to_stdout = [option for option, path in targets.items() if path is not None and str(path) == "-"]
    if len(to_stdout) > 1:
        raise StringcheckError(f"{' and '.join(to_stdout)} both write to standard output ('-'), "
                               "where they would mix; send all but one of them to a file")
    read = [(Path(item[0]), item[1]) if isinstance(item, tuple) else (Path(item), "the design file")
            for item in inputs]
    seen: dict[str, str] = {}
    for option, path in targets.items():
        if path is None or str(path) == "-":
            continue
        if not str(path).strip():
            raise StringcheckError(f"{option}: empty path; give a file name, or '-' for standard "
                                   "output")
        target = Path(path)
        for source, what in read:
            if _same_file(target, source):
                raise StringcheckError(f"{option} {_shown_path(target)}: is {what}, which this run "
                                       "reads; give another name (it would be overwritten)")
        real = _real(target)
        if real in seen:
            raise StringcheckError(f"{option} {_shown_path(target)}: the same file as "
                                   f"{seen[real]}; give each output its own name")
        seen[real] = option
        try:
            _writable(target)
        except StringcheckError as error:
            raise StringcheckError(f"{option} {error}") from None


def write_text_atomic(path: str | Path, text: str) -> None:
    """Write ``text`` to ``path`` atomically ("-" writes to standard output).

    See :func:`atomic_outputs`.
    """
    write_files_atomic([(path, text)])


def write_files_atomic(files: Sequence[tuple[str | Path, str]]) -> None:
    """Write each ``(path, text)`` all or nothing; see :func:`atomic_outputs`."""
    with atomic_outputs(files):
        pass


@contextmanager
def atomic_outputs(files: Sequence[tuple[str | Path, str]]) -> Iterator[None]:
    """Stage every ``(path, text)`` on entry; publish them all only when the block succeeds.

    On entry each file's text goes to a new temporary file beside its target (nothing is replaced
    yet). The block runs (the terminal report, say). When it ends without an error, the text for
    standard output (``"-"``) is written and flushed, then every temporary file is renamed over its
    target, then ``/dev/null`` targets are written. When the block, the standard-output write (a
    reader that went away) or a rename fails, or on Ctrl-C, the temporary files not yet renamed are
    removed and every target not yet renamed is left byte for byte as it was. A symbolic link is
    followed (its target is replaced, the link kept); an existing file keeps its permissions. The
    only target written in place is ``/dev/null``; any other target that is not a regular file is
    refused (see :func:`check_output_targets`).

    Raises
    ------
    StringcheckError
        When a folder does not exist or cannot be written, a target is a folder or not a regular
        file, or a temporary file cannot be written (a full disk).
    """
    staged: list[tuple[str, Path]] = []
    discarded: list[str] = []
    to_stdout: list[str] = []
    try:
        for path, text in files:
            if str(path) == "-":
                to_stdout.append(text)
                continue
            target = _writable(Path(path))
            if _is_null(target):
                discarded.append(text)
                continue
            staged.append((_stage(target, text), target))
        yield
        for text in to_stdout:
            try:
                sys.stdout.write(text)
                sys.stdout.flush()
            except BrokenPipeError:
                raise  # the reader left: exit 141, not an error of the input
            except OSError as error:  # `--json - > /dev/full`
                raise StringcheckError(f"standard output cannot be written ({error.strerror}); "
                                       "no output file was replaced") from None
        while staged:
            temporary, target = staged[0]
            os.replace(temporary, target)
            staged.pop(0)
    finally:
        for temporary, _ in staged:
            try:
                os.unlink(temporary)
            except OSError:
                pass  # never made
    for text in discarded:
        with open(os.devnull, "w", encoding="utf-8") as stream:
            stream.write(text)


def _real(path: Path) -> str:
    """The path with symbolic links resolved, for comparing two names of one file."""
    return os.path.realpath(path)


def _same_file(first: Path, second: Path) -> bool:
    """Whether two names lead to one file (symbolic links followed, hard links too)."""
    if _real(first) == _real(second):
        return True
    try:
        return os.path.samefile(first, second)
    except OSError:  # one of them does not exist (yet)
        return False


def _is_null(path: Path) -> bool:
    try:
        return os.path.samefile(path, os.devnull)
    except OSError:
        return False


def _standard_stream(path: Path) -> str | None:
    """"standard output" (or input, error) when ``path`` names one of this process's streams."""
    try:
        status = os.stat(path)
    except OSError:
        return None
    for number, name in ((1, "standard output"), (2, "standard error"), (0, "standard input")):
        try:
            stream = os.fstat(number)
        except OSError:
            continue
        if (stream.st_dev, stream.st_ino) == (status.st_dev, status.st_ino):
            return name
    return None


def _shown_path(path: Path) -> str:
    """A file name as the user wrote it, with control characters shown as '?' (one line)."""
    return "".join(c if c.isprintable() else "?" for c in str(path))


def _writable(target: Path) -> Path:
    """The file to write for ``target`` (links followed), after checking that it can be written:
    a regular file (existing or new) in a folder that can be written, or ``/dev/null``."""
    shown = _shown_path(target)
    try:
        stream = _standard_stream(target)
        if stream is not None and not _is_null(target):
            raise StringcheckError(f"{shown}: is this run's {stream}; write '-' for standard "
                                   "output, or give a file name")
        real = Path(_real(target))
        folder = real.parent
        if real.is_dir():
            raise StringcheckError(f"{shown}: is a folder; give a file name")
        if real.exists() and not real.is_file():
            if _is_null(real):
                return real
            mode = os.stat(real).st_mode
            kind = ("a named pipe (FIFO)" if stat.S_ISFIFO(mode) else
                    "a socket" if stat.S_ISSOCK(mode) else "a device")
            # A pipe with no reader would block the end of a finished run for ever, and a device
            # cannot be replaced as a whole: only regular files and /dev/null are outputs.
            raise StringcheckError(f"{shown}: is {kind}, not a regular file; give a file name, or "
                                   "'-' for standard output (and pipe that)")
        if not folder.is_dir():
            where = target.parent if str(target.parent) else Path(".")
            raise StringcheckError(f"{shown}: the folder {_shown_path(where)} does not exist")
        if not os.access(folder, os.W_OK):
            raise StringcheckError(f"{shown}: the folder {_shown_path(folder)} cannot be written "
                                   "(permission denied)")
    except OSError as error:
        raise StringcheckError(f"{shown}: cannot be written ({error.strerror})") from None
    return real


def _stage(target: Path, text: str) -> str:
    """Write ``text`` to a new temporary file beside ``target``; return its path."""
    try:
        mode = stat.S_IMODE(target.stat().st_mode)
    except OSError:
        mode = 0o666 & ~_umask()  # what a newly created file would get
    try:
        handle, temporary = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp",
                                             dir=target.parent)
    except OSError as error:
        raise StringcheckError(f"{target}: cannot write in {target.parent} "
                               f"({error.strerror})") from None
    try:
        with os.fdopen(handle, "w", encoding="utf-8", newline="") as stream:
            os.fchmod(stream.fileno(), mode)
            stream.write(text)
            stream.flush()
            os.fsync(stream.fileno())
    except BaseException as error:
        try:
            os.unlink(temporary)
        except OSError:
            pass
        if isinstance(error, OSError):
            raise StringcheckError(f"{target}: cannot be written ({error.strerror})") from None
        raise
    return temporary


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def json_text(data: dict[str, Any]) -> str:
    """Serialise ``data`` as indented JSON with a final newline."""
    return json.dumps(data, indent=2, allow_nan=False) + "\n"


def sizing_to_dict(result: "SizingResult") -> dict[str, Any]:
    """The result of ``size``: the check of the sized design plus ``grading`` (SI units)."""
    data = result_to_dict(result.check)
    ratings = result.ratings

    def choice(ladder) -> dict[str, Any] | None:
        if ladder is None:
            return None

        def candidate(c) -> dict[str, Any] | None:
            if c is None:
                return None
            return {"value": c.value, "passed": c.passed, "failures": c.failures,
                    "p_fail_upper": c.p_fail_upper, "worst_ratio": json_number(c.worst_ratio)}

        return {"series": ladder.series, "chosen": candidate(ladder.chosen),
                "rejected_neighbour": candidate(ladder.rejected_neighbour),
                "textbook_bound": json_number(ladder.textbook_bound)}

    data["grading"] = {
        "resistor": result.resistor.chosen.value,
        "capacitor": result.design.grading.capacitor if result.capacitor else None,
        "damping_resistor": result.damping_resistor,
        "damping_rule": result.damping_rule,
        "damping_candidates": [
            {"value": c.value, "worst_ratio": json_number(c.worst_ratio), "energy": json_number(c.energy),
             "within_limit": c.within_limit} for c in result.damping_candidates],
        "series_used": {"resistor": result.resistor.series,
                        "capacitor": result.capacitor.series if result.capacitor else None},
        "series_count": result.series_count,
        "target_p_fail": result.target_p_fail,
        "search": {"resistor": choice(result.resistor), "capacitor": choice(result.capacitor)},
        "ratings": {
            "derating": ratings.derating,
            "worst_stage_voltage": json_number(ratings.worst_stage_voltage),
            "worst_stage_voltage_check": ratings.worst_voltage_check or None,
            "resistor_voltage_required": json_number(ratings.resistor_voltage_required),
            "resistor_power_continuous": json_number(ratings.resistor_power_continuous),
            "resistor_power_duty": json_number(ratings.resistor_power_duty),
            "resistor_power_required": json_number(ratings.resistor_power_required),
            "grading_loss_total": json_number(ratings.total_grading_loss),
            "capacitor_voltage_required": json_number(ratings.capacitor_voltage_required),
            "damping_loss_per_stage": json_number(ratings.damping_loss_per_stage),
            "damping_loss_total": json_number(ratings.damping_loss_total),
            "stage_energy": json_number(ratings.stage_energy),
            "total_energy": json_number(ratings.total_energy),
            "discharge_time": json_number(ratings.discharge_time),
        },
        "advisories": list(result.advisories),
    }
    return data
