"""Wiring: open a device, run every check that applies, collect Verdicts.

Every random draw of a run comes from one seed: check ``name`` gets the stream
``SeedSequence(seed, spawn_key=(crc32(name),))``, so turning one check off or on does not change
what the others draw, and ``--seed`` reproduces any verdict exactly.
"""

from __future__ import annotations

import time
import traceback
import zlib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ._version import __version__
from .adapters.python import PythonAdapter
from .bench import Bench, open_bench
from .config import load_device, parse_device
from .errors import AdapterError
from .oracles import ORACLES
from .spec import DeviceSpec
from .verdict import GATING, Verdict

DEFAULT_SEED = 1


@dataclass
class RunResult:
    """Everything one device's run produced."""

    spec: DeviceSpec
    verdicts: list[Verdict]
    seed: int
    duration_s: float = 0.0
    device_time_s: float = 0.0
    version: str = __version__
    notes: list[str] = field(default_factory=list)

    @property
    def gating(self) -> list[Verdict]:
        bad = set(GATING) | ({"inconclusive"} if self.spec.fail_on_inconclusive else set())
        return [v for v in self.verdicts if v.outcome in bad]

    @property
    def ok(self) -> bool:
        return not self.gating

    def counts(self) -> dict[str, int]:
        out: dict[str, int] = {}
        for v in self.verdicts:
            out[v.outcome] = out.get(v.outcome, 0) + 1
        return out


def check_seed(seed: int, name: str) -> np.random.SeedSequence:
    return np.random.SeedSequence(seed, spawn_key=(zlib.crc32(name.encode()),))


def run_oracle(oracle, bench: Bench, opts: dict, seed: int) -> list[Verdict]:
    """Run one oracle; a misbehaving device or a harness bug becomes an error verdict."""
    ss = check_seed(seed, oracle.name)
    rng = np.random.default_rng(ss)
    t0 = time.perf_counter()
    try:
        why_not = oracle.skip_reason(bench)
        if why_not:
            verdicts = [Verdict(oracle.name, "skipped", why_not, seed=seed)]
        else:
            verdicts = oracle.run(bench, opts, rng, seed)
    except AdapterError as exc:
        verdicts = [Verdict(oracle.name, "error", f"the device failed: {exc}", seed=seed,
                            details={"call": exc.call, "input": exc.input_summary,
                                     "stderr": exc.stderr})]
    except Exception as exc:  # a bug in modemverify itself: report it, keep the other verdicts
        verdicts = [Verdict(oracle.name, "error",
                            f"internal error in the {oracle.name} check: "
                            f"{type(exc).__name__}: {exc}", seed=seed,
                            details={"traceback": traceback.format_exc(limit=6)})]
    took = time.perf_counter() - t0
    return [v.with_(duration_s=took / len(verdicts)) for v in verdicts]


def check(device: DeviceSpec | str | Path, *, seed: int = DEFAULT_SEED,
          only: list[str] | None = None, on_verdict=None, adapter=None,
          progress=None) -> RunResult:
    """Run every check that applies to ``device`` and return the verdicts.

    Parameters
    ----------
    device : DeviceSpec or path
        A validated spec, or the path of a device file.
    seed : int
        Seed of every random draw in the run.
    only : list of str, optional
        Run just these checks.
    on_verdict : callable, optional
        Called with each Verdict as soon as it exists (progress output, incremental JUnit).
    adapter : ModemAdapter, optional
        An adapter already open; by default the spec's adapter opens the device.
    progress : callable, optional
        ``progress(name, fraction, text)`` for long checks (the command line's progress bar).

    Raises
    ------
    ConfigError
        For a bad device file or an unimportable target.

    Examples
    --------
    >>> from modemverify.config import parse_device
    >>> spec = parse_device({"name": "ref", "adapter": "reference",
    ...                      "scheme": {"modulation": "qpsk", "convention": "3gpp"}})
    >>> result = check(spec)
    >>> result.ok, sorted(result.counts())
    (True, ['pass'])
    """
    spec = device if isinstance(device, DeviceSpec) else load_device(device)
    t0 = time.perf_counter()
    verdicts: list[Verdict] = []

    def emit(vs):
        for v in vs:
            verdicts.append(v)
            if on_verdict:
                on_verdict(v)

    try:
        bench = open_bench(spec, adapter)
        if progress is not None:
            bench.progress = progress
    except AdapterError as exc:
        emit([Verdict("device.open", "error", f"the device could not be opened: {exc}",
                      seed=seed)])
        return RunResult(spec, verdicts, seed, time.perf_counter() - t0)
    try:
        for name, oracle in ORACLES.items():
            opts = spec.checks.get(name)
            if opts is None or (only and name not in only):
                continue
            emit(run_oracle(oracle, bench, opts, seed))
    finally:
        bench.device.close()
    return RunResult(spec, verdicts, seed, time.perf_counter() - t0,
                     device_time_s=bench.device.device_time_s)


def check_object(device, *, modulation: str, convention: str, samples_per_symbol: int = 1,
                 checks: dict | None = None, name: str | None = None,
                 seed: int = DEFAULT_SEED, **scheme) -> RunResult:
    """Run the checks on a Python object offering modulate / demodulate (no device file).

    Examples
    --------
    >>> from modemverify.schemes.conventions import get_convention
    >>> class Mapper:
    ...     def modulate(self, bits):
    ...         return get_convention("3gpp", "qpsk").modulate(bits)
    >>> result = check_object(Mapper(), modulation="qpsk", convention="3gpp")
    >>> [v.name for v in result.verdicts if v.outcome == "fail"]
    []
    """
    spec = parse_device({"name": name or type(device).__name__, "adapter": "python",
                         "target": "<object>:" + type(device).__name__,
                         "scheme": {"modulation": modulation, "convention": convention,
                                    "samples_per_symbol": samples_per_symbol, **scheme},
                         "checks": checks or {}})
    return check(spec, seed=seed, adapter=PythonAdapter(device))
