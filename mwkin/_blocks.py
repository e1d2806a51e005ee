"""Run array work over blocks of rows, on a few threads.

numpy releases the global interpreter lock inside its loops, so blocks of a few thousand rows worked
on by two threads keep two cores busy, and each block's temporary arrays stay in the processor
cache. Used by :mod:`mwkin.kinematics`; nothing here knows about astronomy.

The number of threads is ``MWKIN_THREADS`` when set (a whole number >= 1), else
min(2, number of CPUs this process may use); never more than that number of CPUs.
"""

from __future__ import annotations

import contextvars
import os
import threading
from concurrent.futures import ThreadPoolExecutor

__all__ = ["thread_count", "run_blocks"]

_ENV = "MWKIN_THREADS"
_DEFAULT_THREADS = 2

_pool = None
_pool_size = 0
_pool_pid = None
_pool_lock = threading.Lock()


def _cpus():
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def thread_count():
    """Threads for block work: ``MWKIN_THREADS`` if set, else min(2, CPUs), at most the CPUs.

    Raises
    ------
    ValueError
        If ``MWKIN_THREADS`` is set to something other than a whole number >= 1.
    """
    cpus = _cpus()
    text = os.environ.get(_ENV, "").strip()
    if not text:
        return min(_DEFAULT_THREADS, cpus)
    try:
        wanted = int(text)
    except ValueError:
        wanted = 0
    if wanted < 1:
        raise ValueError(f"{_ENV} must be a whole number >= 1 (threads for array work), got {text!r}")
    return min(wanted, cpus)


def _executor(workers):
    """The shared pool with at least ``workers`` threads (a new one after a fork)."""
    global _pool, _pool_size, _pool_pid
    with _pool_lock:
        if _pool is None or _pool_pid != os.getpid() or _pool_size < workers:
            if _pool is not None and _pool_pid == os.getpid():
                _pool.shutdown(wait=False)
            _pool = ThreadPoolExecutor(max_workers=workers, thread_name_prefix="mwkin")
            _pool_size, _pool_pid = workers, os.getpid()
        return _pool


def run_blocks(n, block, work, scratch=dict, threads=None):
    """Call ``work(start, stop, scratch)`` for consecutive blocks covering ``range(n)``.

    Parameters
    ----------
    n : int
        Number of rows.
    block : int
        Rows per block (the last block may be shorter).
    work : callable
        ``work(start, stop, scratch)``; it must write its results into arrays preallocated by the
        caller, each block to its own rows, and may keep scratch arrays in ``scratch``.
    scratch : callable, default dict
        Makes one scratch object per thread.
    threads : int, optional
        Default :func:`thread_count`.

    Notes
    -----
    The calling thread works too; the others take blocks from the same queue, so a thread slowed
    down by other programs simply does fewer blocks. Each thread runs in a copy of the caller's
    context, so ``numpy.errstate`` settings carry over. The first exception raised by ``work`` stops
    the remaining blocks and is raised again here.
    """
    starts = iter(range(0, n, block))
    lock = threading.Lock()
    failed: list[BaseException] = []

    def worker():
        mine = scratch()
        while not failed:
            with lock:
                start = next(starts, None)
            if start is None:
                return
            try:
                work(start, min(start + block, n), mine)
            except BaseException as exc:  # noqa: BLE001 - handed to the caller below
                failed.append(exc)
                raise

    if threads is None:
        threads = thread_count()
    helpers = min(threads, -(-n // block) if block > 0 else 1) - 1
    futures = []
    if helpers > 0:
        pool = _executor(helpers)
        futures = [pool.submit(contextvars.copy_context().run, worker) for _ in range(helpers)]
    try:
        worker()
    finally:
        for future in futures:
            if not future.cancel():
                try:
                    future.result()
                except BaseException:  # noqa: BLE001 - the first one is raised below
                    pass
    if failed:
        raise failed[0]
