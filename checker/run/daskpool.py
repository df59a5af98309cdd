"""The Dask pool: the same per-file tasks as the local pool (checker/run/workers.py), sent to
a Dask distributed scheduler (``--cluster``: ``local:N`` or a scheduler address).

One job: run measure_task on a Dask cluster and yield ``(task, outcome)`` as files finish.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterator

from checker.meters.base import MeasureOptions
from checker.model.errors import UsageError
from checker.run import live
from checker.run.workerproc import MIB, Outcome, measure_task
from checker.run.workers import DEFAULT_MEMORY_MB, Task, longest_first


def parse_cluster(address: str) -> tuple[str, int | None]:
    """'local:N' -> ('local', N); anything else -> (address, None)."""
    if address.startswith("local:") or address == "local":
        text = address.partition(":")[2] or str(os.cpu_count() or 1)
        try:
            n = int(text)
        except ValueError:
            n = 0
        if n < 1:
            raise UsageError(
                f"cluster: workers = {text!r} (expected local:N with N >= 1)", parameter="cluster"
            )
        return "local", n
    return address, None


class DaskPool:
    """Send the same per-file task to a Dask distributed scheduler.

    ``local:N`` starts a LocalCluster (N worker processes, one thread each, no
    dashboard) for the duration of the run; any other address is passed to
    ``distributed.Client``. The files must be readable at the same paths on
    every worker. Worker crashes end as errors after Dask's own retries.
    """

    def __init__(
        self,
        address: str,
        memory_mb: int | None = DEFAULT_MEMORY_MB,
        measure_fn: Callable | None = None,
    ):
        from checker.analysis.onepass import measure

        self.address, self.local_workers = parse_cluster(address)
        self.memory_mb = memory_mb
        self.measure_fn = measure_fn or measure
        self.workers_started = 0

    def _client(self):
        try:
            from dask.distributed import Client, LocalCluster
        except ImportError:
            raise UsageError(
                "cluster: dask.distributed is not installed "
                "(expected: pip install 'deliverycheck[cluster]')",
                parameter="cluster",
            ) from None
        if self.address == "local":
            cluster = LocalCluster(
                n_workers=self.local_workers,
                threads_per_worker=1,
                processes=True,
                dashboard_address=None,
                memory_limit=(self.memory_mb * MIB) if self.memory_mb else "auto",
            )
            self.workers_started = self.local_workers or 0
            return Client(cluster), cluster
        try:
            return Client(self.address, timeout="30s"), None
        except Exception as exc:
            raise UsageError(
                f"cluster: cannot reach the Dask scheduler at {self.address} ({exc})",
                parameter="cluster",
            ) from None

    def run(
        self, tasks: list[Task], options: MeasureOptions, ledger=None
    ) -> Iterator[tuple[Task, Outcome]]:
        """``ledger``: told each file's size and, when it ends, its seconds (per file
        only: Dask tasks report nothing while they run)."""
        if not tasks:
            return
        from dask.distributed import as_completed

        for task in tasks if ledger is not None else ():
            ledger.plan(task.index, task.size_bytes)
        client, cluster = self._client()
        try:
            futures = {}
            for task in longest_first(tasks):
                fut = client.submit(measure_task, task.path, options, self.measure_fn, pure=False)
                futures[fut] = task
            for fut in as_completed(list(futures)):
                task = futures[fut]
                try:
                    outcome = fut.result()
                except Exception as exc:  # KilledWorker, lost connection ...
                    text = str(exc).strip().replace("\n", " ")
                    outcome = (
                        "error",
                        f"{task.path}: cluster task failed ({type(exc).__name__}: {text})",
                        True,
                    )
                if ledger is not None:
                    ledger.finished(task.index, *live.outcome_seconds(outcome, 0.0))
                yield task, outcome
        finally:
            client.close()
            if cluster is not None:
                cluster.close()
