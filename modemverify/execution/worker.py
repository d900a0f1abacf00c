"""The worker side of a BER campaign: each worker process opens its own device, once.

A worker receives the run's validated :class:`~modemverify.spec.DeviceSpec` and the bench
state the run measured (:func:`~modemverify.blocks.bench_state`: the alignment and the scale),
opens the device from the spec with the spec's own adapter and guard (``isolate: true`` gives
every worker its own device process), and then computes the blocks it is sent with
:func:`~modemverify.blocks.run_block`. What goes wrong comes back as a :class:`Failure` (a
plain, picklable value), never as an exception that might not survive the trip: the run then
gives the point an error verdict that says what happened, and in which worker.
"""

from __future__ import annotations

import os
import signal
import traceback
from dataclasses import dataclass

from ..bench import Bench, open_bench
from ..blocks import BlockJob, BlockResult, apply_bench_state, run_block
from ..errors import AdapterError, ModemVerifyError
from ..spec import DeviceSpec

__all__ = ["Failure", "ignore_interrupts", "compute", "warm", "unwrap", "close_all"]


@dataclass(frozen=True)
class Failure:
    """A block a worker could not compute: what failed, and where."""

    message: str
    call: str | None = None
    input_summary: str | None = None
    stderr: str | None = None
    opening: bool = False

    def error(self, where: str) -> AdapterError:
        what = "could not open the device" if self.opening else "the device failed"
        return AdapterError(f"{where} {what}: {self.message}", call=self.call,
                            input_summary=self.input_summary, stderr=self.stderr)


#: the benches open in this process, by the key of their spec (one per device file)
_BENCHES: dict[str, Bench] = {}


def ignore_interrupts() -> None:
    """A worker leaves Ctrl-C to the run: the run stops its workers itself (a terminal's
    Ctrl-C reaches the whole process group)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def _bench(key: str, spec: DeviceSpec, state: dict) -> Bench:
    bench = _BENCHES.get(key)
    if bench is None:
        bench = apply_bench_state(open_bench(spec), state)
        _BENCHES[key] = bench
    return bench


def compute(key: str, spec: DeviceSpec, state: dict, job: BlockJob) -> BlockResult | Failure:
    """One block, on this process's bench for ``spec`` (opened on first use)."""
    try:
        bench = _bench(key, spec, state)
    except ModemVerifyError as exc:
        return Failure(getattr(exc, "raw_message", str(exc)), getattr(exc, "call", None),
                       getattr(exc, "input_summary", None), getattr(exc, "stderr", None),
                       opening=True)
    except Exception as exc:  # noqa: BLE001 -- reported, with its kind, as the point's error
        return Failure(f"{type(exc).__name__}: {exc}", opening=True)
    try:
        return run_block(bench, job)
    except AdapterError as exc:
        return Failure(exc.raw_message, exc.call, exc.input_summary, exc.stderr)
    except Exception as exc:  # noqa: BLE001 -- a harness bug in a worker: say so
        return Failure(f"internal error in worker {os.getpid()}: {type(exc).__name__}: {exc}"
                       f"\n{traceback.format_exc(limit=4)}")


def warm(key: str, spec: DeviceSpec, state: dict) -> None:
    """Open this process's bench for ``spec`` ahead of its first block; a failure is left to
    that block to report."""
    try:
        _bench(key, spec, state)
    except Exception:  # noqa: BLE001 -- reported by the first block's compute
        pass


def unwrap(out: BlockResult | Failure, where: str) -> BlockResult:
    """A worker's answer as a result, or the AdapterError of its failure (``where``: which
    worker and block, for the message)."""
    if isinstance(out, Failure):
        raise out.error(where)
    return out


def close_all() -> None:
    """Close this process's devices (at a worker's exit)."""
    while _BENCHES:
        _, bench = _BENCHES.popitem()
        bench.device.close()
