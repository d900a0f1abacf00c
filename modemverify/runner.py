"""Wiring: open a device, run every check that applies, collect Verdicts.

Every random draw of a run comes from one seed: check ``name`` gets the stream
``SeedSequence(seed, spawn_key=(crc32(name),))``, so turning one check off or on does not change
what the others draw, and ``--seed`` reproduces any verdict exactly.

The names of a run's verdicts depend only on the device file and the version
(:func:`expected_names`): a check that errors, is skipped or depends on a failed verdict reports
under every name it declares, and ``on_verdict`` hears each verdict as soon as it exists.
"""

from __future__ import annotations

import time
import traceback
import zlib
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ._version import __version__
from .adapters.python import PythonAdapter
from .bench import Bench, open_bench
from .config import load_device, parse_device
from .blocks import Unavailable
from .errors import AdapterError, ModemVerifyError
from .oracles import ORACLES
from .spec import DeviceSpec, SchemeSpec
from .text import clean
from .verdict import OUTCOMES, Verdict, gates

__all__ = [
    "DEFAULT_SEED", "Subject", "RunResult", "check_seed", "guarded", "run_oracle",
    "expected_names", "not_judged", "check", "check_object",
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
    """Everything one run produced: the subject, its verdicts, the seed and the timings.

    ``interrupted`` is True when a signal (SIGTERM, Ctrl-C) stopped the run before this subject
    was fully judged: ``verdicts`` then holds every verdict measured before it, and the names
    that were not judged as ``skipped`` verdicts saying so; such a result is never ``ok``.
    """

    subject: Subject
    verdicts: list[Verdict]
    seed: int
    duration_s: float = 0.0
    device_time_s: float = 0.0
    version: str = __version__
    notes: list[str] = field(default_factory=list)
    interrupted: bool = False
    #: the checks the run was limited to (``--only``), for the rerun hint; empty for all
    only: tuple[str, ...] = ()

    def __repr__(self) -> str:
        status = "INTERRUPTED" if self.interrupted else "OK" if self.ok else "NOT OK"
        return (f"RunResult({self.subject.name!r}, {status}: "
                f"{self.tally() or 'no verdicts'}, seed={self.seed})")

    def gates(self, verdict: Verdict) -> bool:
        """True when ``verdict`` fails this run (see :func:`modemverify.verdict.gates`)."""
        return gates(verdict.outcome, self.subject.fail_on_inconclusive)

    @property
    def gating(self) -> list[Verdict]:
        return [v for v in self.verdicts if self.gates(v)]

    @property
    def ok(self) -> bool:
        """No verdict gates the run, and the run was not interrupted."""
        return not self.gating and not self.interrupted

    def verdict(self, name: str) -> Verdict:
        """The verdict named ``name`` (as JUnit and ``expected_names`` name it).

        >>> from modemverify.config import parse_device
        >>> spec = parse_device({"name": "ref", "adapter": "reference", "checks": {"ber": False},
        ...                      "scheme": {"modulation": "qpsk", "convention": "3gpp"}})
        >>> check(spec).verdict("mapping").outcome
        'pass'
        """
        for v in self.verdicts:
            if v.name == name:
                return v
        raise KeyError(f"no verdict named {name!r} in this run; its verdicts: "
                       f"{', '.join(v.name for v in self.verdicts) or 'none'}")

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


def guarded(names: str | Iterable[str], seed: int, judge: Callable[[], Iterable[Verdict]], *,
            device_failed: str = "the device failed") -> Iterator[Verdict]:
    """``judge()``'s verdicts, each timed and yielded as soon as it exists.

    A misbehaving device (AdapterError) or a harness bug ends the judging: every name of
    ``names`` not yet reported gets an ``error`` verdict with the reason (a harness bug's says
    "internal error"), so one broken check never costs the others and a check's names do not
    change when it breaks. A list of ``names`` is also the check's promise: a name it did not
    report gets an internal-error verdict (unless the check reported names outside the list,
    which marks a check that does not declare its names). With a single name, the error
    verdict carries that name.
    """
    names = [names] if isinstance(names, str) else list(names)
    produced: list[str] = []
    problem = None
    t = time.perf_counter()
    try:
        for v in judge():
            now = time.perf_counter()
            produced.append(v.name)
            yield v.with_(duration_s=now - t)
            t = time.perf_counter()
    except AdapterError as exc:
        problem = (f"{device_failed}: {exc}", {"call": exc.call, "input": exc.input_summary,
                                               "stderr": exc.stderr})
    except Exception as exc:  # a bug in modemverify itself: report it, keep the other verdicts
        problem = (f"internal error in the {names[0].split('.')[0]} check: "
                   f"{type(exc).__name__}: {exc}",
                   {"traceback": traceback.format_exc(limit=6)})
    missing = [n for n in names if n not in produced]
    if problem is None and (not missing or not set(produced) <= set(names)):
        return
    took = time.perf_counter() - t
    for i, name in enumerate(missing):
        if problem is None:
            reason = (f"internal error in the {name.split('.')[0]} check: it gave no verdict "
                      f"named {name}")
            yield Verdict(name, "error", reason, seed=seed)
        else:
            yield Verdict(name, "error", problem[0], seed=seed, details=dict(problem[1]),
                          duration_s=took if i == 0 else 0.0)


def not_judged(names: Iterable[str], outcome: str, reason: str, seed: int | None
               ) -> list[Verdict]:
    """One verdict per name, all with the same outcome and reason (a skip or an error that
    covers a whole check)."""
    return [Verdict(n, outcome, reason, seed=seed) for n in names]


def run_oracle(oracle, bench: Bench, opts: dict, seed: int) -> Iterator[Verdict]:
    """Run one oracle, yielding each verdict as soon as it exists and recording it on the
    bench; a skip (the check does not apply, a device call is missing, a verdict it needs
    failed) or an error is reported under every name the oracle declares."""
    rng = np.random.default_rng(check_seed(seed, oracle.name))
    names = oracle.verdict_names(bench.spec)

    def judge():
        why_not = oracle.skip_reason(bench)
        if why_not:
            return not_judged(names, "skipped", why_not, seed)
        return oracle.run(bench, opts, rng, seed)

    for v in guarded(names, seed, judge):
        bench.verdicts[v.name] = v
        yield v


def expected_names(spec: DeviceSpec, only: list[str] | None = None) -> list[str]:
    """The names of every verdict a run of ``spec`` reports, in run order: a function of the
    device file (and ``only``) alone."""
    return [n for name, oracle in ORACLES.items()
            if spec.checks.get(name) is not None and not (only and name not in only)
            for n in oracle.verdict_names(spec)]


def check(device: DeviceSpec | str | Path, *, seed: int = DEFAULT_SEED,
          only: list[str] | None = None, on_verdict=None, adapter=None,
          progress=None, execution=None, journal=None, warn=None,
          oracles: dict | None = None, kept: dict | None = None) -> RunResult:
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
        Called with each Verdict as soon as it exists (live output; the verdicts measured
        before an interrupt).
    adapter : ModemAdapter, optional
        An adapter already open; by default the spec's adapter opens the device.
    progress : callable, optional
        ``progress(name, fraction, text)`` for long checks (the command line's progress bar).
    execution : modemverify.execution.Execution, optional
        Where the BER check's blocks run (workers, a Dask cluster); default: this process.
        The verdicts are the same either way.
    journal : modemverify.blocks.Journal, optional
        Where a BER campaign keeps its state (``execution.CampaignFile`` for ``--resume``).
    warn : callable, optional
        ``warn(text)``: warnings before a long check spends its budget (also kept in the
        result's notes).
    oracles : dict, optional
        {check name: Oracle} replacing the built-in checks of those names (the self-test's
        deliberately weakened checks); by default :data:`~modemverify.oracles.ORACLES`.
    kept : dict, optional
        {verdict name: [CounterexampleRecord, ...]}: inputs an earlier run failed on, which
        the checks that search for counterexamples try first (``vectors.kept``; the command
        line reads them from the ``--report`` folder).

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

    notes: list[str] = []

    def warned(text):
        notes.append(text)
        if warn is not None:
            warn(text)

    try:
        bench = open_bench(spec, adapter)
        if progress is not None:
            bench.progress = progress
        bench.warn = warned
        bench.journal = journal
        bench.kept = dict(kept or {})
    except AdapterError as exc:
        # every verdict the device file promises, as an error: the names do not change
        emit(not_judged(expected_names(spec, only), "error",
                        f"the device could not be opened: {exc}", seed))
        return RunResult(Subject.of(spec), verdicts, seed, time.perf_counter() - t0,
                         only=tuple(only or ()))
    table = {**ORACLES, **oracles} if oracles else ORACLES
    todo = [(name, oracle, spec.checks[name]) for name, oracle in table.items()
            if spec.checks.get(name) is not None and (not only or name in only)]
    try:
        if execution is not None and any(o.parallel for _, o, _ in todo):
            # start the workers now: they import and open the device while the checks
            # before the BER check run here
            _start_engine(bench, execution, adapter, warned)
            if bench.engine is not None:
                bench.engine.warm()
        for name, oracle, opts in todo:
            bench.progress(name, 0.0, "running")
            if oracle.parallel and execution is not None:
                _start_engine(bench, execution, adapter, warned)
            emit(run_oracle(oracle, bench, opts, seed))
    finally:
        try:
            if bench.engine is not None:
                bench.engine.close()
        finally:
            bench.device.close()
    return RunResult(Subject.of(spec), verdicts, seed, time.perf_counter() - t0,
                     device_time_s=bench.device.device_time_s, only=tuple(only or ()),
                     notes=notes)


def _start_engine(bench: Bench, execution, adapter, warned) -> None:
    """Give the bench the engine ``execution`` asks for (once): the BER check's workers."""
    bench.time_budget_s = execution.time_budget_s
    if bench.engine is not None or execution.in_process:
        return
    if adapter is not None:
        warned(f"warning: {execution.describe()} asked for, but this device was given as a Python "
               f"object, which workers cannot open: the blocks run in this process")
        return
    try:
        bench.engine = execution.engine(bench)
    except ModemVerifyError as exc:  # no cluster there, the device fails its probe: the
        # check's points get error verdicts that say so
        bench.engine = Unavailable(f"{execution.describe()} could not start: "
                                   f"{getattr(exc, 'raw_message', exc)}")


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
