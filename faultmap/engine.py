"""Where batches of work run: in-process (default), or on a Dask cluster.

Tools hand the engine a pure function and a list of batches; the engine
returns the results in the order of the batches, so outputs are identical
whatever runs them. Only the client (this process) writes outputs.

Three kinds of engine:

* ``in-process`` (default): a small thread pool (``threads``; by default
  one thread per core, at most 4, see :func:`default_threads`; 1 = a plain
  loop); needs nothing beyond faultmap's own dependencies. The throw
  step's compiled kernels release the GIL, so its batches run in parallel.
* ``local-cluster`` (``workers=N``): starts a Dask ``LocalCluster`` of N
  single-threaded worker processes on this machine for the run.
* ``scheduler`` (``scheduler="tcp://host:8786"``): connects to an existing
  Dask scheduler; every worker must be able to import faultmap and read the
  input files at the same paths (absolute local paths on shared storage, or
  URLs). Before the first batch, :meth:`Engine.check_worker_access` asks one
  worker to open the inputs the workers read, so a path only the client sees
  stops the run with one line instead of failing mid-run.

Dask (``pip install 'faultmap[dask]'``) is only imported for the last two.
"""

from __future__ import annotations

import contextlib
import logging
import threading
import warnings
from collections.abc import Callable, Sequence
from typing import Any

from faultmap.errors import FaultmapError, NotAvailableError, ParameterError

__all__ = [
    "Engine",
    "make_engine",
    "engine_map",
    "run_capturing_warnings",
    "default_threads",
    "old_objects_frozen",
    "DASK_HINT",
    "probe_inputs",
]

#: How to get the optional Dask dependencies.
DASK_HINT = "pip install 'faultmap[dask]'"
#: Dask settings for the workers of the local cluster faultmap starts (and recommended for
#: existing clusters, see docs/cluster.md). Dask's nannies give workers MALLOC_TRIM_THRESHOLD_=65536,
#: which makes glibc hand every freed block back to the system, so each large temporary array faults
#: its pages in again (measured: ~40 % more CPU in the throw batches, a third of it in the kernel);
#: None unsets it. The worker's statistical profiler samples the task thread's stack every 10 ms
#: under the GIL; measured, the batches' thread then ran only ~60 % of their wall time.
WORKER_CONFIG = {
    "distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None,
    "distributed.worker.profile.enabled": False,
}
#: Python's GIL switch interval while the in-process thread pool runs, s (Python's default: 0.005).
SWITCH_INTERVAL_S = 0.001
#: Most in-process threads used unless asked for (more mostly multiply the memory in use).
MAX_DEFAULT_THREADS = 4


_FREEZE_LOCK = threading.Lock()
_FREEZE_DEPTH = 0


@contextlib.contextmanager
def old_objects_frozen():
    """Keep Python's cyclic garbage collector off the objects that existed before a step.

    A step that creates tens of thousands of objects (one shapely point per
    station) triggers full collections, and each full collection walks every
    object of the process: measured ~80 ms each on the throw benchmark, in
    about half the runs, with every thread stopped meanwhile. Inside this
    context the objects that existed at its start are moved to the
    collector's permanent generation (``gc.freeze``, Python >= 3.7), so
    collections walk only the step's own objects; on leaving, they return
    to the oldest generation (``gc.unfreeze``), so nothing is kept alive
    longer than without it. Re-entrant: only the outermost context freezes
    and unfreezes.
    """
    import gc

    global _FREEZE_DEPTH
    with _FREEZE_LOCK:
        _FREEZE_DEPTH += 1
        if _FREEZE_DEPTH == 1:
            gc.freeze()
    try:
        yield
    finally:
        with _FREEZE_LOCK:
            _FREEZE_DEPTH -= 1
            if _FREEZE_DEPTH == 0:
                gc.unfreeze()


def default_threads() -> int:
    """In-process threads when none are asked for: the cores this process may use, at most 4."""
    import os

    try:
        n = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # pragma: no cover - not Linux
        n = os.cpu_count() or 1
    return max(1, min(int(n), MAX_DEFAULT_THREADS))


def run_capturing_warnings(func: Callable[[Any], Any], batch: Any) -> tuple[Any, list]:
    """Run ``func(batch)`` and return ``(result, warnings)``.

    What a Dask worker runs for each batch: warnings raised on a worker would
    otherwise be lost, so they travel back with the result and the engine
    raises them again on the client, in batch order. Every
    :class:`~faultmap.errors.FaultmapWarning` is kept (the run records each
    one, as in-process); other warnings follow the worker's filters.

    Returns
    -------
    result : object
        What ``func`` returned.
    warnings : list of (str, type, str, int)
        Message, category, file name and line number of each warning.
    """
    from faultmap.errors import FaultmapWarning

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FaultmapWarning)
        out = func(batch)
    return out, [(str(w.message), w.category, str(w.filename), int(w.lineno or 0)) for w in caught]


class Engine:
    """Runs ``func(batch)`` over batches, in order.

    Parameters
    ----------
    workers : int, optional
        Start a local Dask cluster with this many single-threaded worker
        processes (closed with :meth:`close` or at the end of a ``with``).
    scheduler : str, optional
        Address of an existing Dask scheduler (``tcp://host:8786``).
    threads : int, optional
        In-process thread pool size (default :func:`default_threads`: one
        per core, at most 4; 1 = sequential). Ignored by the Dask engines
        (their workers decide).
    timeout_s : float
        How long to wait for an existing scheduler to answer, s.

    Raises
    ------
    ParameterError
        Bad numbers, or both ``workers`` and ``scheduler``.
    NotAvailableError
        ``workers`` or ``scheduler`` without Dask installed (the message
        says how to install it).
    FaultmapError
        The scheduler cannot be reached.
    """

    def __init__(
        self,
        *,
        workers: int | None = None,
        scheduler: str | None = None,
        threads: int | None = None,
        timeout_s: float = 20.0,
    ):
        if workers is not None and (isinstance(workers, bool) or int(workers) != workers or workers < 1):
            raise ParameterError(f"workers must be a whole number >= 1, got {workers}.")
        if threads is not None and (isinstance(threads, bool) or int(threads) != threads or threads < 1):
            raise ParameterError(f"threads must be a whole number >= 1, got {threads}.")
        if workers is not None and scheduler is not None:
            raise ParameterError("give either workers (a local cluster) or scheduler (an existing one), not both.")
        if scheduler is not None and (not isinstance(scheduler, str) or not scheduler.strip()):
            raise ParameterError(f"scheduler must be an address such as tcp://host:8786, got {scheduler!r}.")
        self.workers = None if workers is None else int(workers)
        self.scheduler = scheduler
        self.timeout_s = float(timeout_s)
        self.threads = default_threads() if threads is None else int(threads)
        self._client = None
        self._cluster = None
        if workers is not None or scheduler is not None:
            try:
                from dask.distributed import Client, LocalCluster
            except ImportError as exc:
                opt = "--workers" if workers is not None else "--scheduler"
                raise NotAvailableError(
                    f"{opt} runs on Dask, which is not installed: {DASK_HINT} (or run without {opt}, in-process)."
                ) from exc
            if scheduler is not None:
                try:
                    self._client = Client(scheduler, timeout=f"{float(timeout_s)}s", set_as_default=False)
                except (OSError, TimeoutError, ValueError) as exc:
                    raise FaultmapError(
                        f"cannot reach the Dask scheduler at {scheduler} ({type(exc).__name__}: {exc}); "
                        "check the address and that the scheduler is running."
                    ) from exc
            else:
                import dask

                # loopback only, no dashboard, quiet logs: a private cluster for this run, with two of
                # Dask's worker defaults changed (see WORKER_CONFIG)
                with dask.config.set(WORKER_CONFIG):
                    self._cluster = self._local_cluster(LocalCluster)
                self._client = Client(self._cluster, set_as_default=False)

    def _local_cluster(self, LocalCluster):
        """Start the private local cluster of single-threaded worker processes."""
        return LocalCluster(
            n_workers=self.workers,
            threads_per_worker=1,
            processes=True,
            host="127.0.0.1",
            dashboard_address=None,
            scheduler_kwargs={"dashboard": False, "dashboard_address": "127.0.0.1:0"},
            silence_logs=logging.CRITICAL,  # worker errors reach the client as exceptions
        )

    # ------------------------------------------------------------------ description
    @property
    def kind(self) -> str:
        """``in-process``, ``local-cluster`` or ``scheduler``."""
        if self.scheduler is not None:
            return "scheduler"
        return "local-cluster" if self.workers is not None else "in-process"

    @property
    def parallelism(self) -> int:
        """How many batches can run at once (threads, or worker threads of the cluster)."""
        if self._client is None:
            return self.threads
        try:
            n = sum(self._client.nthreads().values())
        except Exception:  # noqa: BLE001 - a lost scheduler shows up in map()
            n = 0
        return max(int(n), 1)

    def describe(self) -> str:
        """One line for run_info."""
        if self.kind == "in-process":
            return f"in-process, {self.threads} thread(s)"
        if self.kind == "local-cluster":
            return f"local Dask cluster, {self.workers} worker process(es)"
        return f"Dask scheduler at {self.scheduler}"

    @property
    def client(self):
        """The ``dask.distributed.Client`` (None in-process)."""
        return self._client

    # ------------------------------------------------------------------ checks
    def check_worker_access(self, locations: dict, *, timeout_s: float = 120.0) -> None:
        """Ask one worker to open each input it will read; stop with one line if it cannot.

        Nothing to do in-process (the client's own checks hold). On Dask, one task on one worker
        opens each location with GDAL (:func:`probe_inputs`), exactly as the batches will.

        Parameters
        ----------
        locations : dict
            ``{input kind: absolute path or URL}``, as the batches will carry them.
        timeout_s : float
            How long to wait for the worker's answer, s (opening a remote file may take a while).

        Raises
        ------
        InputFileError
            A worker cannot open an input; the message names it and what GDAL answered there.
        FaultmapError
            No worker answered.
        """
        if self._client is None or not locations:
            return
        from faultmap.errors import InputFileError

        items = sorted((str(k), str(v)) for k, v in locations.items())
        try:
            self._client.wait_for_workers(1, timeout=self.timeout_s)
            fut = self._client.submit(probe_inputs, items, pure=False)
            answers = fut.result(timeout=timeout_s)
        except Exception as exc:  # noqa: BLE001 - timeouts and lost connections alike
            raise FaultmapError(
                f"no Dask worker answered the input check within {self.timeout_s + timeout_s:g} s ({self.describe()}: "
                f"{type(exc).__name__}: {' '.join(str(exc).split())}); start workers or check the scheduler."
            ) from exc
        for kind, location, worker, problem in answers:
            if problem is not None:
                raise InputFileError(
                    f"workers cannot read {location} (input '{kind}'; on worker {worker}: {problem}): give a path "
                    "on storage the workers share, or a URL."
                )

    # ------------------------------------------------------------------ running
    def map(self, func: Callable[[Any], Any], batches: Sequence[Any], *, progress=None) -> list:
        """``[func(b) for b in batches]``, possibly in parallel; order kept.

        Parameters
        ----------
        func : callable
            A function defined at module level in an importable package
            (Dask workers import it by name); it must not rely on state of
            this process other than its argument.
        batches : sequence
            Picklable work items (paths and geometries, never open datasets).
        progress : callable, optional
            ``progress(iterable, total) -> iterable`` wrapper (progress bar).

        Returns
        -------
        list
            ``func(batch)`` for each batch, in the order of ``batches``.

        Raises
        ------
        FaultmapError
            A batch failed: its own FaultmapError (the message names the
            batch and the worker), or any other error turned into one. The
            remaining batches are cancelled; nothing has been written.
        """
        batches = list(batches)
        wrap = progress or (lambda it, total: it)
        if not batches:
            return []
        if self._client is not None:
            return self._map_dask(func, batches, wrap)
        if self.threads > 1 and len(batches) > 1:
            return self._map_threads(func, batches, wrap)
        return [func(b) for b in wrap(batches, len(batches))]

    def _map_threads(self, func, batches, wrap) -> list:
        import sys
        from concurrent.futures import ThreadPoolExecutor

        # Batches alternate between compiled kernels (GIL released) and short stretches of Python;
        # with Python's default 5 ms switch interval a thread wanting the GIL back can idle up to
        # 5 ms each time. 1 ms while the pool runs: measured ~14 % faster on 2 threads.
        old = sys.getswitchinterval()
        sys.setswitchinterval(min(old, SWITCH_INTERVAL_S))
        ex = ThreadPoolExecutor(min(self.threads, len(batches)))
        futures = [ex.submit(func, b) for b in batches]
        try:
            out = [f.result() for f in wrap(iter(futures), len(futures))]
        except BaseException:
            ex.shutdown(wait=True, cancel_futures=True)
            raise
        finally:
            sys.setswitchinterval(old)
        ex.shutdown(wait=True)
        return out

    def _map_dask(self, func, batches, wrap) -> list:
        from functools import partial

        from dask.distributed import as_completed

        n = len(batches)
        task = partial(run_capturing_warnings, func)
        futures = self._client.map(task, batches, pure=False)
        index = {f.key: i for i, f in enumerate(futures)}
        out: list = [None] * n
        caught: list = [None] * n
        i = -1
        try:
            with self._client.as_current():
                for fut in wrap(as_completed(futures), n):
                    i = index[fut.key]
                    out[i], caught[i] = fut.result()
                    i = -1  # a later error not raised by a batch (lost connection) names none
        except KeyboardInterrupt:
            self._client.cancel(futures)
            raise
        except Exception as exc:
            self._client.cancel(futures)
            raise _worker_error(exc, i, n, self.describe()) from exc
        del futures
        from faultmap.errors import FaultmapWarning

        seen: set = set()
        for ws in caught:
            for msg, cat, filename, lineno in ws or ():
                # every FaultmapWarning (as in-process); others once, like Python's default filter
                key = (msg, cat, filename, lineno)
                if not issubclass(cat, FaultmapWarning):
                    if key in seen:
                        continue
                    seen.add(key)
                warnings.warn_explicit(msg, cat, filename, lineno, module=_module_of(filename))
        return out

    # ------------------------------------------------------------------ lifetime
    def close(self) -> None:
        """Disconnect; shut down a cluster this engine started."""
        if self._client is not None:
            self._client.close()
            self._client = None
        if self._cluster is not None:
            self._cluster.close()
            self._cluster = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def probe_inputs(items) -> list[tuple[str, str, str, str | None]]:
    """Open each ``(kind, location)`` with GDAL here (what a worker runs for :meth:`Engine.check_worker_access`).

    Returns
    -------
    list of (kind, location, worker, problem)
        ``problem`` is None when the input opened, else GDAL's answer on one line; ``worker`` is
        this worker's address (or the host name outside Dask).
    """
    import os
    import socket

    from faultmap.io.locations import RASTER_KINDS, gdal_path, location_kind, remote_options

    try:
        from dask.distributed import get_worker

        where = str(get_worker().address)
    except Exception:  # noqa: BLE001 - not on a Dask worker
        where = socket.gethostname()
    out = []
    for kind, location in items:
        problem = None
        try:
            if location_kind(location) == "local" and not os.path.exists(location):
                raise FileNotFoundError(f"no such file in {os.getcwd()}" if not os.path.isabs(location) else "no such file")
            if kind in RASTER_KINDS:
                import rasterio

                with rasterio.Env(**remote_options(location)), rasterio.open(gdal_path(location)):
                    pass
            else:
                import pyogrio

                pyogrio.list_layers(gdal_path(location))
        except Exception as exc:  # noqa: BLE001 - reported to the client as text
            problem = " ".join(str(exc).split()) or type(exc).__name__
        out.append((kind, location, where, problem))
    return out


def _module_of(filename: str) -> str:
    """Return a module name for ``warn_explicit`` from a file name (for the warning filters)."""
    import os

    return os.path.splitext(os.path.basename(filename))[0] or "faultmap"


def _worker_error(exc: Exception, i: int, n: int, where: str) -> Exception:
    """Build a one-line FaultmapError for a failed batch (keeping the class of faultmap's own errors)."""
    at = f"batch {i + 1} of {n}" if i >= 0 else f"one of {n} batches"
    tail = f"({at}, {where}); the run stopped and nothing was written."
    text = " ".join(str(exc).split())  # one line
    if isinstance(exc, FaultmapError):
        try:
            return type(exc)(f"{text.rstrip('.')} {tail}")
        except Exception:  # noqa: BLE001 - an error class with another signature
            return FaultmapError(f"{text} {tail}")
    name = type(exc).__name__
    if name == "KilledWorker":
        return FaultmapError(
            f"a Dask worker died running {at} ({where}), e.g. out of memory; lower memory_budget_mb or give "
            "the workers more memory. The run stopped and nothing was written."
        )
    return FaultmapError(f"a worker failed on {at} ({where}): {name}: {text}; the run stopped and nothing was written.")


def make_engine(
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    threads: int | None = None,
    timeout_s: float = 20.0,
) -> Engine:
    """Build the engine described by CLI options or a project's ``[engine]`` table.

    Parameters
    ----------
    workers : int, optional
        Local Dask cluster with this many worker processes (``--workers``).
    scheduler : str, optional
        Existing Dask scheduler address (``--scheduler``).
    threads : int, optional
        In-process threads.
    timeout_s : float
        Connection timeout for ``scheduler``, s.

    Returns
    -------
    Engine
        Close it (or use it in a ``with`` block) to stop a local cluster.
    """
    return Engine(workers=workers, scheduler=scheduler, threads=threads, timeout_s=timeout_s)


def engine_map(engine: Engine | None, func: Callable[[Any], Any], batches: Sequence[Any], *, progress=None) -> list:
    """``engine.map(func, batches)``, or a plain ordered loop when ``engine`` is None."""
    if engine is None:
        batches = list(batches)
        it = batches if progress is None else progress(batches, len(batches))
        return [func(b) for b in it]
    return engine.map(func, batches, progress=progress)
