"""``modemverify demo``: the bundled, invented demo scenario (see SCENARIO.md) end to end."""

from __future__ import annotations

import sys
from pathlib import Path

from ..compare import compare
from ..config import load_device
from ..report.console import render_run
from ..report.html import write_report
from ..report.junit import write_junit
from ..session import EXIT_INTERRUPTED, run_and_report

HERE = Path(__file__).resolve().parent

#: device file -> (should the device pass?, {check: words its reason must contain})
EXPECTED = {
    "tern-16qam-port.yaml": (True, {}),
    "tern-16qam-swapped-arms.yaml": (False, {"mapping": "arms swapped"}),
    "tern-16qam-lsb-first.yaml": (False, {"mapping": "label bits reversed"}),
    "tern-16qam-natural.yaml": (False, {"gray": "differ in more than one bit"}),
    "tern-qpsk-inverted.yaml": (False, {"mapping": "inverted"}),
    "tern-16qam-two-labels.yaml": (False, {"mapping": "trade places"}),
    "tern-16qam-rrc-port.yaml": (True, {}),
    "tern-16qam-rrc-rolloff.yaml": (False, {"spectrum.obw": "another pulse or roll-off"}),
}

#: the comparison the demo runs last: (A, B) -> B judged against A
COMPARISON = ("tern-16qam-rrc-port.yaml", "tern-16qam-rrc-q15.yaml")


def run_demo(out: Path, *, seed: int, stream=None) -> int:
    """Run the scenario; exit 0 when every device got the verdict the scenario expects."""
    stream = stream or sys.stdout
    print("modemverify demo: an invented scenario (modemverify/demo/SCENARIO.md): candidate "
          "ports of a 16QAM/QPSK modem, some correct, most with one defect each, and a "
          "fixed-point port compared with its floating-point original.\n", file=stream)
    specs = [load_device(HERE / name) for name in EXPECTED]
    out.mkdir(parents=True, exist_ok=True)
    results, code = run_and_report(specs, seed=seed, junit=str(out / "junit.xml"),
                                   report=str(out / "report"), stream=stream)
    if code == EXIT_INTERRUPTED:
        return code
    surprises = []
    for result, (name, (should_pass, reasons)) in zip(results, EXPECTED.items()):
        if result.ok != should_pass:
            surprises.append(f"{name}: expected {'OK' if should_pass else 'NOT OK'}")
        for check, words in reasons.items():
            v = next((v for v in result.verdicts if v.name == check), None)
            if v is None or v.outcome != "fail" or words not in v.reason:
                surprises.append(f"{name}: expected {check} to fail naming {words!r}")

    a, b = (load_device(HERE / name) for name in COMPARISON)
    print(f"\n-- compare: {b.name} judged against {a.name}", file=stream)
    cmp = compare(a, b, seed=seed)
    print(render_run(cmp), file=stream)
    write_junit([cmp], out / "compare-junit.xml")
    write_report(results + [cmp], out / "report", title="modemverify demo report")
    print(f"JUnit: {out / 'compare-junit.xml'}; the report above now includes the comparison",
          file=stream)
    if not cmp.ok:
        surprises.append("the Q15 port should agree with its floating-point original")
    print("", file=stream)
    if surprises:
        print("Demo: NOT as expected:\n  " + "\n  ".join(surprises), file=stream)
        return 1
    print("Demo: as expected — the correct ports passed every verdict, each defective port "
          "failed with its defect named, and the Q15 port agrees with its original. (The exit "
          "code is 0 because the demo behaved as designed; `modemverify check` on a failing "
          "device exits 1.)", file=stream)
    return 0
