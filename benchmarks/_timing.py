"""Timing helpers shared by the benchmark modules (best of k, wall clock)."""

from __future__ import annotations

import gc
import time
import tracemalloc


def best_of(fn, k: int = 3) -> float:
    """Smallest wall time of ``k`` calls of ``fn()`` in seconds (garbage collected between)."""
    best = float("inf")
    for _ in range(k):
        gc.collect()
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def paired(ours, peer, k: int = 5) -> tuple[float, float]:
    """Smallest wall times of ``ours()`` and ``peer()``, called alternately ``k`` times each.

    On a shared machine the speed drifts over seconds; alternating the two
    puts both under the same conditions, so their ratio drifts far less than
    two separate best-of runs would.
    """
    t_o = t_p = float("inf")
    for _ in range(k):
        t_o = min(t_o, best_of(ours, 1))
        t_p = min(t_p, best_of(peer, 1))
    return t_o, t_p


def peak_python_memory(fn) -> tuple[float, int]:
    """(seconds, peak bytes allocated through Python/numpy) of one call, via tracemalloc."""
    gc.collect()
    tracemalloc.start()
    t0 = time.perf_counter()
    fn()
    dt = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return dt, peak
