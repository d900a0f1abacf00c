"""The self-test certificate: every mapping-class defect caught and named in every seed, the
reference's false-fail rates consistent with the stated risks, the BER pass probability beside
Wald's operating characteristic, and a weakened check showing up as a gap.

Sources: the exact interval is Clopper and Pearson, Biometrika 26(4):404-413, 1934; the
operating characteristic L(p) = (A^h - 1)/(A^h - B^h) with A = (1 - beta)/alpha and
B = beta/(1 - alpha) is A. Wald, *Sequential Analysis*, Wiley 1947 (the formula from memory);
the BER of rotated QPSK is common practice (from memory).
"""

from __future__ import annotations

import json
import math
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from scipy.stats import binomtest, norm

from modemverify.cli import main
from modemverify.oracles.mapping import MappingOracle
from modemverify.schemes.conventions import get_convention
from modemverify.selftest import (
    GATING_CLASSES,
    OPERATORS,
    certify,
    phase_for_loss,
    rotated_ber,
    run_selftest,
)
from modemverify.verdict import Verdict


@pytest.fixture(scope="module")
def certificate():
    # the short self-test of the suite: two schemes, two seeds, a small operating curve
    return run_selftest(("qpsk", "16qam"), seeds=2, seed=1, oc_seeds=6)


def test_at_least_twenty_defect_classes_of_operators_with_declared_names():
    assert len(OPERATORS) >= 20
    assert len({op.name for op in OPERATORS}) == len(OPERATORS)
    for op in OPERATORS:
        assert op.words and op.verdict and op.defect_class


def test_every_mapping_class_defect_is_detected_and_named_in_every_seed(certificate):
    rows = [r for r in certificate.data["operators"] if r["class"] == "mapping"]
    assert {r["modulation"] for r in rows} == {"qpsk", "16qam"}
    assert len(rows) == 2 * sum(op.defect_class == "mapping" for op in OPERATORS)
    for r in rows:
        assert (r["detected"], r["named"]) == (r["n"], r["n"]) == (2, 2), r
        assert "mapping" in r["failing_verdicts"]
    for r in certificate.data["operators"]:
        if r["class"] in GATING_CLASSES:
            assert r["detected"] == r["named"] == r["n"], r


def test_detection_interval_is_clopper_pearson(certificate):
    for r in certificate.data["operators"]:
        ci = binomtest(r["detected"], r["n"]).proportion_ci(0.95, method="exact")
        assert r["interval"] == pytest.approx([ci.low, ci.high], rel=1e-9, abs=1e-12)


def test_false_fail_rates_are_consistent_with_the_stated_risk(certificate):
    rows = certificate.data["reference"]
    names = {r["verdict"] for r in rows}
    assert {"mapping", "energy", "roundtrip", "llr.sign", "spectrum.obw",
            "ber (any point)"} <= names
    for r in rows:
        assert not r["gap"] and r["interval"][0] <= r["risk"], r
        if r["verdict"].startswith("ber."):
            assert r["risk"] == pytest.approx(0.05 / 3)  # familywise over 3 default points
    assert certificate.ok, certificate.gaps


def test_ber_pass_probability_follows_walds_operating_characteristic(certificate):
    rows = [r for r in certificate.data["ber_oc"] if r["modulation"] == "qpsk"]
    assert [r["loss_db"] for r in rows][0] == 0 and rows[-1]["loss_db"] == 2
    by = {r["loss_db"]: r for r in rows}
    # Wald: L(p0) = 1 - alpha, L(p1) = beta (alpha = beta = 0.05 for one point)
    assert by[0.0]["wald"] == pytest.approx(0.95, abs=1e-6)
    assert by[0.5]["wald"] == pytest.approx(0.05, abs=1e-6)
    for r in rows:
        ci = binomtest(r["passes"], r["n"]).proportion_ci(0.95, method="exact")
        assert r["interval"] == pytest.approx([ci.low, ci.high], rel=1e-9, abs=1e-12)
    assert by[0.0]["passes"] >= 4 and by[2.0]["passes"] == 0  # power rises with the loss


def test_rotated_qpsk_ber_matches_the_closed_form():
    pts = get_convention("3gpp", "qpsk").points
    for ebn0, deg in ((4.0, 0.0), (6.8, 7.0), (8.0, 15.0)):
        g, t = 10 ** (ebn0 / 10), math.radians(deg)
        a = math.sqrt(2 * g)
        closed = 0.5 * (norm.sf(a * (math.cos(t) - math.sin(t)))
                        + norm.sf(a * (math.cos(t) + math.sin(t))))
        assert rotated_ber("qpsk", pts, ebn0, t) == pytest.approx(closed, rel=1e-9)
    theta = phase_for_loss("qpsk", pts, 6.8, 1.0)
    assert rotated_ber("qpsk", pts, 6.8, theta) == pytest.approx(norm.sf(math.sqrt(
        2 * 10 ** (5.8 / 10))), rel=1e-6)


class RotationBlindMapping(MappingOracle):
    """A deliberately weakened mapping check: it lets a rotated table pass."""

    def run(self, bench, opts, rng, seed):
        for v in super().run(bench, opts, rng, seed):
            if v.outcome == "fail" and "rotated by" in v.reason:
                v = Verdict(v.name, "pass", "the table is a rotation of the claim (ignored)",
                            seed=seed)
            yield v


def test_a_weakened_check_shows_as_a_gap_and_fails_the_selftest(tmp_path):
    lines = []
    cert = certify(["16qam"], seeds=1, operators=["rotated_90", "rotated_270", "iq_swapped"],
                   oracles={"mapping": RotationBlindMapping()}, oc_seeds=0,
                   report=tmp_path / "r", junit=tmp_path / "j.xml", out=lines.append)
    assert not cert.ok
    gapped = {r["operator"] for r in cert.data["operators"] if r["gap"]}
    assert gapped == {"rotated_90", "rotated_270"}
    assert cert.data["stamp"]["weakened_checks"] == ["mapping"]
    assert any("GAP" in line and "rotated_90" in line for line in lines)
    data = json.loads((tmp_path / "r" / "certificate.json").read_text())
    assert data["ok"] is False and data["stamp"]["numpy"] == np.__version__
    suite = ET.parse(tmp_path / "j.xml").getroot().find("testsuite")
    failed = {c.get("name") for c in suite.iter("testcase") if c.find("failure") is not None}
    assert failed == {"16qam.rotated_90", "16qam.rotated_270"}
    assert "rotated_90" in (tmp_path / "r" / "index.html").read_text()


def test_the_command_refuses_a_bad_seed_count(capsys):
    assert main(["selftest", "--seeds", "0"]) == 2
    assert "--seeds=0" in capsys.readouterr().err
