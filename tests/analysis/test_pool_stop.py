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
    for _ in range(200):  # until both workers have started
        workers = [p for p in multiprocessing.active_children() if p not in others]
        if len(workers) == 2:
            break
        time.sleep(0.05)
    pool.shutdown(wait=False, cancel_futures=True)
    _end_workers(workers)
    assert not any(w.is_alive() for w in workers)
    started = time.monotonic()
    pool.shutdown(wait=True)
    assert time.monotonic() - started < 10
    assert all(f.done() for f in busy)
