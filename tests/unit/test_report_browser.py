"""The HTML report as a person sees it: rendered by headless Chromium, not only read as text.

Chromium (Debian's ``chromium`` package; `.ci/run` installs it where it can) loads the report of
a shaped 16QAM reference device, a device with its label bits inverted and a comparison, takes
a screenshot and dumps the DOM after layout. The page must show the header, the summary table
with a link per device, every figure the report names (each a PNG that exists and decodes), and
no filler cells.
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest

from modemverify.compare import compare
from modemverify.config import parse_device
from modemverify.report.html import write_report
from modemverify.runner import check

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="headless Chromium is not installed")

RRC = {"modulation": "16qam", "convention": "3gpp", "samples_per_symbol": 8,
       "pulse": {"shape": "rrc", "rolloff": 0.35, "span": 10}}
FAST = {"ber": {"ebn0_db": [10.0], "max_bits": 2e5}, "roundtrip": {"max_examples": 20},
        "llr": {"bits": 20000}}


def _chromium(url: str, *extra: str, tmp: Path) -> subprocess.CompletedProcess:
    return subprocess.run(
        [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
         "--no-first-run", "--disable-background-networking", "--disable-component-update",
         "--disable-sync", f"--user-data-dir={tmp / 'profile'}", *extra, url],
        capture_output=True, text=True, timeout=180)


def test_report_renders_with_summary_and_every_figure(tmp_path):
    ref = parse_device({"name": "shaped-ref", "adapter": "reference", "scheme": RRC,
                        "checks": FAST})
    results = [check(ref)]
    a = parse_device({"name": "a", "adapter": "reference", "scheme": RRC})
    results.append(compare(a, a))
    index = write_report(results, tmp_path / "report", title="browser check")
    url = index.resolve().as_uri()

    shot = tmp_path / "shot.png"
    run = _chromium(url, "--window-size=1280,4000", f"--screenshot={shot}", tmp=tmp_path)
    assert shot.exists(), run.stderr[-2000:]
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 20_000

    dom = _chromium(url, "--dump-dom", tmp=tmp_path).stdout
    assert "<table class=\"meta\">" in dom and "modemverify" in dom and "UTC" in dom
    summary = re.search(r'<table class="summary">(.*?)</table>', dom, re.S).group(1)
    assert 'href="#shaped-ref"' in summary and 'href="#a-vs-a"' in summary
    figures = re.findall(r'<img src="([^"]+)"', dom)
    names = {Path(f).name for f in figures}
    assert {"shaped-ref-constellation.png", "shaped-ref-psd.png", "shaped-ref-eye.png",
            "shaped-ref-evm-labels.png", "shaped-ref-ber.png", "shaped-ref-llr.png",
            "a-vs-a-ab-psd.png",
            "a-vs-a-ab-error.png"} <= names
    for f in figures:
        data = (index.parent / f).read_bytes()
        assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 5_000, f
    assert "-inf" not in dom and "nan" not in re.sub(r"<[^>]+>", " ", dom).split()
