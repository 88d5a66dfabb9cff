"""Small cases sent ahead to a busy ngspice worker (``workers.AHEAD_CASES``): nothing a case could count on changes.

A case sent ahead is timed from when its worker begins it, goes to a fresh worker when the one holding it is
lost, is dropped when its caller cancels it, and never waits behind a hung case while another worker is free.
The worker tells its analysis to the parent only for a case that runs long (``sandbox.ProgressTeller``).
"""

from __future__ import annotations

import threading
import time

import pytest
from misbehaving_solve import MISBEHAVING
from test_workers import assert_divider, divider, fault

from crosscheck.errors import ReferenceEngineError
from crosscheck.spice import sandbox
from crosscheck.spice.workers import AHEAD_CASES, SpicePool


def test_small_cases_are_sent_ahead():
    """The settings these tests rely on: more than one small case per worker (a divider has 3 elements)."""
    assert AHEAD_CASES > 1


@pytest.mark.spice
def test_a_case_sent_ahead_is_timed_from_when_its_worker_begins_it():
    """Behind a case that takes 2.5 s, a case with a 1 s limit still runs: its clock starts after the slow one."""
    with SpicePool(workers=1, timeout_s=30.0, solve=MISBEHAVING) as pool:
        slow = pool.submit(*fault("slow"), [1e3])
        quick = pool.submit(*divider(300.0), [1e3], timeout_s=1.0)
        assert slow.result(timeout=60).points[0].vth is not None
        assert_divider(quick.result(timeout=60), 300.0)
        assert (pool.finished, pool.cancelled) == (2, 0)


@pytest.mark.spice
def test_cases_sent_ahead_of_a_worker_that_dies_run_on_a_fresh_one():
    """The dying case alone is an error; the three sent ahead of the same worker are answered by its successor."""
    with SpicePool(workers=1, solve=MISBEHAVING) as pool:
        died = pool.submit(*fault("die"), [50.0])
        after = [pool.submit(*divider(r), [50.0]) for r in (200.0, 400.0, 800.0)]
        with pytest.raises(ReferenceEngineError, match="died while running this case.*SIGKILL"):
            died.result(timeout=60)
        for r, future in zip((200.0, 400.0, 800.0), after):
            assert_divider(future.result(timeout=60), r)
    assert (pool.finished, pool.cancelled) == (4, 0)


@pytest.mark.spice
def test_a_free_worker_takes_the_case_queued_behind_a_hung_one():
    """With two workers, the case submitted right after a hanging one is answered within seconds, not held."""
    pool = SpicePool(workers=2, timeout_s=600.0, solve=MISBEHAVING)
    try:
        pool.submit(*divider(100.0), [1e3]).result(timeout=60)  # both lanes idle again, waiting for cases
        hung = pool.submit(*fault("hang"), [1e3])
        after = pool.submit(*divider(700.0), [1e3])
        assert_divider(after.result(timeout=30), 700.0)
        assert hung.running()
    finally:
        pool.close(cancel=True)


@pytest.mark.spice
def test_a_case_cancelled_after_it_was_sent_ahead_is_dropped():
    """Cancelled while waiting behind a slow case, a case stays cancelled and is not counted; the next one runs."""
    with SpicePool(workers=1, timeout_s=30.0, solve=MISBEHAVING) as pool:
        slow = pool.submit(*fault("slow"), [1e3])
        dropped = pool.submit(*divider(300.0), [1e3])
        deadline = time.monotonic() + 60
        while not slow.running() and time.monotonic() < deadline:
            time.sleep(0.02)
        time.sleep(0.3)  # the lane has sent the second case ahead by now
        assert dropped.cancel()
        later = pool.submit(*divider(900.0), [1e3])
        slow.result(timeout=60)
        assert_divider(later.result(timeout=60), 900.0)
        assert dropped.cancelled()
    assert pool.finished == 2


class _Socket:
    """What the teller sends, with the time, in place of the worker's socket."""

    def __init__(self):
        self.sent: list[tuple[float, object]] = []
        self.lock = threading.Lock()

    def send(self, message: object) -> None:
        with self.lock:
            self.sent.append((time.monotonic(), message))


def test_the_worker_tells_the_analysis_of_long_cases_only():
    """A case done within the teller's delay sends nothing; a long one sends its analysis once, then its change,
    and nothing after its outcome."""
    socket = _Socket()
    teller = sandbox.ProgressTeller(socket)
    teller.case_started()
    teller.stage_started("open + short + test at 3 frequencies")
    with teller.case_ended():
        pass
    time.sleep(sandbox.TELL_AFTER_S * 2)
    assert socket.sent == []
    teller.case_started()
    began = time.monotonic()
    teller.stage_started("open at 1 frequency")
    time.sleep(sandbox.TELL_AFTER_S * 3)
    teller.stage_started("short at 1 frequency")
    time.sleep(sandbox.TELL_AFTER_S * 3)
    with teller.case_ended():
        ended = time.monotonic()
    time.sleep(sandbox.TELL_AFTER_S * 3)
    messages = [m for _, m in socket.sent]
    assert messages == [(sandbox.PROGRESS, "open at 1 frequency"), (sandbox.PROGRESS, "short at 1 frequency")]
    assert socket.sent[0][0] - began >= sandbox.TELL_AFTER_S * 0.9  # tolerance: monotonic clock and sleep jitter
    assert all(t <= ended for t, _ in socket.sent)


@pytest.mark.spice
def test_cases_sent_ahead_never_fill_the_socket_of_a_hung_worker():
    """Seven cases of 40 kB each behind a hung one (more than a socket holds): the hung case is still stopped at
    its limit, because only ``AHEAD_BYTES`` of them are sent ahead; then every one of them is answered."""
    with SpicePool(workers=1, timeout_s=30.0, solve=MISBEHAVING) as pool:
        hung = pool.submit(*fault("hang"), [1e3], timeout_s=1.5)
        bulky = [divider(100.0 * (i + 1), title="x" * 40_000) for i in range(7)]
        after = [pool.submit(network, port, [1e3]) for network, port in bulky]
        with pytest.raises(ReferenceEngineError, match="did not finish this case within 1.5 s"):
            hung.result(timeout=30)
        for i, future in enumerate(after):
            assert_divider(future.result(timeout=60), 100.0 * (i + 1))


@pytest.mark.spice
def test_cases_sent_ahead_of_a_retiring_worker_run_on_its_successor():
    """A worker retires after ``cases_per_worker`` cases with more already sent to it; its successor answers them."""
    resistances = [100.0 * (i + 1) for i in range(7)]
    with SpicePool(workers=1, cases_per_worker=2) as pool:
        futures = [pool.submit(*divider(r), [1e3]) for r in resistances]
        for r, future in zip(resistances, futures):
            assert_divider(future.result(timeout=60), r)
    assert (pool.finished, pool.cancelled) == (7, 0)
