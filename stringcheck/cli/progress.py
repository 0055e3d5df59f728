"""Progress on standard error while a study runs, and Ctrl-C held to a safe point meanwhile.

A run's progress bar (:class:`DelayedProgress`) or the sizing spinner (:class:`StepSpinner`) is a
rich live display; while one is shown the first Ctrl-C is held to the next progress report
(:class:`DeferredInterrupt`). Machine output never goes where these are drawn (standard error).
"""

from __future__ import annotations

import signal
import threading
import time

from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

from stringcheck.report.display_text import report_console

__all__ = ["DeferredInterrupt", "DelayedProgress", "StepSpinner"]


class DeferredInterrupt:
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

    def __enter__(self) -> "DeferredInterrupt":
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


class DelayedProgress:
    """A progress bar on stderr that appears only when a run lasts longer than about a second.

    Use it as a context manager and pass it as the study's ``progress`` callback (called with
    trials done and trials in all): while the bar is shown, Ctrl-C is held to the next report
    (:class:`DeferredInterrupt`).
    """

    def __init__(self, enabled: bool, label: str):
        self.enabled = enabled
        self.label = label
        self.start = time.monotonic()
        self.bar: Progress | None = None
        self.task = None
        self.interrupt = DeferredInterrupt()

    def __enter__(self) -> "DelayedProgress":
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
                                TimeRemainingColumn(), console=report_console(stderr=True),
                                transient=True)
            self.interrupt.__enter__()
            self.bar.start()
            self.task = self.bar.add_task(self.label, total=total)
        self.bar.update(self.task, completed=done)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.stop()


class StepSpinner:
    """A spinner on stderr naming the step a search is at (``label: step``), shown at once.

    Use it as a context manager and pass it as the study's ``progress`` callback (called with a
    short description of each step); while it spins, Ctrl-C is held to the next step
    (:class:`DeferredInterrupt`). Disabled, it shows nothing and holds nothing.
    """

    def __init__(self, enabled: bool, label: str):
        self.enabled = enabled
        self.label = label
        self.interrupt = DeferredInterrupt()
        self.status = None

    def __enter__(self) -> "StepSpinner":
        if self.enabled:
            self.interrupt.__enter__()
            try:
                self.status = report_console(stderr=True).status(self.label, spinner="line")
                self.status.__enter__()
            except BaseException as error:
                self.interrupt.__exit__(type(error), error, error.__traceback__)
                raise
        return self

    def __call__(self, step: str) -> None:
        if self.status is not None:
            self.interrupt.check()
            self.status.update(f"{self.label}: {step}")

    def __exit__(self, kind, value, trace) -> bool:
        if self.enabled:
            try:
                if self.status is not None:
                    self.status.__exit__(kind, value, trace)
            finally:
                self.interrupt.__exit__(kind, value, trace)
        return False
