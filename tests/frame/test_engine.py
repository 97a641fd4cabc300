"""Execution engines: in-process, threads and a local Dask cluster give the same, ordered results.

The reference for every result is the function itself run in a plain loop
(numpy / the standard library); the engines must return exactly that, in
batch order, whatever runs the batches.
"""

from __future__ import annotations

import math
import operator
import sys
import time
import warnings

import numpy as np
import pytest

from faultmap.engine import engine_map, make_engine
from faultmap.errors import FaultmapError, FaultmapWarning, InputFileError, NotAvailableError, ParameterError

BATCHES = [np.arange(k, k + 50, dtype=float) for k in range(0, 400, 50)]


@pytest.fixture(scope="module")
def cluster():
    """One local cluster of 2 worker processes for the whole module (a few seconds to start)."""
    eng = make_engine(workers=2)
    yield eng
    eng.close()


def test_in_process_and_threads_identical_and_ordered():
    a = make_engine().map(np.cumsum, BATCHES)
    b = make_engine(threads=2).map(np.cumsum, BATCHES)
    c = engine_map(None, np.cumsum, BATCHES)
    for x, y, z, src in zip(a, b, c, BATCHES, strict=True):
        np.testing.assert_array_equal(x, y)
        np.testing.assert_array_equal(x, z)
        np.testing.assert_array_equal(x, np.cumsum(src))  # reference: numpy itself


def test_bad_engine_options():
    with pytest.raises(ParameterError):
        make_engine(workers=0)
    with pytest.raises(ParameterError):
        make_engine(threads=1.5)
    with pytest.raises(ParameterError, match="not both"):
        make_engine(workers=2, scheduler="tcp://127.0.0.1:1")
    assert make_engine().kind == "in-process" and make_engine(threads=1).parallelism == 1
    assert make_engine(threads=3).parallelism == 3
    # default: one thread per core this process may use (os.sched_getaffinity), at most 4
    import os

    assert make_engine().parallelism == min(len(os.sched_getaffinity(0)), 4)


def test_threads_failure_raises_the_batch_error():
    with pytest.raises(ValueError, match="math domain"):
        make_engine(threads=2).map(math.sqrt, [4.0, -1.0, 9.0, 16.0])


def test_local_cluster_matches_in_process_and_reports_failures(cluster):
    ref = make_engine().map(np.cumsum, BATCHES)
    assert cluster.kind == "local-cluster" and cluster.parallelism == 2
    got = cluster.map(np.cumsum, BATCHES)
    for x, y in zip(ref, got, strict=True):
        np.testing.assert_array_equal(x, y)
    # an error that is not faultmap's: one line naming the batch, the engine and that nothing was written
    with pytest.raises(FaultmapError, match=r"worker failed on batch 2 of 3 .*ValueError.*nothing was written"):
        cluster.map(math.sqrt, [4.0, -1.0, 9.0])
    # faultmap's own errors keep their class (the CLI prints them as one line, exit code 2)
    from faultmap.io.dem import open_dem

    with pytest.raises(InputFileError, match=r"not found.*batch 1 of 1.*nothing was written"):
        cluster.map(open_dem, ["/nonexistent/dem.tif"])
    # the engine still works after a failed run (a rerun succeeds)
    assert cluster.map(operator.neg, [1, 2, 3]) == [-1, -2, -3]


def test_worker_warnings_come_back_to_the_client(cluster):
    msgs = [FaultmapWarning(f"batch {i}") for i in range(4)]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out = cluster.map(warnings.warn, msgs)
    assert out == [None] * 4
    got = [str(w.message) for w in caught if issubclass(w.category, FaultmapWarning)]
    assert got == [f"batch {i}" for i in range(4)]  # every one, in batch order


def test_existing_scheduler(cluster):
    addr = cluster.client.scheduler.address
    with make_engine(scheduler=addr) as eng:
        assert eng.kind == "scheduler" and addr in eng.describe()
        assert eng.parallelism == 2
        assert eng.map(operator.neg, list(range(10))) == [-i for i in range(10)]
    # closing a scheduler engine leaves the cluster running
    assert cluster.map(operator.neg, [5]) == [-5]


def test_unreachable_scheduler_fails_fast_with_a_clear_message():
    t0 = time.perf_counter()
    with pytest.raises(FaultmapError, match="cannot reach the Dask scheduler at tcp://127.0.0.1:9"):
        make_engine(scheduler="tcp://127.0.0.1:9", timeout_s=1.0)
    assert time.perf_counter() - t0 < 15.0


def test_without_dask_the_option_says_how_to_install_and_in_process_still_works(monkeypatch):
    for mod in ("dask", "dask.distributed", "distributed"):
        monkeypatch.setitem(sys.modules, mod, None)  # import now raises ImportError
    with pytest.raises(NotAvailableError, match=r"pip install 'faultmap\[dask\]'"):
        make_engine(workers=2)
    with pytest.raises(NotAvailableError, match="--scheduler"):
        make_engine(scheduler="tcp://127.0.0.1:8786")
    assert make_engine(threads=2).map(operator.neg, [1, 2]) == [-1, -2]


def _worker_settings():
    import os

    import dask

    return os.environ.get("MALLOC_TRIM_THRESHOLD_"), dask.config.get("distributed.worker.profile.enabled")


def test_local_cluster_workers_get_faultmap_settings(cluster):
    # faultmap.engine.WORKER_CONFIG reaches the worker processes: no forced malloc trimming (Dask's own
    # default is MALLOC_TRIM_THRESHOLD_=65536) and no statistical profiler; the client's config is unchanged
    import dask

    got = cluster.client.run(_worker_settings)
    assert len(got) == 2
    assert all(v == (None, False) for v in got.values())
    assert dask.config.get("distributed.nanny.pre-spawn-environ")["MALLOC_TRIM_THRESHOLD_"] == 65536


def test_thread_pool_restores_the_switch_interval():
    # the pool shortens Python's GIL switch interval while it runs, and puts it back (also after an error)
    import sys

    seen = []
    before = sys.getswitchinterval()
    make_engine(threads=2).map(lambda _: seen.append(sys.getswitchinterval()), [0, 1, 2])
    assert seen and max(seen) <= 0.001 + 1e-12
    assert sys.getswitchinterval() == before
    with pytest.raises(ValueError, match="math domain"):
        make_engine(threads=2).map(math.sqrt, [4.0, -1.0])
    assert sys.getswitchinterval() == before


def test_old_objects_frozen_freezes_only_inside_and_nests():
    # objects existing at entry go to the collector's permanent generation (gc.freeze) and come back
    # on leaving (gc.unfreeze), also after an error; nested contexts leave that to the outermost
    import gc

    from faultmap.engine import old_objects_frozen

    assert gc.get_freeze_count() == 0
    with old_objects_frozen():
        frozen = gc.get_freeze_count()
        assert frozen > 1000  # at least the objects of the imported modules
        made = [[] for _ in range(20000)]  # made inside: not frozen, and an inner context freezes nothing
        with old_objects_frozen():
            assert gc.get_freeze_count() < frozen + len(made)
        assert gc.get_freeze_count() > 1000  # the inner context did not unfreeze either
        del made
        garbage = [[]]
        garbage[0].append(garbage)  # a cycle made inside is still collected inside
        del garbage
        assert gc.collect() >= 1
    assert gc.get_freeze_count() == 0
    with pytest.raises(RuntimeError), old_objects_frozen():
        raise RuntimeError("boom")
    assert gc.get_freeze_count() == 0
