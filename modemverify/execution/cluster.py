"""A Dask cluster: the same BER blocks on a Dask distributed scheduler.

``--cluster ADDRESS`` connects to a running scheduler (``tcp://host:8786``); ``--cluster
local`` starts a :class:`distributed.LocalCluster` of worker processes on this machine (one
thread each). Dask is an optional extra: ``pip install 'modemverify[cluster]'``.

How workers reach the device: every worker runs
:func:`modemverify.execution.worker.compute`, which opens the device from the device file's
spec, so every worker needs modemverify (the same version) and whatever the device file
points at, at the same path: a shared file system, or an image with both installed. A python
target that is a single file (``target: port.py:Modem``) is uploaded to the workers
(:meth:`distributed.Client.upload_file`) when ``execution: {upload: true}`` is set; a shared
library or a device program is not uploaded (it is machine code for the workers' platform).

The blocks and their streams are those of one process (:mod:`modemverify.blocks`), so the
verdicts are the same, field by field, as with one worker.
"""

from __future__ import annotations


from ..bench import Bench
from ..blocks import Engine, bench_state
from ..errors import AdapterError, ConfigError
from . import worker
from .pool import RunAhead, spec_key

__all__ = ["INSTALL_HINT", "DaskCluster", "dask_available"]

INSTALL_HINT = "pip install 'modemverify[cluster]'"


def dask_available() -> bool:
    try:
        import distributed  # noqa: F401
    except ImportError:
        return False
    return True


def _distributed():
    try:
        import distributed
    except ImportError:
        raise ConfigError(f"a Dask cluster needs the optional extra: {INSTALL_HINT}",
                          key="execution.cluster") from None
    return distributed


class DaskCluster(Engine):
    """Blocks on a Dask scheduler at ``address``, or on a LocalCluster (``address="local"``)
    of ``workers`` processes."""

    def __init__(self, bench: Bench, address: str, *, workers: int = 2, upload: bool = False):
        distributed = _distributed()
        self._local = None
        if address == "local":
            self._local = distributed.LocalCluster(
                n_workers=int(workers), threads_per_worker=1, processes=True,
                dashboard_address=None, silence_logs=40)
            self._client = distributed.Client(self._local)
            self.workers = int(workers)
        else:
            try:
                self._client = distributed.Client(address, timeout=30)
            except (OSError, TimeoutError) as exc:
                raise ConfigError(f"cannot reach the Dask scheduler at {address!r}: {exc}",
                                  key="execution.cluster") from None
            self.workers = max(1, sum(w.get("nthreads", 1) for w in
                                      self._client.scheduler_info()["workers"].values()))
        if upload:
            self._upload(bench)
        self._key = spec_key(bench.spec)
        # sent to every worker once, not with every block
        self._spec, self._state = self._client.scatter([bench.spec, bench_state(bench)],
                                                       broadcast=True)

    def _upload(self, bench: Bench) -> None:
        target = bench.spec.target or ""
        path = target.rsplit(":", 1)[0]
        if bench.spec.adapter == "python" and path.endswith(".py"):
            self._client.upload_file(str(bench.spec.resolve(path)))

    def results(self, jobs):
        ahead = RunAhead(jobs, lambda job: self._client.submit(
            worker.compute, self._key, self._spec, self._state, job, pure=False,
            key=f"modemverify-{job.point}-{job.index}-{id(self)}"), 3 * self.workers)
        try:
            for job, future in ahead:
                try:
                    out = future.result()
                except Exception as exc:  # noqa: BLE001 -- a lost worker, a killed task
                    raise AdapterError(f"the Dask cluster lost block {job.index} of "
                                       f"{job.point}: {type(exc).__name__}: {exc}") from None
                yield worker.unwrap(out, f"a Dask worker (block {job.index} of {job.point})")
        finally:
            if ahead.pending:  # Dask cancels running and pending tasks alike
                self._client.cancel([f for _, f in ahead.pending])

    def close(self) -> None:
        client, self._client = getattr(self, "_client", None), None
        if client is not None:
            client.close()
        if self._local is not None:
            self._local.close()
            self._local = None
