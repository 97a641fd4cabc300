"""Where batches of work run: in-process (default), or on a Dask cluster.

Tools hand the engine a pure function and a list of batches; the engine
returns the results in the order of the batches, so outputs are identical
whatever runs them. Only the client (this process) writes outputs.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

from faultmap.errors import FaultmapError, ParameterError

__all__ = ["Engine", "make_engine"]


class Engine:
    """Runs ``func(batch)`` over batches, in order.

    Parameters
    ----------
    workers : int, optional
        Start a local Dask cluster with this many worker processes.
    scheduler : str, optional
        Address of an existing Dask scheduler (``tcp://host:8786``).
    threads : int, optional
        In-process thread pool size (default 1: sequential).
    """

    def __init__(self, *, workers: int | None = None, scheduler: str | None = None, threads: int | None = None):
        if workers is not None and workers < 1:
            raise ParameterError(f"workers must be >= 1, got {workers}.")
        if threads is not None and threads < 1:
            raise ParameterError(f"threads must be >= 1, got {threads}.")
        if workers is not None and scheduler is not None:
            raise ParameterError("give either workers (a local cluster) or scheduler (an existing one), not both.")
        self.workers = workers
        self.scheduler = scheduler
        self.threads = threads or 1
        self._client = None
        self._cluster = None
        if workers is not None or scheduler is not None:
            try:
                from dask.distributed import Client, LocalCluster
            except ImportError as exc:
                raise FaultmapError(
                    "the Dask engine needs the optional extra: pip install 'faultmap[dask]'."
                ) from exc
            if scheduler is not None:
                try:
                    self._client = Client(scheduler, timeout="20s")
                except OSError as exc:
                    raise FaultmapError(f"cannot reach the Dask scheduler at {scheduler} ({exc}).") from exc
            else:
                self._cluster = LocalCluster(
                    n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None
                )
                self._client = Client(self._cluster)

    @property
    def kind(self) -> str:
        """``in-process``, ``local-cluster`` or ``scheduler``."""
        if self.scheduler is not None:
            return "scheduler"
        return "local-cluster" if self.workers is not None else "in-process"

    def describe(self) -> str:
        """One line for run_info."""
        if self.kind == "in-process":
            return f"in-process, {self.threads} thread(s)"
        if self.kind == "local-cluster":
            return f"local Dask cluster, {self.workers} worker process(es)"
        return f"Dask scheduler at {self.scheduler}"

    def map(self, func: Callable[[Any], Any], batches: Sequence[Any], *, progress=None) -> list:
        """``[func(b) for b in batches]``, possibly in parallel; order kept.

        A failing batch raises its error here (the run then fails as a whole
        and writes nothing).
        """
        batches = list(batches)
        wrap = progress or (lambda it, total: it)
        if self._client is not None:
            from dask.distributed import as_completed

            futures = self._client.map(func, batches, pure=False)
            index = {f.key: i for i, f in enumerate(futures)}
            out: list = [None] * len(batches)
            try:
                for fut in wrap(as_completed(futures), len(futures)):
                    out[index[fut.key]] = fut.result()
            except FaultmapError:
                self._client.cancel(futures)
                raise
            except Exception as exc:
                self._client.cancel(futures)
                raise FaultmapError(f"a worker failed: {type(exc).__name__}: {exc}; nothing was written.") from exc
            return out
        if self.threads > 1:
            from concurrent.futures import ThreadPoolExecutor

            with ThreadPoolExecutor(self.threads) as ex:
                return list(wrap(ex.map(func, batches), len(batches)))
        return [func(b) for b in wrap(batches, len(batches))]

    def close(self) -> None:
        """Shut down a cluster this engine started."""
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


def make_engine(*, workers: int | None = None, scheduler: str | None = None, threads: int | None = None) -> Engine:
    """Build the engine described by CLI options or a project's ``[engine]`` table."""
    return Engine(workers=workers, scheduler=scheduler, threads=threads)
