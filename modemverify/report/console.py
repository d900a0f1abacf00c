"""The console summary: one line per verdict, failures with their counterexample and rerun.

A device's block is a header, its verdict lines and a summary line. ``render_run`` gives the
whole block at once (failures first); the command line prints the header, then each verdict
line as soon as the verdict exists (in run order), then the summary, from the same pieces.
"""

from __future__ import annotations

from ..verdict import ranked

__all__ = [
    "TAGS", "render_header", "render_verdict", "render_summary", "render_run", "render_totals",
]

TAGS = {"pass": "PASS", "fail": "FAIL", "error": "ERROR", "inconclusive": "INCONCL",
        "skipped": "skip"}


def render_header(subject, seed: int) -> str:
    """``== name  [adapter, scheme]  seed N``: the first line of a device's block."""
    return f"== {subject.name}  [{subject.adapter}, {subject.scheme.describe()}]  seed {seed}"


def render_verdict(v) -> str:
    """A verdict's line, and its counterexample's on a failure or error."""
    line = f"  {TAGS[v.outcome]:<7} {v.name:<22} {v.reason}"
    if v.outcome in ("fail", "error") and v.counterexample:
        line += f"\n          counterexample: {v.counterexample}"
    return line


def render_summary(result) -> str:
    """The last lines of a device's block: the outcome, the tally and how to rerun."""
    subject = result.subject
    if result.interrupted:
        status = "INTERRUPTED"
    else:
        status = "OK" if result.ok else "NOT OK"
    lines = [f"  -> {status}: {result.tally() or 'no verdicts'} ({result.duration_s:.1f} s)"]
    lines += [f"  {note}" for note in result.notes]
    if not result.ok and subject.file:
        only = "".join(f" --only {name}" for name in result.only)
        lines.append(f"  rerun: modemverify check {subject.file} --seed {result.seed}{only}")
    return "\n".join(lines)


def render_run(result, *, verbose: bool = False) -> str:
    lines = [render_header(result.subject, result.seed)]
    lines += [render_verdict(v) for v in (result.verdicts if verbose
                                          else ranked(result.verdicts))]
    lines.append(render_summary(result))
    return "\n".join(lines)


def render_totals(results) -> str:
    """``8 devices: 2 OK, 6 NOT OK``; after an interrupt, what was judged in full and what was
    not (never "OK" for a device that was not judged in full)."""
    n = len(results)
    devices = f"{n} device{'s' if n != 1 else ''}"
    full = [r for r in results if not r.interrupted]
    ok = sum(r.ok for r in full)
    if len(full) == n:
        return f"{devices}: {ok} OK, {n - ok} NOT OK"
    if not full:
        return f"INTERRUPTED: {devices} given, none judged in full"
    return (f"INTERRUPTED: {len(full)} of {devices} judged in full ({ok} OK, "
            f"{len(full) - ok} NOT OK); {n - len(full)} not judged in full")
