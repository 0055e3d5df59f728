"""Exit codes, and the guard that turns what a command did into one, never into a traceback.

0 every check passes (review: accept); 1 a check fails (reject) or the design is impossible;
2 bad input or usage; 3 internal error; 130 interrupted (Ctrl-C); 141 the reader of standard
output went away; 143 terminated (SIGTERM).
"""

from __future__ import annotations

import os
import signal
import sys
import threading
import traceback
import warnings
from typing import Callable

import typer
from rich.console import Console

from stringcheck.cli.options import option_wording
from stringcheck.errors import ImpossibleDesignError, StringcheckError

__all__ = ["EXIT_BROKEN_PIPE", "EXIT_FAIL", "EXIT_INPUT", "EXIT_INTERNAL", "EXIT_INTERRUPTED",
           "EXIT_PASS", "EXIT_TERMINATED", "Terminated", "TerminateOnSigterm", "console",
           "one_line", "run_guarded"]

EXIT_PASS, EXIT_FAIL, EXIT_INPUT, EXIT_INTERNAL, EXIT_INTERRUPTED = 0, 1, 2, 3, 130
EXIT_BROKEN_PIPE = 141  # 128 + SIGPIPE, what a shell reports for a writer whose reader left
EXIT_TERMINATED = 143  # 128 + SIGTERM, what a shell reports for a process ended by `kill`


def console(stderr: bool = False, *, wrap: bool = True) -> Console:
    """The report's console (``report.display_text.report_console``) on stdout or stderr."""
    from stringcheck.report.display_text import report_console

    return report_console(stderr=stderr, soft_wrap=not wrap)


class Terminated(BaseException):
    """SIGTERM arrived: unwind like Ctrl-C (worker processes stopped, no output file left), but
    not as an Exception, which some code may catch."""


class TerminateOnSigterm:
    """While a command runs, turn SIGTERM into :class:`Terminated` (main thread only, and only
    where SIGTERM would end the process anyway), so that cleanup runs: worker processes are
    stopped and temporary files removed."""

    def __init__(self) -> None:
        self.previous = None

    def __enter__(self) -> "TerminateOnSigterm":
        if threading.current_thread() is threading.main_thread() and \
                signal.getsignal(signal.SIGTERM) is signal.SIG_DFL:
            self.previous = signal.signal(signal.SIGTERM, self._raise)
        return self

    @staticmethod
    def _raise(signum, frame) -> None:
        raise Terminated

    def __exit__(self, *exc) -> bool:
        if self.previous is not None:
            signal.signal(signal.SIGTERM, self.previous)
            self.previous = None
        return False


def one_line(error: BaseException) -> str:
    """The message as one line of rich markup: user text in it is escaped, control characters
    shown as '?', a setting it names (``errors.Setting``) spelled as its option, and a finding
    in it in words (``report.wording``)."""
    from rich.markup import escape

    from stringcheck.report.display_text import shown
    from stringcheck.report.wording import sentence

    text = error.worded(option_wording, lambda finding: sentence(finding, spell=option_wording)) \
        if isinstance(error, StringcheckError) else str(error)
    return escape(shown(" ".join(text.split())))


def run_guarded(action: Callable[[], int], debug: bool) -> None:
    """Run ``action`` and turn its outcome into an exit code (raised as ``typer.Exit``), never a
    traceback (unless ``debug``)."""
    try:
        with warnings.catch_warnings(), TerminateOnSigterm():
            if not debug:
                # numpy's overflow and invalid-value warnings are not messages for a user: a trial
                # that could not be solved is counted and reported as such. --debug shows them.
                warnings.simplefilter("ignore", RuntimeWarning)
            code = action()
    except ImpossibleDesignError as error:
        console(stderr=True, wrap=False).print(f"[bold red]impossible design:[/] {one_line(error)}",
                                               markup=True)
        code = EXIT_FAIL
    except StringcheckError as error:
        console(stderr=True, wrap=False).print(f"[bold red]error:[/] {one_line(error)}",
                                               markup=True)
        code = EXIT_INPUT
    except KeyboardInterrupt:
        console(stderr=True).print("interrupted; no partial output file was left behind")
        code = EXIT_INTERRUPTED
    except Terminated:
        try:
            console(stderr=True).print("terminated; no partial output file was left behind")
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
            console(stderr=True, wrap=False).print(
                f"[bold red]internal error:[/] {type(error).__name__}: {one_line(error)} "
                "(rerun with --debug for the traceback, and please report it)", markup=True)
        code = EXIT_INTERNAL
    raise typer.Exit(code)
