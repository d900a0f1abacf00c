"""The human report: ``index.html`` with every device's verdicts, tables and figures."""

from __future__ import annotations

import html
import json
import re
from pathlib import Path

from .._version import __version__
from ..verdict import ranked
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
"""


def _slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "-", text).strip("-") or "device"


def _verdict_rows(result) -> str:
    rows = []
    for v in ranked(result.verdicts):
        stat = ""
        if v.statistic is not None:
            stat = f"{v.statistic:.4g} {html.escape(v.unit)}"
            if v.interval is not None:
                stat += f"<br>[{v.interval[0]:.3g}, {v.interval[1]:.3g}]"
        limit = "" if v.limit is None else f"{v.limit:.4g}"
        ce = f"<br><code>{html.escape(v.counterexample)}</code>" if v.counterexample else ""
        rows.append(f"<tr class='{v.outcome}'><td class='tag'>{v.outcome.upper()}</td>"
                    f"<td><code>{html.escape(v.name)}</code></td>"
                    f"<td>{html.escape(v.reason)}{ce}</td><td>{stat}</td><td>{limit}</td>"
                    f"<td>{v.duration_s:.2f} s</td></tr>")
    return ("<table><tr><th>outcome</th><th>check</th><th>reason</th><th>measured</th>"
            "<th>limit</th><th>time</th></tr>" + "".join(rows) + "</table>")


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
    used = set()
    for result in results:
        stem = _slug(result.subject.name)
        while stem in used:
            stem += "_"
        used.add(stem)
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
        sections.append(
            f"<h2 id='{stem}'>{html.escape(subject.name)} — {status}</h2>"
            f"<p>{html.escape(subject.description)}</p>"
            f"<p>adapter <code>{html.escape(subject.adapter)}</code>, "
            f"{html.escape(subject.scheme.describe())}, seed <code>{result.seed}</code>; "
            + result.tally()
            + (f"; rerun <code>modemverify check {html.escape(subject.file)} --seed {result.seed}"
               f"</code>" if subject.file else "") + "</p>"
            + _verdict_rows(result) + figs + _mapping_table(result) + notes)
        record.append({"device": subject.name, "file": subject.file, "seed": result.seed,
                       "ok": result.ok, "verdicts": [v.to_json() for v in result.verdicts]})
    toc = "".join(f"<li><a href='#{_slug(r.subject.name)}'>{html.escape(r.subject.name)}</a> — "
                  f"{'OK' if r.ok else 'NOT OK'}</li>" for r in results)
    page = (f"<!doctype html><html><head><meta charset='utf-8'><title>{html.escape(title)}"
            f"</title><style>{CSS}</style></head><body><h1>{html.escape(title)}</h1>"
            f"<p>modemverify {__version__}. JSON record: <a href='verdicts.json'>verdicts.json</a>"
            f"</p><p class='caution'>A pass here means the device agrees with the reference on "
            f"the properties listed, on the vectors tried. It does not replace the conformance "
            f"procedure of the governing standard (for example the 3GPP or IEEE test "
            f"specifications), which defines its own test conditions and limits.</p>"
            f"<ul>{toc}</ul>{''.join(sections)}</body></html>")
    write_atomic(folder / "verdicts.json", json.dumps(record, indent=1, default=str))
    index = folder / "index.html"
    write_atomic(index, page)
    return index
