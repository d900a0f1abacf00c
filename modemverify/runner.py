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
from .spec import DeviceSpec, SchemeSpec
from .text import clean
from .verdict import OUTCOMES, Verdict, gates

__all__ = [
    "DEFAULT_SEED", "Subject", "RunResult", "check_seed", "guarded", "run_oracle", "check",
    "check_object",
]

DEFAULT_SEED = 1


@dataclass(frozen=True)
class Subject:
    """What a run judged: one device (from its spec), or B against A for ``compare``."""

    name: str
    adapter: str
    scheme: SchemeSpec
    file: str | None = None
    description: str = ""
    fail_on_inconclusive: bool = False
    #: sha256 of the device file (None for a spec built in Python, or a comparison)
    sha256: str | None = None

    def __post_init__(self):
        # a device's name, description or file name reaches terminals, XML and HTML
        for name in ("name", "adapter", "description"):
            object.__setattr__(self, name, clean(getattr(self, name)))
        if self.file is not None:
            object.__setattr__(self, "file", clean(self.file))

    @classmethod
    def of(cls, spec: DeviceSpec) -> "Subject":
        return cls(name=spec.name, adapter=spec.adapter, scheme=spec.scheme, file=spec.file,
                   description=spec.description,
                   fail_on_inconclusive=spec.fail_on_inconclusive, sha256=spec.sha256)


@dataclass
class RunResult:
    """Everything one run produced: the subject, its verdicts, the seed and the timings."""

    subject: Subject
    verdicts: list[Verdict]
    seed: int
    duration_s: float = 0.0
    device_time_s: float = 0.0
    version: str = __version__
    notes: list[str] = field(default_factory=list)

    def __repr__(self) -> str:
        return (f"RunResult({self.subject.name!r}, {'OK' if self.ok else 'NOT OK'}: "
                f"{self.tally() or 'no verdicts'}, seed={self.seed})")

    def gates(self, verdict: Verdict) -> bool:
        """True when ``verdict`` fails this run (see :func:`modemverify.verdict.gates`)."""
        return gates(verdict.outcome, self.subject.fail_on_inconclusive)

    @property
    def gating(self) -> list[Verdict]:
        return [v for v in self.verdicts if self.gates(v)]

    @property
    def ok(self) -> bool:
        return not self.gating

    def counts(self) -> dict[str, int]:
        """{outcome: number of verdicts}, in the order of :data:`~modemverify.verdict.OUTCOMES`,
        outcomes with no verdict left out."""
        found = [v.outcome for v in self.verdicts]
        return {o: found.count(o) for o in OUTCOMES if o in found}

    def tally(self) -> str:
        """``"2 fail, 9 pass, 4 skipped"``."""
        return ", ".join(f"{n} {o}" for o, n in self.counts().items())


def check_seed(seed: int, name: str) -> np.random.SeedSequence:
    return np.random.SeedSequence(seed, spawn_key=(zlib.crc32(name.encode()),))


def guarded(name: str, seed: int, judge, *, device_failed: str = "the device failed"
            ) -> list[Verdict]:
    """``judge()``'s verdicts, timed; a misbehaving device (AdapterError) or a harness bug
    becomes one ``error`` verdict named ``name``, so one broken check never costs the others."""
    t0 = time.perf_counter()
    try:
        verdicts = judge()
    except AdapterError as exc:
        verdicts = [Verdict(name, "error", f"{device_failed}: {exc}", seed=seed,
                            details={"call": exc.call, "input": exc.input_summary,
                                     "stderr": exc.stderr})]
    except Exception as exc:  # a bug in modemverify itself: report it, keep the other verdicts
        verdicts = [Verdict(name, "error",
                            f"internal error in the {name} check: "
                            f"{type(exc).__name__}: {exc}", seed=seed,
                            details={"traceback": traceback.format_exc(limit=6)})]
    took = time.perf_counter() - t0
    return [v.with_(duration_s=took / len(verdicts)) for v in verdicts]


def run_oracle(oracle, bench: Bench, opts: dict, seed: int) -> list[Verdict]:
    """Run one oracle; a misbehaving device or a harness bug becomes an error verdict."""
    rng = np.random.default_rng(check_seed(seed, oracle.name))

    def judge():
        why_not = oracle.skip_reason(bench)
        if why_not:
            return [Verdict(oracle.name, "skipped", why_not, seed=seed)]
        return oracle.run(bench, opts, rng, seed)

    return guarded(oracle.name, seed, judge)


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
    (True, ['pass', 'skipped'])
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
        return RunResult(Subject.of(spec), verdicts, seed, time.perf_counter() - t0)
    try:
        for name, oracle in ORACLES.items():
            opts = spec.checks.get(name)
            if opts is None or (only and name not in only):
                continue
            emit(run_oracle(oracle, bench, opts, seed))
    finally:
        bench.device.close()
    return RunResult(Subject.of(spec), verdicts, seed, time.perf_counter() - t0,
                     device_time_s=bench.device.device_time_s)


def check_object(device, *, modulation: str, convention: str, samples_per_symbol: int = 1,
                 checks: dict | None = None, name: str | None = None,
                 seed: int = DEFAULT_SEED, **scheme) -> RunResult:
    """Run the checks on a Python object offering modulate / demodulate (no device file).

    Examples
    --------
    >>> from modemverify.schemes.conventions import get_convention
    >>> from modemverify.schemes.labels import bits_to_labels
    >>> class Mapper:
    ...     def modulate(self, bits):
    ...         return get_convention("3gpp", "qpsk").points[bits_to_labels(bits, 2)]
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
