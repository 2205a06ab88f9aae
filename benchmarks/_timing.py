"""Wall-clock timing shared by the benchmark scripts (run them as ``python benchmarks/<name>.py``)."""

import time

import jax


def time_calls(fn, repeats: int = 5, stat=min) -> float:
    """``stat`` (min by default) of the wall time in s of ``repeats`` calls of ``fn()``, each waited for
    with ``jax.block_until_ready``; compile beforehand (a first call) if compile time should not count."""
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        jax.block_until_ready(fn())
        times.append(time.perf_counter() - t0)
    return float(stat(times))
