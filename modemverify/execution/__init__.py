"""Where a BER campaign's blocks run, and where its state is kept.

* :mod:`~modemverify.execution.pool` -- local worker processes (``--workers N``);
* :mod:`~modemverify.execution.cluster` -- a Dask scheduler or LocalCluster (``--cluster``);
* :mod:`~modemverify.execution.worker` -- what a worker runs: its own device, opened once;
* :mod:`~modemverify.execution.campaign` -- the campaign file that ``--resume`` continues.

:class:`Execution` is the resolved choice for one device (its ``execution:`` key overlaid
with the command line) and makes the engine; the embedded default, one process and no
server, needs none of this and no extra install.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..bench import Bench
from ..blocks import Engine
from .campaign import CAMPAIGN_FILE, CampaignFile
from .cluster import INSTALL_HINT, DaskCluster, dask_available
from .pool import WorkerPool, available_cores

__all__ = [
    "Execution", "CampaignFile", "CAMPAIGN_FILE", "WorkerPool", "DaskCluster", "INSTALL_HINT",
    "dask_available", "available_cores",
]


@dataclass(frozen=True)
class Execution:
    """How one device's BER blocks run: ``workers`` processes, on ``cluster`` if given."""

    workers: int = 1
    cluster: str | None = None
    upload: bool = False
    time_budget_s: float | None = None

    @classmethod
    def of(cls, spec, *, workers=None, cluster=None, time_budget_s=None) -> "Execution":
        """The device file's ``execution:`` with the command line's choices over it."""
        given = spec.execution
        w = workers if workers is not None else given["workers"]
        if w == "auto":
            w = available_cores()
        return cls(workers=int(w), cluster=cluster if cluster is not None else given["cluster"],
                   upload=given["upload"],
                   time_budget_s=(time_budget_s if time_budget_s is not None
                                  else given["time_budget_s"]))

    @property
    def in_process(self) -> bool:
        return self.workers == 1 and self.cluster is None

    def describe(self) -> str:
        if self.cluster == "local":
            return f"a Dask LocalCluster of {self.workers} worker processes"
        if self.cluster:
            return f"the Dask cluster at {self.cluster}"
        return "one process" if self.workers == 1 else f"{self.workers} worker processes"

    def engine(self, bench: Bench) -> Engine | None:
        """The engine for ``bench``'s BER blocks; None for the bench itself, in process."""
        if self.cluster is not None:  # says how to install Dask when it is missing
            return DaskCluster(bench, self.cluster, workers=self.workers, upload=self.upload)
        if self.workers > 1:
            return WorkerPool(bench, self.workers)
        return None
