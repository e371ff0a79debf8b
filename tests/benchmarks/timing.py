"""Shared helper of the benchmarks: mean wall time of a call, repeated for at least min_time seconds."""
import time


def time_call(fn, min_time=0.5):
    n, t0 = 0, time.perf_counter()
    while True:
        fn()
        n += 1
        dt = time.perf_counter() - t0
        if dt >= min_time:
            return dt / n
