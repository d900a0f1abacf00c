"""``isolate: true``: any adapter in a worker process; crashes, hangs and bad output as verdicts.

The devices are Python modules written into the test's folder: TS 38.211 5.1.3 QPSK
(d = ((1 - 2 b0) + j (1 - 2 b1)) / sqrt 2) with a planted misbehaviour each.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from _cmodems import write_device
from _procs import all_gone

from modemverify.adapters.base import GuardedDevice
from modemverify.adapters.isolated import (
    MAX_CONSECUTIVE_TIMEOUTS,
    IsolatedAdapter,
    open_adapter,
)
from modemverify.adapters.python import PythonAdapter
from modemverify.config import load_device, parse_device
from modemverify.errors import AdapterError, ConfigError, DeviceCrashed, DeviceTimeout
from modemverify.runner import check

FAST = {"ber": False, "llr": False}

DEVICES = r'''
import os, sys, time
from pathlib import Path
import numpy as np

A = 1 / np.sqrt(2)


class Qpsk:
    """TS 38.211 5.1.3 QPSK with one planted misbehaviour."""

    def __init__(self, misbehave=None, marker=None):
        self.misbehave = misbehave
        self.marker = marker
        if misbehave == "hang-in-constructor":
            time.sleep(3600)

    def modulate(self, bits):
        b = bits.reshape(-1, 2).astype(float)
        m = self.misbehave
        if m in ("fork", "fork-hang") and not Path(self.marker).exists():
            pid = os.fork()
            if pid == 0:  # a helper process that lives on, holding the worker's descriptors
                time.sleep(3600)
                os._exit(0)
            Path(self.marker).write_text(str(pid))
        if m == "fork-hang":
            time.sleep(3600)
        if m in ("abort-once", "hang-once") and 36 <= bits.size < 128 and \
                not Path(self.marker).exists():  # once, on a length only the search draws
            Path(self.marker).write_text(str(bits.size))
            if m == "abort-once":
                os.abort()
            time.sleep(3600)
        if m == "keyboardinterrupt":
            raise KeyboardInterrupt
        if m == "baseexception":
            raise GeneratorExit("frame sync lost")
        if m == "hang" and bits.size > 5000:
            time.sleep(3600)
        if m == "hang-always":
            time.sleep(3600)
        if m == "raise" and bits.size == 6:
            raise ZeroDivisionError("slicer table index out of range")
        if m == "abort" and bits.size == 6:
            print("about to abort", file=sys.stderr, flush=True)
            os.abort()
        if m == "exit" and bits.size == 6:
            sys.exit(3)
        y = A * ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1]))
        if m == "strings":
            return y.astype(str)
        if m == "nan" and y.size > 3:
            y[3] = np.nan
        if m == "short":
            return y[:-1]
        if m == "none":
            return None
        if m == "huge":
            return np.zeros(200_000_000, np.complex64)  # calloc: costs nothing unless copied
        if m == "huge-2d":
            return np.zeros((100_000_000, 2), np.complex64)
        if m == "huge-list":
            return [0j] * 5_000_000
        if m == "mutate":
            bits[:] = 1
        return y

    def demodulate(self, samples):
        if self.misbehave == "slow-demod":
            Path(self.marker).write_text("demodulating")
            time.sleep(3600)
        return np.stack([samples.real < 0, samples.imag < 0], axis=1).astype(np.uint8).ravel()


def broken():
    raise RuntimeError("license server not reachable")
'''


def device_file(tmp_path: Path, misbehave, *, factory="Qpsk", **extra) -> Path:
    (tmp_path / "devs.py").write_text(DEVICES)
    params = {"misbehave": misbehave} if factory == "Qpsk" else {}
    params.update(extra.pop("params", {}))
    return write_device(tmp_path, f"dev-{misbehave}", {
        "adapter": "python", "target": f"devs.py:{factory}", "params": params,
        "isolate": True, "scheme": {"modulation": "qpsk", "convention": "3gpp"}, **extra})


def guarded(path: Path):
    adapter = open_adapter(load_device(path))
    return adapter, GuardedDevice(adapter, 2)


def cli(*args, timeout=120):
    return subprocess.run([sys.executable, "-m", "modemverify.cli", *map(str, args)],
                          capture_output=True, text=True, timeout=timeout)


def test_defaults_per_adapter(tmp_path):
    base = {"name": "d", "scheme": {"modulation": "qpsk", "convention": "3gpp"}}
    assert parse_device({**base, "adapter": "reference"}).isolate is False
    assert parse_device({**base, "adapter": "python", "target": "x.py:f"}).isolate is False
    assert parse_device({**base, "adapter": "reference"}).timeout_s == 10.0
    (tmp_path / "libx.so").write_bytes(b"")
    lib = parse_device({**base, "adapter": "sharedlib", "library": "libx.so",
                        "symbols": {"modulate": "m"}}, base_dir=tmp_path)
    assert lib.isolate is True
    proc = parse_device({**base, "adapter": "process", "command": ["{python}", "dev.py"]})
    assert proc.isolate is True
    # reference stays in process; asked to, it runs in a worker
    assert not isinstance(open_adapter(parse_device({**base, "adapter": "reference"})),
                          IsolatedAdapter)
    isolated = open_adapter(parse_device({**base, "adapter": "reference", "isolate": True}))
    try:
        assert isinstance(isolated, IsolatedAdapter)
        assert isolated.capabilities == {"modulate", "demodulate", "demodulate_soft"}
    finally:
        isolated.close()


@pytest.mark.parametrize("body, key, words", [
    ({"isolate": "yes"}, "isolate", "expected true or false"),
    ({"isolate": True, "timeout_s": 0}, "timeout_s", "expected a value > 0"),
    ({"timeout_s": 5}, "timeout_s", "needs isolate: true"),
])
def test_isolation_keys_are_validated(body, key, words):
    with pytest.raises(ConfigError) as info:
        parse_device({"name": "d", "adapter": "python", "target": "x.py:f", **body,
                      "scheme": {"modulation": "qpsk", "convention": "3gpp"}}, file="dev.yaml")
    assert info.value.key == key and info.value.file == "dev.yaml" and words in str(info.value)


def test_isolated_device_passes_like_in_process(tmp_path):
    result = check(device_file(tmp_path, None, checks=FAST))
    assert result.ok, [(v.name, v.reason) for v in result.verdicts]
    assert {v.name for v in result.verdicts} >= {"mapping", "roundtrip", "length.modulate"}


def test_exception_names_the_call_and_input(tmp_path):
    adapter, device = guarded(device_file(tmp_path, "raise"))
    try:
        with pytest.raises(AdapterError) as info:
            device.modulate(np.array([0, 1, 1, 0, 1, 1], np.uint8))
        assert str(info.value).startswith("modulate(): raised ZeroDivisionError: slicer table")
        assert "bits[6]=011011" in str(info.value)
        assert "Traceback" in info.value.stderr  # the worker's traceback is quoted
        assert adapter.restarts == 0  # an exception does not cost the worker
    finally:
        adapter.close()


@pytest.mark.parametrize("misbehave, words", [
    ("abort", "was killed by signal SIGABRT"),
    ("exit", "exited with status 3"),
])
def test_death_is_reported_and_the_next_call_gets_a_new_worker(tmp_path, misbehave, words):
    adapter, device = guarded(device_file(tmp_path, misbehave))
    try:
        with pytest.raises(DeviceCrashed) as info:
            device.modulate(np.zeros(6, np.uint8))
        assert words in str(info.value) and "bits[6]" in str(info.value)
        if misbehave == "abort":
            assert "about to abort" in info.value.stderr
        out = device.modulate(np.array([1, 0], np.uint8))
        np.testing.assert_allclose(out, [(-1 + 1j) / np.sqrt(2)])
        assert adapter.restarts == 1
    finally:
        adapter.close()


@pytest.mark.parametrize("misbehave", ["strings", "nan", "short", "none", "huge", "huge-2d",
                                       "huge-list", "keyboardinterrupt", "baseexception"])
def test_bad_output_is_judged_as_in_process(tmp_path, misbehave):
    """dtype, length, NaN and None cross the pipe unchanged, so the guard says the same; an
    answer above the size cap is judged from its dtype and shape, never sent; what a device
    raises (a BaseException too) is named alike."""
    path = device_file(tmp_path, misbehave)
    spec = load_device(path)
    local = GuardedDevice(PythonAdapter.from_spec(spec), 2)
    adapter, remote = guarded(path)
    bits = np.zeros(10, np.uint8)
    try:
        with pytest.raises(AdapterError) as here:
            local.modulate(bits)
        with pytest.raises(AdapterError) as there:
            remote.modulate(bits)
        if misbehave in ("keyboardinterrupt", "baseexception"):  # the worker adds its traceback
            assert "Traceback" in there.value.stderr
            there.value.stderr = here.value.stderr
        assert (there.value.raw_message, there.value.call, there.value.input_summary) == \
            (here.value.raw_message, here.value.call, here.value.input_summary)
        assert type(there.value) is type(here.value)
    finally:
        adapter.close()


def test_input_arrays_are_writable_copies(tmp_path):
    adapter, device = guarded(device_file(tmp_path, "mutate"))
    try:
        bits = np.zeros(4, np.uint8)
        out = device.modulate(bits)
        assert bits.tolist() == [0, 0, 0, 0]
        np.testing.assert_allclose(out, [(1 + 1j) / np.sqrt(2)] * 2)
    finally:
        adapter.close()


def test_open_errors_cross_from_the_worker(tmp_path):
    result = check(device_file(tmp_path, None, factory="broken"))
    v = result.verdicts[0]  # an open error stands for every verdict of the file
    assert all(x.outcome == "error" and x.reason == v.reason for x in result.verdicts)
    assert v.reason.startswith("the device could not be opened") and v.outcome == "error"
    assert "raised RuntimeError: license server not reachable" in v.reason
    with pytest.raises(ConfigError, match="has no 'Nope'"):
        check(device_file(tmp_path, None, factory="Nope"))


def test_a_device_that_keeps_hanging_is_given_up(tmp_path):
    adapter, device = guarded(device_file(tmp_path, "hang-always", timeout_s=0.3))
    try:
        for _ in range(MAX_CONSECUTIVE_TIMEOUTS):
            with pytest.raises(DeviceTimeout, match="did not return within timeout_s=0.3"):
                device.modulate(np.zeros(2, np.uint8))
        # each timeout stopped the worker; every call after the first started a new one
        assert adapter.restarts == MAX_CONSECUTIVE_TIMEOUTS - 1
        for _ in range(2):  # refused without starting a worker, so the device is not called
            with pytest.raises(DeviceTimeout) as info:
                device.modulate(np.zeros(2, np.uint8))
            assert str(info.value).startswith("modulate(): not called: the device timed out "
                                              f"(0.3 s) on the last {MAX_CONSECUTIVE_TIMEOUTS} "
                                              "calls in a row, so the run treats it as hung")
            assert adapter.restarts == MAX_CONSECUTIVE_TIMEOUTS - 1
    finally:
        adapter.close()


@pytest.mark.slow  # about 6 s: a Python start-up, the worker server and two 1 s timeouts
def test_hanging_device_is_stopped_and_the_cli_exits_1(tmp_path):
    path = device_file(tmp_path, "hang", timeout_s=1, checks=FAST)
    junit = tmp_path / "junit.xml"
    proc = cli("check", path, "--junit", junit)
    assert proc.returncode == 1, proc.stdout + proc.stderr
    assert "did not return within timeout_s=1 s" in proc.stdout
    suite = ET.parse(junit).getroot().find("testsuite")
    cases = {c.get("name"): c for c in suite.findall("testcase")}
    errors = {n for n, c in cases.items() if c.find("error") is not None}
    # the long blocks (length, roundtrip, the EVM probe) time out; everything else answered
    assert errors == {"length.modulate", "roundtrip", "evm"}
    assert "bits[8192]" in cases["length.modulate"].find("error").get("message")
    assert cases["mapping"].find("failure") is None


@pytest.mark.parametrize("isolate", [True, False])
def test_sigterm_leaves_a_complete_junit_file(tmp_path, isolate):
    marker = tmp_path / "marker"
    path = device_file(tmp_path, "slow-demod", params={"marker": str(marker)}, isolate=isolate,
                       **({"timeout_s": 600} if isolate else {}),
                       checks={**FAST, "finite": {}, "length": {}})
    junit = tmp_path / "junit.xml"
    proc = subprocess.Popen([sys.executable, "-m", "modemverify.cli", "check", str(path),
                             "--junit", str(junit)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 60
        while not marker.exists():
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() < deadline, "the device was never called"
            time.sleep(0.05)
        proc.send_signal(signal.SIGTERM)
        out, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == 130, out + err
    suite = ET.parse(junit).getroot().find("testsuite")
    names = [c.get("name") for c in suite.findall("testcase")]
    assert int(suite.get("tests")) == len(names)
    assert "finite" in names  # finished before the signal: kept
    assert not [p for p in os.listdir(tmp_path) if p.startswith(".junit.xml.")]  # no temp left


def test_a_constructor_that_hangs_is_stopped(tmp_path, monkeypatch):
    # only a worker survives a constructor that never returns (in process nothing can stop it)
    monkeypatch.setattr("modemverify.adapters.isolated.OPEN_TIMEOUT_S", 1.0)
    result = check(device_file(tmp_path, "hang-in-constructor", timeout_s=0.5))
    v = result.verdicts[0]  # an open error stands for every verdict of the file
    assert all(x.outcome == "error" and x.reason == v.reason for x in result.verdicts)
    assert v.reason.startswith("the device could not be opened") and v.outcome == "error"
    assert not result.ok
    assert "the device was not open after 1 s; the worker was stopped" in v.reason


def _gone(pid: int, wait_s: float = 30.0) -> bool:
    """Whether ``pid`` has ended, waiting up to ``wait_s`` for a SIGKILL to land."""
    return not all_gone([pid], wait_s)


@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="reads /proc")
def test_processes_a_device_starts_end_with_its_worker_on_a_timeout(tmp_path):
    marker = tmp_path / "pid"
    adapter, device = guarded(device_file(tmp_path, "fork-hang", timeout_s=0.5,
                                          params={"marker": str(marker)}))
    try:
        with pytest.raises(DeviceTimeout):
            device.modulate(np.zeros(2, np.uint8))
        pid = int(marker.read_text())
        assert _gone(pid), f"process {pid} the device started outlived its stopped worker"
    finally:
        adapter.close()


@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="reads /proc")
def test_a_device_that_forks_does_not_keep_the_cli_output_open(tmp_path):
    marker = tmp_path / "pid"
    path = device_file(tmp_path, "fork", params={"marker": str(marker)}, checks=FAST)
    proc = subprocess.Popen([sys.executable, "-m", "modemverify.cli", "check", str(path)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        # returns only when every holder of the output pipes has closed them
        out, err = proc.communicate(timeout=300)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == 0, out + err
    pid = int(marker.read_text())
    assert _gone(pid), f"process {pid} the device started outlived the run"


def test_a_random_py_in_the_working_folder_does_not_break_isolation(tmp_path):
    work = tmp_path / "work"
    work.mkdir()
    (work / "random.py").write_text("raise ImportError('this random.py shadows the standard "
                                    "library')\n")
    # as the installed `modemverify` script runs: its own folder, not the working one, first
    launcher = tmp_path / "bin" / "modemverify-launcher.py"
    launcher.parent.mkdir()
    launcher.write_text("import sys\nfrom modemverify.cli import main\n"
                        "if __name__ == '__main__':\n    sys.exit(main())\n")
    path = device_file(work, None, checks=FAST)
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(p for p in sys.path if p)}
    proc = subprocess.run([sys.executable, str(launcher), "check", str(path)], cwd=work,
                          capture_output=True, text=True, timeout=300, env=env)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "shadows" not in proc.stdout + proc.stderr
    assert "PASS    mapping" in proc.stdout


def test_the_worker_path_puts_the_working_folder_last(tmp_path):
    from modemverify.adapters.isolated import worker_path

    here = str(tmp_path)
    assert worker_path(["", "/opt/lib", here, "/site"], here) == ["/opt/lib", "/site", here]
    assert worker_path(["/opt/lib"], here) == ["/opt/lib"]


@pytest.mark.parametrize("misbehave, words", [
    ("abort-once", "was killed by signal SIGABRT"),
    ("hang-once", "did not return within timeout_s=0.5 s"),
])
def test_a_failure_of_the_device_during_the_search_is_an_error_not_a_fail(
        tmp_path, misbehave, words):
    # the device fails once, on a length only hypothesis draws: the search stops there and the
    # verdict quotes the error (a rerun would pass, which used to make it a "fail")
    marker = tmp_path / "once"
    path = device_file(tmp_path, misbehave, timeout_s=0.5, params={"marker": str(marker)})
    (v,) = check(path, only=["roundtrip"]).verdicts
    assert marker.exists(), "the search never drew a length the device fails on"
    n = int(marker.read_text())
    assert v.outcome == "error", (v.reason, v.counterexample)
    assert "the device failed on a generated sequence: modulate(): " in v.reason
    assert words in v.reason and f"bits[{n}]=" in v.reason
    assert "does not return the bits sent" not in v.reason
    assert v.counterexample.startswith("bits=[") and words in v.counterexample
