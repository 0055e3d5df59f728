"""Run the chunks of a Monte Carlo study in this process or in worker processes.

A study splits its trials into chunks of whole sampling blocks, or of sub-blocks for a string too
large for a block within :data:`CHUNK_ELEMENTS` (``sampling.chunk_bounds``); each chunk draws from
its own random streams, so a chunk's outcome depends only on (design, seed, first
trial, count). The runner hands the chunks out and returns their outcomes **in chunk order**, which
the study merges in that order: the result is then identical for any chunk size and any number of
workers (floating-point sums are added in the same order either way).

Worker processes are started with the "spawn" method (the same on Linux, macOS and Windows; no
inherited threads or locks). A pool costs about a second to start, so a study that runs many short
checks (the sizing search) opens one pool with :func:`worker_pool` and passes it to every check.
"""

from __future__ import annotations

import multiprocessing
import os
from concurrent.futures import Executor, ProcessPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Callable, Iterator, Sequence, TypeVar

from stringcheck.errors import Setting, StringcheckError
from stringcheck.montecarlo.sampling import BLOCK_TRIALS, evaluation_trials

Context = TypeVar("Context")
Outcome = TypeVar("Outcome")

__all__ = ["CHUNK_ELEMENTS", "WorkerPool", "available_memory", "check_workers", "chunk_size",
           "map_chunks", "stop_workers", "worker_pool"]

# A chunk's array budget: chunks hold about this many device values (of the order of 100 bytes of
# working arrays each while a chunk is drawn and solved), so memory stays flat in the trial count
# and in the string's size.
CHUNK_ELEMENTS = 1_000_000


def available_memory() -> int | None:
    """Bytes of memory this process may still take: the kernel's estimate of what can be allocated
    without swapping (``MemAvailable`` of /proc/meminfo, Linux 3.14+), else the free physical
    pages, capped by an address-space limit (``RLIMIT_AS``) if one is set; None when unknown."""
    available = None
    try:
        with open("/proc/meminfo", encoding="ascii") as meminfo:
            for line in meminfo:
                if line.startswith("MemAvailable:"):
                    available = int(line.split()[1]) * 1024
                    break
    except (OSError, ValueError):
        pass
    if available is None:
        try:
            available = os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
        except (AttributeError, OSError, ValueError):
            available = None
    try:
        import resource

        soft, _ = resource.getrlimit(resource.RLIMIT_AS)
        if soft != resource.RLIM_INFINITY and soft > 0:
            available = soft if available is None else min(available, soft)
    except (ImportError, OSError, ValueError):
        pass
    return available


def check_workers(workers: int) -> int:
    """Validate a ``workers`` value: 1 .. the number of CPUs this process may use."""
    available = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else \
        (os.cpu_count() or 1)
    if workers < 1:
        raise StringcheckError(Setting("workers"), f" must be at least 1, got {workers}")
    if workers > 4 * available:
        raise StringcheckError(Setting("workers", workers), f" is far above the {available} CPU(s) "
                               f"of this machine; use at most {available}")
    return workers


@dataclass(frozen=True)
class WorkerPool:
    """An open process pool and its number of processes."""

    executor: Executor
    workers: int


@contextmanager
def worker_pool(workers: int) -> Iterator[WorkerPool | None]:
    """A pool of ``workers`` processes, or None for ``workers == 1`` (run in this process)."""
    check_workers(workers)
    if workers == 1:
        yield None
        return
    before = set(multiprocessing.active_children())
    executor = ProcessPoolExecutor(max_workers=workers,
                                   mp_context=multiprocessing.get_context("spawn"))
    try:
        yield WorkerPool(executor=executor, workers=workers)
    except BaseException:
        # An error, Ctrl-C or SIGTERM (which the command line raises as an exception): stop the
        # workers now, the chunks they are running included, rather than wait for those; a
        # worker left running would outlive this process.
        # Shutting down first lets the pool drop the cancelled chunks before it sees its workers
        # gone (else it would try to fail a cancelled chunk, and print a traceback).
        executor.shutdown(wait=False, cancel_futures=True)
        stop_workers(before)
        executor.shutdown(wait=True)
        raise
    executor.shutdown(wait=True)


def stop_workers(before: set) -> None:
    """Terminate (SIGTERM, then SIGKILL after a second) this process's multiprocessing children
    that are not in ``before``, and wait for them."""
    started = [child for child in multiprocessing.active_children() if child not in before]
    for child in started:
        child.terminate()
    for child in started:
        child.join(timeout=1.0)
        if child.is_alive():
            child.kill()
            child.join()


def chunk_size(trials: int, preferred: int, pool: WorkerPool | None) -> int:
    """Trials per chunk: ``preferred`` (the memory budget), smaller with a pool so that every
    worker gets several chunks (about four each); whole sampling blocks either way, or a sub-block
    (``sampling.evaluation_trials``) when the budget holds less than a block."""
    if preferred < BLOCK_TRIALS:
        return evaluation_trials(1, preferred)
    if pool is None:
        return max(BLOCK_TRIALS, preferred)
    share = -(-trials // (4 * pool.workers))
    return max(BLOCK_TRIALS, min(preferred, -(-share // BLOCK_TRIALS) * BLOCK_TRIALS))


def map_chunks(function: Callable[[Context, int, int], Outcome], context: Context,
               bounds: Sequence[tuple[int, int]], *, pool: WorkerPool | None = None,
               progress: Callable[[int, int], None] | None = None) -> Iterator[Outcome]:
    """Yield ``function(context, first, count)`` for each chunk of ``bounds``, in chunk order.

    ``function`` and ``context`` must be picklable when ``pool`` is given (a module-level function
    and a frozen dataclass). ``progress`` is called with (trials done, trials in all) as chunks
    complete.
    """
    total = sum(count for _, count in bounds)
    done = 0
    if pool is None:
        for first, count in bounds:
            outcome = function(context, first, count)
            done += count
            if progress is not None:
                progress(done, total)
            yield outcome
        return
    futures = [pool.executor.submit(function, context, first, count) for first, count in bounds]
    try:
        for future, (_, count) in zip(futures, bounds):
            outcome = future.result()
            done += count
            if progress is not None:
                progress(done, total)
            yield outcome
    finally:
        for future in futures:
            future.cancel()
