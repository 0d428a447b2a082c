"""Running the points: in this process, on a local Dask cluster, or on an existing one.

``open_cluster`` gives a ``dask.distributed.Client`` (a ``LocalCluster`` of one-thread worker processes by
default, each bound to its own core (:mod:`capacity.sweep.cores`), shut down on exit; or a connection to
``tcp://host:port``), ``run_points`` submits the points in a bounded window and hands each result to a callback
as it completes, in whatever order. Every point carries its
own seed, so the numbers do not depend on the number of workers or the order.
"""

from __future__ import annotations

import contextlib
import logging
import os
import re
from typing import Callable

from capacity.errors import InputError

#: environment of local worker processes: one thread each for BLAS and XLA, so N workers use N cores
WORKER_ENV = {
    "OMP_NUM_THREADS": "1",
    "OPENBLAS_NUM_THREADS": "1",
    "MKL_NUM_THREADS": "1",
    "XLA_FLAGS": "--xla_cpu_multi_thread_eigen=false intra_op_parallelism_threads=1",
    "JAX_ENABLE_X64": "1",
}
#: seconds to wait for a scheduler given with ``--scheduler``
CONNECT_TIMEOUT = 3.0
_ADDRESS = re.compile(r"^(tcp|tls|inproc|ucx|ws|wss)://[^\s:/]+(:\d+)?$|^[^\s:/]+:\d+$")


def _cores() -> list[int]:
    try:
        return sorted(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover  (not Linux)
        return list(range(os.cpu_count() or 1))


def default_workers() -> int:
    """One worker per core this process may use."""
    return max(len(_cores()), 1)


@contextlib.contextmanager
def open_cluster(workers: int | None = None, scheduler: str | None = None):
    """Yield a Dask client, or None for ``workers == 0`` (points run in this process, one after another).

    scheduler : address of a running scheduler (``tcp://host:8786``); an unreachable one raises
    :class:`InputError` naming ``--scheduler`` after :data:`CONNECT_TIMEOUT` seconds.
    """
    if scheduler is None and workers == 0:
        yield None
        return
    from distributed import Client

    if scheduler is not None:
        if not _ADDRESS.match(scheduler.strip()):
            raise InputError("--scheduler", scheduler, "is not a scheduler address", "write tcp://HOST:PORT, e.g. "
                             "tcp://127.0.0.1:8786 (start one with `dask scheduler`)")
        try:
            client = Client(scheduler.strip(), timeout=f"{CONNECT_TIMEOUT}s", set_as_default=False)
        except (OSError, TimeoutError) as exc:
            raise InputError("--scheduler", scheduler, f"no scheduler answered within {CONNECT_TIMEOUT:g} s "
                             f"({type(exc).__name__})", "start one with `dask scheduler` and workers with `dask "
                             "worker ADDRESS` (each with capacity installed), or leave out --scheduler to use "
                             "this machine's cores") from None
        try:
            yield client
        finally:
            client.close()
        return
    from distributed import LocalCluster

    n = default_workers() if workers is None else int(workers)
    if n < 0:
        raise InputError("--workers", workers, "must be >= 0", "give the number of worker processes (0 = in "
                         "this process)")
    # no dashboard; the scheduler's small HTTP server (health checks) on a free port, not the busy default 8787
    cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True, dashboard_address=None,
                           scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
                           silence_logs=logging.CRITICAL, env=dict(WORKER_ENV))
    client = Client(cluster, set_as_default=False)
    try:
        from capacity.sweep.cores import OneCoreEach

        client.register_plugin(OneCoreEach(_cores()), name="capacity-one-core-each")
        yield client
    finally:
        client.close()
        cluster.close()


def run_points(client, points, call: Callable, on_done: Callable, *, window: int | None = None) -> None:
    """Evaluate every point and call ``on_done(point, result)`` as each one finishes.

    call : ``call(point) -> (function, args)``; the function must be importable on the workers and must not
        raise (see :func:`capacity.sweep.measures.evaluate`). client : a Dask client, or None to run here in
        order. window : most points in flight at once (default 4 per worker), so a large grid does not flood
        the scheduler.
    """
    if client is None:
        for p in points:
            fn, args = call(p)
            on_done(p, fn(*args))
        return
    from distributed import as_completed

    n_workers = max(len(client.scheduler_info().get("workers", {})), 1)
    window = window or 4 * n_workers
    queue = iter(points)
    pending = {}

    def submit(p):
        fn, args = call(p)
        future = client.submit(fn, *args, key=f"point-{p.point_id}-{os.getpid()}", pure=False)
        pending[future.key] = p
        return future

    first = [submit(p) for _, p in zip(range(window), queue, strict=False)]
    done = as_completed(first, loop=client.loop)
    for future in done:
        p = pending.pop(future.key)
        try:
            result = future.result()
        except Exception as exc:  # a worker died (KilledWorker) or the task could not be run
            result = {"ok": False, "error": f"{type(exc).__name__}: {exc}", "seconds": float("nan")}
        future.release()
        on_done(p, result)
        nxt = next(queue, None)
        if nxt is not None:
            done.add(submit(nxt))
