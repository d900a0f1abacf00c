"""What a file or an output path can do to a run (issue: the harness survives everything).

Each case is a real file or path given to the command line; each must end with exit 2 and a
message naming the file or option (or, for text a device supplies, a valid JUnit file and
valid UTF-8 output), never a traceback, and must not touch what it was not asked to write.
"""

from __future__ import annotations

import os
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from modemverify.cli import main
from modemverify.report.outputs import OutputLock

HERE = Path(__file__).parent
GOOD = (f"name: good\nadapter: python\ntarget: {HERE / 'devices' / 'modems.py'}:Qpsk3gpp\n"
        f"scheme: {{modulation: qpsk, convention: 3gpp}}\n"
        f"checks: {{ber: false, llr: false, roundtrip: {{max_examples: 5}}}}\n")


@pytest.fixture
def good(tmp_path):
    p = tmp_path / "good.yaml"
    p.write_text(GOOD)
    return p


def _usage_error(capsys, argv) -> str:
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    return err


@pytest.mark.parametrize("text,words", [
    (GOOD + "name: again\n", "key 'name' is given twice (first on line 1)"),
    (GOOD.replace("checks: {", "checks: {mapping: {tolerance: 0.1}, mapping: {tolerance: 0.2}, "),
     "key 'mapping' is given twice"),
    ("base: &b {modulation: qpsk, convention: 3gpp}\n" + GOOD.replace(
        "scheme: {modulation: qpsk, convention: 3gpp}", "scheme: *b"),
     "anchors and aliases are not accepted"),
    ("name: " + "[" * 500 + "]" * 500 + "\n", "nested more than 32 levels deep"),
    ("name: x\n\tadapter: python\n", "not valid YAML: line 2"),
    ("{[1, 2]: x}\n", "a key must be text or a number"),
])
def test_a_device_file_is_plain_data(tmp_path, capsys, text, words):
    p = tmp_path / "dev.yaml"
    p.write_text(text)
    err = _usage_error(capsys, ["check", str(p)])
    assert str(p) in err and words in err


def test_a_device_file_that_is_not_text_or_too_large(tmp_path, capsys):
    p = tmp_path / "dev.yaml"
    p.write_bytes(b"name: \xff\xfe\n")
    assert "not UTF-8" in _usage_error(capsys, ["check", str(p)])
    p.write_text("# padding\n" * 120_000)
    assert "larger than 1024 KiB" in _usage_error(capsys, ["check", str(p)])
    assert "expected a device file, found a folder" in _usage_error(capsys, ["check",
                                                                             str(tmp_path)])


def test_junit_naming_a_folder_and_report_naming_a_file(tmp_path, capsys, good):
    err = _usage_error(capsys, ["check", str(good), "--junit", str(tmp_path)])
    assert f"--junit {tmp_path}: is a folder" in err
    (tmp_path / "file").write_text("keep me")
    err = _usage_error(capsys, ["check", str(good), "--report", str(tmp_path / "file")])
    assert "--report" in err and "is not a regular file" not in err and "a file" in err
    assert (tmp_path / "file").read_text() == "keep me"


def test_outputs_never_replace_a_link_a_fifo_or_a_device(tmp_path, capsys, good):
    target = tmp_path / "precious.txt"
    target.write_text("keep me")
    link = tmp_path / "link.xml"
    link.symlink_to(target)
    err = _usage_error(capsys, ["check", str(good), "--junit", str(link)])
    assert "is a symbolic link" in err and link.is_symlink()
    assert target.read_text() == "keep me"
    fifo = tmp_path / "fifo.xml"
    os.mkfifo(fifo)
    assert "is a FIFO" in _usage_error(capsys, ["check", str(good), "--junit", str(fifo)])
    assert "is a device node" in _usage_error(capsys, ["check", str(good), "--junit",
                                                       "/dev/null"])
    assert Path("/dev/null").is_char_device()


def test_a_second_run_on_the_same_output_is_refused(tmp_path, capsys, good):
    junit = tmp_path / "out.xml"
    with OutputLock(junit):
        err = _usage_error(capsys, ["check", str(good), "--junit", str(junit)])
    assert f"another modemverify run (pid {os.getpid()}) is writing it" in err
    assert not junit.exists()
    # once the other run is over, the output is free again and no lock file is left
    assert main(["check", str(good), "--junit", str(junit)]) == 0
    assert junit.exists() and sorted(p.name for p in tmp_path.iterdir()) == ["good.yaml",
                                                                             "out.xml"]


DEVICE = '''
class Modem:
    def modulate(self, bits):
        raise ValueError("cannot open /data/" + bytes([0xff, 0x1b]).decode("utf-8",
                         "surrogateescape") + "\\x1b[2J\\x07 frame")
'''


def test_device_text_with_surrogates_and_controls_gives_valid_junit_and_utf8(tmp_path):
    (tmp_path / "odd.py").write_text(DEVICE)
    (tmp_path / "odd.yaml").write_text(
        "name: \"odd\\x1b[31m\\x07 device\"\nadapter: python\ntarget: odd.py:Modem\n"
        "scheme: {modulation: qpsk, convention: 3gpp}\n")
    junit, report = tmp_path / "j.xml", tmp_path / "rep"
    proc = subprocess.run([sys.executable, "-m", "modemverify.cli", "check",
                           str(tmp_path / "odd.yaml"), "--junit", str(junit), "--report",
                           str(report)], capture_output=True, timeout=300, cwd=tmp_path)
    assert proc.returncode == 1
    out = proc.stdout.decode("utf-8")  # strict: raises on invalid UTF-8
    assert "Traceback" not in out + proc.stderr.decode("utf-8", "replace")
    assert "\x1b" not in out and "\\x1b" in out and "\\udcff" in out
    suite = ET.parse(junit).getroot().find("testsuite")
    assert suite.get("name") == "odd\\x1b[31m\\x07 device"
    errors = [c for c in suite.findall("testcase") if c.find("error") is not None]
    assert errors and any("\\udcff" in c.find("error").get("message") for c in errors)
    html = (report / "index.html").read_text(encoding="utf-8")
    assert "\x1b" not in html and "\\x1b" in html
