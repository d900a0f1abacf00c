"""``adapter: sharedlib`` on C modems built here, against the ABI only, into a temporary folder.

Expected points: 3GPP TS 38.211 5.1.3 QPSK, d = ((1 - 2 b0) + j (1 - 2 b1)) / sqrt(2), and
5.1.4 16QAM (TS 36.211 Table 7.1.3-1 rows). Expected LLRs: the exact 3GPP QPSK LLR
L(b0) = 2 sqrt(2) Re(y) / N0, derived from the Gaussian likelihoods (common practice; y = 0.3 -
0.2j, N0 = 0.4 -> 2.1213, -1.4142).
"""

from __future__ import annotations

import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from _cmodems import (
    CC,
    QAM16_INT16_C,
    build_library,
    needs_cc,
    qpsk_sharedlib,
    write_device,
)

from modemverify.adapters.base import GuardedDevice
from modemverify.adapters.isolated import IsolatedAdapter
from modemverify.adapters.sharedlib import CANARY_BYTES, SharedLibAdapter
from modemverify.config import load_device
from modemverify.errors import AdapterError, ConfigError, DeviceOutputError
from modemverify.runner import check

pytestmark = needs_cc

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "sharedlib-c"
S = 1 / np.sqrt(2)
# TS 38.211 5.1.3 (d = ((1 - 2 b0) + j (1 - 2 b1)) / sqrt 2): 00, 01, 10, 11
QPSK_3GPP = S * np.array([1 + 1j, 1 - 1j, -1 + 1j, -1 - 1j])
FAST = {"ber": False, "llr": False}  # the statistical checks have their own tests


def by_name(result):
    return {v.name: v for v in result.verdicts}


def test_correct_library_passes_every_verdict(tmp_path):
    result = check(qpsk_sharedlib(tmp_path, "good"))
    outcomes = {v.name: v.outcome for v in result.verdicts}
    assert result.ok, outcomes
    assert {"mapping", "gray", "energy", "finite", "roundtrip", "length.modulate",
            "length.demodulate"} <= set(outcomes)
    assert set(outcomes.values()) <= {"pass", "skipped"}
    # the only skips: checks that need a soft demodulator (this library has none), and the
    # waveform checks, which do not apply at one sample per symbol
    skipped = {v.name for v in result.verdicts if v.outcome == "skipped"}
    assert skipped == {"llr.sign", "llr.calibration", "llr.mutual_information", "alignment",
                       "spectrum.obw", "fixed_point.clipping", "fixed_point.sqnr"}, skipped


def test_modulate_in_process_gives_the_ts_38_211_table(tmp_path):
    spec = load_device(qpsk_sharedlib(tmp_path, "inproc", isolate=False))
    adapter = SharedLibAdapter.from_spec(spec)
    out = adapter.modulate(np.array([0, 0, 0, 1, 1, 0, 1, 1], dtype=np.uint8))
    np.testing.assert_allclose(out, QPSK_3GPP, atol=1e-7)  # float32 across the ABI
    bits = adapter.demodulate(QPSK_3GPP[[3, 0, 2]])
    assert bits.tolist() == [1, 1, 0, 0, 1, 0]


def test_swapped_arms_fail_mapping_naming_the_swap(tmp_path):
    result = check(qpsk_sharedlib(tmp_path, "swapped", ["SWAP"], checks=FAST))
    v = by_name(result)
    assert v["mapping"].outcome == "fail"
    assert "arms swapped" in v["mapping"].reason
    for name in ("finite", "energy", "gray", "roundtrip", "length.modulate"):
        assert v[name].outcome == "pass", v[name].reason


def test_error_code_is_quoted(tmp_path):
    result = check(qpsk_sharedlib(tmp_path, "errcode", ["ERRCODE"], checks=FAST))
    v = by_name(result)
    assert v["length.modulate"].outcome == "error"
    assert "modulate(): returned error code -3" in v["length.modulate"].reason
    assert "bits[8192]" in v["length.modulate"].reason  # the input it failed on
    assert v["mapping"].outcome == "pass"  # short probes never reach the error


def test_segfault_is_an_error_verdict_and_the_junit_file_is_complete(tmp_path):
    device = qpsk_sharedlib(tmp_path, "segv", ["SEGFAULT"], checks=FAST)
    junit = tmp_path / "out" / "junit.xml"
    proc = subprocess.run([sys.executable, "-m", "modemverify.cli", "check", str(device),
                           "--junit", str(junit)], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 1, proc.stdout + proc.stderr
    assert "SIGSEGV" in proc.stdout
    root = ET.parse(junit).getroot()
    suite = root.find("testsuite")
    cases = {c.get("name"): c for c in suite.findall("testcase")}
    assert int(suite.get("tests")) == len(cases) >= 6
    errors = {n for n, c in cases.items() if c.find("error") is not None}
    assert errors == {"length.modulate", "roundtrip", "evm"}  # the probes longer than 6000 bits
    assert int(suite.get("errors")) == 3
    message = cases["length.modulate"].find("error").get("message")
    assert "SIGSEGV" in message and "modulate()" in message and "bits[8192]" in message
    for name in ("finite", "energy", "mapping", "gray"):
        assert cases[name].find("failure") is None and cases[name].find("error") is None


def test_crash_restarts_the_worker_for_the_next_call(tmp_path):
    spec = load_device(qpsk_sharedlib(tmp_path, "abort", ["ABORT"]))
    adapter = IsolatedAdapter.from_spec(spec)
    try:
        device = GuardedDevice(adapter, 2)
        with pytest.raises(AdapterError) as info:
            device.modulate(np.zeros(6002, dtype=np.uint8))
        text = str(info.value)
        assert "SIGABRT" in text and "bits[6002]" in text
        assert "6002 bits exceeds the frame buffer" in info.value.stderr  # stderr quoted
        np.testing.assert_allclose(device.modulate(np.array([1, 0], np.uint8)),
                                   QPSK_3GPP[[2]], atol=1e-7)
        assert adapter.restarts == 1
    finally:
        adapter.close()


def test_int16_q15_library(tmp_path):
    lib = build_library(tmp_path, QAM16_INT16_C, "qam16")
    device = write_device(tmp_path, "qam16", {
        "adapter": "sharedlib", "library": lib.name,
        "symbols": {"modulate": "mod16", "demodulate": "demod16"},
        "sample_format": "int16", "full_scale": 1.0,
        "scheme": {"modulation": "16qam", "convention": "3gpp"}, "checks": FAST})
    result = check(device)
    assert result.ok, [(v.name, v.reason) for v in result.verdicts]
    spec = load_device(device)
    adapter = SharedLibAdapter.from_spec(spec)
    # TS 36.211 Table 7.1.3-1 / TS 38.211 5.1.4: 0000 -> (1+1j)/sqrt(10), 0011 -> (3+3j)/sqrt(10),
    # 1101 -> (-1-3j)/sqrt(10); Q15 quantisation: 1/sqrt(10) -> 10362/32768
    out = adapter.modulate(np.array([0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 0, 1], np.uint8))
    np.testing.assert_allclose(out * np.sqrt(10), [1 + 1j, 3 + 3j, -1 - 3j], atol=1e-4)


def test_buffer_overrun_is_reported(tmp_path):
    spec = load_device(qpsk_sharedlib(tmp_path, "overrun", ["OVERRUN"], isolate=False))
    device = GuardedDevice(SharedLibAdapter.from_spec(spec), 2)
    with pytest.raises(DeviceOutputError, match="wrote past the end of its output buffer"):
        device.modulate(np.zeros(8, np.uint8))


def test_example_library_soft_outputs_match_the_exact_llr(tmp_path):
    lib = tmp_path / "libqpsk3gpp.so"
    subprocess.run([CC, "-O2", "-shared", "-fPIC", "-o", str(lib),
                    str(EXAMPLE / "qpsk_3gpp.c")], check=True)
    device = tmp_path / "qpsk-3gpp.yaml"
    device.write_text((EXAMPLE / "qpsk-3gpp.yaml").read_text())
    spec = load_device(device)
    adapter = SharedLibAdapter.from_spec(spec)
    llr = adapter.demodulate_soft(np.array([0.3 - 0.2j]), 0.4)
    np.testing.assert_allclose(llr, [2.1213, -1.4142], atol=1e-4)


@pytest.mark.parametrize("change, key, words", [
    ({"library": "missing.so"}, "library", "library='missing.so': no such file"),
    ({"symbols": {"modulate": "mod", "encode": "x"}}, "symbols.encode", "unknown function"),
    ({"symbols": {"modulate": "not a name"}}, "symbols.modulate", "name of a C function"),
    ({"symbols": {"demodulate_soft": "s"}}, "symbols", "at least one of modulate"),
    ({"sample_format": "float64"}, "sample_format", "expected one of float32, int16"),
    ({"full_scale": 2.0}, "full_scale", "int16 only"),
    ({"sample_format": "int16", "full_scale": 0}, "full_scale", "expected a finite number > 0"),
])
def test_device_file_errors_name_file_and_key(tmp_path, change, key, words):
    lib = build_library(tmp_path, "long mod(void) { return 0; }\n", "tiny")
    body = {"adapter": "sharedlib", "library": lib.name, "symbols": {"modulate": "mod"},
            "scheme": {"modulation": "qpsk", "convention": "3gpp"}, **change}
    path = write_device(tmp_path, "bad", body)
    with pytest.raises(ConfigError) as info:
        load_device(path)
    assert info.value.key == key and info.value.file == str(path)
    assert words in str(info.value)


def test_missing_symbol_is_a_config_error_from_the_worker(tmp_path):
    lib = build_library(tmp_path, "long mod(void) { return 0; }\n", "tiny")
    path = write_device(tmp_path, "nosym", {
        "adapter": "sharedlib", "library": lib.name, "symbols": {"modulate": "qpsk_mod"},
        "scheme": {"modulation": "qpsk", "convention": "3gpp"}})
    with pytest.raises(ConfigError, match="'qpsk_mod': libtiny.so exports no such function"):
        check(path)


def test_a_far_overrun_is_reported(tmp_path):
    """64 floats written 1000 elements past the buffer: beyond the capacity slack, inside the
    canary after it."""
    spec = load_device(qpsk_sharedlib(tmp_path, "far", ["FAR_OVERRUN"], isolate=False))
    device = GuardedDevice(SharedLibAdapter.from_spec(spec), 2)
    with pytest.raises(DeviceOutputError) as info:
        device.modulate(np.zeros(8, np.uint8))
    text = str(info.value)
    assert "wrote past the end of its output buffer (capacity 72 samples): a buffer overrun" \
        in text
    assert f"changed bytes up to {(1000 + 64) * 4} past the end" in text
    assert CANARY_BYTES > (1000 + 64) * 4  # the canary reaches that far


def test_a_far_overrun_fails_the_run_isolated(tmp_path):
    result = check(qpsk_sharedlib(tmp_path, "far", ["FAR_OVERRUN"], checks=FAST))
    assert not result.ok
    v = by_name(result)
    assert v["mapping"].outcome == "error" and "buffer overrun" in v["mapping"].reason


def test_an_underrun_is_blamed_on_the_call_that_made_it(tmp_path):
    result = check(qpsk_sharedlib(tmp_path, "under", ["UNDERRUN"], checks=FAST))
    v = by_name(result)
    # only the blocks longer than 6000 bits write before the buffer; the short probes pass
    assert v["mapping"].outcome == "pass" and v["finite"].outcome == "pass"
    assert v["length.modulate"].outcome == "error"
    assert "modulate(): wrote before the start of its output buffer (up to 32 bytes before " \
           "it): a buffer underrun" in v["length.modulate"].reason
    assert "bits[8192]" in v["length.modulate"].reason


def test_a_write_past_the_input_buffer_is_reported(tmp_path):
    spec = load_device(qpsk_sharedlib(tmp_path, "inover", ["INPUT_OVERRUN"], isolate=False))
    device = GuardedDevice(SharedLibAdapter.from_spec(spec), 2)
    with pytest.raises(DeviceOutputError, match="wrote past the end of its input buffer: a "
                                                "buffer overrun"):
        device.modulate(np.zeros(8, np.uint8))
