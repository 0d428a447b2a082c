"""Local sweep workers run on one core each (so N workers use N cores and never each other's).

Reference: the operating system's own record of each thread's allowed cores (``os.sched_getaffinity`` per
thread id, Linux), read inside the workers after they have run JAX code.
"""

from __future__ import annotations

import os
import sys

import pytest

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux") or len(os.sched_getaffinity(0)) < 2,
                                reason="needs Linux and at least 2 cores")


def _thread_cores():
    import jax.numpy as jnp

    (jnp.arange(1000.0) ** 2).sum().block_until_ready()  # start XLA's thread pools
    return {int(t): sorted(os.sched_getaffinity(int(t))) for t in os.listdir("/proc/self/task")}


def test_two_local_workers_are_bound_to_distinct_single_cores():
    from capacity.sweep.engine import open_cluster

    with open_cluster(workers=2) as client:
        seen = client.run(_thread_cores)
    assert len(seen) == 2
    per_worker = []
    for threads in seen.values():
        cores = {tuple(c) for c in threads.values()}
        assert len(cores) == 1, cores  # every thread of the worker, XLA's included, on the same single core
        (only,) = cores
        assert len(only) == 1
        per_worker.append(only[0])
    assert sorted(per_worker) == sorted(set(per_worker))  # distinct cores
    assert os.sched_getaffinity(0) >= set(per_worker)  # the caller itself is left free
