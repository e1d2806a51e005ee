"""Coalesced background computation for live widgets.

Slider moves arrive faster than some computations finish. :class:`LiveRunner` runs the computation on one
worker thread, always on the newest request: requests that arrive while it is busy replace each other,
and a result is delivered only if no newer request was made in the meantime, so a stale result never
overwrites a newer one. Errors are handed to a callback (the widget's status line) instead of vanishing
into the kernel log.

A request that fails before it can be submitted (its inputs do not validate) must still count as the
newest one: :meth:`LiveRunner.supersede` makes every computation in flight stale, so a result computed from
older, valid inputs can never land on top of the error the current inputs produced. Delivery and
superseding share one lock, so "is this still the newest request?" and "show it" happen as one step.
"""

from __future__ import annotations

import threading
import time
import traceback

__all__ = ["LiveRunner"]


class LiveRunner:
    """Run ``compute(request)`` off the kernel's main thread, newest request wins.

    Parameters
    ----------
    compute : callable
        ``compute(request) -> result``; runs on the worker thread.
    on_result : callable
        ``on_result(result, request, seconds)``; called only for the newest request.
    on_error : callable
        ``on_error(exception, request)``; called only for the newest request.
    on_busy : callable, optional
        ``on_busy(bool)`` when the runner starts or stops having work.
    threaded : bool, optional
        False runs everything synchronously in :meth:`submit` (scripts and debugging).
    stall_seconds : float, optional
        A computation running longer than this is abandoned when a newer request arrives: the newer one
        starts at once on a fresh worker thread, and the abandoned one's outcome is dropped whenever it
        ends. A thread cannot be stopped from outside, so this keeps a widget responsive behind a
        computation that never returns; the core's own guards are what end such computations.
    """

    def __init__(self, compute, on_result, on_error, on_busy=None, threaded=True, stall_seconds=20.0):
        self._compute = compute
        self._on_result = on_result
        self._on_error = on_error
        self._on_busy = on_busy or (lambda busy: None)
        self._threaded = threaded
        # Condition over an RLock: the result callback runs with the lock held (so nothing can supersede
        # a result between the newest-check and its display) and may itself submit or supersede.
        self._lock = threading.Condition(threading.RLock())
        self._pending = None
        self._generation = 0
        self._delivered = 0
        self._thread = None
        self._running_since = None
        self._stall_seconds = float(stall_seconds)
        self.last_seconds = None

    @property
    def generation(self):
        """Number of requests submitted so far."""
        return self._generation

    @property
    def idle(self):
        """True when every submitted request has been processed (nothing queued or running)."""
        with self._lock:
            return self._delivered >= self._generation

    def submit(self, request, inline=False):
        """Queue ``request``, replacing any request that has not started yet; returns its generation.

        Parameters
        ----------
        request : object
            Handed to ``compute``.
        inline : bool, optional
            For a computation known to be quick: when nothing is queued or running, compute it at once
            on the caller's thread (without the busy callback, which would only flicker); otherwise it
            is queued like any other. Either way only the newest request is delivered.
        """
        with self._lock:
            self._generation += 1
            generation = self._generation
            here = not self._threaded or (inline and self._pending is None and self._running_since is None)
            if not here:
                self._pending = (generation, request)
                if self._thread is None or not self._thread.is_alive() or self._stalled():
                    self._thread = threading.Thread(target=self._work, name="mwkin-live", daemon=True)
                    self._thread.start()
                else:
                    self._lock.notify_all()
        if here:
            busy = not inline
            if busy:
                self._on_busy(True)
            try:
                self._execute(generation, request, worker=False)
            finally:
                if busy:
                    self._on_busy(False)
        return generation

    def supersede(self):
        """Make every computation queued or in flight stale, without submitting a new one.

        Called when the current inputs fail validation: their error is the newest outcome, so an older
        request finishing later must not be shown. Returns the new generation.
        """
        with self._lock:
            self._generation += 1
            self._pending = None
            # Nothing new will run for this generation: count it as processed so wait() and idle hold.
            self._delivered = max(self._delivered, self._generation)
            self._lock.notify_all()
            return self._generation

    def _stalled(self):
        since = self._running_since
        return since is not None and time.monotonic() - since > self._stall_seconds

    def _is_current_worker(self):
        return not self._threaded or threading.current_thread() is self._thread

    def _run_one(self):
        """Take the pending request and compute it on the worker thread; False when there is none."""
        with self._lock:
            if self._pending is None or not self._is_current_worker():
                return False
            generation, request = self._pending
            self._pending = None
            self._running_since = time.monotonic()
        return self._execute(generation, request, worker=True)

    def _execute(self, generation, request, worker):
        """Compute one request and deliver it if it is still the newest; False if the worker was abandoned."""
        start = time.perf_counter()
        try:
            result = self._compute(request)
            error = None
        except Exception as exc:  # noqa: BLE001 - every failure must reach the status line
            result, error = None, exc
            error.__mwkin_traceback__ = traceback.format_exc()
        seconds = time.perf_counter() - start
        with self._lock:
            if worker:
                if not self._is_current_worker():
                    return False  # abandoned as stalled: a fresh worker has taken over
                self._running_since = None
            if generation == self._generation:
                self.last_seconds = seconds
                try:
                    if error is None:
                        self._on_result(result, request, seconds)
                    else:
                        self._on_error(error, request)
                except Exception as exc:  # noqa: BLE001
                    try:
                        self._on_error(exc, request)
                    except Exception:  # noqa: BLE001
                        traceback.print_exc()
            self._delivered = max(self._delivered, generation)
            self._lock.notify_all()
        return True

    def _work(self):
        while True:
            with self._lock:
                if not self._is_current_worker():
                    return
                if self._pending is None:
                    self._lock.wait(timeout=5.0)
                    if self._pending is None:
                        if self._is_current_worker():
                            self._thread = None
                        return
            self._on_busy(True)
            try:
                while self._run_one():
                    pass
            finally:
                self._on_busy(False)

    def wait(self, timeout=30.0):
        """Block until every submitted request has been processed; returns False on timeout."""
        deadline = time.monotonic() + timeout
        with self._lock:
            while self._delivered < self._generation:
                remaining = deadline - time.monotonic()
                if remaining <= 0:
                    return False
                self._lock.wait(timeout=min(remaining, 0.1))
        return True
