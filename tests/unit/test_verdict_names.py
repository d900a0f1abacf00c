"""The names of a run's verdicts (its JUnit test cases) depend only on the device file and the
modemverify version, never on how the device behaves: CI keeps one history per test case."""

from __future__ import annotations

import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from modemverify.cli import main
from modemverify.config import load_device
from modemverify.runner import check, expected_names

DEVICE = Path(__file__).parent / "devices" / "soft_qpsk.py"
#: every check on, with small budgets; a mask and ACLR so that spectrum declares four parts
CHECKS = ("checks: {ber: {ebn0_db: [4.0, 6.0], max_bits: 2.0e+5}, llr: {bits: 4000}, "
          "roundtrip: {max_examples: 20}, spectrum: {mask: [[0.7, 0], [1.0, -30]], "
          "x_db_limit_rs: 2, aclr: {bandwidth_rs: 1, offset_rs: 1.5, min_db: 20}}}")


def device_file(tmp_path, defect=None, target="SoftQpsk"):
    p = tmp_path / f"{defect or 'correct'}-{target}.yaml"
    params = f"params: {{defect: {defect}}}\n" if defect else ""
    p.write_text(f"name: dut\nadapter: python\ntarget: {DEVICE}:{target}\n{params}"
                 f"scheme: {{modulation: qpsk, convention: 3gpp}}\n{CHECKS}\n")
    return p


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("names")
    return {d: check(device_file(tmp, d)) for d in (None, "raises", "nan", "flip")}


def test_every_device_behaviour_gives_the_same_names(runs):
    names = {d: [v.name for v in r.verdicts] for d, r in runs.items()}
    assert names["raises"] == names[None]
    assert names["nan"] == names[None]
    assert names["flip"] == names[None]
    assert len(set(names[None])) == len(names[None])  # each name once


def test_the_names_are_what_the_device_file_declares(runs, tmp_path):
    spec = load_device(device_file(tmp_path))
    declared = expected_names(spec)
    assert [v.name for v in runs[None].verdicts] == declared
    # the parts the file's options ask for, one BER verdict per Eb/N0 point, all three llr
    # parts, both length sides
    for name in ("length.modulate", "length.demodulate", "spectrum.obw", "spectrum.xdb",
                 "spectrum.mask", "spectrum.aclr", "fixed_point.clipping", "fixed_point.sqnr",
                 "ber.ebn0=4dB", "ber.ebn0=6dB", "llr.sign", "llr.calibration",
                 "llr.mutual_information"):
        assert name in declared


def test_the_behaviours_differ_in_outcomes_not_names(runs):
    by = {d: {v.name: v for v in r.verdicts} for d, r in runs.items()}
    assert runs[None].ok, [v.reason for v in runs[None].verdicts if v.outcome != "pass"
                           and v.outcome != "skipped"]
    # a device that raises: every check that calls modulate errors under each of its names
    assert by["raises"]["length.modulate"].outcome == "error"
    assert "DMA buffer not mapped" in by["raises"]["ber.ebn0=6dB"].reason
    assert by["raises"]["llr.mutual_information"].outcome == "error"
    # NaN output: finite fails, the checks that meet the NaN error
    assert by["nan"]["finite"].outcome == "fail"
    assert by["nan"]["ber.ebn0=4dB"].outcome == "error"
    # flipped LLRs: the sign fails, the other two parts are skipped naming it
    assert by["flip"]["llr.sign"].outcome == "fail"
    assert by["flip"]["llr.calibration"].outcome == "skipped"
    assert "llr.sign failed" in by["flip"]["llr.mutual_information"].reason


def test_a_device_that_cannot_be_opened_reports_every_name_as_an_error(tmp_path):
    path = device_file(tmp_path, target="unopenable")
    res = check(path)
    assert [v.name for v in res.verdicts] == expected_names(load_device(path))
    assert {v.outcome for v in res.verdicts} == {"error"}
    assert "licence server not reachable" in res.verdicts[0].reason


def test_only_restricts_the_names_to_the_checks_run(tmp_path):
    path = device_file(tmp_path, "raises")
    res = check(path, only=["length", "llr"])
    assert [v.name for v in res.verdicts] == [
        "length.modulate", "length.demodulate", "llr.sign", "llr.calibration",
        "llr.mutual_information"]
    assert expected_names(load_device(path), ["length", "llr"]) == [v.name for v in
                                                                    res.verdicts]


def test_junit_test_cases_are_the_same_for_a_correct_and_a_broken_device(tmp_path):
    cases = {}
    for defect in (None, "raises"):
        junit = tmp_path / f"{defect}.xml"
        main(["check", str(device_file(tmp_path, defect)), "--junit", str(junit),
              "--only", "length", "--only", "ber", "--only", "llr"])
        cases[defect] = [c.get("name") for c in ET.parse(junit).getroot().iter("testcase")]
    assert cases["raises"] == cases[None] and len(cases[None]) == 7
