"""Waveform-level devices: RRC shaping at 8 samples per symbol, alignment, spectrum, EVM,
fixed point, and comparing two implementations.

The devices are written independently of modemverify's reference (the demo scenario's
configurable RRC build, modemverify/demo/tern_modems.py, plays a third party's code).
Published values: the 99 % occupied bandwidth of RRC alpha = 0.35 is 1.1667 Rs (ITU RR
No. 1.153 definition; value computed from the theoretical raised-cosine PSD); the default EVM
limits are 3GPP TS 38.104 6.5.2.2, Table 6.5.2.2-1.
"""

from __future__ import annotations

import numpy as np
import pytest

from modemverify.adapters.python import PythonAdapter
from modemverify.compare import compare
from modemverify.config import parse_device
from modemverify.demo.tern_modems import TernRrcModem as RrcModem  # noqa: E402
from modemverify.runner import check

RRC = {"shape": "rrc", "rolloff": 0.35, "span": 10}
FAST = {"ber": {"ebn0_db": [8.0, 10.0]}, "llr": False,
        "roundtrip": {"max_examples": 60}}


def run(device, modulation="16qam", checks=None, extra=None, **scheme):
    data = {"name": "rrc-dut", "adapter": "python", "target": "x:y",
            "scheme": {"modulation": modulation, "convention": "3gpp",
                       "samples_per_symbol": 8, "pulse": RRC, **scheme},
            "checks": {**FAST, **(checks or {})}, **(extra or {})}
    spec = parse_device(data)
    res = check(spec, adapter=PythonAdapter(device, *_fmt(extra)))
    return {v.name: v for v in res.verdicts}, res


def _fmt(extra):
    extra = extra or {}
    return extra.get("sample_format", "complex128"), extra.get("full_scale", 1.0)


def test_correct_rrc_device_passes_every_verdict():
    v, res = run(RrcModem())
    bad = {n: x.reason for n, x in v.items() if x.outcome not in ("pass", "skipped")}
    assert not bad, bad
    for name in ("mapping", "roundtrip", "evm", "spectrum.obw", "ber.ebn0=8dB", "alignment"):
        assert v[name].outcome == "pass"
    # published check value: 99 % OBW of RRC 0.35 is 1.1667 Rs; the span-10 truncated pulse
    # and Welch's estimate land within 1 %
    assert v["spectrum.obw"].statistic == pytest.approx(1.1667, rel=0.01)
    assert v["evm"].statistic < 2.0


class TxOnly:
    """Only the modulator of a device: the harness's reference receiver (aligned) listens."""

    def __init__(self, **kw):
        self.m = RrcModem(**kw)

    def modulate(self, bits):
        return self.m.modulate(bits)


def test_delay_and_phase_are_aligned_and_reported_not_failed():
    v, _ = run(TxOnly(lead=13, frac=0.5, phase_deg=20))
    a = v["alignment"]
    assert a.outcome == "pass"
    # the lead adds 13 samples and the pulse grid 0.5
    assert a.details["delay_samples"] == pytest.approx(13.5, abs=0.05)
    assert a.details["phase_deg"] == pytest.approx(20, abs=0.5)
    for name in ("mapping", "gray", "energy", "evm", "roundtrip", "ber.ebn0=8dB",
                 "ber.ebn0=10dB"):
        assert v[name].outcome == "pass", (name, v[name].reason)


def test_trimmed_output_is_aligned_and_its_cut_burst_edges_are_found():
    # a modulator that removes its filter delay ("same" mode) cuts the pulses of the first and
    # last symbols of every burst: long sequences are fine, a one-symbol burst is not
    v, _ = run(TxOnly(trim="same"))
    assert v["alignment"].details["delay_samples"] == pytest.approx(-40, abs=0.05)
    assert v["mapping"].outcome == "pass" and v["evm"].outcome == "pass"
    assert v["roundtrip"].outcome == "fail"
    assert v["roundtrip"].counterexample.startswith("bits=[")


def test_forbidden_phase_correction_fails():
    v, _ = run(TxOnly(phase_deg=20), alignment={"phase": False})
    assert v["alignment"].outcome == "fail"
    assert "scheme.alignment.phase is false" in v["alignment"].reason
    assert v["mapping"].outcome == "fail" and "rotated by 20 degrees" in v["mapping"].reason


def test_rotation_by_a_symmetry_step_is_a_mapping_defect():
    v, _ = run(TxOnly(phase_deg=90))
    assert v["alignment"].outcome == "pass" and "whole symmetry step" in v["alignment"].reason
    assert v["mapping"].outcome == "fail" and "rotated by 90 degrees" in v["mapping"].reason


def test_declared_rolloff_differs_from_the_real_one():
    v, _ = run(RrcModem(true_rolloff=0.2))
    obw = v["spectrum.obw"]
    assert obw.outcome == "fail" and "another pulse or roll-off" in obw.reason
    assert v["mapping"].outcome == "pass"  # the symbols are still right


def test_mask_and_aclr():
    checks = {"spectrum": {"mask": [[0.6, 0], [0.75, -30], [1.0, -45]],
                           "aclr": {"bandwidth_rs": 1.35, "offset_rs": 1.5, "min_db": 35}}}
    v, _ = run(RrcModem(), checks=checks)
    assert v["spectrum.mask"].outcome == "pass" and v["spectrum.aclr"].outcome == "pass"
    v, _ = run(RrcModem(true_rolloff=1.0), checks=checks)
    assert v["spectrum.mask"].outcome == "fail" and "above the mask" in v["spectrum.mask"].reason


def test_demodulate_only_shaped_device_is_judged_on_the_reference_waveform():
    class RxOnly:
        def __init__(self):
            self.m = RrcModem()

        def demodulate(self, samples):
            return self.m.demodulate(samples)

    v, _ = run(RxOnly())
    assert v["mapping"].outcome == "pass" and v["roundtrip"].outcome == "pass"
    assert v["ber.ebn0=8dB"].outcome == "pass"


def test_fixed_point_port_clipping_and_sqnr():
    port = RrcModem(fixed_point=("int16", 1.0))
    v, _ = run(port, extra={"sample_format": "int16", "full_scale": 1.0})
    assert v["fixed_point.clipping"].outcome == "pass"
    assert v["fixed_point.sqnr"].outcome == "pass" and v["fixed_point.sqnr"].statistic > 60
    hot = RrcModem(fixed_point=("int8", 0.25))  # full scale far below the signal peaks
    v, _ = run(hot, extra={"sample_format": "int8", "full_scale": 0.25})
    assert v["fixed_point.clipping"].outcome == "fail"


def spec_of(name, extra=None, **params):
    return parse_device({"name": name, "adapter": "python",
                         "target": "modemverify.demo.tern_modems:TernRrcModem",
                         "params": params,
                         "scheme": {"modulation": "16qam", "convention": "3gpp",
                                    "samples_per_symbol": 8, "pulse": RRC}, **(extra or {})})


def test_compare_fixed_point_port_against_its_float_original():
    a = spec_of("float")
    b = spec_of("q15", {"sample_format": "int16", "full_scale": 1.0},
                fixed_point=["int16", 1.0], trim="same")
    res = compare(a, b)
    v = {x.name: x for x in res.verdicts}
    assert res.ok, {n: x.reason for n, x in v.items()}
    assert v["compare.evm"].statistic < 0.1       # 16-bit: far below the 12.5 % limit
    assert v["compare.alignment"].details["delay_samples"] == pytest.approx(-40, abs=0.05)
    # an 8-bit port at a full scale that clips, judged against a tight EVM limit, fails
    c = spec_of("q7", {"sample_format": "int8", "full_scale": 0.3},
                fixed_point=["int8", 0.3])
    res = compare(a, c, evm_limit_percent=1.0)
    v = {x.name: x for x in res.verdicts}
    assert v["compare.evm"].outcome == "fail" and not res.ok


def test_compare_names_a_mapping_difference():
    a = spec_of("a")
    b = parse_device({"name": "b", "adapter": "reference", "params": {"convention": "ieee802.11"},
                      "scheme": {"modulation": "16qam", "convention": "3gpp",
                                 "samples_per_symbol": 8, "pulse": RRC}})
    res = compare(a, b)
    v = {x.name: x for x in res.verdicts}
    assert v["compare.mapping"].outcome == "fail"
    assert v["compare.mapping"].reason.startswith("B's table is the A table with ")
    assert "label bits reordered" in v["compare.mapping"].reason


def test_report_has_spectrum_eye_and_constellation_figures(tmp_path):
    from modemverify.report.html import write_report

    _, res = run(RrcModem(), checks={"spectrum": {"mask": [[0.6, 0], [0.8, -30]]}})
    index = write_report([res], tmp_path)
    html = index.read_text()
    for kind in ("constellation", "ber", "psd", "eye"):
        assert f"rrc-dut-{kind}.png" in html
        assert (tmp_path / f"rrc-dut-{kind}.png").stat().st_size > 5000


def test_every_correction_forbidden_is_still_measured_and_judged():
    v, _ = run(TxOnly(lead=5), alignment={"delay": False, "phase": False, "frequency": False})
    a = v["alignment"]
    assert a.outcome == "fail" and "scheme.alignment.delay is false" in a.reason
    assert a.details["delay_samples"] == pytest.approx(5, abs=0.05)


class Compressed(TxOnly):
    """A transmit chain whose amplifier compresses the outer points (a soft limiter)."""

    def modulate(self, bits):
        y = self.m.modulate(bits)
        return y / (1 + 0.6 * np.abs(y) ** 2)


def test_evm_catches_a_compressing_transmitter():
    v, _ = run(Compressed(), checks={"evm": {"limit_percent": 3.0}})
    assert v["evm"].outcome == "fail" and v["evm"].statistic > 3.0
    assert "worst labels" in v["evm"].reason
    v, _ = run(TxOnly(), checks={"evm": {"limit_percent": 3.0}})
    assert v["evm"].outcome == "pass"


def test_sqnr_below_the_floor_fails():
    coarse = RrcModem(fixed_point=("int8", 1.0))
    v, _ = run(coarse, extra={"sample_format": "int8", "full_scale": 1.0},
               checks={"fixed_point": {"min_sqnr_db": 45}})
    assert v["fixed_point.sqnr"].outcome == "fail" and v["fixed_point.sqnr"].statistic < 45


def test_x_db_bandwidth_limit():
    checks = {"spectrum": {"x_db": 26, "x_db_limit_rs": 1.45}}
    v, _ = run(RrcModem(), checks=checks)
    assert v["spectrum.xdb"].outcome == "pass"           # alpha 0.35: about 1.34 Rs
    v, _ = run(RrcModem(true_rolloff=1.0), checks=checks)
    assert v["spectrum.xdb"].outcome == "fail"           # alpha 1: wider than 1.45 Rs
