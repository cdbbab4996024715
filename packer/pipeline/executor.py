"""Where independent planning work runs: one declared interface, three implementations.

The pipeline hands an :class:`Executor` a picklable function and a list of plain-data
work items (:class:`packer.pipeline.components.PlanUnit`) and gets the results back in
the order given. The results do not depend on the executor: every budget decision of
the planner reads its work clock (:mod:`packer.fleet.clock`), never the wall clock, and
each item builds its own layout service, so the same job, seed and budget give the same
plan in-process, in a process pool or on a cluster (unless a solver's wall-clock safety
net fires; the plan's ``deterministic`` statistic says so).

- :class:`InProcess`: one item after the other in this process (the default).
- :class:`ProcessPool`: a local pool of ``workers`` processes (``--workers N``), forked from
  a fork server that imported :data:`PRELOAD` once (``spawn`` where there is no fork server),
  so no thread state of this process is copied into the workers and packer is not imported
  again for each worker.
- :class:`DaskCluster`: a running Dask distributed scheduler at ``address``
  (``--cluster ADDRESS``), started by the user (``dask scheduler``; ``dask worker
  ADDRESS`` on each machine, with packer installed). Distributed is imported only here,
  only when asked for: ``pip install 'packer[cluster]'``.

Examples
--------
>>> with executor_for() as ex:
...     ex.map(abs, [-2, 3])
[2, 3]
"""

from __future__ import annotations

import multiprocessing
from concurrent.futures import ProcessPoolExecutor
from typing import Any, Callable, Protocol, Sequence

from packer.errors import InputError, PackerError

__all__ = ["Executor", "InProcess", "ProcessPool", "DaskCluster", "executor_for", "CLUSTER_TIMEOUT_S", "PRELOAD"]

#: How long connecting to a ``--cluster`` address may take before it counts as not answering (s).
CLUSTER_TIMEOUT_S = 10.0

#: Modules the fork server of :class:`ProcessPool` imports once before forking workers: what the
#: pipeline's work items need (the fleet planner and the engines; several seconds to import).
PRELOAD = ("packer.pipeline.components",)


class Executor(Protocol):
    """Runs ``fn`` on every item and returns the results in the items' order."""

    name: str

    def map(self, fn: Callable[[Any], Any], items: Sequence) -> list:
        """``[fn(x) for x in items]``, wherever the implementation runs it."""

    def close(self) -> None:
        """Release processes or connections (the executor is not used after)."""


class _Closing:
    """Context-manager support shared by the implementations."""

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        return None


class InProcess(_Closing):
    """One item after the other in this process: the default, and the reference for the others."""

    name = "in-process"

    def map(self, fn, items):
        return [fn(x) for x in items]


def _pool_context():
    """The fork-server context with :data:`PRELOAD` (``spawn`` where there is no fork server)."""
    try:
        ctx = multiprocessing.get_context("forkserver")
    except ValueError:          # pragma: no cover - platforms without a fork server
        return multiprocessing.get_context("spawn")
    ctx.set_forkserver_preload(list(PRELOAD))
    return ctx


class ProcessPool(_Closing):
    """A local pool of ``workers`` processes (started per call from the fork server).

    One item, or one worker, runs in this process: a pool would only add start-up time.
    """

    def __init__(self, workers: int) -> None:
        if workers < 1:
            raise InputError(f"--workers must be at least 1 (got {workers})")
        self.workers = int(workers)
        self.name = f"{self.workers} local workers"

    def map(self, fn, items):
        items = list(items)
        if self.workers == 1 or len(items) <= 1:
            return [fn(x) for x in items]
        with ProcessPoolExecutor(max_workers=min(self.workers, len(items)), mp_context=_pool_context()) as pool:
            return list(pool.map(fn, items))


class DaskCluster(_Closing):
    """A Dask distributed scheduler the user started, at ``address`` (``tcp://host:8786``).

    Raises
    ------
    PackerError
        When distributed is not installed or nothing answers at ``address`` within
        :data:`CLUSTER_TIMEOUT_S`; the message names ``--cluster``.
    """

    def __init__(self, address: str, *, timeout_s: float = CLUSTER_TIMEOUT_S) -> None:
        try:
            from distributed import Client
        except ImportError:
            raise PackerError("--cluster needs the Dask distributed package, which is not installed: "
                              "pip install 'packer[cluster]' (or pip install distributed)") from None
        try:
            self.client = Client(address, timeout=f"{timeout_s:g}s", set_as_default=False)
        except (OSError, TimeoutError, ValueError) as exc:
            raise PackerError(f"--cluster {address}: no Dask scheduler answered within {timeout_s:g} s "
                              f"({type(exc).__name__}: {str(exc)[:200]}); start one with `dask scheduler` "
                              f"and workers with `dask worker {address}`") from None
        self.address = address
        self.name = f"Dask cluster at {address}"

    def map(self, fn, items):
        items = list(items)
        if not items:
            return []
        futures = self.client.map(fn, items, pure=False)
        return self.client.gather(futures)

    def close(self) -> None:
        self.client.close()


def executor_for(*, workers: int | None = None, cluster: str | None = None) -> Executor:
    """The executor the command line names: ``cluster`` (an address), ``workers`` (a local
    pool), or neither (in-process). Both at once is a usage error."""
    if workers is not None and cluster:
        raise InputError("--workers and --cluster exclude each other: name one")
    if cluster:
        return DaskCluster(cluster)
    if workers is not None:
        return ProcessPool(workers)
    return InProcess()
