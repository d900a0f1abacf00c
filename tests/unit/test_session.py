"""The command line's run as CI meets it: live lines, and interrupts that keep the record.

Events are compared, never clocks: a test waits for a file the device writes, or for a line,
and then checks what has and has not happened yet.
"""

from __future__ import annotations

import io
import os
import select
import signal
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

import modemverify.session as session
from modemverify.config import load_device
from modemverify.errors import Interrupted
from modemverify.report.console import render_totals
from modemverify.runner import RunResult, Subject, expected_names
from modemverify.session import Interrupts, compare_and_report, run_and_report

DEVICES = Path(__file__).parent / "devices" / "gated.py"
#: short checks; ber at two points, decided on their first block of 2^17 bits
CHECKS = ("checks: {ber: {ebn0_db: [4.0, 6.0]}, roundtrip: {max_examples: 20}, "
          "llr: false}")
#: QPSK symbols in a BER block (2^17 bits): no other check sends that many
BER_BLOCK = 1 << 16


def device_file(tmp_path, name, target, **params):
    p = tmp_path / f"{name}.yaml"
    args = ", ".join(f"{k}: {v!r}" if not isinstance(v, (list, tuple)) else f"{k}: {list(v)}"
                     for k, v in params.items())
    p.write_text(f"name: {name}\nadapter: python\ntarget: {DEVICES}:{target}\n"
                 f"params: {{{args}}}\nscheme: {{modulation: qpsk, convention: 3gpp}}\n"
                 f"{CHECKS}\n")
    return p


def junit_cases(path):
    root = ET.parse(path).getroot()
    return {s.get("name"): {c.get("name"): c for c in s.findall("testcase")}
            for s in root.findall("testsuite")}


def outcome(case):
    for tag in ("failure", "error", "skipped"):
        if case.find(tag) is not None:
            return tag
    return "pass"


def cli(*args, env=None, text=True):
    env = {**os.environ, **(env or {}), "PYTHONPATH": os.pathsep.join(sys.path)}
    return subprocess.Popen([sys.executable, "-m", "modemverify.cli", *map(str, args)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=text,
                            env=env)


def read_lines(proc, n):
    """The first ``n`` lines the process has written to its stdout pipe, read from the pipe
    itself; fails (rather than waits for ever) when they do not come."""
    fd, buf = proc.stdout.fileno(), b""
    while buf.count(b"\n") < n:
        ready, _, _ = select.select([fd], [], [], 120)
        assert ready, f"no line in the pipe: {buf!r}"
        chunk = os.read(fd, 1 << 16)
        assert chunk, f"the pipe closed: {buf!r}"
        buf += chunk
    return buf.decode()


def wait_for(path, proc):
    deadline = time.monotonic() + 120
    while not path.exists():
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < deadline, "the device was never called"
        time.sleep(0.02)


# --- live output --------------------------------------------------------------------------
def test_the_header_and_first_verdicts_reach_a_pipe_before_the_run_ends(tmp_path):
    gate, marker = tmp_path / "go", tmp_path / "waiting"
    path = device_file(tmp_path, "gated", "Gated", gate=str(gate), marker=str(marker),
                       threshold=BER_BLOCK)
    proc = cli("check", path, env={"CI": "1"}, text=False)
    try:
        # the device holds the run at its first BER block until the gate opens: the lines
        # the pipe carries now were written before the run could end
        wait_for(marker, proc)
        early = read_lines(proc, 2)
        assert proc.poll() is None and not gate.exists()
        gate.write_text("go")
        rest, err = proc.communicate(timeout=300)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == 0, rest + err
    header, first = early.splitlines()[:2]
    assert header.startswith("== gated  [python, qpsk (3gpp)")
    assert first.startswith("  PASS    finite")
    lines = (early + rest.decode()).splitlines()
    # run order, then the summary line of the device, then the totals
    names = [line.split()[1] for line in lines if line.startswith("  ") and
             line.split()[0] in ("PASS", "FAIL", "ERROR", "skip", "INCONCL")]
    assert names == expected_names(load_device(path))
    assert any(line.startswith("  -> OK:") for line in lines)
    assert lines[-1] == "1 device: 1 OK, 0 NOT OK"


# --- interrupts ---------------------------------------------------------------------------
@pytest.mark.parametrize("signame", ["SIGTERM", "SIGINT"])
def test_a_second_signal_still_leaves_every_verdict_measured_and_the_record(tmp_path, signame):
    # the device waits at the second BER point; the first is decided. Two signals 50 ms apart
    # (a double Ctrl-C; a supervisor that repeats its SIGTERM) must not cost the final writes.
    gate, marker = tmp_path / "go", tmp_path / "waiting"
    first = device_file(tmp_path, "first", "Gated", gate=str(gate), marker=str(marker),
                        threshold=BER_BLOCK, calls=2)
    second = device_file(tmp_path, "second", "Gated", gate=str(gate), marker=str(marker))
    junit, report = tmp_path / "junit.xml", tmp_path / "report"
    proc = cli("check", first, second, "--junit", junit, "--report", report)
    try:
        wait_for(marker, proc)
        proc.send_signal(getattr(signal, signame))
        time.sleep(0.05)
        proc.send_signal(getattr(signal, signame))
        out, err = proc.communicate(timeout=120)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == 130, out + err
    assert "Traceback" not in err
    suites = junit_cases(junit)
    # every device given, each with every name its file declares
    assert list(suites) == ["first", "second"]
    assert list(suites["first"]) == expected_names(load_device(first))
    assert list(suites["second"]) == expected_names(load_device(second))
    cases = suites["first"]
    assert outcome(cases["ber.ebn0=4dB"]) == "pass"      # decided before the signal: kept
    assert outcome(cases["mapping"]) == "pass"
    assert outcome(cases["ber.ebn0=6dB"]) == "skipped"   # being measured: not judged
    assert signame in cases["ber.ebn0=6dB"].find("skipped").get("message")
    assert {outcome(c) for c in suites["second"].values()} == {"skipped"}
    assert (report / "index.html").exists()
    assert f"INTERRUPTED by {signame}" in out
    assert out.splitlines()[-3] == "INTERRUPTED: 2 devices given, none judged in full"
    assert not [p for p in os.listdir(tmp_path) if p.startswith(".junit.xml.")]


def test_an_interrupt_before_any_verdict_leaves_a_junit_and_never_says_ok(tmp_path):
    path = device_file(tmp_path, "early", "SelfSignal", threshold=0)
    junit = tmp_path / "junit.xml"
    stream = io.StringIO()
    results, code = run_and_report([path], seed=1, junit=str(junit), stream=stream)
    assert code == 130
    [r] = results
    assert r.interrupted and not r.ok
    assert [v.name for v in r.verdicts] == expected_names(load_device(path))
    assert {v.outcome for v in r.verdicts} == {"skipped"}
    totals = stream.getvalue().splitlines()[-2]
    assert totals == "INTERRUPTED: 1 device given, none judged in full"
    assert "OK" not in totals
    assert f"  -> INTERRUPTED: {len(r.verdicts)} skipped" in stream.getvalue()
    assert list(junit_cases(junit)["early"]) == [v.name for v in r.verdicts]


def test_a_signal_during_the_final_writes_is_ignored(tmp_path, monkeypatch):
    # the device stops the run; then a second SIGTERM arrives while JUnit is being written
    real = session.write_junit
    sent = []

    def write_junit_under_fire(results, path):
        if not sent:
            sent.append(True)
            os.kill(os.getpid(), signal.SIGTERM)
        real(results, path)

    monkeypatch.setattr(session, "write_junit", write_junit_under_fire)
    path = device_file(tmp_path, "dev", "SelfSignal", threshold=BER_BLOCK)
    junit = tmp_path / "junit.xml"
    results, code = run_and_report([path], seed=1, junit=str(junit), stream=io.StringIO())
    assert code == 130 and sent
    names = expected_names(load_device(path))
    assert list(junit_cases(junit)["dev"]) == names
    kept = [v for v in results[0].verdicts if v.outcome != "skipped"]
    assert [v.name for v in kept][:3] == ["finite", "length.modulate", "length.demodulate"]
    assert signal.getsignal(signal.SIGTERM) is not None  # restored, pytest's own again


def test_compare_keeps_its_verdicts_on_an_interrupt(tmp_path):
    a = device_file(tmp_path, "a", "SelfSignal", signals=[])
    b = device_file(tmp_path, "b", "SelfSignal", threshold=1 << 14)  # the waveform probe
    junit = tmp_path / "junit.xml"
    result, code = compare_and_report(a, b, seed=1, junit=str(junit), stream=io.StringIO())
    assert code == 130 and result.interrupted
    assert [v.name for v in result.verdicts] == ["compare.mapping"]
    assert result.verdicts[0].outcome == "pass"
    assert list(junit_cases(junit)["b vs a"]) == ["compare.mapping"]


def test_compare_runs_to_the_end_without_a_signal(tmp_path):
    a = device_file(tmp_path, "a", "SelfSignal", signals=[])
    result, code = compare_and_report(a, a, seed=1, stream=io.StringIO())
    assert code == 0 and not result.interrupted
    assert [v.name for v in result.verdicts] == ["compare.mapping", "compare.alignment",
                                                 "compare.samples", "compare.evm"]


# --- the handler itself -------------------------------------------------------------------
def test_the_first_signal_raises_and_the_others_are_counted():
    guard = Interrupts()
    with pytest.raises(Interrupted):
        guard.handle(signal.SIGTERM)
    guard.handle(signal.SIGTERM)
    guard.handle(signal.SIGINT)
    assert guard.signal_name == "SIGTERM" and guard.repeats == 2


def test_a_deferred_stretch_records_the_signal_and_raises_after():
    guard = Interrupts()
    with guard.deferred():
        guard.handle(signal.SIGINT)  # no exception here
    assert guard.fired
    with pytest.raises(Interrupted):
        guard.check()


def test_the_previous_handlers_come_back():
    before = {s: signal.getsignal(s) for s in session.SIGNALS}
    with Interrupts() as guard:
        assert all(signal.getsignal(s) == guard.handle for s in session.SIGNALS)
    assert {s: signal.getsignal(s) for s in session.SIGNALS} == before


@pytest.mark.skipif(not hasattr(os, "fork"), reason="needs os.fork")
def test_a_forked_child_does_not_inherit_the_handler():
    before = signal.getsignal(signal.SIGTERM)
    with Interrupts():
        pid = os.fork()
        if pid == 0:  # the child: exit 0 when it has its parent's previous handlers back
            os._exit(0 if signal.getsignal(signal.SIGTERM) == before else 1)
        _, status = os.waitpid(pid, 0)
    assert os.waitstatus_to_exitcode(status) == 0


def test_totals_after_an_interrupt_count_only_what_was_judged_in_full():
    from modemverify.config import parse_device

    spec = parse_device({"name": "x", "adapter": "reference",
                         "scheme": {"modulation": "qpsk", "convention": "3gpp"}})
    done = RunResult(Subject.of(spec), [], 1)
    cut = RunResult(Subject.of(spec), [], 1, interrupted=True)
    assert render_totals([done, done]) == "2 devices: 2 OK, 0 NOT OK"
    assert render_totals([done, cut]) == ("INTERRUPTED: 1 of 2 devices judged in full (1 OK, "
                                          "0 NOT OK); 1 not judged in full")
    assert render_totals([cut]) == "INTERRUPTED: 1 device given, none judged in full"


def test_a_signal_while_the_device_files_load_still_leaves_a_junit(tmp_path):
    # the handler is installed before anything slow: a signal that arrives while the device
    # files are read (here: while the target module is imported) is held until loading ends,
    # then stops the run with every device in the record
    target = tmp_path / "signals_at_import.py"
    target.write_text("import os, signal\n"
                      "os.kill(os.getpid(), signal.SIGTERM)\n"
                      "class Mapper:\n"
                      "    def modulate(self, bits):\n"
                      "        return (1 - 2.0 * bits[0::2]) + 1j * (1 - 2.0 * bits[1::2])\n")
    first = tmp_path / "first.yaml"
    first.write_text(f"name: first\nadapter: python\ntarget: {target}:Mapper\n"
                     f"scheme: {{modulation: qpsk, convention: 3gpp}}\n{CHECKS}\n")
    second = device_file(tmp_path, "second", "SelfSignal", signals=[])
    junit = tmp_path / "junit.xml"
    stream = io.StringIO()
    results, code = run_and_report([first, second], seed=1, junit=str(junit), stream=stream)
    assert code == 130
    suites = junit_cases(junit)
    assert list(suites) == ["first", "second"]
    for r in results:
        assert r.interrupted and {v.outcome for v in r.verdicts} == {"skipped"}
        assert list(suites[r.subject.name]) == [v.name for v in r.verdicts]
    assert "INTERRUPTED by SIGTERM" in stream.getvalue()


def test_a_signal_recorded_before_the_run_still_leaves_a_junit(tmp_path):
    # an entry point that noted a SIGTERM while Python was starting hands it over
    path = device_file(tmp_path, "dev", "SelfSignal", signals=[])
    junit = tmp_path / "junit.xml"
    results, code = run_and_report([path], seed=1, junit=str(junit), stream=io.StringIO(),
                                   signal_before=signal.SIGTERM)
    assert code == 130 and results[0].interrupted
    assert list(junit_cases(junit)["dev"]) == expected_names(load_device(path))


class _Terminal(io.StringIO):
    def isatty(self):
        return True


def test_the_progress_line_is_for_terminals_and_quiet_in_ci(monkeypatch):
    from modemverify.report.progress import ProgressLine

    monkeypatch.delenv("CI", raising=False)
    assert ProgressLine.wanted(_Terminal()) and not ProgressLine.wanted(io.StringIO())
    monkeypatch.setenv("CI", "true")
    assert not ProgressLine.wanted(_Terminal())
    term = _Terminal()
    bar = ProgressLine(term, width=8)
    bar("ber.ebn0=4dB", 0.5, "6.6e+04 bits")
    assert term.getvalue() == "\r  ber.ebn0=4dB           [####....] 6.6e+04 bits\033[K"
    bar.clear()
    assert term.getvalue().endswith("\r\033[K")
