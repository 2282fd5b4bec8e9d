"""Where a screen runs: this process (``local``) or a Dask cluster (``dask``), with the same results.

The pipeline (:func:`pointsift.pipeline.screen_frame`) is one code path. It
asks its engine for the two stages that are per point and need nothing
global in between, and computes everything else once over the whole layer
and hands it to them:

* the neighbour graph (:meth:`Engine.build_graph`): the local engine calls
  :func:`pointsift.graph.build_graph`; the Dask engine cuts the layer into
  spatial partitions (Hilbert order, ``partition_size`` points) and builds
  each partition's rows on a worker over the partition and an exact halo,
  widened and retried where a neighbourhood was not exact
  (:mod:`pointsift.partition`);
* the permutation counts of Local Moran's I / Gi*
  (:meth:`Engine.permutation_counts`): the standardized values in sorted
  order (global: mean and variance over every point) are sent once to every
  worker; each worker counts its rows' draws from their own per-point
  streams (:mod:`pointsift.methods.autocorr`), so a row's p-value cannot
  depend on which worker or partition counted it. Benjamini-Hochberg then
  runs over all points, in this process.

Global quantities (robust scale, the trend surface, variograms, the lag-pair
screen, strips, Benjamini-Hochberg) and the local residual (whose robust
floors and distance scale are medians over every point, taken inside each
pass) run in the calling process on the whole layer. docs/scale.md says what
this costs and what is next.
"""

from __future__ import annotations

import os
from contextlib import contextmanager

import numpy as np

from .errors import ConfigError
from .graph import build_graph

__all__ = ["Engine", "LocalEngine", "DaskEngine", "open_engine", "dask_client"]


class Engine:
    """The stages an engine runs; the local engine runs them here, in this process."""

    name = "local"

    def build_graph(self, xy, **options):
        """The neighbour graph (same arguments and result as :func:`pointsift.graph.build_graph`)."""
        return build_graph(xy, **options)

    #: ``None``: :func:`pointsift.methods.autocorr.local_autocorrelation` counts in this process.
    permutation_counts = None

    def record(self) -> dict:
        """The run record's ``engine`` entry."""
        return {"name": self.name}


LocalEngine = Engine


def _dask_missing() -> ConfigError:
    return ConfigError("The dask engine needs the optional Dask packages: install them with "
                       "pip install 'pointsift[dask]', or run with the local engine.")


@contextmanager
def dask_client(scheduler: str | None = None, *, workers: int | None = None):
    """A ``distributed.Client``: connected to ``scheduler``, or to a local cluster started here and closed after.

    The local cluster has one single-threaded worker process per core
    (``workers`` to choose), on the loopback interface, with any dashboard on a free port.
    """
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise _dask_missing() from None
    if scheduler is not None:
        try:
            client = Client(scheduler, timeout="20s")
        except (OSError, TimeoutError) as exc:
            raise ConfigError(f"No Dask scheduler answered at {scheduler} ({exc}). Check the address "
                              "(e.g. tcp://10.0.0.5:8786) and that the scheduler runs, or leave the "
                              "scheduler out to start a local cluster.") from None
        try:
            yield client
        finally:
            client.close()
        return
    count = workers or max(1, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1)
    with LocalCluster(n_workers=count, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=":0") as cluster, Client(cluster) as client:
        yield client


class DaskEngine(Engine):
    """Stages on a ``distributed`` cluster (see the module notes).

    Parameters
    ----------
    client : distributed.Client
    partition_size : int
        Points per spatial partition.
    """

    name = "dask"

    def __init__(self, client, partition_size: int) -> None:
        self.client = client
        self.partition_size = int(partition_size)
        self.graphs = []

    def map(self, function, items):
        """Run ``function(*item)`` for every item on the cluster; results in order."""
        futures = [self.client.submit(function, *item, pure=False) for item in items]
        return self.client.gather(futures)

    def build_graph(self, xy, **options):
        from .partition import partitioned_graph, spatial_partitions

        options.pop("workers", None)
        graph, plan = partitioned_graph(xy, partitions=spatial_partitions(xy, self.partition_size), mapper=self.map,
                                        **options)
        self.graphs.append(plan)
        return graph

    def permutation_counts(self, z_sorted, self_pos, observed, k_rows, keys, permutations, extended, seed, tolerance):
        """:func:`pointsift.methods.autocorr` counts on the workers: rows of one neighbour count
        per task (each task draws that count's candidates once), at most ``partition_size`` rows each."""
        from .methods.autocorr import _conditional_counts

        order = np.argsort(k_rows, kind="stable")
        starts = np.flatnonzero(np.r_[True, np.diff(k_rows[order]) != 0])
        tasks = []
        for group in np.split(order, starts[1:]):
            tasks.extend(np.array_split(group, max(1, int(np.ceil(group.size / self.partition_size)))))
        shared = self.client.scatter(z_sorted, broadcast=True)
        futures = [self.client.submit(_conditional_counts, shared, self_pos[t], observed[t], k_rows[t], keys[t],
                                      permutations, extended, seed, tolerance, pure=False) for t in tasks if t.size]
        results = self.client.gather(futures)
        counts = tuple(np.zeros(observed.size, dtype=np.int64) for _ in range(3))
        for rows, result in zip((t for t in tasks if t.size), results):
            for out, part in zip(counts, result):
                out[rows] = part
        return counts

    def record(self) -> dict:
        info = self.client.scheduler_info()
        return {
            "name": self.name,
            "workers": len(info.get("workers", {})),
            "partition_size": self.partition_size,
            "graphs": [{"partitions": p.partitions, "halo_rounds": p.rounds, "rows_retried": p.retried_rows,
                        "halo_widths_m": [round(w, 3) for w in p.widths], "largest_task_points": p.largest_subset}
                       for p in self.graphs],
        }


@contextmanager
def open_engine(config):
    """The engine ``config.engine`` names, open for one run (a local cluster is closed after it)."""
    if config.engine != "dask":
        yield Engine()
        return
    with dask_client(config.scheduler) as client:
        yield DaskEngine(client, config.partition_size)
