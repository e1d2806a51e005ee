"""LiveRunner: newest request wins, errors reach the callback, a stalled computation does not block."""

from __future__ import annotations

import threading
import time

from mwkin.widgets._live import LiveRunner


def collecting_runner(compute, **kwargs):
    results, errors = [], []
    runner = LiveRunner(compute, lambda r, q, s: results.append(r), lambda e, q: errors.append((e, q)), **kwargs)
    return runner, results, errors


def test_requests_made_while_busy_coalesce_to_the_newest():
    gate = threading.Event()
    computed = []

    def compute(request):
        computed.append(request)
        gate.wait(10)
        return request

    runner, results, _ = collecting_runner(compute)
    runner.submit(1)
    while not computed:
        time.sleep(0.001)
    for request in (2, 3, 4):  # queued while 1 runs: each replaces the one before
        runner.submit(request)
    gate.set()
    assert runner.wait(10)
    assert computed == [1, 4] and results == [4]  # 1 was stale when it ended; 2 and 3 never ran


def test_errors_go_to_the_callback_with_their_request():
    def compute(request):
        raise ValueError(f"bad request {request}")

    runner, results, errors = collecting_runner(compute, threaded=False)
    runner.submit("x")
    assert results == [] and len(errors) == 1
    assert str(errors[0][0]) == "bad request x" and errors[0][1] == "x"


def test_a_stalled_computation_does_not_block_newer_requests():
    release = threading.Event()

    def compute(request):
        if request == "stuck":
            release.wait(30)  # stands for a computation that never returns
        return request

    runner, results, _ = collecting_runner(compute, stall_seconds=0.2)
    runner.submit("stuck")
    time.sleep(0.4)
    runner.submit("next")
    assert runner.wait(10), "the newer request waited for the stalled one"
    assert results == ["next"]
    release.set()  # the stalled computation ends late: its outcome is dropped
    time.sleep(0.2)
    assert results == ["next"]
    runner.submit("again")
    assert runner.wait(10) and results == ["next", "again"]


def test_synchronous_mode_runs_in_submit():
    runner, results, _ = collecting_runner(lambda q: q * 2, threaded=False)
    assert runner.submit(3) == 1 and results == [6] and runner.idle


def test_inline_requests_run_in_place_when_idle_and_queue_behind_a_running_one():
    gate = threading.Event()
    threads = []

    def compute(request):
        threads.append(threading.current_thread())
        if request == "slow":
            gate.wait(10)
        return request

    busy = []
    runner, results, _ = collecting_runner(compute, on_busy=busy.append)
    runner.submit("quick", inline=True)  # idle: computed here, at once, no busy flicker
    assert results == ["quick"] and threads[-1] is threading.current_thread() and busy == [] and runner.idle
    runner.submit("slow")
    while len(threads) < 2:
        time.sleep(0.001)
    runner.submit("quick again", inline=True)  # something is running: queued, the newest wins
    assert results == ["quick"]
    gate.set()
    assert runner.wait(10)
    assert results == ["quick", "quick again"] and threads[-1] is not threading.current_thread()


def test_the_quiet_guard_is_per_thread_and_nests():
    from mwkin.widgets._base import Quiet

    quiet, seen = Quiet(), []
    with quiet:
        with quiet:
            assert quiet
        assert quiet
        other = threading.Thread(target=lambda: seen.append(bool(quiet)))
        other.start()
        other.join()
    assert not quiet and seen == [False]
