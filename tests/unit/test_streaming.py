"""The ``streaming`` check: devices with state judged in chunks, reset() and repeatability.

Correct devices keep their state across calls as the standards define the stream: the
pi/2-BPSK position counter of 3GPP TS 38.211 5.1.1 (i counts the symbols of the stream), the
DQPSK reference (the previous symbol; common practice) and an RRC filter's memory (an FIR's
output is the convolution of the whole input, whatever the blocks it arrives in: common
practice). Each broken device drops one piece of state, and the check names the smallest
failing split and its boundary.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from conftest import make_bench
from devices.streaming import DitheredQpsk, StreamingDqpsk, StreamingPi2Bpsk, StreamingRrcQpsk

from modemverify.adapters.python import PythonAdapter
from modemverify.config import parse_device
from modemverify.oracles import ORACLES
from modemverify.options import validate_options
from modemverify.runner import check, run_oracle

RRC = {"pulse": {"shape": "rrc", "rolloff": 0.35, "span": 10}}
DEVICES = Path(__file__).parent / "devices"


def run(bench, **opts):
    oracle = ORACLES["streaming"]
    got = run_oracle(oracle, bench, validate_options(oracle.options, opts, file=None,
                                                     key="streaming"), seed=7)
    return {v.name: v for v in got}


def outcomes(verdicts):
    return {name: v.outcome for name, v in verdicts.items()}


def test_streaming_rrc_shaper_with_filter_memory_passes_every_check():
    res = check(parse_device({
        "name": "rrc-stream", "adapter": "python", "target": "streaming.py:StreamingRrcQpsk",
        "scheme": {"modulation": "qpsk", "convention": "3gpp", "samples_per_symbol": 8,
                   "streaming": True, **RRC},
        "checks": {"ber": False}}, base_dir=DEVICES), seed=3)
    bad = [(v.name, v.reason) for v in res.verdicts if v.outcome not in ("pass", "skipped")]
    assert bad == []
    got = {v.name: v.outcome for v in res.verdicts}
    assert got["streaming.modulate"] == got["streaming.reset"] == "pass"
    assert got["roundtrip"] == got["mapping"] == got["alignment"] == "pass"


def test_shaper_that_drops_filter_state_fails_with_the_smallest_split():
    v = run(make_bench(StreamingRrcQpsk(defect="drop_state"), "qpsk", "3gpp", 8,
                       streaming=True, **RRC))
    assert outcomes(v) == {"streaming.reset": "pass", "streaming.modulate": "fail",
                           "streaming.demodulate": "skipped"}
    m = v["streaming.modulate"]
    # two chunks of one symbol each is the smallest split; the boundary is at 1 x 8 samples
    assert "chunks of 1 + 1 symbols differ from the whole from sample 8" in m.reason
    assert "the boundary after symbol 1, at sample 8" in m.reason
    assert m.details["counterexample"] == {"verdict": "streaming.modulate", "bits": "0000",
                                           "chunks": [1, 1]}


def test_pi2_bpsk_that_restarts_its_position_counter_fails():
    v = run(make_bench(StreamingPi2Bpsk(defect="restart"), "pi/2-bpsk", "3gpp",
                       streaming=True))
    assert v["streaming.modulate"].outcome == "fail"
    # symbol 1 is turned by 90 degrees in the stream, not when the counter restarts
    assert "chunks of 1 + 1 symbols differ from the whole from sample 1 (the boundary after " \
           "symbol 1" in v["streaming.modulate"].reason
    assert v["streaming.demodulate"].outcome == v["streaming.reset"].outcome == "pass"


@pytest.mark.parametrize("device,mod,conv", [
    (StreamingPi2Bpsk, "pi/2-bpsk", "3gpp"), (StreamingDqpsk, "dqpsk", "gray")])
def test_correct_streaming_symbol_rule_devices_pass(device, mod, conv):
    v = run(make_bench(device(), mod, conv, streaming=True))
    assert outcomes(v) == dict.fromkeys(v, "pass"), {n: x.reason for n, x in v.items()}


def test_dqpsk_that_restarts_its_reference_per_call_fails_on_each_side():
    tx = run(make_bench(StreamingDqpsk("restart_tx"), "dqpsk", "gray", streaming=True))
    assert tx["streaming.modulate"].outcome == "fail"
    assert tx["streaming.demodulate"].outcome == "pass"
    # the smallest: a first symbol that turns the phase (label 01), then any symbol
    assert "chunks of 1 + 1 symbols differ from the whole from sample 1" in \
        tx["streaming.modulate"].reason
    assert tx["streaming.modulate"].counterexample == "chunks=[1, 1] bits=[01 00]"
    rx = run(make_bench(StreamingDqpsk("restart_rx"), "dqpsk", "gray", streaming=True))
    assert rx["streaming.modulate"].outcome == "pass"
    assert rx["streaming.demodulate"].outcome == "fail"
    assert "demodulate to other bits than the whole from bit 3, symbol 1 (the boundary after " \
           "symbol 1" in rx["streaming.demodulate"].reason


def test_reset_that_does_not_reset_fails_and_blocks_the_chunks():
    v = run(make_bench(StreamingPi2Bpsk("reset_ignored"), "pi/2-bpsk", "3gpp", streaming=True))
    assert v["streaming.reset"].outcome == "fail"
    assert "reset() does not restore the initial state" in v["streaming.reset"].reason
    for call in ("modulate", "demodulate"):
        assert v[f"streaming.{call}"].outcome == "skipped"
        assert "streaming.reset failed" in v[f"streaming.{call}"].reason


def test_device_without_state_that_is_not_repeatable_fails_repeat():
    v = run(make_bench(DitheredQpsk()))
    assert list(v) == ["streaming.repeat"]
    assert v["streaming.repeat"].outcome == "fail"
    assert "modulate gave another waveform the second time, from sample 0" in \
        v["streaming.repeat"].reason
    assert "declares scheme.streaming: true" in v["streaming.repeat"].reason
    assert run(make_bench(DitheredQpsk(level=0.0)))["streaming.repeat"].outcome == "pass"


def test_undeclared_state_fails_repeat():
    # a pi/2-BPSK device that keeps its counter but does not say streaming: true
    v = run(make_bench(StreamingPi2Bpsk(), "pi/2-bpsk", "3gpp"))
    assert v["streaming.repeat"].outcome == "fail"


def test_streaming_without_reset_is_skipped_saying_why():
    v = run(make_bench(DitheredQpsk(level=0.0), streaming=True))
    assert set(outcomes(v).values()) == {"skipped"}
    assert all("has no reset()" in x.reason for x in v.values())


def test_every_check_sees_a_burst_from_reset():
    # the correct pi/2-BPSK device passes mapping and roundtrip only because each call of
    # those checks starts at position 0 (reset() before it)
    spec = {"name": "pi2", "adapter": "python", "target": "streaming.py:StreamingPi2Bpsk",
            "scheme": {"modulation": "pi/2-bpsk", "convention": "3gpp", "streaming": True},
            "checks": {"ber": False}}
    res = check(parse_device(spec, base_dir=DEVICES), seed=3)
    assert {v.name: v.outcome for v in res.verdicts}["mapping"] == "pass"
    spec["scheme"]["streaming"] = False
    res = check(parse_device(spec, base_dir=DEVICES), seed=3)
    got = {v.name: v.outcome for v in res.verdicts}
    assert got["streaming.repeat"] == "fail"


def test_isolated_device_offers_reset_and_flush():
    res = check(parse_device({
        "name": "rrc-stream", "adapter": "python", "isolate": True,
        "target": "streaming.py:StreamingRrcQpsk", "params": {"defect": "drop_state"},
        "scheme": {"modulation": "qpsk", "convention": "3gpp", "samples_per_symbol": 8,
                   "streaming": True, **RRC}}, base_dir=DEVICES), seed=3, only=["streaming"])
    got = {v.name: v for v in res.verdicts}
    assert got["streaming.reset"].outcome == "pass"
    assert got["streaming.modulate"].outcome == "fail"
    assert "chunks of 1 + 1 symbols differ from the whole from sample 8" in \
        got["streaming.modulate"].reason


def test_selftest_operator_drops_only_the_state():
    # the self-test's mutant, with its defect turned off, passes every check: its only defect
    # is the memory it clears at each call
    from modemverify.schemes.conventions import get_convention
    from modemverify.selftest.operators import OPERATORS

    op = next(o for o in OPERATORS if o.name == "chunk_state_dropped")
    dev = op.build(get_convention("3gpp", "16qam"), None)
    dev.drop_state = False
    res = check(parse_device({"name": "stream", "adapter": "python", "target": "x.py:X",
                              "scheme": {"modulation": "16qam", "convention": "3gpp",
                                         **op.scheme}, "checks": {"ber": False}}),
                seed=2, adapter=PythonAdapter(dev))
    assert [v.name for v in res.verdicts if v.outcome not in ("pass", "skipped")] == []
    dev.drop_state = True
    res = check(parse_device({"name": "stream", "adapter": "python", "target": "x.py:X",
                              "scheme": {"modulation": "16qam", "convention": "3gpp",
                                         **op.scheme}}),
                seed=2, adapter=PythonAdapter(dev), only=["streaming"])
    got = {v.name: v for v in res.verdicts}
    assert got[op.verdict].outcome == "fail" and "boundary" in got[op.verdict].reason
