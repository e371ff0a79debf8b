"""Where many independent fits run: serially, on a thread pool, or on a Dask cluster.

`run_chunks(task, shared, items, executor=None, progress=None, desc="")` applies
`task(shared, item)` to every item and returns the results in the order of `items`, whatever
the executor:

    None or "threads"   a thread pool over every core this process may use; the C core releases
                        the GIL inside each fit, so threads run in parallel
    "serial"            one after the other in this thread
    an int n >= 1       a thread pool of n threads
    a concurrent.futures.Executor   its map(), one call per chunk
    a dask.distributed.Client, or a scheduler address string ("tcp://host:8786")
                        one Dask task per chunk of items; `shared` (the data, the starting
                        model and the settings) is sent once to every worker (scatter with
                        broadcast) and each task receives only its own items

With batched=True, `task(shared, chunk)` receives a list of items and returns the list of their
results (one C call can then fit a whole chunk); the chunks are cut the same way, and serially
into pieces of `SERIAL_BATCH` items so that the progress bar moves.

`task` and `shared` must be picklable for Dask (module-level functions and plain data).
The results depend only on the items, never on the chunking or on which worker ran them,
so a seeded run gives the same numbers on every executor.

Progress: a tqdm bar (the notebook widget in Jupyter, through tqdm.auto) counting the items,
shown when `progress` is True, or by default (None) when there are at least
`PROGRESS_MIN_ITEMS` items and tqdm is installed; progress=False switches it off.
"""
import concurrent.futures
import math
import os

__all__ = ["run_chunks", "local_map", "describe_executor", "PROGRESS_MIN_ITEMS"]

#: runs with fewer items than this show no progress bar unless asked (progress=True)
PROGRESS_MIN_ITEMS = 200
#: chunks per worker: enough for the bar to move and the load to balance, few enough that the
#: per-chunk overhead (a Dask task costs milliseconds) stays small
_CHUNKS_PER_WORKER = 4
#: items per batched call when run serially
SERIAL_BATCH = 50

_DASK_MISSING = ("a Dask executor needs dask.distributed, which is not installed; install the extra with "
                 "pip install 'wkbfit[dask]' (or pip install 'dask[distributed]'), or use executor='threads'")


def n_cores():
    """The cores this process may run on (its CPU affinity where the system reports it)."""
    try:
        return len(os.sched_getaffinity(0)) or 1
    except (AttributeError, OSError):
        return os.cpu_count() or 1


def _run_chunk(task, shared, chunk):
    return [task(shared, item) for item in chunk]


def _run_batch(task, shared, chunk):
    out = list(task(shared, chunk))
    if len(out) != len(chunk):
        raise RuntimeError("a batched task returned %d results for %d items" % (len(out), len(chunk)))
    return out


def _chunks(items, n_chunks):
    n = len(items)
    n_chunks = max(1, min(n, n_chunks))
    size = int(math.ceil(n / n_chunks)) if n else 1
    return [items[i:i + size] for i in range(0, n, size)]


def _is_dask_client(obj):
    cls = type(obj)
    return cls.__name__ == "Client" and cls.__module__.split(".")[0] == "distributed"


def describe_executor(executor):
    """A short plain-language name of an executor argument (for reports)."""
    if executor is None or executor == "threads":
        return "threads (%d)" % n_cores()
    if executor == "serial":
        return "serial"
    if isinstance(executor, int) and not isinstance(executor, bool):
        return "threads (%d)" % executor
    if isinstance(executor, str):
        return "dask scheduler %s" % executor
    if _is_dask_client(executor):
        return "dask client %s" % getattr(executor.scheduler, "address", "")
    return type(executor).__name__


def _check_executor(executor):
    if executor is None or executor in ("threads", "serial"):
        return
    if isinstance(executor, bool):
        raise ValueError("executor=%r is not valid; use None or 'threads' (all cores), 'serial', a number of "
                         "threads, a dask.distributed.Client or a scheduler address" % (executor,))
    if isinstance(executor, int):
        if executor < 1:
            raise ValueError("executor=%d threads is invalid: give a number >= 1" % executor)
        return
    if isinstance(executor, str):
        if "://" not in executor and ":" not in executor:
            raise ValueError("executor=%r is not known; use 'threads', 'serial', or a Dask scheduler address such "
                             "as 'tcp://127.0.0.1:8786'" % (executor,))
        return
    if isinstance(executor, concurrent.futures.Executor) or _is_dask_client(executor):
        return
    raise ValueError("executor=%r is not valid; use None or 'threads' (all cores), 'serial', a number of threads, "
                     "a concurrent.futures.Executor, a dask.distributed.Client or a scheduler address"
                     % (executor,))


def _progress_bar(progress, total, desc):
    if progress is False or (progress is None and total < PROGRESS_MIN_ITEMS):
        return None
    if progress not in (None, True):
        raise ValueError("progress=%r must be True, False or None (a bar for long runs)" % (progress,))
    try:
        from tqdm.auto import tqdm
    except ImportError:
        if progress is True:
            raise ImportError("progress=True needs tqdm, which is not installed; pip install tqdm, or pass "
                              "progress=False") from None
        return None
    return tqdm(total=total, desc=desc, unit="fit", leave=False)


def run_chunks(task, shared, items, executor=None, progress=None, desc="", batched=False):
    """[task(shared, item) for item in items], run on `executor` (see the module notes); with
    batched=True, task(shared, chunk) -> list of results."""
    _check_executor(executor)
    items = list(items)
    bar = _progress_bar(progress, len(items), desc)
    runner = _run_batch if batched else _run_chunk
    try:
        if executor == "serial":
            out = []
            step = SERIAL_BATCH if batched else 1
            for i in range(0, len(items), step):
                out.extend(runner(task, shared, items[i:i + step]))
                if bar is not None:
                    bar.update(len(items[i:i + step]))
            return out
        if isinstance(executor, str) and executor != "threads" or _is_dask_client(executor):
            return _run_dask(runner, task, shared, items, executor, bar)
        if isinstance(executor, concurrent.futures.Executor):
            workers = getattr(executor, "_max_workers", n_cores())
            return _run_pool(runner, executor, task, shared, items, workers, bar)
        workers = executor if isinstance(executor, int) else n_cores()
        with concurrent.futures.ThreadPoolExecutor(max_workers=workers) as pool:
            return _run_pool(runner, pool, task, shared, items, workers, bar)
    finally:
        if bar is not None:
            bar.close()


def local_map(fn, items, executor=None):
    """[fn(item) for item in items] on threads of this process (serially for executor="serial"),
    for the few core calls that prepare or check a run (the core releases the GIL)."""
    _check_executor(executor)
    items = list(items)
    if executor == "serial" or len(items) < 2:
        return [fn(item) for item in items]
    workers = executor if isinstance(executor, int) and not isinstance(executor, bool) else n_cores()
    with concurrent.futures.ThreadPoolExecutor(max_workers=min(workers, len(items))) as pool:
        return list(pool.map(fn, items))


def _run_pool(runner, pool, task, shared, items, workers, bar):
    chunks = _chunks(items, workers * _CHUNKS_PER_WORKER)
    futures = [pool.submit(runner, task, shared, chunk) for chunk in chunks]
    if bar is not None:
        for fut in concurrent.futures.as_completed(futures):
            bar.update(len(fut.result()))
    return [x for fut in futures for x in fut.result()]


def _run_dask(runner, task, shared, items, executor, bar):
    try:
        from distributed import Client, as_completed
    except ImportError:
        raise ImportError(_DASK_MISSING) from None
    own = isinstance(executor, str)
    try:
        client = Client(executor, set_as_default=False) if own else executor
    except (OSError, TimeoutError) as err:
        raise ValueError("cannot reach the Dask scheduler at %r: %s" % (executor, err)) from None
    try:
        n_threads = sum(client.nthreads().values()) or 1
        chunks = _chunks(items, n_threads * _CHUNKS_PER_WORKER)
        # the data once to every worker; each task then carries only its own items
        shared_future = client.scatter(shared, broadcast=True, hash=False)
        futures = [client.submit(runner, task, shared_future, chunk, pure=False) for chunk in chunks]
        if bar is not None:
            for fut in as_completed(futures):
                bar.update(len(chunks[futures.index(fut)]))
        results = client.gather(futures)
        client.cancel([shared_future])
        return [x for part in results for x in part]
    finally:
        if own:
            client.close()
