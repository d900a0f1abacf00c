"""The console summary: one line per verdict, failures with their counterexample and rerun."""

from __future__ import annotations

from ..verdict import ranked

__all__ = ["TAGS", "render_run", "render_totals"]

TAGS = {"pass": "PASS", "fail": "FAIL", "error": "ERROR", "inconclusive": "INCONCL",
        "skipped": "skip"}


def render_run(result, *, verbose: bool = False) -> str:
    subject = result.subject
    lines = [f"== {subject.name}  [{subject.adapter}, {subject.scheme.describe()}]  "
             f"seed {result.seed}"]
    for v in (result.verdicts if verbose else ranked(result.verdicts)):
        lines.append(f"  {TAGS[v.outcome]:<7} {v.name:<22} {v.reason}")
        if v.outcome in ("fail", "error") and v.counterexample:
            lines.append(f"          counterexample: {v.counterexample}")
    summary = result.tally()
    status = "OK" if result.ok else "NOT OK"
    lines.append(f"  -> {status}: {summary} ({result.duration_s:.1f} s)")
    if not result.ok and subject.file:
        lines.append(f"  rerun: modemverify check {subject.file} --seed {result.seed}")
    return "\n".join(lines)


def render_totals(results) -> str:
    ok = sum(r.ok for r in results)
    return (f"{len(results)} device{'s' if len(results) != 1 else ''}: {ok} OK, "
            f"{len(results) - ok} NOT OK")
