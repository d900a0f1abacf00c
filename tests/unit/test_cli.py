"""The command line as a user meets it: exit codes, JUnit, report, identify."""

from __future__ import annotations

import json
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from modemverify.cli import main

HERE = Path(__file__).parent


def device_file(tmp_path, name, target="Qpsk3gpp", params=None, extra=""):
    p = tmp_path / f"{name}.yaml"
    p.write_text(
        f"name: {name}\nadapter: python\ntarget: {HERE / 'devices' / 'modems.py'}:{target}\n"
        f"params: {json.dumps(params or {})}\n"
        f"scheme: {{modulation: qpsk, convention: 3gpp}}\n{extra}")
    return p


def test_exit_0_junit_and_report_for_a_correct_device(tmp_path, capsys):
    f = device_file(tmp_path, "good")
    junit, report = tmp_path / "out.xml", tmp_path / "rep"
    assert main(["check", str(f), "--junit", str(junit), "--report", str(report)]) == 0
    out = capsys.readouterr().out
    assert "OK" in out and "PASS" in out
    suites = ET.parse(junit).getroot()
    [suite] = suites.findall("testsuite")
    assert suite.get("name") == "good" and suite.get("failures") == "0"
    names = {c.get("name") for c in suite.findall("testcase")}
    assert {"mapping", "gray", "roundtrip", "length.modulate"} <= names
    props = {p.get("name"): p.get("value") for p in suite.iter("property")}
    assert props["seed"] == "1" and props["modulation"] == "qpsk"
    html = (report / "index.html").read_text()
    assert "good" in html and "constellation.png" in html
    assert (report / "good-constellation.png").stat().st_size > 1000
    assert json.loads((report / "verdicts.json").read_text())[0]["ok"] is True


def test_exit_1_and_failure_text_for_a_defect(tmp_path, capsys):
    f = device_file(tmp_path, "swapped", params={"defect": "swap"})
    junit = tmp_path / "out.xml"
    assert main(["check", str(f), "--junit", str(junit), "--seed", "5"]) == 1
    out = capsys.readouterr().out
    assert "FAIL" in out and "arms swapped" in out and "--seed 5" in out
    case = next(c for c in ET.parse(junit).getroot().iter("testcase")
                if c.get("name") == "mapping")
    failure = case.find("failure")
    assert "arms swapped" in failure.get("message")
    assert "Minimal counterexample" in failure.text and "Seed: 5" in failure.text


@pytest.mark.parametrize("defect,check,words", [
    ("wrong_dtype", "mapping", "returned dtype"),
    ("raises", "roundtrip", "ZeroDivisionError: division by zero in slicer"),
    ("nan", "roundtrip", "non-finite sample"),
])
def test_misbehaving_device_gives_error_verdicts_and_the_rest_still_run(tmp_path, capsys,
                                                                        defect, check, words):
    f = device_file(tmp_path, defect, params={"defect": defect})
    junit = tmp_path / "out.xml"
    assert main(["check", str(f), "--junit", str(junit)]) == 1
    cases = {c.get("name"): c for c in ET.parse(junit).getroot().iter("testcase")}
    assert len(cases) >= 6  # every check reported
    problem = cases[check].find("error")
    if problem is None:
        problem = cases[check].find("failure")
    assert problem is not None and words in (problem.get("message") + problem.text)


def test_device_that_cannot_be_created_is_an_error_verdict(tmp_path):
    f = device_file(tmp_path, "nolicense", target="broken_factory")
    assert main(["check", str(f)]) == 1


@pytest.mark.parametrize("argv,words", [
    (["check", "missing.yaml"], "no such device file"),
    (["check", "{good}", "--only", "mapings"], "no check named 'mapings'"),
    (["check", "{good}", "--seed", "x"], "expected a whole number"),
    (["frobnicate"], "invalid choice"),
])
def test_exit_2_for_bad_usage(tmp_path, capsys, argv, words):
    good = device_file(tmp_path, "good")
    argv = [a.replace("{good}", str(good)) for a in argv]
    with pytest.raises(SystemExit) if argv[0] == "frobnicate" or "x" in argv else _null():
        code = main(argv)
        assert code == 2
    err = capsys.readouterr().err
    assert words in err and "Traceback" not in err


class _null:
    def __enter__(self):
        return self

    def __exit__(self, *a):
        return False


def test_identify_json(tmp_path, capsys):
    f = device_file(tmp_path, "swapped", params={"defect": "swap"})
    assert main(["identify", str(f), "--json"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert info["modulation"] == "qpsk" and info["bits_per_symbol"] == 2
    # 3GPP QPSK with swapped arms is exactly the generic Gray QPSK table (common practice:
    # binary-reflected Gray around the circle from 45 degrees), and a swap of 3GPP's
    assert info["gray"] is True and info["closest_convention"] == "gray"
    assert info["matches"] == ["gray"]
    # TS 38.211 5.1.3 with the bits swapped: label 01 -> (-1+1j)/sqrt2
    assert info["mapping"]["01"] == pytest.approx([-0.70710678, 0.70710678])
    assert set(info["others"]["3gpp"]) == {"label bits reversed (LSB first)",
                                           "I and Q arms swapped"}


def test_console_script_runs_as_a_process(tmp_path):
    f = device_file(tmp_path, "good")
    proc = subprocess.run([sys.executable, "-m", "modemverify.cli", "check", str(f)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr


def test_sigterm_while_the_command_line_loads_still_leaves_a_junit_file(tmp_path):
    # the console script records a stop signal before its heavy imports (modemverify._entry);
    # sent while Python starts, the run then stops at once and still writes every device
    import signal
    import time

    f = device_file(tmp_path, "early")
    junit = tmp_path / "out.xml"
    code = "import sys; from modemverify._entry import main; sys.exit(main(sys.argv[1:]))"
    proc = subprocess.Popen([sys.executable, "-c", code, "check", str(f), "--junit",
                             str(junit)], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True)
    time.sleep(0.05)  # inside the imports, or at worst early in the run: the same record
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, out + err
    assert "Traceback" not in err
    suite = ET.parse(junit).getroot().find("testsuite")
    assert suite.get("name") == "early"
    props = {p.get("name"): p.get("value") for p in suite.iter("property")}
    assert props["interrupted"].startswith("true")
    assert {c.get("name") for c in suite.findall("testcase")} >= {"mapping", "length.modulate"}


def test_a_python_target_imports_its_sibling_and_no_cache_is_left_in_the_working_folder(
        tmp_path):
    dev = tmp_path / "dev"
    dev.mkdir()
    (dev / "helper.py").write_text("SCALE = 1.0\n")
    (dev / "modem.py").write_text(
        "import helper\nfrom modemverify.schemes.conventions import get_convention\n"
        "from modemverify.schemes.labels import bits_to_labels\nclass M:\n"
        "    def modulate(self, bits):\n        return helper.SCALE * get_convention("
        "'3gpp', 'qpsk').points[bits_to_labels(bits, 2)]\n")
    (dev / "d.yaml").write_text("name: sib\nadapter: python\ntarget: modem.py:M\n"
                                "scheme: {modulation: qpsk, convention: 3gpp}\n"
                                "checks: {ber: false, roundtrip: {max_examples: 10}}\n")
    work = tmp_path / "work"
    work.mkdir()
    proc = subprocess.run([sys.executable, "-m", "modemverify.cli", "check", str(dev / "d.yaml")],
                          capture_output=True, text=True, timeout=300, cwd=work,
                          env={k: v for k, v in __import__("os").environ.items()
                               if k != "HYPOTHESIS_STORAGE_DIRECTORY"}
                          | {"XDG_CACHE_HOME": str(tmp_path / "cache")})
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert list(work.iterdir()) == []  # no .hypothesis folder in the user's working folder
