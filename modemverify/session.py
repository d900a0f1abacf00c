"""One run of the command line's ``check`` (and the demo's), and of ``compare``: run, print,
write, exit code.

Lives apart from ``cli.py`` so that the demo, which the command line starts, can use it too
without a cycle.

Output is live: a device's header line first, then each verdict's line as soon as the verdict
exists (flushed, so a pipe sees it at once), then its summary line; a progress bar on stderr
for long checks when stderr is a terminal and ``CI`` is not set.

Interrupts (:class:`Interrupts`): SIGTERM and SIGINT (Ctrl-C) stop the run once, at once;
every verdict measured so far is kept (a BER check's decided Eb/N0 points too), the names not
judged are reported as skipped, the results are marked ``interrupted`` and JUnit and the report
are written. Repeated signals are ignored until those final writes are done, so a second
SIGTERM or a double Ctrl-C cannot cost the record. A process forked from the run (a device
that forks) does not inherit the handler.
"""

from __future__ import annotations

import json
import os
import signal
import sys
import threading
import time
from contextlib import contextmanager
from pathlib import Path

from .compare import compare, comparison_subject
from .config import load_device
from .errors import ConfigError, Interrupted
from .execution import CAMPAIGN_FILE, CampaignFile, Execution
from .report.console import render_header, render_summary, render_totals, render_verdict
from .report.html import write_report
from .report.junit import write_junit
from .report.outputs import write_atomic
from .report.progress import ProgressLine
from .runner import RunResult, Subject, check, expected_names, not_judged
from .spec import DeviceSpec
from .vectors.kept import kept_of_results, kept_path, load_kept

__all__ = [
    "EXIT_OK", "EXIT_FAIL", "EXIT_USAGE", "EXIT_INTERRUPTED", "SIGNALS", "Interrupts",
    "run_and_report", "compare_and_report",
]

EXIT_OK, EXIT_FAIL, EXIT_USAGE, EXIT_INTERRUPTED = 0, 1, 2, 130

#: the signals that stop a run (SIGINT is Ctrl-C)
SIGNALS = (signal.SIGTERM, signal.SIGINT)

#: the guards installed in this process, innermost last (a forked child resets them)
_ACTIVE: list["Interrupts"] = []


class Interrupts:
    """While active, SIGTERM and SIGINT raise :class:`~modemverify.errors.Interrupted` once.

    The first signal raises (wherever the run is: inside a check, a device call, a write);
    every later one is counted and ignored, and inside :meth:`deferred` none raises, so the
    code that writes the record after an interrupt always finishes. The previous handlers are
    restored on exit; a child forked while the guard is active gets them back at once
    (``os.register_at_fork``), so signalling a device's fork later does not touch the run.

    >>> with Interrupts() as guard:
    ...     guard.fired
    False
    """

    def __init__(self):
        self.signal_name: str | None = None
        self.repeats = 0
        self._deferred = 0
        self._previous: dict[int, object] = {}

    @property
    def fired(self) -> bool:
        """A signal arrived (the run is stopping, or has stopped)."""
        return self.signal_name is not None

    def handle(self, signum, frame=None) -> None:
        """The signal handler: raise on the first signal, unless deferred; count the others."""
        if self.fired:
            self.repeats += 1
            return
        self.signal_name = signal.Signals(signum).name
        if not self._deferred:
            raise Interrupted(self.signal_name)

    def check(self) -> None:
        """Raise :class:`Interrupted` if a signal arrived (after a deferred stretch)."""
        if self.fired:
            raise Interrupted(self.signal_name)

    @contextmanager
    def deferred(self):
        """A stretch no signal interrupts (it is recorded; :meth:`check` raises it after)."""
        self._deferred += 1
        try:
            yield self
        finally:
            self._deferred -= 1

    def hold(self) -> None:
        """From here to the end of the guard a signal is only recorded: the final writes."""
        self._deferred += 1

    def __enter__(self) -> "Interrupts":
        # signal handlers belong to the main thread; in another thread the guard is inert
        if threading.current_thread() is threading.main_thread():
            for sig in SIGNALS:
                previous = signal.signal(sig, self.handle)
                # None: a handler installed from C, which Python cannot put back
                self._previous[sig] = signal.SIG_DFL if previous is None else previous
            _ACTIVE.append(self)
        return self

    def __exit__(self, *exc) -> bool:
        if self in _ACTIVE:
            _ACTIVE.remove(self)
            self._restore()
        return False

    def _restore(self) -> None:
        for sig, previous in self._previous.items():
            signal.signal(sig, previous)


def _reset_in_child() -> None:
    """After ``os.fork`` in the child: the run's handlers belong to the parent."""
    while _ACTIVE:
        _ACTIVE.pop()._restore()


if hasattr(os, "register_at_fork"):  # POSIX
    os.register_at_fork(after_in_child=_reset_in_child)


def _not_judged_reason(guard: Interrupts, what: str) -> str:
    return f"not judged: the run was interrupted ({guard.signal_name}) before {what}"


def _interrupted_result(subject: Subject, kept: list, names: list[str], seed: int,
                        guard: Interrupts, started: float) -> RunResult:
    """The verdicts measured before the interrupt, then every other declared name, skipped."""
    done = {v.name for v in kept}
    rest = not_judged([n for n in names if n not in done], "skipped",
                      _not_judged_reason(guard, "this verdict"), seed)
    result = RunResult(subject, list(kept) + rest, seed, time.perf_counter() - started,
                       interrupted=True)
    result.notes.append(f"interrupted by {guard.signal_name} after {len(kept)} verdict"
                        f"{'s' if len(kept) != 1 else ''}; the others are reported as skipped")
    return result


def _write_record(results, junit, report, title=None) -> None:
    if junit and results:
        write_junit(results, junit)
    if report and results:
        if title is None:
            write_report(results, report)
        else:
            write_report(results, report, title=title)


def _finish(results, guard, junit, report, stream, bar) -> None:
    if bar:
        bar.clear()
    if guard.fired:
        print(f"INTERRUPTED by {guard.signal_name}: every verdict measured before it is kept; "
              f"the rest are reported as skipped", file=stream)
    print(render_totals(results), file=stream)
    if junit:
        print(f"JUnit: {junit}", file=stream)
    if report:
        print(f"Report: {Path(report) / 'index.html'}", file=stream)
    stream.flush()


def run_and_report(specs, *, seed, only=None, junit=None, report=None, stream=None,
                   signal_before=None, workers=None, cluster=None, time_budget_s=None,
                   campaign=None, resume=False):
    """Run the devices, print their blocks live, write JUnit and the report; return (results,
    exit code).

    ``specs`` are DeviceSpecs or device-file paths (loaded here, under the signal handler, every
    file before any device runs; a bad file raises ConfigError). JUnit is rewritten after every
    device and, after an interrupt, with every device given: what was measured, and the rest as
    skipped. ``signal_before``: a signal number that arrived before this call (an entry point
    that recorded it while Python started): the run stops at once, with the same record. The
    exit code is 130 after an interrupt, else 0 when every verdict passed, else 1.

    ``workers``, ``cluster`` and ``time_budget_s`` override each device file's ``execution:``
    (:class:`~modemverify.execution.Execution`). A BER campaign keeps its state in
    ``campaign`` (a path), or in ``REPORT/campaign.json`` with a report; ``resume`` continues
    from it (a file of another version, seed or device-file content raises ConfigError).
    """
    with Interrupts() as guard:  # before anything slow
        stream = stream or sys.stdout
        with guard.deferred():  # loading is all or nothing: no half-loaded list
            if signal_before is not None:
                guard.handle(signal_before)
            specs = [s if isinstance(s, DeviceSpec) else load_device(s) for s in specs]
            journal = _campaign(specs, seed, campaign, report, resume)
            kept = {id(spec): load_kept(report, spec) for spec in specs}
            runs = {id(spec): Execution.of(spec, workers=workers, cluster=cluster,
                                           time_budget_s=time_budget_s) for spec in specs}
        bar = ProgressLine() if ProgressLine.wanted() else None
        results: list[RunResult] = []
        try:
            for spec in specs:
                guard.check()
                _run_one(spec, guard, seed, only, stream, bar, results, runs[id(spec)],
                         journal, kept[id(spec)], report)
                if junit:
                    with guard.deferred():
                        write_junit(results, junit)
            guard.hold()
        except Interrupted:
            guard.hold()
        finally:
            guard.hold()  # an exception other than an interrupt still leaves the record
            if guard.fired:
                results = _complete(results, specs, guard, seed, only)
            if journal is not None:
                journal.flush()
            _write_record(results, junit, report)
            _finish(results, guard, junit, report, stream, bar)
    if guard.fired:
        return results, EXIT_INTERRUPTED
    return results, (EXIT_OK if all(r.ok for r in results) else EXIT_FAIL)


def _campaign(specs, seed, campaign, report, resume) -> CampaignFile | None:
    """The campaign file of a run that checks BER: ``campaign``, or one in the report folder."""
    path = campaign or (Path(report) / CAMPAIGN_FILE if report else None)
    if path is None:
        if resume:
            raise ConfigError("--resume needs the campaign file: give --report DIR (its "
                              "campaign.json) or --campaign FILE, as in the interrupted run",
                              key="--resume")
        return None
    journal = CampaignFile(path, seed=seed, resume=resume)
    for spec in specs:
        journal.attach(spec)
    return journal


def _run_one(spec, guard: Interrupts, seed, only, stream, bar, results, execution=None,
             journal=None, kept=None, report=None) -> None:
    """One device's block, printed as it is measured; its result (partial after an interrupt,
    which then propagates) goes to ``results``. ``kept``: (KeptSet, note) of the report
    folder, replayed first and written back with this run's counterexamples."""
    print(render_header(Subject.of(spec), seed), file=stream, flush=True)
    if execution is not None and not execution.in_process and "ber" in spec.checks:
        print(f"  BER blocks on {execution.describe()}", file=stream, flush=True)
    kept_set, kept_note = kept if kept is not None else (None, None)
    if kept_note:
        print(f"  {kept_note}", file=stream, flush=True)
    elif kept_set is not None and kept_set.entries:
        print(f"  replaying {len(kept_set.entries)} kept counterexample"
              f"{'s' if len(kept_set.entries) != 1 else ''} first ({kept_set.path})",
              file=stream, flush=True)
    kept: list = []
    started = time.perf_counter()

    def warn(text):
        if bar:
            bar.clear()
        print(f"  {text}", file=stream, flush=True)

    def on_verdict(v):
        guard.check()  # a signal a device swallowed: stop here, without its verdict
        if bar:
            bar.clear()
        kept.append(v)
        print(render_verdict(v), file=stream, flush=True)

    try:
        result = check(spec, seed=seed, only=only, on_verdict=on_verdict, progress=bar,
                       execution=execution, journal=journal, warn=warn,
                       kept=kept_set.by_verdict() if kept_set is not None else None)
    except Interrupted:
        with guard.deferred():
            result = _interrupted_result(Subject.of(spec), kept, expected_names(spec, only),
                                         seed, guard, started)
            if journal is not None and "ber" in spec.checks:
                result.notes.append(f"the BER campaign is kept in {journal.path}: run the same "
                                    f"command with --resume to continue where it stopped")
            results.append(result)
            if bar:
                bar.clear()
            print(render_summary(result), file=stream, flush=True)
        raise
    with guard.deferred():
        results.append(result)
        if report and kept_set is not None:
            _keep(report, spec, kept_set, result, seed)
        if bar:
            bar.clear()
        print(render_summary(result), file=stream, flush=True)


def _keep(report, spec, kept_set, result, seed) -> None:
    """Write the device's kept counterexamples (earlier ones and this run's) beside the
    report; nothing when there never was one."""
    updated = kept_of_results(kept_set, result.verdicts, seed)
    if updated.entries:
        write_atomic(kept_path(report, spec.name),
                     json.dumps(updated.to_json(), indent=1) + "\n")


def _complete(results, specs, guard: Interrupts, seed, only) -> list[RunResult]:
    """After an interrupt: the results so far (the interrupted device's included), then every
    device not started, each with all its declared names, skipped."""
    out = list(results)
    for spec in specs[len(out):]:
        names = expected_names(spec, only)
        r = RunResult(Subject.of(spec), not_judged(names, "skipped",
                                                   _not_judged_reason(guard, "this device"),
                                                   seed), seed, interrupted=True)
        r.notes.append(f"not run: the run was interrupted by {guard.signal_name} first")
        out.append(r)
    return out


def compare_and_report(a, b, *, seed, junit=None, report=None, stream=None,
                       title="modemverify comparison", **options):
    """``compare`` B against A with the same treatment as :func:`run_and_report`: live lines,
    the signal handler, the verdicts kept on an interrupt, JUnit and the report always written.

    ``a`` and ``b`` are DeviceSpecs or device-file paths; ``options`` go to
    :func:`modemverify.compare.compare` (``evm_limit_percent``, ``sample_error_percent``,
    ``spectrum_tolerance_db``). Returns (result, exit code).
    """
    with Interrupts() as guard:
        stream = stream or sys.stdout
        with guard.deferred():
            a, b = (s if isinstance(s, DeviceSpec) else load_device(s) for s in (a, b))
        subject = comparison_subject(a, b)
        kept: list = []
        started = time.perf_counter()
        result = None
        try:
            guard.check()
            print(render_header(subject, seed), file=stream, flush=True)

            def on_verdict(v):
                guard.check()
                kept.append(v)
                print(render_verdict(v), file=stream, flush=True)

            result = compare(a, b, seed=seed, on_verdict=on_verdict, **options)
            guard.hold()
        except Interrupted:
            guard.hold()
        finally:
            guard.hold()
            if result is None and guard.fired:
                result = RunResult(subject, list(kept), seed, time.perf_counter() - started,
                                   interrupted=True)
                result.notes.append(f"interrupted by {guard.signal_name} after {len(kept)} "
                                    f"verdict{'s' if len(kept) != 1 else ''}: the others are "
                                    f"missing")
            if result is not None:
                print(render_summary(result), file=stream, flush=True)
                _write_record([result], junit, report, title=title)
                _finish([result], guard, junit, report, stream, None)
    if guard.fired:
        return result, EXIT_INTERRUPTED
    return result, (EXIT_OK if result.ok else EXIT_FAIL)
