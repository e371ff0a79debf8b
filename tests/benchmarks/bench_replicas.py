"""Benchmark: replicas and model scans (wkbfit.replicas, wkbfit.model_scan) on threads, processes and Dask.

Prints, from one run:
  * before: the full refits (refit="full", every replica through wkbfit.fit), serially on
    N_FULL replicas (scaled to 1000), and on the thread pool;
  * after: 1000 Monte-Carlo replicas of a 50-level, 3-parameter Morse fit, linearised refits
    (the default), on the default thread pool (target <= 1 s on a 2-core machine), and serially,
    with the largest difference from the full refits of the same replicas in standard deviations;
  * two threads against one on the same replicas (target >= 1.8x), beside two processes against
    one (two forked processes each running half the replicas serially): the machine's own ceiling;
    for the linearised refits (1000 replicas) and for the full refits (N_FULL replicas);
  * the same bootstrap on a distributed.LocalCluster with 2 worker processes, and its overhead per
    task, (wall time - serial time / 2) / tasks;
  * a 20-candidate MLR model scan of a 500-level data set (target <= 2 s).
The data are exact-solver levels of invented potentials plus seeded noise. On a shared machine the
ceiling itself moves; the run prints it so that the thread figure can be read against it.
Run: python3 tests/benchmarks/bench_replicas.py
"""
import multiprocessing
import os
import sys
import time

import functools

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "pkg"))
import wkbfit  # noqa: E402
import wkbfit.corrected  # noqa: E402

MU = 6.66420389
N_REPLICAS = 1000
#: full refits timed (the before figure is scaled to N_REPLICAS)
N_FULL = 200


def morse_fit():
    true = wkbfit.Morse(De=5875.0, re=3.67, a=0.6)
    vs, Js, E = [], [], []
    for J in (0, 10):
        vs += list(range(25))
        Js += [J] * 25
        E += wkbfit.levels(true, MU, v=list(range(25)), J=J, method="exact").energy.tolist()
    rng = np.random.default_rng(1)
    obs = wkbfit.read_levels({"v": vs, "J": Js, "energy": np.array(E) + rng.normal(0, 0.01, 50),
                              "uncertainty": np.full(50, 0.01)})
    return wkbfit.fit(wkbfit.Morse(De=5800.0, re=3.66, a=0.605), obs, MU)


def scan_case():
    """500 levels (J = 0..72, v = 0..19) of an invented MLR well, measured from v=0, J=0 (the usual zero
    of measured term values), exact-solver levels plus 0.01 cm-1 noise; 20 MLR candidates."""
    true = wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3, 0.1, 0.05])
    mu = 30.0
    E00 = wkbfit.levels(true, mu, v=[0], method="exact").energy[0]
    rows = {"v": [], "J": [], "energy": []}
    for J in range(0, 75, 3):  # 25 J values x 20 levels = 500 levels
        table = wkbfit.levels(true, mu, v=list(range(20)), J=J, method="exact")
        rows["v"] += table.v.tolist()
        rows["J"] += table.J.tolist()
        rows["energy"] += (table.energy - E00).tolist()
    rng = np.random.default_rng(2)
    n = len(rows["v"])
    rows["energy"] = np.array(rows["energy"]) + rng.normal(0, 0.01, n)
    rows["energy"][0] = 0.0  # the zero of the data
    rows["uncertainty"] = np.full(n, 0.01)
    obs = wkbfit.read_levels(rows, energy_zero="lowest")
    cands = [wkbfit.MLR(De=2950.0, re=3.0, C6=2e5, betas=[0.3] + [0.0] * (k - 1), q=q, r_ref=r_ref)
             for k in range(2, 7) for q in (3, 4) for r_ref in (3.0, 3.1)]
    return obs, cands, mu


def _half_serial(res, n, queue, refit=None):
    t0 = time.perf_counter()
    res.bootstrap(n, seed=1, executor="serial", progress=False, refit=refit)
    queue.put(time.perf_counter() - t0)


def _ratios(res, n, refit, repeats=3):
    """(2 threads / 1 thread, 2 processes / 1 process) speed-ups, interleaved runs."""
    ratios_t, ratios_p = [], []
    ctx = multiprocessing.get_context("fork")
    for _ in range(repeats):
        t0 = time.perf_counter()
        res.bootstrap(n, seed=1, executor="serial", progress=False, refit=refit)
        t_one = time.perf_counter() - t0
        t0 = time.perf_counter()
        res.bootstrap(n, seed=1, executor=2, progress=False, refit=refit)
        ratios_t.append(t_one / (time.perf_counter() - t0))
        queue = ctx.Queue()
        procs = [ctx.Process(target=_half_serial, args=(res, n // 2, queue, refit)) for _ in range(2)]
        t0 = time.perf_counter()
        for p in procs:
            p.start()
        for p in procs:
            p.join()
        ratios_p.append(t_one / (time.perf_counter() - t0))
    return ratios_t, ratios_p


def _print_ratios(label, ratios_t, ratios_p):
    print("  %-18s: 2 threads / 1: median %.2fx (runs %s; target >= 1.8x); 2 processes / 1: median %.2fx "
          "(runs %s) <- the machine's ceiling" % (label, np.median(ratios_t), ", ".join("%.2f" % r for r in ratios_t),
                                                  np.median(ratios_p), ", ".join("%.2f" % r for r in ratios_p)))


def main():
    if sys.argv[1:] == ["scan"]:
        return scan_only()
    print("replica and model-scan benchmark on %d cores (a shared machine: other jobs may load it)" % os.cpu_count())
    res = morse_fit()
    res.bootstrap(50, progress=False)  # warm-up
    res.bootstrap(10, progress=False, refit="full")
    # before: full refits
    t0 = time.perf_counter()
    full = res.bootstrap(N_FULL, seed=1, executor="serial", progress=False, refit="full")
    t_full = (time.perf_counter() - t0) * N_REPLICAS / N_FULL
    t0 = time.perf_counter()
    res.bootstrap(N_FULL, seed=1, executor="threads", progress=False, refit="full")
    t_full_threads = (time.perf_counter() - t0) * N_REPLICAS / N_FULL
    # after: linearised refits
    t0 = time.perf_counter()
    serial = res.bootstrap(N_REPLICAS, seed=1, executor="serial", progress=False)
    t_serial = time.perf_counter() - t0
    t0 = time.perf_counter()
    threaded = res.bootstrap(N_REPLICAS, seed=1, executor="threads", progress=False)
    t_threads = time.perf_counter() - t0
    same = all(np.array_equal(serial.values[k], threaded.values[k]) for k in serial.names)
    worst = max(float(np.max(np.abs(serial.values[k][:N_FULL] - full.values[k]))) / res.params[k].uncertainty
                for k in res.var_names)
    check = serial.method_check
    print("\n%d replicas of a 50-level, 3-parameter Morse fit (%d failed):" % (N_REPLICAS, threaded.n_failed))
    print("  before: full refits, serial : %7.3f s  (%.3f ms per replica; %d timed, scaled)" % (
        t_full, t_full / N_REPLICAS * 1e3, N_FULL))
    print("  before: full refits, threads: %7.3f s" % t_full_threads)
    print("  after: linearised, serial   : %7.3f s  (%.3f ms per replica; %.1fx faster than before)" % (
        t_serial, t_serial / N_REPLICAS * 1e3, t_full / t_serial))
    print("  after: linearised, threads(%d): %6.3f s  (target <= 1 s: %s; %.1fx faster than before on threads); "
          "identical to serial: %s" % (os.cpu_count(), t_threads, "met" if t_threads <= 1 else "NOT met",
                                       t_full_threads / t_threads, same))
    print("  linearised vs full refits of the same %d replicas: largest difference %.2g sd; run-time exact check: "
          "parameters %.2g sd, predictions %.2g sd (tolerance %.2g), frozen corrections %.2g sd" % (
              N_FULL, worst, check["parameter_error_sd"], check["prediction_error_sd"], check["tolerance"],
              check["slope_effect_sd"]))

    # two threads against one, and two processes against one (the ceiling), three interleaved runs each
    _print_ratios("linearised", *_ratios(res, N_REPLICAS, None))
    _print_ratios("full refits", *_ratios(res, N_FULL, "full"))

    try:
        from distributed import Client, LocalCluster
    except ImportError:
        print("  Dask              : not installed (pip install 'wkbfit[dask]'); skipped")
    else:
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster, \
                Client(cluster) as client:
            res.bootstrap(20, executor=client, progress=False)  # warm-up: imports on the workers
            t0 = time.perf_counter()
            on_dask = res.bootstrap(N_REPLICAS, seed=1, executor=client, progress=False)
            t_dask = time.perf_counter() - t0
            n_tasks = 2 * 4  # executors._CHUNKS_PER_WORKER chunks per worker thread
        same = all(np.array_equal(serial.values[k], on_dask.values[k]) for k in serial.names)
        print("  Dask LocalCluster : %7.3f s on 2 worker processes, %d tasks; overhead %.1f ms per task; "
              "identical to serial: %s" % (t_dask, n_tasks, (t_dask - t_serial / 2) / n_tasks * 1e3, same))

    scan_only()


def scan_only():
    obs, cands, mu = scan_case()
    wkbfit.scan_models(obs, cands[:2], mu, progress=False)  # warm-up
    from bench_large_fit import count_orbits
    _, orbits = count_orbits(lambda: wkbfit.scan_models(obs, cands, mu, progress=False, executor="serial"))
    print("\nmodel scan: %.3f first-order WKB orbits per level and evaluation (serial run)" % orbits)
    t0 = time.perf_counter()
    scan = wkbfit.scan_models(obs, cands, mu, progress=False)
    t_scan = time.perf_counter() - t0
    print("\nmodel scan: %d MLR candidates, %d levels (J = 0..72), threads: %.3f s (target <= 2 s: %s); "
          "best %s, %d acceptable, %d failed" % (len(cands), len(obs), t_scan, "met" if t_scan <= 2 else "NOT met",
                                                 scan.rows[0]["candidate"], scan.n_acceptable, scan.n_failed))
    # the same scan with every refresh row of the corrected fits solved exactly (no interpolation in J(J+1))
    orig = wkbfit.corrected.run_corrected
    wkbfit.corrected.run_corrected = functools.partial(orig, interpolate_in_j=False)
    try:
        t0 = time.perf_counter()
        slow = wkbfit.scan_models(obs, cands, mu, progress=False)
        t_slow = time.perf_counter() - t0
    finally:
        wkbfit.corrected.run_corrected = orig
    print("  the same scan, every refresh row solved exactly: %.3f s (ratio %.2fx); same ranking: %s"
          % (t_slow, t_slow / t_scan, [r["candidate"] for r in slow.rows] == [r["candidate"] for r in scan.rows]))


if __name__ == "__main__":
    main()
