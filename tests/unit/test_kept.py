"""Regression memory, end to end through the command line: a failing run keeps its
counterexamples beside the report, the next run tries them first and says how they fared, and
``vectors export --from-report`` writes them as a vector set the recorded adapter replays."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from modemverify.adapters.python import PythonAdapter
from modemverify.bench import open_bench
from modemverify.cli import main
from modemverify.config import load_device
from modemverify.records import CounterexampleRecord, KeptRecord
from modemverify.vectors.kept import bits_of, read_kept
from modemverify.vectors.recording import read_vector_set

DEVICES = Path(__file__).parent / "devices"
ONLY = ["--only", "roundtrip", "--only", "streaming"]


def qpsk_file(tmp_path, defect):
    """TS 38.211 5.1.3 QPSK; ``swap`` swaps the arms in the modulator only, so the round trip
    through its own (unswapped) demodulator fails on label 01."""
    p = tmp_path / "port.yaml"
    p.write_text(f"name: tern-port\nadapter: python\ntarget: {DEVICES / 'modems.py'}:Qpsk3gpp\n"
                 f"params: {json.dumps({'defect': defect})}\n"
                 f"scheme: {{modulation: qpsk, convention: 3gpp}}\n")
    return p


def dqpsk_file(tmp_path, defect):
    p = tmp_path / "stream.yaml"
    p.write_text(f"name: tern-stream\nadapter: python\n"
                 f"target: {DEVICES / 'streaming.py'}:StreamingDqpsk\n"
                 f"params: {json.dumps({'defect': defect})}\n"
                 f"scheme: {{modulation: dqpsk, convention: gray, streaming: true}}\n")
    return p


def kept_file(report, name):
    return json.loads((report / "counterexamples" / f"{name}.json").read_text())


def test_a_failing_run_keeps_its_counterexamples_and_the_next_run_tries_them_first(
        tmp_path, capsys):
    report = tmp_path / "report"
    files = [str(qpsk_file(tmp_path, "swap")), str(dqpsk_file(tmp_path, "restart_tx"))]
    assert main(["check", *files, "--report", str(report), *ONLY]) == 1
    capsys.readouterr()
    port = kept_file(report, "tern-port")
    assert port["format"] == "modemverify-counterexamples"
    assert port["scheme"]["modulation"] == "qpsk"
    # label 01 alone: the shrunk round-trip failure (arms swapped in the modulator)
    assert port["counterexamples"] == [{"verdict": "roundtrip", "bits": "01", "last": "fail",
                                        "seed": 1}]
    stream = kept_file(report, "tern-stream")
    assert stream["counterexamples"][0]["verdict"] == "streaming.modulate"
    assert stream["counterexamples"][0]["chunks"] == [1, 1]

    # the second run with the same report folder tries them before drawing new inputs
    assert main(["check", *files, "--report", str(report), *ONLY]) == 1
    out = capsys.readouterr().out
    assert "replaying 1 kept counterexample first" in out
    assert out.count("tried the 1 kept counterexample first: still failing") == 2
    assert kept_file(report, "tern-port")["counterexamples"][0]["last"] == "fail"

    # the device fixed: the kept input now passes, and stays kept
    files[0] = str(qpsk_file(tmp_path, None))
    assert main(["check", files[0], "--report", str(report), *ONLY]) == 0
    out = capsys.readouterr().out
    assert "tried the 1 kept counterexample first: now passes" in out
    assert kept_file(report, "tern-port")["counterexamples"] == [
        {"verdict": "roundtrip", "bits": "01", "last": "pass", "seed": 1}]


def test_the_records_in_the_details_have_exactly_their_keys(tmp_path):
    report = tmp_path / "report"
    f = qpsk_file(tmp_path, "swap")
    main(["check", str(f), "--report", str(report), *ONLY])
    from modemverify.runner import check

    kept = read_kept(report / "counterexamples" / "tern-port.json").by_verdict()
    res = check(load_device(f), only=["roundtrip"], kept=kept)
    d = res.verdicts[0].details
    assert set(d["counterexample"]) == CounterexampleRecord.__required_keys__
    assert set(d["kept"]) == KeptRecord.__required_keys__ | KeptRecord.__optional_keys__
    assert d["kept"] == {"tried": 1, "failing": [0]}


def test_export_writes_the_failing_inputs_as_vectors_the_recorded_adapter_replays(
        tmp_path, capsys):
    report, out = tmp_path / "report", tmp_path / "vectors"
    files = [str(qpsk_file(tmp_path, "swap")), str(dqpsk_file(tmp_path, "restart_tx"))]
    main(["check", *files, "--report", str(report), *ONLY])
    capsys.readouterr()
    assert main(["vectors", "export", "--from-report", str(report), "--out", str(out)]) == 0
    printed = capsys.readouterr().out.split()
    assert sorted(Path(p).name for p in printed) == [
        "tern-port-counterexamples.yaml", "tern-stream-counterexamples.yaml"]

    vs = read_vector_set(out / "tern-port-counterexamples.yaml")
    assert [s.bits.tolist() for s in vs.segments] == [[0, 1]]
    # TS 38.211 5.1.3: bits 01 -> (1 - j) / sqrt 2
    np.testing.assert_allclose(vs.segments[0].samples, [(1 - 1j) / np.sqrt(2)], atol=1e-7)
    stream = read_vector_set(out / "tern-stream-counterexamples.yaml")
    assert "feed as 2 calls of 1 + 1 symbols" in stream.segments[0].description

    # the recorded adapter reads the set back and answers exactly those inputs
    dev = tmp_path / "replay.yaml"
    dev.write_text(f"name: replay\nadapter: recorded\n"
                   f"recording: {out / 'tern-port-counterexamples.yaml'}\n"
                   f"scheme: {{modulation: qpsk, convention: 3gpp}}\n")
    bench = open_bench(load_device(dev))
    try:
        got = bench.device.modulate(bits_of("01"))
        np.testing.assert_allclose(got, vs.segments[0].samples, atol=1e-6)
    finally:
        bench.device.close()
    # and a correct device matches them
    from devices.modems import Qpsk3gpp

    ok = open_bench(load_device(qpsk_file(tmp_path, None)), PythonAdapter(Qpsk3gpp()))
    np.testing.assert_allclose(ok.device.modulate(vs.segments[0].bits), vs.segments[0].samples,
                               atol=1e-6)


@pytest.mark.parametrize("make,words", [
    (lambda d: d / "missing", ["missing: no such folder", "expected the --report folder"]),
    (lambda d: d, ["has no counterexamples/ folder", "expected the --report folder"]),
])
def test_export_from_a_bad_report_folder_is_exit_2_naming_it(tmp_path, capsys, make, words):
    path = make(tmp_path)
    assert main(["vectors", "export", "--from-report", str(path)]) == 2
    err = capsys.readouterr().err
    assert str(path) in err and all(w in err for w in words) and "Traceback" not in err


def test_a_corrupt_kept_file_is_refused_naming_it(tmp_path, capsys):
    folder = tmp_path / "counterexamples"
    folder.mkdir()
    bad = folder / "tern-port.json"
    bad.write_text(json.dumps({"format": "modemverify-counterexamples", "version": 1,
                               "scheme": {"modulation": "qpsk"},
                               "counterexamples": [{"verdict": "roundtrip", "bits": "012"}]}))
    assert main(["vectors", "export", "--from-report", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert str(bad) in err and "counterexamples[0]" in err and "Traceback" not in err
    # the same file stops a check run before any device runs
    assert main(["check", str(qpsk_file(tmp_path, None)), "--report", str(tmp_path)]) == 2
    assert str(bad) in capsys.readouterr().err


def test_a_kept_file_for_another_scheme_is_not_replayed(tmp_path, capsys):
    report = tmp_path / "report"
    main(["check", str(qpsk_file(tmp_path, "swap")), "--report", str(report), *ONLY])
    other = tmp_path / "other.yaml"
    other.write_text(f"name: tern-port\nadapter: python\n"
                     f"target: {DEVICES / 'streaming.py'}:StreamingPi2Bpsk\n"
                     f"scheme: {{modulation: pi/2-bpsk, convention: 3gpp, streaming: true}}\n")
    capsys.readouterr()
    assert main(["check", str(other), "--report", str(report), *ONLY]) == 0
    out = capsys.readouterr().out
    assert "are for qpsk (3gpp), not pi/2-bpsk (3gpp): not replayed" in out
    assert "kept counterexample" not in out.split("not replayed")[1]


def test_a_shaped_device_exports_its_counterexamples_at_one_sample_per_symbol(tmp_path,
                                                                              capsys):
    report, out = tmp_path / "report", tmp_path / "vectors"
    f = tmp_path / "rrc.yaml"
    f.write_text(f"name: tern-rrc\nadapter: python\n"
                 f"target: {DEVICES / 'streaming.py'}:StreamingRrcQpsk\n"
                 f"params: {{defect: drop_state}}\n"
                 f"scheme: {{modulation: qpsk, convention: 3gpp, samples_per_symbol: 8, "
                 f"streaming: true, pulse: {{shape: rrc, rolloff: 0.35, span: 10}}}}\n")
    assert main(["check", str(f), "--report", str(report), "--only", "streaming"]) == 1
    assert main(["vectors", "export", "--from-report", str(report), "--out", str(out)]) == 0
    vs = read_vector_set(out / "tern-rrc-counterexamples.yaml")
    assert vs.samples_per_symbol == 1 and "is not applied" in vs.source
    # chunks [1, 1] of label 00: TS 38.211 5.1.3 gives (1 + j) / sqrt 2 twice
    np.testing.assert_allclose(vs.segments[0].samples, [(1 + 1j) / np.sqrt(2)] * 2, atol=1e-7)
