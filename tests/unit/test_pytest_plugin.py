"""The pytest plugin: device files as test items beside a team's own tests, and the fixture.

Every run is a fresh pytest process in an empty folder (``pytester.runpytest_subprocess``), as
a team would start it; the devices are real numpy devices (the invented demo's Tern ports and a
small QPSK modem written here from TS 38.211 5.1.3), correct or broken on purpose.
"""

from __future__ import annotations

import subprocess
import sys
import xml.etree.ElementTree as ET
from importlib.metadata import entry_points
from pathlib import Path

import pytest

from modemverify.config import load_device
from modemverify.report.junit import junit_xml
from modemverify.runner import check, expected_names

pytest_plugins = ["pytester"]

DEMO = Path(__file__).resolve().parents[2] / "modemverify" / "demo" / "tern_modems.py"
#: the short checks (no BER: its verdict names are covered by the inconclusive case below)
FAST = "checks: {ber: false, roundtrip: {max_examples: 20}}"

#: TS 38.211 5.1.3: d = ((1 - 2b(2i)) + j(1 - 2b(2i+1))) / sqrt(2); ``swap`` drives I with the
#: second bit (arms swapped); ``log`` gets one line (the process id) per device opened
QPSK_DEVICE = '''
import os
import numpy as np

class Qpsk:
    def __init__(self, log=None, swap=False):
        if log:
            with open(log, "a") as f:
                f.write(f"{os.getpid()}\\n")
        self.swap = swap

    def modulate(self, bits):
        b = np.asarray(bits, dtype=np.int8).reshape(-1, 2)
        if self.swap:
            b = b[:, ::-1]
        return ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1])) / np.sqrt(2)

    def demodulate(self, samples):
        s = np.asarray(samples)
        b = np.stack([s.real < 0, s.imag < 0], axis=1)
        if self.swap:
            b = b[:, ::-1]
        return b.astype(np.uint8).ravel()
'''


def _plugin() -> list[str]:
    """``-p modemverify.pytest_plugin`` unless the installed metadata already registers it
    (then pytest loads it from the entry point, and a second registration would clash)."""
    found = any(ep.value == "modemverify.pytest_plugin"
                for ep in entry_points(group="pytest11"))
    return [] if found else ["-p", "modemverify.pytest_plugin"]


def _tern(pytester, name, defect=None, extra=FAST) -> Path:
    path = pytester.path / f"{name}.yaml"
    path.write_text(f"name: {name}\nadapter: python\ntarget: {DEMO}:TernModem\n"
                    f"params: {{modulation: 16qam, defect: {defect or 'null'}}}\n"
                    f"scheme: {{modulation: 16qam, convention: 3gpp}}\n{extra}\n")
    return path


def _qpsk(pytester, name, extra=FAST, **params) -> Path:
    pytester.path.joinpath("qpsk_dev.py").write_text(QPSK_DEVICE)
    args = ", ".join(f"{k}: {v!r}" for k, v in params.items())
    path = pytester.path / f"{name}.yaml"
    path.write_text(f"name: {name}\nadapter: python\ntarget: qpsk_dev.py:Qpsk\n"
                    f"params: {{{args}}}\nscheme: {{modulation: qpsk, convention: 3gpp}}\n"
                    f"{extra}\n")
    return path


def _run(pytester, *args):
    return pytester.runpytest_subprocess(*_plugin(), "-p", "no:cacheprovider", "-rA", *args)


def _cases(xml_path: Path, *, by_class=False) -> dict:
    """{test case name (with its class name): outcome} of a JUnit file (pytest's or
    modemverify's)."""
    out = {}
    for case in ET.parse(xml_path).getroot().iter("testcase"):
        kinds = [c.tag for c in case if c.tag in ("failure", "error", "skipped")]
        key = (case.get("classname"), case.get("name")) if by_class else case.get("name")
        out[key] = kinds[0] if kinds else "pass"
    return out


def test_a_correct_device_gives_one_passed_test_per_passing_verdict(pytester):
    device = _tern(pytester, "port")
    run = _run(pytester, "--modemverify", "port.yaml", "--junitxml=pytest.xml")
    result = check(load_device(device))
    counts = result.counts()
    assert result.ok and counts["pass"] > 0
    run.assert_outcomes(passed=counts["pass"], skipped=counts.get("skipped", 0))
    assert run.ret == 0
    # the items carry the names of modemverify's own JUnit test cases, with the same outcomes
    pytester.path.joinpath("mv.xml").write_text(junit_xml([result]))
    assert _cases(pytester.path / "pytest.xml") == _cases(pytester.path / "mv.xml")
    assert list(_cases(pytester.path / "pytest.xml")) == expected_names(load_device(device))


def test_a_broken_device_fails_with_the_verdicts_reason_and_no_traceback(pytester):
    _tern(pytester, "port")
    _tern(pytester, "swapped", "swapped_arms")
    run = _run(pytester, "--modemverify", "port.yaml", "swapped.yaml")
    assert run.ret == 1
    outcomes = run.parseoutcomes()
    assert outcomes["failed"] == 1
    run.stdout.fnmatch_lines(["FAIL mapping: *I and Q arms swapped*",
                              "FAILED swapped.yaml::mapping - *"])
    text = run.stdout.str()
    assert "Minimal counterexample: bits=" in text and "Seed: 1" in text
    assert "Traceback" not in text and "pytest_plugin.py" not in text
    # a verdict skipped because mapping failed is a skipped test, with its reason
    run.stdout.fnmatch_lines(["SKIPPED * swapped.yaml:1: not judged because mapping failed*"])


def test_the_seed_option_reaches_every_verdict(pytester):
    _tern(pytester, "swapped", "swapped_arms")
    run = _run(pytester, "--modemverify", "swapped.yaml", "--modemverify-seed", "7")
    assert run.ret == 1
    run.stdout.fnmatch_lines(["modemverify *, seed 7"])
    assert "Seed: 7" in run.stdout.str() and "Seed: 1" not in run.stdout.str()
    bad = _run(pytester, "--modemverify", "swapped.yaml", "--modemverify-seed", "-3")
    assert bad.ret == pytest.ExitCode.USAGE_ERROR
    bad.stderr.fnmatch_lines(["*--modemverify-seed='-3': expected a number >= 0*"])


def test_a_bad_device_file_is_a_collection_error_naming_file_key_and_expectation(pytester):
    _tern(pytester, "port")
    _tern(pytester, "bad", extra="checks: {energy: {tolernce_db: 1}}")
    run = _run(pytester, "--modemverify", "bad.yaml", "port.yaml")
    # like the command line's exit 2: nothing runs when a device file is wrong
    assert run.ret == pytest.ExitCode.INTERRUPTED
    run.stdout.fnmatch_lines(["modemverify: error: *bad.yaml: checks.energy.tolernce_db: "
                              "unknown option 'tolernce_db'; known options: *tolerance_db"])
    assert "Traceback" not in run.stdout.str()
    assert "passed" not in run.stdout.str()


def test_inconclusive_follows_the_gating_rule(pytester):
    # a correct QPSK device given a budget far below what the sequential test needs
    ber = "checks: {ber: {ebn0_db: [6.0], max_bits: 2e3}, llr: false, roundtrip: false}"
    _qpsk(pytester, "loose", extra=ber)
    _qpsk(pytester, "strict", extra=ber + "\nfail_on_inconclusive: true")
    loose = _run(pytester, "--modemverify", "loose.yaml")
    assert loose.ret == 0
    loose.stdout.fnmatch_lines(["SKIPPED * loose.yaml:1: inconclusive: *budget of 2e+03 bits "
                                "spent before a decision*"])
    strict = _run(pytester, "--modemverify", "strict.yaml")
    assert strict.ret == 1
    strict.stdout.fnmatch_lines(["inconclusive (fail_on_inconclusive: true): INCONCLUSIVE "
                                 "ber.ebn0=6dB: *budget*", "FAILED strict.yaml::ber.ebn0=6dB*"])


@pytest.mark.parametrize("dist", ["load", "loadgroup", "loadfile"])
def test_xdist_workers_give_the_same_outcomes_and_check_a_device_once_each(pytester, dist):
    pytest.importorskip("xdist")  # the test extra installs it
    log = pytester.path / "opened.log"
    _qpsk(pytester, "good", log=str(log))
    _qpsk(pytester, "swapped", swap=True)
    serial = _run(pytester, "--modemverify", "good.yaml", "swapped.yaml",
                  "--junitxml=serial.xml")
    log.unlink()
    spread = _run(pytester, "--modemverify", "good.yaml", "swapped.yaml", "-n", "2",
                  "--dist", dist, "--junitxml=spread.xml")
    assert serial.ret == spread.ret == 1
    serial_cases = _cases(pytester.path / "serial.xml", by_class=True)
    assert len(serial_cases) == 2 * len(expected_names(load_device(pytester.path / "good.yaml")))
    assert serial_cases == _cases(pytester.path / "spread.xml", by_class=True)
    spread.stdout.fnmatch_lines(["FAIL mapping: *I and Q arms swapped*"])
    pids = log.read_text().split()
    assert len(pids) == len(set(pids))  # at most one check of the device per worker
    if dist == "loadfile":
        assert len(pids) == 1  # grouped by file: one worker runs the whole device file
    # (loadgroup groups by the xdist_group mark the items carry, but pytest-xdist 3.8 under
    # pytest 9.2 drops the group: pytest-dev/pytest-xdist issue 1386; so only "at most once")


def test_without_the_option_nothing_is_collected_beside_a_teams_tests(pytester):
    _tern(pytester, "port")
    pytester.makepyfile(test_team="def test_own():\n    assert 1 + 1 == 2\n")
    run = _run(pytester)
    run.assert_outcomes(passed=1)
    listed = _run(pytester, "--collect-only", "-q")
    assert "port.yaml" not in listed.stdout.str()
    # and beside the option, a team's own tests still run with the device's items
    both = _run(pytester, "--modemverify", "port.yaml")
    assert both.ret == 0
    both.stdout.fnmatch_lines(["PASSED test_team.py::test_own", "PASSED port.yaml::mapping"])


def test_the_fixture_gives_a_teams_own_tests_the_run_result(pytester):
    _tern(pytester, "port")
    _tern(pytester, "swapped", "swapped_arms")
    _tern(pytester, "bad", extra="checks: {energy: {tolernce_db: 1}}")
    pytester.makepyfile(test_team='''
        def test_port_maps(modemverify_check):
            r = modemverify_check("port.yaml")
            assert r.verdict("mapping").outcome == "pass"
            assert modemverify_check("port.yaml") is r  # checked once per session

        def test_swapped_maps(modemverify_check):
            assert modemverify_check("swapped.yaml").verdict("mapping").outcome == "pass"

        def test_seed(modemverify_check):
            assert modemverify_check("port.yaml", seed=5).seed == 5

        def test_bad(modemverify_check):
            modemverify_check("bad.yaml")
    ''')
    run = _run(pytester)
    run.assert_outcomes(passed=2, failed=2)
    run.stdout.fnmatch_lines(["FAILED test_team.py::test_swapped_maps - *"])
    run.stdout.fnmatch_lines(["modemverify: error: *bad.yaml: checks.energy.tolernce_db: "
                              "unknown option*"])


def test_importing_the_plugin_loads_none_of_the_harness():
    # pytest imports it in every run once modemverify is installed, --modemverify or not
    code = ("import sys, modemverify.pytest_plugin; "
            "print(sorted(m for m in sys.modules if m.startswith(('modemverify.', 'numpy'))))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.strip() == "['modemverify._door', 'modemverify._version', " \
                          "'modemverify.pytest_plugin']"
