"""``adapter: process``: the example device processes, and scripted misbehaving ones.

The scripted device below implements the frame protocol from its description in
``modemverify/adapters/_wire.py`` with the standard library only (no modemverify import), as a
third party would. Expected points: 3GPP TS 38.211 5.1.3 QPSK and 5.1.4 16QAM
(TS 36.211 Table 7.1.3-1 rows).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
import yaml
from _cmodems import CC, build_program, needs_cc, write_device
from _procs import all_gone

from modemverify.adapters import _wire
from modemverify.adapters.base import GuardedDevice
from modemverify.adapters.process import ProcessAdapter
from modemverify.config import load_device, parse_device
from modemverify.dsp.formats import from_format
from modemverify.errors import AdapterError, ConfigError, DeviceCrashed, DeviceTimeout
from modemverify.runner import check

EXAMPLES = Path(__file__).resolve().parents[2] / "examples"
S = 1 / np.sqrt(2)
QPSK_3GPP = S * np.array([1 + 1j, 1 - 1j, -1 + 1j, -1 - 1j])  # labels 00, 01, 10, 11
FAST = {"ber": False, "llr": False}

SCRIPTED = r'''
import json, os, struct, sys, time
mode = sys.argv[1]
if os.environ.get("MV_PIDS"):  # the test reads the pids of the processes the device runs
    with open(os.environ["MV_PIDS"], "a") as f:
        f.write(f"{os.getpid()}\n")
rd, wr = sys.stdin.buffer, sys.stdout.buffer
if mode == "hang":  # one line per start, so a test can tell which processes still live
    with open(os.path.join(os.path.dirname(os.path.abspath(sys.argv[0])), "pids"), "a") as f:
        f.write(f"{os.getpid()}\n")
if mode == "noise":
    wr.write(b"debug: starting up\n"); wr.flush()
if mode == "exit-at-start":
    sys.stderr.write("scripted: license file missing\n"); sys.stderr.flush()
    sys.exit(4)

def read(n):
    data = b""
    while len(data) < n:
        chunk = rd.read(n - len(data))
        if not chunk:
            sys.exit(0)
        data += chunk
    return data

def frame(kind, seq, payload=b""):
    wr.write(b"MV" + bytes([1]) + kind + struct.pack("<IQ", seq, len(payload)) + payload)
    wr.flush()

calls = 0
while True:
    head = read(16)
    kind, (seq, n) = head[3:4], struct.unpack("<IQ", head[4:16])
    payload = read(n) if n else b""
    if kind == b"Q":
        sys.exit(0)
    if kind == b"H":
        hello = {"protocol": 1, "capabilities": ["modulate"], "sample_format": "float32",
                 "name": " ".join(sys.argv[1:])}
        frame(b"H", seq, json.dumps(hello).encode())
        continue
    calls += 1
    if mode == "hang" and len(payload) > 100:
        sys.stderr.write("scripted: waiting for a sync word\n"); sys.stderr.flush()
        time.sleep(3600)
    if mode == "errors" and len(payload) > 100:
        sys.stderr.write("scripted: pll unlocked\n"); sys.stderr.flush()
        frame(b"E", seq, struct.pack("<i", -7) + b"symbol clock lost")
        continue
    if mode == "wrong-seq":
        seq += 1
    if mode == "wrong-seq-once" and 36 <= n < 128 and not os.path.exists("once"):
        open("once", "w").write(str(n))  # once, on a length only the search draws
        seq += 1
    a = 0.7071067811865476
    out = b"".join(struct.pack("<ff", a - 2 * a * payload[i], a - 2 * a * payload[i + 1])
                   for i in range(0, len(payload), 2))
    frame(b"R", seq, out)
'''


def scripted(tmp_path: Path, mode: str, *extra_args, **extra) -> Path:
    (tmp_path / "scripted.py").write_text(SCRIPTED)
    return write_device(tmp_path, f"scripted-{mode}", {
        "adapter": "process", "command": ["{python}", "scripted.py", mode, *extra_args],
        "scheme": {"modulation": "qpsk", "convention": "3gpp"}, **extra})


def open_adapter(path: Path) -> ProcessAdapter:
    return ProcessAdapter.from_spec(load_device(path))


@pytest.fixture
def c_device(tmp_path):
    """The C example device, built from examples/process-device-c into tmp_path."""
    if CC is None:
        pytest.skip("no C compiler")
    build_program(tmp_path, EXAMPLES / "process-device-c" / "qpsk_device.c", "qpsk-device")
    return tmp_path


@needs_cc
def test_c_example_device_passes_every_verdict(c_device):
    device = c_device / "qpsk-device.yaml"
    device.write_text((EXAMPLES / "process-device-c" / "qpsk-device.yaml").read_text())
    result = check(device)
    assert result.ok, [(v.name, v.outcome, v.reason) for v in result.verdicts]
    names = {v.name for v in result.verdicts if v.outcome == "pass"}
    # demodulate_soft travels in S frames; the LLR checks judge it
    assert {"mapping", "roundtrip", "length.modulate", "length.demodulate"} <= names
    assert any(n.startswith("llr") for n in names) and any(n.startswith("ber") for n in names)


@needs_cc
def test_process_is_started_once_and_restarted_after_a_crash(c_device):
    device = write_device(c_device, "crashy", {
        "adapter": "process", "command": ["./qpsk-device", "--crash-over", "6000"],
        "scheme": {"modulation": "qpsk", "convention": "3gpp"}})
    adapter = open_adapter(device)
    try:
        guarded = GuardedDevice(adapter, 2)
        for _ in range(3):
            guarded.modulate(np.array([0, 1], np.uint8))
        assert adapter.starts == 1  # one process for many calls
        with pytest.raises(DeviceCrashed) as info:
            guarded.modulate(np.zeros(6002, np.uint8))
        err = info.value
        assert "SIGABRT" in str(err) and err.call == "modulate" and "bits[6002]" in str(err)
        assert "6002 bits is more than the frame buffer holds" in err.stderr
        out = guarded.modulate(np.array([0, 0, 1, 1], np.uint8))
        np.testing.assert_allclose(out, QPSK_3GPP[[0, 3]], atol=1e-7)
        assert adapter.starts == 2
    finally:
        adapter.close()
    assert adapter._child is None


def test_python_example_device_with_a_planted_swap(tmp_path):
    src = EXAMPLES / "process-device-python"
    (tmp_path / "qam16_device.py").write_text((src / "qam16_device.py").read_text())
    device = write_device(tmp_path, "swapped", {
        "adapter": "process", "command": ["{python}", "qam16_device.py"],
        "params": {"swap_arms": True}, "timeout_s": 30,
        "scheme": {"modulation": "16qam", "convention": "3gpp"}, "checks": FAST})
    result = check(device)
    v = {x.name: x for x in result.verdicts}
    assert v["mapping"].outcome == "fail" and "arms swapped" in v["mapping"].reason
    assert v["roundtrip"].outcome == "pass" and v["energy"].outcome == "pass"


def test_python_example_device_answers_with_the_ts_38_211_table():
    spec = load_device(EXAMPLES / "process-device-python" / "qam16-device.yaml")
    adapter = ProcessAdapter.from_spec(spec)
    try:
        assert adapter.hello["name"] == "qam16-device (Python example)"
        assert adapter.capabilities == {"modulate", "demodulate", "demodulate_soft"}
        # TS 38.211 5.1.4: 0001 -> (1+3j)/sqrt(10), 0110 -> (3-1j)/sqrt(10)
        out = adapter.modulate(np.array([0, 0, 0, 1, 0, 1, 1, 0], np.uint8))
        np.testing.assert_allclose(out * np.sqrt(10), [1 + 3j, 3 - 1j], atol=1e-5)
        assert adapter.demodulate(out).tolist() == [0, 0, 0, 1, 0, 1, 1, 0]
    finally:
        adapter.close()


def test_timeout_kills_the_process_and_quotes_stderr(tmp_path):
    adapter = open_adapter(scripted(tmp_path, "hang", timeout_s=0.5))
    pids = tmp_path / "pids"
    try:
        (hung,) = map(int, pids.read_text().split())
        with pytest.raises(DeviceTimeout) as info:
            adapter.modulate(np.zeros(200, np.uint8))
        assert "timeout_s=0.5" in str(info.value) and "bits[200]" in str(info.value)
        assert "device process was killed" in str(info.value)
        assert "waiting for a sync word" in info.value.stderr
        # stopped, not waited out: the hung process is gone (killed and reaped) at once
        with pytest.raises(ProcessLookupError):
            os.kill(hung, 0)
        # the next call starts the process again and is answered
        np.testing.assert_allclose(adapter.modulate(np.array([1, 1], np.uint8)), QPSK_3GPP[[3]],
                                   atol=1e-7)
        assert adapter.starts == 2
        first, second = map(int, pids.read_text().split())
        assert first == hung and second != hung
        os.kill(second, 0)  # the new process is alive
    finally:
        adapter.close()


def test_error_frame_is_quoted_and_the_process_lives_on(tmp_path):
    adapter = open_adapter(scripted(tmp_path, "errors"))
    try:
        with pytest.raises(AdapterError) as info:
            adapter.modulate(np.zeros(200, np.uint8))
        assert "returned error code -7: symbol clock lost" in str(info.value)
        assert "pll unlocked" in info.value.stderr
        adapter.modulate(np.zeros(2, np.uint8))
        assert adapter.starts == 1
    finally:
        adapter.close()


@pytest.mark.parametrize("mode, words", [
    ("noise", "stdout carries the protocol only"),
    ("wrong-seq", "reply numbered"),
])
def test_protocol_errors_are_named(tmp_path, mode, words):
    path = scripted(tmp_path, mode)
    if mode == "noise":  # garbage arrives before the hello: opening the device fails
        result = check(path, only=["mapping"])
        assert result.verdicts[0].reason.startswith("the device could not be opened")
        assert words in result.verdicts[0].reason
        return
    adapter = open_adapter(path)
    try:
        with pytest.raises(AdapterError, match=words):
            adapter.modulate(np.zeros(2, np.uint8))
    finally:
        adapter.close()


def test_death_at_start_is_an_open_error_quoting_stderr(tmp_path):
    result = check(scripted(tmp_path, "exit-at-start"))
    v = result.verdicts[0]  # an open error stands for every verdict of the file
    assert all(x.outcome == "error" and x.reason == v.reason for x in result.verdicts)
    assert v.reason.startswith("the device could not be opened") and v.outcome == "error"
    assert "exited with status 4" in v.reason and "license file missing" in v.reason


def test_arguments_reach_the_device_without_a_shell(tmp_path):
    adapter = open_adapter(scripted(tmp_path, "echo", "; touch pwned", "$HOME", "*"))
    try:
        assert adapter.hello["name"] == "echo ; touch pwned $HOME *"
    finally:
        adapter.close()
    assert not (tmp_path / "pwned").exists()


@pytest.mark.parametrize("command, words", [
    ("./dev --fast", "expected a list of arguments (the device is started without a shell)"),
    (["./missing-device"], "no such file"),
    (["no-such-program-anywhere"], "not found on PATH"),
    ([], "non-empty list"),
])
def test_command_errors(tmp_path, command, words):
    path = write_device(tmp_path, "bad", {"adapter": "process", "command": command,
                                          "scheme": {"modulation": "qpsk", "convention": "3gpp"}})
    with pytest.raises(ConfigError) as info:
        load_device(path)
    assert info.value.key == "command" and words in str(info.value)


def test_isolate_false_is_refused(tmp_path):
    path = write_device(tmp_path, "bad", {"adapter": "process", "command": ["{python}", "x.py"],
                                          "isolate": False,
                                          "scheme": {"modulation": "qpsk", "convention": "3gpp"}})
    with pytest.raises(ConfigError, match="always runs the device in its own process"):
        load_device(path)


def test_a_python_device_process_imports_numpy_and_no_more_of_modemverify_than_the_codec():
    # DEVELOPERS.md, "Out-of-process devices": _wire depends on the standard library and numpy
    # only (the sample codec it shares, modemverify.dsp.formats, is numpy only too)
    code = textwrap.dedent("""
        import json, sys
        before = set(sys.modules)
        import modemverify.adapters._wire
        print(json.dumps(sorted(set(sys.modules) - before)))
    """)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    loaded = {m.split(".")[0] if not m.startswith("modemverify") else m
              for m in json.loads(out)}
    third_party = {m for m in loaded if not m.startswith("modemverify")
                   and m not in sys.stdlib_module_names and m != "numpy"}
    assert not third_party, third_party
    assert {m for m in loaded if m.startswith("modemverify")} <= {
        "modemverify", "modemverify._version", "modemverify._door", "modemverify.errors",
        "modemverify.options", "modemverify.dsp", "modemverify.dsp.formats", "modemverify.adapters",
        "modemverify.adapters._wire"}


def test_serve_round_trip_over_pipes():
    """The device side (serve) and the harness side agree on framing, without a child."""
    code = textwrap.dedent("""
        import numpy as np
        from modemverify.adapters._wire import serve
        class Dev:
            def __init__(self, gain=1.0):
                self.gain = gain
            def modulate(self, bits):
                print("stray print goes to stderr")
                return self.gain * (1 - 2.0 * bits[0::2]) + 0j
        serve(Dev, sample_format="int16", full_scale=4.0)
    """)
    proc = subprocess.Popen([sys.executable, "-c", code], stdin=subprocess.PIPE,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    try:
        _wire.write_frame(proc.stdin, _wire.HELLO, 1, json.dumps({"params": {"gain": 2.0}})
                          .encode())
        _, seq, payload = _wire.read_frame(proc.stdout)
        hello = _wire.parse_device_hello(payload)
        assert (seq, hello["sample_format"], hello["full_scale"]) == (1, "int16", 4.0)
        assert hello["capabilities"] == ["modulate"]
        _wire.write_frame(proc.stdin, _wire.MODULATE, 2, np.array([0, 1, 1, 0], np.uint8))
        kind, seq, payload = _wire.read_frame(proc.stdout)
        assert (kind, seq) == (_wire.RESULT, 2)
        # Q15 at full scale 4: 2.0 -> 16384
        assert np.frombuffer(payload, "<i2").tolist() == [16384, 0, -16384, 0]
        np.testing.assert_allclose(from_format(payload, "int16", 4.0), [2, -2])
        _wire.write_frame(proc.stdin, _wire.QUIT, 3)
        assert proc.wait(30) == 0
        assert b"stray print goes to stderr" in proc.stderr.read()
    finally:
        proc.kill()
        proc.wait()


# a "billion laughs": nine levels of ten aliases, 10**9 strings once expanded (YAML 1.1
# aliases, yaml.safe_load keeps them shared until something walks them)
BILLION_LAUGHS = """\
name: laughs
adapter: process
command: ["{python}", scripted.py, plain]
scheme: {modulation: qpsk, convention: 3gpp}
params:
  a: &a [lol, lol, lol, lol, lol, lol, lol, lol, lol, lol]
  b: &b [*a, *a, *a, *a, *a, *a, *a, *a, *a, *a]
  c: &c [*b, *b, *b, *b, *b, *b, *b, *b, *b, *b]
  d: &d [*c, *c, *c, *c, *c, *c, *c, *c, *c, *c]
  e: &e [*d, *d, *d, *d, *d, *d, *d, *d, *d, *d]
  f: &f [*e, *e, *e, *e, *e, *e, *e, *e, *e, *e]
  g: &g [*f, *f, *f, *f, *f, *f, *f, *f, *f, *f]
  h: &h [*g, *g, *g, *g, *g, *g, *g, *g, *g, *g]
  i: &i [*h, *h, *h, *h, *h, *h, *h, *h, *h, *h]
"""


def test_params_that_expand_to_a_billion_values_are_refused_at_load(tmp_path):
    (tmp_path / "scripted.py").write_text(SCRIPTED)
    path = tmp_path / "laughs.yaml"
    path.write_text(BILLION_LAUGHS)
    with pytest.raises(ConfigError) as info:
        load_device(path)
    # the file is refused as it is read (an alias is never expanded) ...
    assert "anchors and aliases are not accepted" in str(info.value)
    assert str(path) in str(info.value)
    # ... and params that reach the adapter another way are bounded by count
    data = yaml.load(BILLION_LAUGHS, Loader=yaml.SafeLoader)
    with pytest.raises(ConfigError) as info:
        parse_device(data, file=str(path), base_dir=tmp_path)
    assert info.value.key == "params" and "more than 100000 values" in str(info.value)


@pytest.mark.parametrize("value, key, words", [
    ("2024-05-01", "params.when", "date is not JSON data"),
    ("!!binary aGVsbG8=", "params.when", "bytes is not JSON data"),
    ("!!set {a, b}", "params.when", "set is not JSON data"),
    (".nan", "params.when", "JSON has no NaN or infinity"),
    ("{1: x}", "params.when", "the key 1 is int; JSON keys are text"),
])
def test_params_must_be_plain_json_data(tmp_path, value, key, words):
    (tmp_path / "scripted.py").write_text(SCRIPTED)
    path = tmp_path / "dev.yaml"
    path.write_text(f"name: d\nadapter: process\ncommand: ['{{python}}', scripted.py, plain]\n"
                    f"scheme: {{modulation: qpsk, convention: 3gpp}}\nparams: {{when: {value}}}\n")
    with pytest.raises(ConfigError) as info:
        load_device(path)
    assert info.value.key == key and words in str(info.value), str(info.value)


def test_params_too_large_to_send_are_refused(tmp_path):
    # larger than a device file may be (1 MiB), so given as data, as check_object callers do
    path = scripted(tmp_path, "plain")
    data = yaml.safe_load(path.read_text())
    data["params"] = {"taps": ["0.125" * 200] * 2000}
    with pytest.raises(ConfigError, match="bytes as JSON; the hello carries at most 1048576"):
        parse_device(data, file=str(path), base_dir=tmp_path)


@pytest.mark.parametrize("env, key", [
    ({"A=B": "1"}, "env"),
    ({"": "1"}, "env"),
    ({"MODEM": "a\0b"}, "env.MODEM"),
])
def test_env_names_and_values_the_system_cannot_hold_are_refused(tmp_path, env, key):
    with pytest.raises(ConfigError) as info:
        load_device(scripted(tmp_path, "plain", env=env))
    assert info.value.key == key




def shell_wrapped(tmp_path: Path, mode: str, **extra) -> tuple[Path, Path]:
    """A device started through /bin/sh -c that also starts a background helper; the shell
    waits for the device (not exec), so the device is the shell's child, not the harness's."""
    (tmp_path / "scripted.py").write_text(SCRIPTED)
    pids = tmp_path / "pids"
    line = f"sleep 3600 & echo $! >> {pids}; {sys.executable} scripted.py {mode}; echo ended"
    return write_device(tmp_path, f"sh-{mode}", {
        "adapter": "process", "command": ["/bin/sh", "-c", line], "env": {"MV_PIDS": str(pids)},
        "scheme": {"modulation": "qpsk", "convention": "3gpp"}, **extra}), pids


def _pids(path: Path) -> list[int]:
    return [int(p) for p in path.read_text().split()]


@pytest.mark.skipif(not Path("/bin/sh").exists() or not Path("/proc/self/stat").exists(),
                    reason="needs /bin/sh and /proc")
def test_a_timeout_kills_what_a_shell_wrapped_device_started(tmp_path):
    path, pids = shell_wrapped(tmp_path, "hang", timeout_s=0.5)
    adapter = open_adapter(path)
    try:
        shell = adapter._child.popen.pid
        assert os.getpgid(shell) == shell  # the device leads its own process group
        with pytest.raises(DeviceTimeout):
            adapter.modulate(np.zeros(200, np.uint8))
        started = sorted(set(_pids(pids)))  # the helper (sleep) and the device (python)
        assert len(started) == 2
        assert all_gone([shell, *started]) == []
    finally:
        adapter.close()


@pytest.mark.skipif(not Path("/bin/sh").exists() or not Path("/proc/self/stat").exists(),
                    reason="needs /bin/sh and /proc")
def test_after_a_run_no_process_the_device_started_is_alive(tmp_path):
    path, pids = shell_wrapped(tmp_path, "plain", checks=FAST)
    result = check(path, only=["mapping", "finite"])
    assert result.ok, [(v.name, v.reason) for v in result.verdicts]
    started = _pids(pids)
    assert len(started) == 2
    assert all_gone(started) == []


def test_a_protocol_error_during_the_search_is_an_error_not_a_fail(tmp_path):
    (v,) = check(scripted(tmp_path, "wrong-seq-once"), only=["roundtrip"]).verdicts
    assert (tmp_path / "once").exists(), "the search never drew a length the device fails on"
    n = int((tmp_path / "once").read_text())
    assert v.outcome == "error", (v.reason, v.counterexample)
    assert "the device failed on a generated sequence: modulate(): protocol error: reply " \
           "numbered" in v.reason and f"bits[{n}]=" in v.reason
    assert "does not return the bits sent" not in v.reason
