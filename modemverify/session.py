"""One run of the command line's ``check`` (and the demo's): run, print, write, exit code.

Lives apart from ``cli.py`` so that the demo, which the command line starts, can use it too
without a cycle.
"""

from __future__ import annotations

import signal
import sys
from pathlib import Path

from .report.console import render_run, render_totals
from .report.html import write_report
from .report.junit import write_junit
from .report.progress import ProgressLine
from .runner import RunResult, Subject, check

__all__ = ["EXIT_OK", "EXIT_FAIL", "EXIT_USAGE", "EXIT_INTERRUPTED", "run_and_report"]

EXIT_OK, EXIT_FAIL, EXIT_USAGE, EXIT_INTERRUPTED = 0, 1, 2, 130


def _terminate(signum, frame):  # SIGTERM behaves like Ctrl-C: finish writing what was measured
    raise KeyboardInterrupt


def run_and_report(specs, *, seed, only=None, junit=None, report=None, stream=None):
    """Run the specs, print summaries, write JUnit and the report; return (results, exit code).

    JUnit is rewritten after every device, and on an interrupt with what finished, so CI always
    finds a complete, valid file.
    """
    bar = ProgressLine() if ProgressLine.wanted() else None

    stream = stream or sys.stdout
    results = []
    previous = signal.signal(signal.SIGTERM, _terminate)
    interrupted = False
    try:
        for spec in specs:
            partial: list = []

            def on_verdict(v, partial=partial):
                if bar:
                    bar.clear()
                partial.append(v)

            try:
                result = check(spec, seed=seed, only=only, on_verdict=on_verdict, progress=bar)
            except KeyboardInterrupt:
                interrupted = True
                result = RunResult(Subject.of(spec), partial, seed)
                result.notes.append("run interrupted; verdicts after this point are missing")
                results.append(result)
                break
            results.append(result)
            print(render_run(result), file=stream, flush=True)
            if junit:
                write_junit(results, junit)
    finally:
        signal.signal(signal.SIGTERM, previous)
        if junit and results:
            write_junit(results, junit)
        if report and results:
            write_report(results, report)
    if interrupted:
        last = results[-1]
        print(f"INTERRUPTED in {last.subject.name} after {len(last.verdicts)} verdicts: the totals "
              f"below cover only what finished", file=stream)
    print(render_totals(results) + (" (incomplete)" if interrupted else ""), file=stream)
    if junit:
        print(f"JUnit: {junit}", file=stream)
    if report:
        print(f"Report: {Path(report) / 'index.html'}", file=stream)
    if interrupted:
        return results, EXIT_INTERRUPTED
    return results, (EXIT_OK if all(r.ok for r in results) else EXIT_FAIL)
