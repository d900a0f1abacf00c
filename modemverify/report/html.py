"""The human report: ``index.html`` with every device's verdicts, tables and figures."""

from __future__ import annotations

import datetime
import html
import json
import platform
import re
from pathlib import Path

import numpy as np
import scipy

from .._version import __version__
from ..verdict import OUTCOMES, ranked
from .outputs import write_atomic
from .plots import PLOTTERS

__all__ = ["CSS", "write_report"]

CSS = """
body{font-family:system-ui,sans-serif;margin:2em;max-width:72em;color:#222}
h1{font-size:1.5em}h2{font-size:1.2em;margin-top:2em;border-bottom:1px solid #ccc}
table{border-collapse:collapse;margin:.5em 0}td,th{border:1px solid #ddd;padding:.25em .6em;
vertical-align:top;font-size:.92em}th{background:#f4f4f4;text-align:left}
.pass{background:#e6f4e6}.fail{background:#fbe3e3}.error{background:#fde9c9}
.inconclusive{background:#fff6c8}.skipped{color:#888}
.tag{font-weight:bold;font-family:monospace}.ok{color:#1a7f1a}.notok{color:#b00}
code,pre{font-family:ui-monospace,monospace;font-size:.9em}pre{white-space:pre-wrap}
.caution{border-left:4px solid #c90;padding:.4em .8em;background:#fffaf0}
figure{display:inline-block;margin:.5em 1em .5em 0;max-width:46em}
figure img{max-width:100%}figcaption{font-size:.85em;color:#555}
.summary td.ok,.summary td.notok{white-space:nowrap}.summary td.n{text-align:right;font-variant-numeric:tabular-nums}.summary td.zero{color:#bbb}
.meta td:first-child{color:#555}.interrupted{border-left:4px solid #b00;padding:.4em .8em;
background:#fdeaea}.num{font-variant-numeric:tabular-nums;white-space:nowrap}
"""


def _num(x: float) -> str:
    """A number as a person reads it: 4 significant digits, no ``-inf`` or ``nan`` filler."""
    if x is None or not np.isfinite(x):
        return "—" if x is None or np.isnan(x) else ("+∞" if x > 0 else "−∞")
    return f"{x:.4g}"


def _with_unit(x, unit: str) -> str:
    return _num(x) + (f" {html.escape(unit)}" if unit and x is not None else "")



def _slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "-", text).strip("-") or "device"


def _verdict_rows(result) -> str:
    rows = []
    for v in ranked(result.verdicts):
        # a number without a unit (a count of nothing, a tolerance in no stated unit) is filler
        judged = v.outcome in ("pass", "fail", "inconclusive") and bool(v.unit)
        stat = _with_unit(v.statistic, v.unit) if judged and v.statistic is not None else ""
        if stat and v.interval is not None:
            conf = f"{v.confidence:.0%} " if v.confidence else ""
            stat += (f"<br><small>{conf}interval {_num(v.interval[0])} to "
                     f"{_num(v.interval[1])}</small>")
        limit = _with_unit(v.limit, v.unit) if judged and v.limit is not None else ""
        ce = f"<br><code>{html.escape(v.counterexample)}</code>" if v.counterexample else ""
        rows.append(f"<tr class='{v.outcome}'><td class='tag'>{v.outcome.upper()}</td>"
                    f"<td><code>{html.escape(v.name)}</code></td>"
                    f"<td>{html.escape(v.reason)}{ce}</td><td class='num'>{stat}</td>"
                    f"<td class='num'>{limit}</td><td class='num'>{v.duration_s:.2f} s</td></tr>")
    return ("<table><tr><th>outcome</th><th>verdict</th><th>reason</th><th>measured</th>"
            "<th>limit</th><th>time</th></tr>" + "".join(rows) + "</table>")


def _summary(results, stems) -> str:
    """Devices x outcomes, each device linked to its section."""
    head = "".join(f"<th>{o}</th>" for o in OUTCOMES)
    rows = []
    for result, stem in zip(results, stems):
        counts = result.counts()
        cells = "".join(f"<td class='n {o if counts.get(o) else 'zero'}'>{counts.get(o, 0)}</td>"
                        for o in OUTCOMES)
        status = "OK" if result.ok else "NOT OK"
        if getattr(result, "interrupted", False):
            status += " (interrupted)"
        rows.append(f"<tr><td><a href='#{stem}'>{html.escape(result.subject.name)}</a></td>"
                    f"<td class='{'ok' if result.ok else 'notok'}'><b>{status}</b></td>{cells}"
                    f"<td>{html.escape(result.subject.scheme.describe())}</td></tr>")
    return (f"<table class='summary'><tr><th>device</th><th>result</th>{head}<th>scheme</th>"
            f"</tr>{''.join(rows)}</table>")


def _header(results) -> str:
    """When, what and where: the facts a reader needs to trust or reproduce the page."""
    seeds = sorted({r.seed for r in results})
    now = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")
    rows = [("date", now), ("modemverify", __version__), ("host", platform.node() or "?"),
            ("platform", f"{platform.system()} {platform.machine()}, Python "
                         f"{platform.python_version()}, numpy {np.__version__}, scipy "
                         f"{scipy.__version__}"),
            ("seed", ", ".join(map(str, seeds))),
            ("devices", f"{len(results)}: {sum(r.ok for r in results)} OK, "
                        f"{sum(not r.ok for r in results)} NOT OK")]
    return ("<table class='meta'>" + "".join(f"<tr><td>{k}</td><td>{html.escape(v)}</td></tr>"
                                            for k, v in rows) + "</table>")


def _mapping_table(result) -> str:
    mapping = next((v for v in result.verdicts if v.name == "mapping" and "table" in v.details),
                   None)
    if mapping is None:
        return ""
    ref = result.subject.scheme.reference.points
    bad = set(mapping.details.get("differing_labels", []))
    rows = []
    for i, (lab, (re_, im_)) in enumerate(mapping.details["table"].items()):
        cls = " class='fail'" if lab in bad else ""
        rows.append(f"<tr{cls}><td><code>{lab}</code></td><td>{re_:+.5f}</td><td>{im_:+.5f}</td>"
                    f"<td>{ref[i].real:+.5f}</td><td>{ref[i].imag:+.5f}</td></tr>")
    conv = result.subject.scheme.convention
    return ("<details><summary>Mapping table (label bits in the order fed to modulate)"
            "</summary><table><tr><th>label</th><th>device I</th><th>device Q</th>"
            f"<th>{conv} I</th><th>{conv} Q</th></tr>" + "".join(rows) + "</table></details>")


def write_report(results, folder: str | Path, *, title: str = "modemverify report") -> Path:
    """Write ``index.html``, figures and ``verdicts.json`` into ``folder``; return the index."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    sections = []
    record = []
    used: set[str] = set()
    stems = []
    for result in results:
        stem = _slug(result.subject.name)
        while stem in used:
            stem += "_"
        used.add(stem)
        stems.append(stem)
    for result, stem in zip(results, stems):
        figures = []
        for plotter in PLOTTERS:
            try:
                figures.extend(plotter(result, folder, stem))
            except Exception as exc:  # a figure must never cost the verdicts
                figures.append(None)
                result.notes.append(f"figure {plotter.__name__} failed: {exc}")
        figs = "".join(
            f"<figure><img src='{html.escape(f.file)}' alt='{html.escape(f.title)}'>"
            f"<figcaption><b>{html.escape(f.title)}.</b> {html.escape(f.caption)}</figcaption>"
            f"</figure>" for f in figures if f)
        status = ("<span class='ok'>OK</span>" if result.ok
                  else "<span class='notok'>NOT OK</span>")
        subject = result.subject
        notes = "".join(f"<p><i>{html.escape(n)}</i></p>" for n in result.notes)
        interrupted = ("<p class='interrupted'><b>Interrupted:</b> the run stopped before this "
                       "device's checks finished; the verdicts below are what was measured, "
                       "the missing ones were not judged.</p>"
                       if getattr(result, "interrupted", False) else "")
        file_line = ""
        if subject.file:
            digest = getattr(subject, "sha256", None)
            file_line = (f"<br>device file <code>{html.escape(subject.file)}</code>"
                         + (f" (sha256 <code>{html.escape(digest[:16])}…</code>)"
                            if digest else "")
                         + f"; rerun <code>modemverify check {html.escape(subject.file)} "
                           f"--seed {result.seed}"
                         + html.escape("".join(f" --only {n}" for n in result.only))
                         + "</code>")
        sections.append(
            f"<h2 id='{stem}'>{html.escape(subject.name)} — {status}</h2>{interrupted}"
            + (f"<p>{html.escape(subject.description)}</p>" if subject.description else "")
            + f"<p>adapter <code>{html.escape(subject.adapter)}</code>, "
            f"{html.escape(subject.scheme.describe())}, seed <code>{result.seed}</code>; "
            + html.escape(result.tally()) + f" ({result.duration_s:.1f} s)" + file_line + "</p>"
            + _verdict_rows(result) + figs + _mapping_table(result) + notes)
        record.append({"device": subject.name, "file": subject.file, "seed": result.seed,
                       "ok": result.ok, "verdicts": [v.to_json() for v in result.verdicts]})
    page = (f"<!doctype html><html><head><meta charset='utf-8'><title>{html.escape(title)}"
            f"</title><style>{CSS}</style></head><body><h1>{html.escape(title)}</h1>"
            + _header(results) + _summary(results, stems)
            + "<p>JSON record of every verdict: <a href='verdicts.json'>verdicts.json</a>.</p>"
            "<p class='caution'><b>A pass is not a certificate.</b> A pass here means the device "
            "agrees with modemverify's reference on the properties listed, on the vectors and "
            "channels tried (an ideal AWGN channel, the device's own receiver). It does not "
            "replace the conformance procedure of the governing standard (3GPP, IEEE 802.11, "
            "ETSI), which defines its own test signals, measurement conditions, equipment and "
            "limits: qualify what you ship with that procedure.</p>"
            + "".join(sections) + "</body></html>")
    write_atomic(folder / "verdicts.json", json.dumps(record, indent=1, default=str))
    index = folder / "index.html"
    write_atomic(index, page)
    return index
