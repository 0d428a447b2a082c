"""One core per local worker: a Dask worker plugin that binds local worker ``k`` to core ``k mod cores``.

One-thread settings (``WORKER_ENV`` in :mod:`capacity.sweep.engine`) are not enough on their own: XLA's CPU
runtime still splits a computation between its pool and the calling thread, so a lone worker used about 1.26
cores and two workers fought over both. Bound to a core each, N workers use N cores and never each other's.
Imported only when :func:`capacity.sweep.engine.open_cluster` starts a local cluster (it imports Dask).
"""

from __future__ import annotations

import os

from distributed.diagnostics.plugin import WorkerPlugin


def pin_process(core: int) -> None:
    """Bind every thread of this process, and so every thread it starts later (XLA's and BLAS's pools, which
    also size themselves from the affinity they see), to one core. Linux only; elsewhere nothing happens."""
    try:
        tasks = [int(t) for t in os.listdir("/proc/self/task")]
    except OSError:  # pragma: no cover  (not Linux)
        return
    for tid in tasks:
        try:
            os.sched_setaffinity(tid, {core})
        except (OSError, AttributeError):  # pragma: no cover  (a thread that just ended; not Linux)
            pass


class OneCoreEach(WorkerPlugin):
    """Runs on every worker as it joins: worker ``k`` (LocalCluster names its workers 0, 1, ...) is bound to
    ``cores[k mod len(cores)]``. Workers with other names (started by hand) are left alone."""

    idempotent = True

    def __init__(self, cores):
        self.cores = sorted(int(c) for c in cores)

    def setup(self, worker):
        if isinstance(worker.name, int) and self.cores:
            pin_process(self.cores[worker.name % len(self.cores)])
