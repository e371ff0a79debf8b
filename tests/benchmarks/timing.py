"""Shared helpers of the benchmarks: mean time of a call, repeated for at least min_time seconds of a clock."""
import time


def time_call(fn, min_time=0.5, clock=time.perf_counter):
    """Mean time per call of fn by `clock` (wall time by default; time.thread_time or time.process_time give CPU
    time, which on a machine shared with other work varies with the load much less than the wall time)."""
    n, t0 = 0, clock()
    while True:
        fn()
        n += 1
        dt = clock() - t0
        if dt >= min_time:
            return dt / n
