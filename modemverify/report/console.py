"""The console summary: one line per verdict, failures with their counterexample and rerun."""

from __future__ import annotations

from ..verdict import OUTCOMES

TAGS = {"pass": "PASS", "fail": "FAIL", "error": "ERROR", "inconclusive": "INCONCL",
        "skipped": "skip"}


def render_run(result, *, verbose: bool = False) -> str:
    spec = result.spec
    lines = [f"== {spec.name}  [{spec.adapter}, {spec.scheme.describe()}]  seed {result.seed}"]
    order = {o: i for i, o in enumerate(OUTCOMES)}
    ranked = sorted(enumerate(result.verdicts), key=lambda iv: (order[iv[1].outcome], iv[0]))
    for v in (result.verdicts if verbose else [v for _, v in ranked]):
        lines.append(f"  {TAGS[v.outcome]:<7} {v.name:<22} {v.reason}")
        if v.outcome in ("fail", "error") and v.counterexample:
            lines.append(f"          counterexample: {v.counterexample}")
    counts = result.counts()
    summary = ", ".join(f"{counts[o]} {o}" for o in OUTCOMES if counts.get(o))
    status = "OK" if result.ok else "NOT OK"
    lines.append(f"  -> {status}: {summary} ({result.duration_s:.1f} s)")
    if not result.ok and spec.file:
        lines.append(f"  rerun: modemverify check {spec.file} --seed {result.seed}")
    return "\n".join(lines)


def render_totals(results) -> str:
    ok = sum(r.ok for r in results)
    return (f"{len(results)} device{'s' if len(results) != 1 else ''}: {ok} OK, "
            f"{len(results) - ok} NOT OK")
