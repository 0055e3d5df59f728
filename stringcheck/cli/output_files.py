"""Output files of a run, written all or nothing, and the checks made on their paths before it.

Files are written all or nothing (:func:`atomic_outputs`): each to a temporary file in its target's
folder, renamed over the targets together only after the whole run, the terminal report included,
has succeeded; an interrupt or an error before that leaves every old file as it was and no temporary
file behind. The output paths are checked before a run (:func:`check_output_targets`): an output may
not be a file the run reads (:func:`design_inputs`), and must be a regular file, ``/dev/null`` or
``-`` (standard output), so a long run does not end in an error about where to write, nor block on
a pipe nobody reads. A report that cannot be written to its stream is an input error
(:class:`report_stream`).
"""

from __future__ import annotations

import os
import stat
import sys
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Iterator, Mapping, Sequence

from stringcheck.errors import StringcheckError

if TYPE_CHECKING:
    from stringcheck.design.model import Design

__all__ = ["atomic_outputs", "check_output_targets", "check_write_target", "design_inputs",
           "report_stream",
           "write_files_atomic", "write_text_atomic"]


def design_inputs(design: "Design", path: str | Path,
                  what: str = "the design file") -> list[tuple[Path, str]]:
    """Every file a run of ``design`` (read from ``path``) reads, with what it is (``what`` for
    the design file itself): no output may replace one."""
    files = [(Path(path), what)]
    for name, part in design.parts.items():
        if part.measured is not None:
            files.append((Path(part.measured.path), f"the measured lot of parts.{name}"))
    return files


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
def atomic_outputs(files: Sequence[tuple[str | Path, str | bytes]]) -> Iterator[None]:
    """Stage every ``(path, text)`` on entry; publish them all only when the block succeeds (text
    is str, or bytes for a binary file such as a PNG).

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
                if isinstance(text, bytes):
                    sys.stdout.buffer.write(text)
                    sys.stdout.buffer.flush()
                else:
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


def check_write_target(path: str | Path, *, force: bool, json_path: str | Path | None) -> None:
    """Check the path ``size --write`` writes the sized design file to before the run: a regular
    file that can be written (not standard output), not the --json target, and no existing file
    unless ``force`` (the design file itself included: --force replaces it, comments kept)."""
    target = Path(path)
    shown = _shown_path(target)
    if str(path) == "-":
        raise StringcheckError("--write -: give a file name for the design file (the report and "
                               "--json go to standard output)")
    if json_path not in (None, "-") and _same_file(target, Path(json_path)):
        raise StringcheckError(f"{shown}: --write and --json name the same file; give two names")
    if target.exists() and not force:
        raise StringcheckError(f"{shown}: exists; add --force to replace it, or give a new name")
    _writable(target)


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


def _stage(target: Path, text: str | bytes) -> str:
    """Write ``text`` (or bytes, a PNG say) to a new temporary file beside ``target``; return its
    path."""
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
        binary = isinstance(text, bytes)
        with (os.fdopen(handle, "wb") if binary else
              os.fdopen(handle, "w", encoding="utf-8", newline="")) as stream:
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


class report_stream:
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
