"""Ending a pool's workers when a run is stopped (rebalance.analysis.solving)."""

from __future__ import annotations

import multiprocessing
import time
from concurrent.futures import ProcessPoolExecutor


def test_workers_ended_on_a_stop_are_seen_gone_by_the_pool():
    # A review: a stopped `marginal` spun at exit for minutes at 94% CPU.  psutil's wait had
    # reaped the pool's workers behind multiprocessing's back, so their is_alive() stayed
    # true for ever and the pool's manager thread never finished.  Ended through
    # multiprocessing, a worker is seen gone and the pool shuts down.
    from rebalance.analysis.solving import _end_workers

    others = set(multiprocessing.active_children())
    pool = ProcessPoolExecutor(max_workers=2, mp_context=multiprocessing.get_context("spawn"))
    busy = [pool.submit(time.sleep, 60) for _ in range(2)]
    # Until both workers have started (spawned, so slow on a loaded machine): a worker that
    # started only after the others were ended would take its task and run it out.
    workers: list[multiprocessing.process.BaseProcess] = []
    waited = time.monotonic()
    while len(workers) < 2 and time.monotonic() - waited < 60:
        workers = [p for p in multiprocessing.active_children() if p not in others]
        time.sleep(0.05)
    assert len(workers) == 2
    while not all(f.running() for f in busy) and time.monotonic() - waited < 60:
        time.sleep(0.05)
    pool.shutdown(wait=False, cancel_futures=True)
    _end_workers(workers)
    assert not any(w.is_alive() for w in workers)
    started = time.monotonic()
    pool.shutdown(wait=True)
    assert time.monotonic() - started < 10
    assert all(f.done() for f in busy)
