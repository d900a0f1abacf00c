"""The self-test: every mutation operator, and the unmutated reference, through the normal
checks for each seed; the certificate of what the gates caught, as JSON, HTML and JUnit.

Detection rates and false-fail rates carry exact (Clopper-Pearson) intervals; the BER check's
measured probability of a pass against the true loss sits beside Wald's operating
characteristic of the sequential test it runs. Only a verdict's public fields (outcome,
reason, statistic, interval, details) are read: the checks are judged as a user sees them.
"""

from __future__ import annotations

import html
import json
import platform
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import scipy
from junit_xml import TestCase, TestSuite, to_xml_report_string

from .._version import __version__
from ..adapters.python import PythonAdapter
from ..config import parse_device
from ..oracles import ORACLES
from ..report import plots
from ..report.html import CSS
from ..report.outputs import write_atomic
from ..runner import check
from ..schemes.conventions import get_convention
from ..schemes.theory import ber as theory_ber
from ..schemes.theory import default_ebn0_points
from ..stats.intervals import clopper_pearson
from ..stats.sequential import operating_characteristic
from .operators import (
    DEFECT_CLASSES,
    GATING_CLASSES,
    WAVEFORM,
    NoisyModem,
    operators_for,
    reference_device,
)

__all__ = [
    "DEFAULT_MODULATIONS", "DEFAULT_SEEDS", "OC_LOSSES_DB", "CONVENTION", "CONFIDENCE",
    "Certificate", "run_selftest",
    "write_certificate", "certify",
]

DEFAULT_MODULATIONS = ("qpsk", "16qam", "64qam")
DEFAULT_SEEDS = 5
#: true losses (dB) at which the BER check's pass probability is measured
OC_LOSSES_DB = (0.0, 0.25, 0.4, 0.5, 0.6, 0.75, 1.0, 1.5, 2.0)
CONVENTION = "3gpp"
CONFIDENCE = 0.95


def _interval(k: int, n: int) -> list[float]:
    ci = clopper_pearson(k, n, CONFIDENCE)
    return [float(ci.low), float(ci.high)]


def _spec(name, modulation, scheme, checks=None):
    scheme = dict(scheme)
    extra = {key: scheme.pop(key) for key in ("sample_format", "full_scale") if key in scheme}
    return parse_device({"name": name, "adapter": "python", "target": "<object>:" + name,
                         "scheme": {"modulation": modulation, "convention": CONVENTION,
                                    **scheme}, "checks": checks or {}, **extra}), extra


def _run(name, modulation, scheme, device, seed, *, oracles=None, checks=None, only=None):
    spec, extra = _spec(name, modulation, scheme, checks)
    adapter = PythonAdapter(device, extra.get("sample_format", "complex128"),
                            extra.get("full_scale", 1.0))
    return check(spec, seed=seed, adapter=adapter, oracles=oracles, only=only)


def _ber_risk() -> tuple[float, bool]:
    opts = ORACLES["ber"].options
    return 1 - opts["confidence"].default, opts["familywise"].default


@dataclass
class Certificate:
    """What the self-test found: ``data`` is the JSON document; ``gaps`` say what failed."""

    data: dict
    gaps: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.gaps


def _reference_rows(modulation, bench, results, n_points):
    alpha, familywise = _ber_risk()
    names = list(dict.fromkeys(v.name for r in results for v in r.verdicts))
    rows = []
    for name in names:
        outs = [v.outcome for r in results for v in r.verdicts if v.name == name]
        judged = [o for o in outs if o in ("pass", "fail", "inconclusive")]
        if not judged:
            continue
        fails = sum(o == "fail" for o in judged)
        if name.startswith("ber."):
            risk = alpha / n_points if familywise else alpha
            stated = f"alpha = {risk:.3g} per point (confidence {1 - alpha:g}" + \
                (f", familywise over {n_points} points)" if familywise else ")")
        else:
            risk, stated = 0.0, "0 (a deterministic property, or no stated risk)"
        iv = _interval(fails, len(judged))
        rows.append({"modulation": modulation, "bench": bench, "verdict": name,
                     "fails": fails, "n": len(judged), "rate": fails / len(judged),
                     "interval": iv, "risk": risk, "stated": stated, "gap": iv[0] > risk})
    # the BER check as a whole: the familywise risk
    per_run = [any(v.name.startswith("ber.") and v.outcome == "fail" for v in r.verdicts)
               for r in results]
    if any(v.name.startswith("ber.") for r in results for v in r.verdicts):
        fails = sum(per_run)
        iv = _interval(fails, len(per_run))
        rows.append({"modulation": modulation, "bench": bench, "verdict": "ber (any point)",
                     "fails": fails, "n": len(per_run), "rate": fails / len(per_run),
                     "interval": iv, "risk": alpha, "stated": f"alpha = {alpha:g} for the check",
                     "gap": iv[0] > alpha})
    return rows


def _names(reason: str, words) -> bool:
    text = reason.lower()
    return all(any(alt.lower() in text for alt in w.split("|")) for w in words)


def _operator_row(modulation, op, results):
    n = len(results)
    failing: dict[str, int] = {}
    detected = named = 0
    reasons = []
    for r in results:
        for v in r.verdicts:
            if v.outcome == "fail":
                failing[v.name] = failing.get(v.name, 0) + 1
        target = [v for v in r.verdicts if v.name == op.verdict
                  or (op.verdict.endswith(".") and v.name.startswith(op.verdict))]
        hit = [v for v in target if v.outcome == "fail"]
        if hit:
            detected += 1
            if any(_names(v.reason, op.words) for v in hit):
                named += 1
            reasons.append(hit[0].reason)
        else:
            reasons.append("; ".join(f"{v.name} {v.outcome}: {v.reason}" for v in target)
                           or "verdict not reported")
    gating = op.defect_class in GATING_CLASSES
    gap = gating and (detected < n or named < n)
    return {"modulation": modulation, "operator": op.name, "class": op.defect_class,
            "description": op.description, "verdict": op.verdict, "words": list(op.words),
            "loss_db": op.loss_db, "failing_verdicts": failing, "detected": detected,
            "named": named, "n": n, "rate": detected / n, "interval": _interval(detected, n),
            "gating": gating, "gap": gap, "example_reason": reasons[0] if reasons else ""}


def _oc_rows(modulation, seeds, oc_seeds, progress):
    alpha, _ = _ber_risk()
    margin = ORACLES["ber"].options["margin_db"].default
    ebn0 = default_ebn0_points(modulation)[1]
    k = int(round(np.log2(get_convention(CONVENTION, modulation).points.size)))
    conv = get_convention(CONVENTION, modulation)
    checks = {"ber": {"ebn0_db": [ebn0]}}
    p0, p1 = float(theory_ber(modulation, ebn0)), float(theory_ber(modulation, ebn0 - margin))
    rows = []
    for loss in OC_LOSSES_DB:
        passes = n = 0
        for s in range(seeds[0], seeds[0] + oc_seeds):
            dev = NoisyModem(reference_device(conv).ref, k, ebn0, loss,
                             np.random.default_rng([s, int(loss * 1000), 7]))
            r = _run(f"noise-loss-{loss:g}dB", modulation, {}, dev, s, checks=checks,
                     only=["ber"])
            v = [v for v in r.verdicts if v.name.startswith("ber.")][0]
            n += 1
            passes += v.outcome == "pass"
        iv = _interval(passes, n)
        p_true = float(theory_ber(modulation, ebn0 - loss))
        wald = operating_characteristic(p_true, p0, p1, alpha, alpha)
        rows.append({"modulation": modulation, "ebn0_db": ebn0, "margin_db": margin,
                     "loss_db": loss, "passes": passes, "n": n, "rate": passes / n,
                     "interval": iv, "wald": wald, "within": iv[0] <= wald <= iv[1]})
        if progress:
            progress(f"{modulation} BER operating characteristic at {loss:g} dB: "
                     f"{passes}/{n} pass (Wald {wald:.3f})")
    return rows


def run_selftest(modulations=DEFAULT_MODULATIONS, *, seeds: int = DEFAULT_SEEDS, seed: int = 1,
                 operators=None, oracles=None, oc_seeds: int | None = None,
                 progress=None) -> Certificate:
    """Run every operator (or just ``operators``, by name) and the reference through the normal
    checks for seeds ``seed .. seed + seeds - 1``; ``oracles`` replaces built-in checks (a
    weakened check, to see the certificate find the gap); ``oc_seeds`` runs per loss for the BER
    operating characteristic (default ``4 * seeds``; 0 leaves it out)."""
    t0 = time.perf_counter()
    seed_list = list(range(seed, seed + seeds))
    oc_seeds = 4 * seeds if oc_seeds is None else oc_seeds
    classes, reference, oc = [], [], []
    for mod in modulations:
        conv = get_convention(CONVENTION, mod)
        n_points = len(default_ebn0_points(mod))
        for bench, scheme in (("symbols", {}), ("rrc", WAVEFORM)):
            results = [_run(f"reference-{mod}-{bench}", mod, scheme,
                            reference_device(conv, scheme), s, oracles=oracles)
                       for s in seed_list]
            reference += _reference_rows(mod, bench, results, n_points)
        for op in operators_for(mod, operators):
            results = [_run(f"{op.name}-{mod}", mod, op.scheme,
                            op.build(conv, np.random.default_rng([s, 11])), s, oracles=oracles)
                       for s in seed_list]
            row = _operator_row(mod, op, results)
            classes.append(row)
            if progress:
                progress(f"{mod} {op.name}: detected {row['detected']}/{row['n']}, named "
                         f"{row['named']}/{row['n']}")
        if oc_seeds:
            oc += _oc_rows(mod, seed_list, oc_seeds, progress)
    gaps = []
    for row in classes:
        if row["gap"]:
            gaps.append(f"{row['modulation']} {row['operator']} ({row['class']}): detected in "
                        f"{row['detected']}/{row['n']} seeds, named in {row['named']}/"
                        f"{row['n']} (needs {row['verdict']} to fail naming "
                        f"{', '.join(row['words'])}); {row['example_reason']}")
    for row in reference:
        if row["gap"]:
            gaps.append(f"{row['modulation']} reference ({row['bench']}) {row['verdict']}: "
                        f"false-fail rate {row['fails']}/{row['n']} (interval "
                        f"{row['interval'][0]:.3g}..{row['interval'][1]:.3g}) above the stated "
                        f"risk {row['risk']:.3g}")
    data = {
        "stamp": {"modemverify": __version__, "platform": platform.platform(),
                  "python": sys.version.split()[0], "numpy": np.__version__,
                  "scipy": scipy.__version__, "seed": seed, "seeds": seeds,
                  "oc_seeds": oc_seeds, "modulations": list(modulations),
                  "convention": CONVENTION, "confidence": CONFIDENCE,
                  "weakened_checks": sorted(oracles or {}),
                  "duration_s": round(time.perf_counter() - t0, 2)},
        "defect_classes": DEFECT_CLASSES, "gating_classes": list(GATING_CLASSES),
        "operators": classes, "reference": reference, "ber_oc": oc, "gaps": gaps,
        "ok": not gaps,
    }
    return Certificate(data, gaps)


def _iv(row) -> str:
    return f"{row['interval'][0]:.3f}&ndash;{row['interval'][1]:.3f}"


def _oc_plot(rows, folder: Path) -> str | None:
    if not rows:
        return None
    plt = plots._pyplot()
    fig, ax = plt.subplots(figsize=(7, 4.2))
    for mod in dict.fromkeys(r["modulation"] for r in rows):
        rs = [r for r in rows if r["modulation"] == mod]
        x = np.array([r["loss_db"] for r in rs])
        y = np.array([r["rate"] for r in rs])
        lo = y - np.array([r["interval"][0] for r in rs])
        hi = np.array([r["interval"][1] for r in rs]) - y
        line = ax.errorbar(x, y, yerr=[lo, hi], fmt="o", capsize=3,
                           label=f"{mod}: measured P(pass) at {rs[0]['ebn0_db']:g} dB")
        ax.plot(x, [r["wald"] for r in rs], "-", color=line[0].get_color(),
                label=f"{mod}: Wald's operating characteristic")
    ax.axvline(rows[0]["margin_db"], color="grey", ls=":", label="margin")
    ax.set_xlabel("true implementation loss (dB)")
    ax.set_ylabel("probability the BER point passes")
    ax.set_ylim(-0.03, 1.03)
    ax.grid(alpha=0.3)
    ax.legend(fontsize=7)
    return plots._save(plt, fig, folder, "ber_operating_characteristic.png")


def _html(cert: Certificate, figure: str | None) -> str:
    d = cert.data
    esc = html.escape
    st = d["stamp"]
    stamp = ", ".join(f"{k} {esc(str(v))}" for k, v in st.items())
    status = ("<p class='pass'>No gap: every gating defect was detected and named in every seed, "
              "and no false-fail rate exceeds its stated risk.</p>" if cert.ok else
              "<p class='fail'>Gaps found:</p><ul>" +
              "".join(f"<li>{esc(g)}</li>" for g in cert.gaps) + "</ul>")
    op_rows = "".join(
        f"<tr class='{'fail' if r['gap'] else ''}'><td>{r['modulation']}</td><td>{r['class']}"
        f"{'' if r['gating'] else ' (power)'}</td><td>{esc(r['operator'])}<br><small>"
        f"{esc(r['description'])}</small></td><td>{esc(', '.join(sorted(r['failing_verdicts'])))}"
        f"</td><td>{r['detected']}/{r['n']}</td><td>{_iv(r)}</td><td>{r['named']}/{r['n']}"
        f"</td><td><small>{esc(r['example_reason'][:300])}</small></td></tr>"
        for r in d["operators"])
    ref_rows = "".join(
        f"<tr class='{'fail' if r['gap'] else ''}'><td>{r['modulation']}</td><td>{r['bench']}"
        f"</td><td>{esc(r['verdict'])}</td><td>{r['fails']}/{r['n']}</td><td>{_iv(r)}</td>"
        f"<td>{esc(r['stated'])}</td></tr>" for r in d["reference"])
    oc_rows = "".join(
        f"<tr><td>{r['modulation']}</td><td>{r['ebn0_db']:g}</td><td>{r['loss_db']:g}</td>"
        f"<td>{r['passes']}/{r['n']}</td><td>{_iv(r)}</td><td>{r['wald']:.3f}</td>"
        f"<td>{'yes' if r['within'] else 'no'}</td></tr>" for r in d["ber_oc"])
    fig = f"<img src='{figure}' alt='BER operating characteristic'>" if figure else ""
    return f"""<!doctype html><html><head><meta charset="utf-8">
<title>modemverify self-test certificate</title><style>{CSS}</style></head><body>
<h1>modemverify self-test certificate</h1><p><small>{stamp}</small></p>{status}
<h2>Defect classes: which verdicts fail, detection rate, whether the defect is named</h2>
<p>Intervals: exact Clopper-Pearson, {d['stamp']['confidence']:g} two-sided. Classes marked
"(power)" are judged statistically; their detection rate is the check's power at that loss.</p>
<table><tr><th>modulation</th><th>class</th><th>operator</th><th>failing verdicts</th>
<th>detected</th><th>interval</th><th>named</th><th>reason (first seed)</th></tr>{op_rows}</table>
<h2>The unmutated reference: false-fail rate of every verdict</h2>
<table><tr><th>modulation</th><th>bench</th><th>verdict</th><th>fails</th><th>interval</th>
<th>stated risk</th></tr>{ref_rows}</table>
<h2>BER: probability of a pass against the true loss</h2>{fig}
<table><tr><th>modulation</th><th>Eb/N0 (dB)</th><th>true loss (dB)</th><th>passes</th>
<th>interval</th><th>Wald</th><th>Wald within interval</th></tr>{oc_rows}</table>
</body></html>
"""


def _junit(cert: Certificate) -> str:
    st = {k: str(v) for k, v in cert.data["stamp"].items()}
    cases = []
    for r in cert.data["operators"]:
        c = TestCase(f"{r['modulation']}.{r['operator']}", classname="modemverify.selftest."
                     f"{r['class']}", stdout=json.dumps({k: r[k] for k in (
                         "detected", "named", "n", "interval", "failing_verdicts")}))
        if r["gap"]:
            c.add_failure_info(message=f"detected {r['detected']}/{r['n']}, named "
                               f"{r['named']}/{r['n']}: {r['example_reason']}")
        cases.append(c)
    for r in cert.data["reference"]:
        c = TestCase(f"{r['modulation']}.{r['bench']}.{r['verdict']}",
                     classname="modemverify.selftest.false_fail",
                     stdout=f"{r['fails']}/{r['n']} fail; stated risk {r['stated']}")
        if r["gap"]:
            c.add_failure_info(message=f"false-fail rate {r['fails']}/{r['n']} above the "
                               f"stated risk {r['risk']:.3g}")
        cases.append(c)
    for r in cert.data["ber_oc"]:
        cases.append(TestCase(f"{r['modulation']}.loss={r['loss_db']:g}dB",
                              classname="modemverify.selftest.ber_oc",
                              stdout=f"{r['passes']}/{r['n']} pass; Wald {r['wald']:.4f}"))
    return to_xml_report_string([TestSuite("modemverify-selftest", cases, properties=st)],
                                encoding="utf-8")


def write_certificate(cert: Certificate, *, report: str | Path | None = None,
                      junit: str | Path | None = None) -> None:
    """``report``: a folder for index.html, certificate.json and the figure; ``junit``: a file."""
    if report is not None:
        folder = Path(report)
        folder.mkdir(parents=True, exist_ok=True)
        figure = _oc_plot(cert.data["ber_oc"], folder)
        write_atomic(folder / "certificate.json", json.dumps(cert.data, indent=1) + "\n")
        write_atomic(folder / "index.html", _html(cert, figure))
    if junit is not None:
        write_atomic(junit, _junit(cert))


def certify(modulations=DEFAULT_MODULATIONS, *, seeds: int = DEFAULT_SEEDS, seed: int = 1,
            report=None, junit=None, oracles=None, operators=None, oc_seeds=None,
            out=print) -> Certificate:
    """What ``modemverify selftest`` does: run, print a line per operator and every gap, write
    the outputs; the command exits non-zero when ``not certificate.ok``."""
    cert = run_selftest(modulations, seeds=seeds, seed=seed, oracles=oracles,
                        operators=operators, oc_seeds=oc_seeds, progress=out)
    write_certificate(cert, report=report, junit=junit)
    st = cert.data["stamp"]
    out(f"modemverify {st['modemverify']} self-test, seeds {st['seed']}.."
        f"{st['seed'] + st['seeds'] - 1}, {st['duration_s']:.0f} s: "
        + ("no gap" if cert.ok else f"{len(cert.gaps)} gap(s)"))
    for gap in cert.gaps:
        out(f"  GAP  {gap}")
    return cert
