"""The device guard in the harness's own process: whatever a Python device does at import, in
its constructor or in a call becomes an error verdict naming it, and the run goes on.

The devices are Python files written into the test's folder: TS 38.211 5.1.3 QPSK
(d = ((1 - 2 b0) + j (1 - 2 b1)) / sqrt 2) with one planted misbehaviour each, chosen by the
``misbehave`` parameter (or, at import, by a marker file beside the module).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from _cmodems import write_device

from modemverify.adapters.base import _INTERRUPTS, GuardedDevice, max_output
from modemverify.adapters.python import PythonAdapter
from modemverify.config import load_device
from modemverify.errors import AdapterError, ConfigError, DeviceOutputError
from modemverify.runner import check

FAST = {"ber": False, "llr": False, "evm": False, "spectrum": False}
S = 1 / np.sqrt(2)

DEVICES = r'''
import os, signal, sys, time
from pathlib import Path
import numpy as np

if (Path(__file__).parent / "exit-at-import").exists():
    sys.exit(int((Path(__file__).parent / "exit-at-import").read_text()))

A = 1 / np.sqrt(2)


class Abort(BaseException):
    """A device's own BaseException subclass."""


class Qpsk:
    """TS 38.211 5.1.3 QPSK with one planted misbehaviour."""

    def __init__(self, misbehave=None, code=0):
        self.misbehave, self.code = misbehave, code
        if misbehave == "exit-in-constructor":
            sys.exit(code)
        if misbehave == "typeerror-in-constructor":
            raise TypeError("unsupported operand type(s) for +: 'int' and 'str'")

    def modulate(self, bits):
        b = bits.reshape(-1, 2).astype(float)
        y = A * ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1]))
        m = self.misbehave
        if m == "exit" and bits.size > 6000:
            sys.exit(self.code)
        if m == "baseexception" and bits.size > 6000:
            raise Abort("frame sync lost")
        if m == "keyboardinterrupt" and bits.size > 6000:
            raise KeyboardInterrupt
        if m == "sigint" and bits.size > 6:
            os.kill(os.getpid(), signal.SIGINT)
            time.sleep(5)
        if m == "strided":
            return np.repeat(y, 2)[::2]
        if m == "real":
            return y.real.copy()
        if m == "integer":
            return np.sign(y.real).astype(np.int16)
        if m == "huge" and bits.size > 6:
            return np.zeros(200_000_000, np.complex64)  # calloc: never touched unless converted
        if m == "huge-list" and bits.size > 6:
            return [0j] * 5_000_000
        return y

    def demodulate(self, samples):
        bits = np.stack([samples.real < 0, samples.imag < 0], axis=1).astype(np.uint8).ravel()
        if self.misbehave == "strided":
            return np.repeat(bits, 3)[::3]
        if self.misbehave == "exit-demod":
            sys.exit(self.code)
        return bits
'''


def device_file(tmp_path: Path, misbehave, **extra) -> Path:
    (tmp_path / "devs.py").write_text(DEVICES)
    params = {"misbehave": misbehave, **extra.pop("params", {})}
    return write_device(tmp_path, f"dev-{misbehave}", {
        "adapter": "python", "target": "devs.py:Qpsk", "params": params,
        "scheme": {"modulation": "qpsk", "convention": "3gpp"}, **extra})


def guarded(path: Path) -> GuardedDevice:
    spec = load_device(path)
    return GuardedDevice.opening(lambda: PythonAdapter.from_spec(spec), 2)


def by_name(result):
    return {v.name: v for v in result.verdicts}


@pytest.mark.parametrize("code", [0, 4])
def test_sys_exit_in_modulate_is_an_error_verdict_and_the_run_goes_on(tmp_path, code):
    result = check(device_file(tmp_path, "exit", params={"code": code}, checks=FAST))
    v = by_name(result)
    assert not result.ok
    assert v["length.modulate"].outcome == "error"
    assert f"modulate(): raised SystemExit({code}): a device must not end the harness" in \
        v["length.modulate"].reason
    assert "devs.py line" in v["length.modulate"].reason and "bits[8192]" in v["length.modulate"].reason
    assert v["mapping"].outcome == "pass"  # the short probes never exit


@pytest.mark.parametrize("code", [0, 4])
def test_sys_exit_in_the_constructor_is_an_open_error(tmp_path, code):
    result = check(device_file(tmp_path, "exit-in-constructor", params={"code": code}))
    v = result.verdicts[0]  # an open error stands for every verdict of the file
    assert all(x.outcome == "error" and x.reason == v.reason for x in result.verdicts)
    assert v.reason.startswith("the device could not be opened") and v.outcome == "error" and not result.ok
    assert f"open(): raised SystemExit({code})" in v.reason and "devs.py line" in v.reason


def test_sys_exit_at_import_is_an_open_error(tmp_path):
    (tmp_path / "exit-at-import").write_text("0")
    result = check(device_file(tmp_path, None))
    v = result.verdicts[0]  # an open error stands for every verdict of the file
    assert all(x.outcome == "error" and x.reason == v.reason for x in result.verdicts)
    assert v.reason.startswith("the device could not be opened") and v.outcome == "error"
    assert "open(): raised SystemExit(0)" in v.reason
    # the half-imported module is not left behind: once fixed, the device opens
    (tmp_path / "exit-at-import").unlink()
    assert check(device_file(tmp_path, None, checks=FAST)).ok


def test_a_baseexception_subclass_is_an_error_verdict(tmp_path):
    result = check(device_file(tmp_path, "baseexception", checks=FAST))
    v = by_name(result)["length.modulate"]
    assert v.outcome == "error"
    assert "raised Abort: frame sync lost (a BaseException, not an Exception)" in v.reason


def test_a_keyboardinterrupt_the_device_raises_itself_is_an_error_verdict(tmp_path):
    result = check(device_file(tmp_path, "keyboardinterrupt", checks=FAST))
    v = by_name(result)["length.modulate"]
    assert v.outcome == "error"
    assert "raised KeyboardInterrupt itself (no interrupt signal reached the harness)" in v.reason
    assert by_name(result)["mapping"].outcome == "pass"


def test_a_real_interrupt_during_a_call_still_stops_the_run(tmp_path):
    # the device sends the harness SIGINT, as Ctrl-C would: the guard lets it through. A
    # suite started in the background by a non-interactive shell inherits SIGINT ignored
    # (POSIX job control), where no Ctrl-C can reach it: the test then gives the process
    # Python's own handler for its duration
    inherited = signal.getsignal(signal.SIGINT)
    if inherited is signal.SIG_IGN:
        signal.signal(signal.SIGINT, signal.default_int_handler)
    try:
        holders = _INTERRUPTS.holders
        device = guarded(device_file(tmp_path, "sigint"))
        try:
            with pytest.raises(KeyboardInterrupt):
                device.modulate(np.zeros(8, np.uint8))
        finally:
            device.close()
        assert _INTERRUPTS.holders == holders  # released: the last holder puts them back
        if holders == 0:
            assert signal.getsignal(signal.SIGINT) is signal.default_int_handler
    finally:
        if inherited is signal.SIG_IGN:
            signal.signal(signal.SIGINT, signal.SIG_IGN)


def test_exits_in_the_cli_give_exit_1_and_a_junit_file_naming_every_device(tmp_path):
    # sys.exit(0) in modulate, sys.exit(4) in the constructor, sys.exit(0) at import, then a
    # correct device: every one is judged and listed, and the run is not green
    paths = [device_file(tmp_path, "exit", params={"code": 0}, checks=FAST),
             device_file(tmp_path, "exit-in-constructor", params={"code": 4})]
    at_import = tmp_path / "import"
    at_import.mkdir()
    (at_import / "exit-at-import").write_text("0")
    paths.append(device_file(at_import, "exits-at-import"))
    paths.append(device_file(tmp_path, "strided", checks=FAST))
    junit = tmp_path / "junit.xml"
    proc = subprocess.run([sys.executable, "-m", "modemverify.cli", "check", *map(str, paths),
                           "--junit", str(junit)], capture_output=True, text=True, timeout=300,
                          env={**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)})
    assert proc.returncode == 1, proc.stdout + proc.stderr
    assert "Traceback" not in proc.stdout + proc.stderr
    suites = {s.get("name"): s for s in ET.parse(junit).getroot().findall("testsuite")}
    assert set(suites) == {"dev-exit", "dev-exit-in-constructor", "dev-exits-at-import",
                           "dev-strided"}

    def errors(name):
        return [c.find("error").get("message") for c in suites[name].findall("testcase")
                if c.find("error") is not None]

    assert any("SystemExit(0)" in m for m in errors("dev-exit"))
    assert any("open(): raised SystemExit(4)" in m for m in errors("dev-exit-in-constructor"))
    assert any("open(): raised SystemExit(0)" in m for m in errors("dev-exits-at-import"))
    assert errors("dev-strided") == [] and int(suites["dev-strided"].get("failures")) == 0


def test_a_strided_view_is_a_correct_answer(tmp_path):
    result = check(device_file(tmp_path, "strided", checks=FAST))
    assert result.ok, [(v.name, v.reason) for v in result.verdicts if v.outcome != "pass"]
    device = guarded(device_file(tmp_path, "strided"))
    out = device.modulate(np.array([0, 0, 0, 1, 1, 0, 1, 1], np.uint8))
    # TS 38.211 5.1.3 QPSK: 00, 01, 10, 11
    np.testing.assert_allclose(out, S * np.array([1 + 1j, 1 - 1j, -1 + 1j, -1 - 1j]))
    assert out.flags.c_contiguous and out.dtype == np.complex128


@pytest.mark.parametrize("misbehave, dtype", [("real", "float64"), ("integer", "int16")])
def test_real_or_integer_samples_are_a_dtype_error(tmp_path, misbehave, dtype):
    device = guarded(device_file(tmp_path, misbehave))
    with pytest.raises(DeviceOutputError,
                       match=f"modulate\\(\\): returned dtype {dtype}; expected complex samples"):
        device.modulate(np.zeros(8, np.uint8))
    result = check(device_file(tmp_path, misbehave, checks=FAST))
    v = by_name(result)
    assert v["mapping"].outcome == "error" and "returned dtype" in v["mapping"].reason
    assert "fail" not in {x.outcome for x in result.verdicts}


def test_a_huge_answer_is_refused_before_conversion(tmp_path):
    cap = max_output("modulate", 8, 2, 1)
    device = guarded(device_file(tmp_path, "huge"))
    with pytest.raises(DeviceOutputError,
                       match=f"returned 200000000 samples for 4 symbols; more than {cap} are "
                             f"refused unread"):
        device.modulate(np.zeros(8, np.uint8))  # a complex64 array: converting it costs 4.8 GB
    device = guarded(device_file(tmp_path, "huge-list"))
    with pytest.raises(DeviceOutputError,
                       match=f"returned 5000000 samples for 4 symbols; more than {cap} are "
                             f"refused unread"):
        device.modulate(np.zeros(8, np.uint8))


def test_the_size_cap_comes_before_the_conversion_of_an_array(tmp_path):
    class Long:
        def modulate(self, bits):
            return np.zeros(10**6, np.complex64)[::2]  # a strided view, never copied

    device = GuardedDevice(PythonAdapter(Long()), 2)
    with pytest.raises(DeviceOutputError, match="returned 500000 samples for 4 symbols; more "
                                                "than 1088 are refused unread"):
        device.modulate(np.zeros(8, np.uint8))
    # at the cap's edge the length check speaks, with its usual message
    device = GuardedDevice(PythonAdapter(type("Ok", (), {
        "modulate": lambda self, bits: np.zeros(1088, complex)})()), 2)
    with pytest.raises(DeviceOutputError, match="returned 1088 samples; expected 4"):
        device.modulate(np.zeros(8, np.uint8))


def test_a_typeerror_inside_the_constructor_is_the_devices(tmp_path):
    result = check(device_file(tmp_path, "typeerror-in-constructor"))
    v = result.verdicts[0]  # an open error stands for every verdict of the file
    assert all(x.outcome == "error" and x.reason == v.reason for x in result.verdicts)
    assert v.reason.startswith("the device could not be opened") and v.outcome == "error"
    assert "devs.py:Qpsk (creating the device)(): raised TypeError: unsupported operand" in \
        v.reason


def test_params_that_do_not_fit_the_signature_are_a_config_error(tmp_path):
    with pytest.raises(ConfigError) as info:
        check(device_file(tmp_path, None, params={"rolloff": 0.35}))
    assert info.value.key == "params" and "unexpected keyword argument 'rolloff'" in \
        str(info.value)


def test_close_that_exits_does_not_end_the_run(tmp_path):
    class ExitsOnClose:
        def modulate(self, bits):
            b = bits.reshape(-1, 2)
            return S * ((1 - 2.0 * b[:, 0]) + 1j * (1 - 2.0 * b[:, 1]))

        def close(self):
            sys.exit(3)

    device = GuardedDevice(PythonAdapter(ExitsOnClose()), 2)
    device.modulate(np.zeros(4, np.uint8))
    device.close()  # dropped: the verdicts already measured are what counts


def test_a_device_in_a_thread_cannot_fake_an_interrupt():
    import threading

    class Raises:
        def modulate(self, bits):
            raise KeyboardInterrupt

    device = GuardedDevice(PythonAdapter(Raises()), 2)
    caught = []

    def run():
        try:
            device.modulate(np.zeros(2, np.uint8))
        except AdapterError as exc:
            caught.append(str(exc))

    t = threading.Thread(target=run)
    t.start()
    t.join()
    device.close()
    assert caught and "raised KeyboardInterrupt itself" in caught[0]


def test_wrong_bits_that_do_not_recur_are_a_fail_naming_the_sequence(tmp_path):
    class FlipsOnce:
        """QPSK (TS 38.211 5.1.3) whose demodulator flips a bit once, on the first sequence of
        20 to 63 symbols it sees (a length only the search draws)."""

        flipped = False

        def modulate(self, bits):
            b = bits.reshape(-1, 2)
            return S * ((1 - 2.0 * b[:, 0]) + 1j * (1 - 2.0 * b[:, 1]))

        def demodulate(self, samples):
            bits = np.stack([samples.real < 0, samples.imag < 0], axis=1).astype(np.uint8)
            bits = bits.ravel()
            if not self.flipped and 20 <= samples.size < 64:
                self.flipped = True
                bits[0] ^= 1
            return bits

    from modemverify.runner import check_object

    (v,) = check_object(FlipsOnce(), modulation="qpsk", convention="3gpp",
                        checks={name: False for name in ("finite", "length", "energy",
                                                         "mapping", "gray", "evm", "ber",
                                                         "llr", "alignment", "spectrum",
                                                         "fixed_point", "streaming")}).verdicts
    assert v.name == "roundtrip" and v.outcome == "fail", (v.reason, v.counterexample)
    assert v.counterexample.startswith("bits=[") and "failed once, passed when rerun" in \
        v.counterexample
