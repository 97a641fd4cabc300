"""Execution engines: in-process, threads and a local Dask cluster give the same, ordered results."""

from __future__ import annotations

import math
import operator

import numpy as np
import pytest

from faultmap.engine import make_engine
from faultmap.errors import FaultmapError, ParameterError

BATCHES = [np.arange(k, k + 50, dtype=float) for k in range(0, 400, 50)]


def test_in_process_and_threads_identical_and_ordered():
    a = make_engine().map(np.cumsum, BATCHES)
    b = make_engine(threads=2).map(np.cumsum, BATCHES)
    for x, y, src in zip(a, b, BATCHES):
        np.testing.assert_array_equal(x, y)
        np.testing.assert_array_equal(x, np.cumsum(src))  # reference: numpy itself


def test_bad_engine_options():
    with pytest.raises(ParameterError):
        make_engine(workers=0)
    with pytest.raises(ParameterError, match="not both"):
        make_engine(workers=2, scheduler="tcp://127.0.0.1:1")


def test_local_cluster_matches_in_process_and_reports_failures():
    ref = make_engine().map(np.cumsum, BATCHES)
    with make_engine(workers=2) as eng:
        assert eng.kind == "local-cluster"
        got = eng.map(np.cumsum, BATCHES)
        for x, y in zip(ref, got):
            np.testing.assert_array_equal(x, y)
        with pytest.raises(FaultmapError, match="worker failed"):
            eng.map(math.sqrt, [4.0, -1.0, 9.0])
        # the engine still works after a failed run (a rerun succeeds)
        assert eng.map(operator.neg, [1, 2, 3]) == [-1, -2, -3]
