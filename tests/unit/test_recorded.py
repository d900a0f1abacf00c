"""Recorded vectors: the golden sets in vectors/, the vector-set format, SigMF, and replay.

Golden values are held against the published tables: 3GPP TS 38.211 5.1.3 QPSK and 5.1.4 16QAM
(5.1.4 clause number from memory; the 16QAM points are those of TS 36.211 Table 7.1.3-1);
IEEE Std 802.11-2007 17.3.5.7, Table 17-7 (BPSK: 0 -> -1, 1 -> +1), Table 17-9 (16-QAM axis:
00 -3, 01 -1, 11 +1, 10 +3) and Table 17-10 (64-QAM axis: 000 -7, 001 -5, 011 -3, 010 -1,
110 +1, 111 +3, 101 +5, 100 +7), with K_MOD 1/sqrt(10) and 1/sqrt(42) from Table 17-6; PRBS9
is x^9 + x^5 + 1 of ITU-T O.150 (05/96) 5.1, whose first 32 bits from the all-ones register
(11111111100000111101111100010111) were computed from that register model.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import yaml
from _cmodems import write_device

from modemverify.adapters.recorded import RecordedAdapter
from modemverify.config import load_device
from modemverify.dsp.formats import from_format
from modemverify.errors import AdapterError, ConfigError
from modemverify.runner import check
from modemverify.vectors.recording import (
    SHIPPED_SETS,
    Segment,
    VectorSet,
    golden_vector_set,
    read_vector_set,
    write_vector_set,
)

ROOT = Path(__file__).resolve().parents[2]
VECTORS = ROOT / "vectors"
TABLE_CHECKS = {"length": False, "roundtrip": False, "ber": False, "llr": False}
S2, S10, S42 = 1 / np.sqrt(2), 1 / np.sqrt(10), 1 / np.sqrt(42)

# 3GPP 16QAM, labels 0000 ... 1111 (x sqrt(10)): TS 38.211 5.1.4 formula (clause number from
# memory); rows 0000 .. 0011 as printed in TS 36.211 Table 7.1.3-1
QAM16_3GPP = np.array([1 + 1j, 1 + 3j, 3 + 1j, 3 + 3j, 1 - 1j, 1 - 3j, 3 - 1j, 3 - 3j,
                       -1 + 1j, -1 + 3j, -3 + 1j, -3 + 3j, -1 - 1j, -1 - 3j, -3 - 1j, -3 - 3j])


def shipped(name: str):
    return read_vector_set(VECTORS / f"{name}.yaml")


def labels_segment(vs) -> np.ndarray:
    return next(s for s in vs.segments if s.name == "labels").samples


def test_every_shipped_set_is_what_export_writes(tmp_path):
    for conv, mod in SHIPPED_SETS:
        name = f"{mod}-{conv}"
        ours = shipped(name)
        fresh = write_vector_set(golden_vector_set(mod, conv), tmp_path)
        for suffix in (".bits.npy", ".iq.npy", ".bits.u8", ".iq.cf32"):
            assert (VECTORS / f"{name}{suffix}").read_bytes() == \
                   (tmp_path / f"{name}{suffix}").read_bytes(), name + suffix
        assert [s.name for s in ours.segments] == [s.name for s in read_vector_set(fresh).segments]
        assert ours.calls == ("modulate", "demodulate")
        # the raw files hold the same data as the .npy files
        raw_bits = np.fromfile(VECTORS / f"{name}.bits.u8", dtype=np.uint8)
        assert np.array_equal(raw_bits, ours.bits)
        raw_iq = from_format((VECTORS / f"{name}.iq.cf32").read_bytes(), "float32")
        np.testing.assert_allclose(raw_iq, ours.samples, atol=1e-7)
        assert (VECTORS / f"{name}.iq.npy").stat().st_size < 16_000  # small, as promised


def test_golden_sets_hold_the_published_tables():
    np.testing.assert_allclose(labels_segment(shipped("qpsk-3gpp")),
                               S2 * np.array([1 + 1j, 1 - 1j, -1 + 1j, -1 - 1j]), atol=1e-15)
    np.testing.assert_allclose(labels_segment(shipped("16qam-3gpp")), S10 * QAM16_3GPP,
                               atol=1e-15)
    np.testing.assert_allclose(labels_segment(shipped("bpsk-ieee802.11")), [-1, 1], atol=1e-15)
    axis16 = {0b00: -3, 0b01: -1, 0b11: 1, 0b10: 3}
    want16 = [S10 * (axis16[lab >> 2] + 1j * axis16[lab & 3]) for lab in range(16)]
    np.testing.assert_allclose(labels_segment(shipped("16qam-ieee802.11")), want16, atol=1e-15)
    axis64 = {0b000: -7, 0b001: -5, 0b011: -3, 0b010: -1, 0b110: 1, 0b111: 3, 0b101: 5,
              0b100: 7}
    want64 = [S42 * (axis64[lab >> 3] + 1j * axis64[lab & 7]) for lab in range(64)]
    np.testing.assert_allclose(labels_segment(shipped("64qam-ieee802.11")), want64, atol=1e-15)
    prbs9 = next(s for s in shipped("qpsk-3gpp").segments if s.name == "prbs9")
    assert "".join(map(str, prbs9.bits[:32])) == "11111111100000111101111100010111"
    assert prbs9.bits.size == 512  # 511 bits of one period, on to a whole QPSK symbol


def test_golden_set_replayed_as_a_device_passes_the_table_checks():
    result = check(ROOT / "examples" / "recorded" / "16qam-3gpp-golden.yaml")
    assert result.ok
    assert {v.name: v.outcome for v in result.verdicts if v.outcome != "skipped"} == {
        "finite": "pass", "energy": "pass", "mapping": "pass", "gray": "pass"}


def test_checks_without_recorded_vectors_get_an_error_naming_why(tmp_path):
    path = write_device(tmp_path, "rec", {
        "adapter": "recorded", "recording": str(VECTORS / "qpsk-3gpp.yaml"),
        "scheme": {"modulation": "qpsk", "convention": "3gpp"}})
    v = {x.name: x for x in check(path).verdicts}
    assert v["mapping"].outcome == "pass"
    # length asks for PRBS prefixes the recording may lack: an error that says so
    assert v["length.modulate"].outcome == "error"
    assert "no recording for these bits" in v["length.modulate"].reason
    # checks that draw fresh vectors are skipped, with the reason, never run on nonsense
    fresh = ["roundtrip", "llr.sign", "llr.calibration", "llr.mutual_information"] + [
        n for n in v if n.startswith("ber.ebn0=")]
    assert len(fresh) == 7  # roundtrip, the three default BER points, the three llr parts
    for name in fresh:
        assert v[name].outcome == "skipped"
        assert "replays a recording" in v[name].reason


def _recording(tmp_path, samples_fn, *, calls=("modulate",), name="dut"):
    gold = golden_vector_set("16qam", "3gpp", segments=("labels", "de-bruijn"))
    segs = [Segment(s.name, s.bits, samples_fn(s.samples)) for s in gold.segments]
    vs = VectorSet(name=name, modulation="16qam", convention="3gpp", samples_per_symbol=1,
                   segments=segs, calls=calls, source="test capture")
    header = write_vector_set(vs, tmp_path)
    return write_device(tmp_path, f"{name}-device", {
        "adapter": "recorded", "recording": header.name,
        "scheme": {"modulation": "16qam", "convention": "3gpp"}, "checks": TABLE_CHECKS})


def test_a_recording_with_swapped_arms_fails_mapping(tmp_path):
    path = _recording(tmp_path, lambda z: z.imag + 1j * z.real)
    v = {x.name: x for x in check(path).verdicts}
    assert v["mapping"].outcome == "fail" and "arms swapped" in v["mapping"].reason


def test_demodulate_only_recording_is_probed_through_demodulate(tmp_path):
    path = _recording(tmp_path, lambda z: z, calls=("demodulate",))
    result = check(path)
    v = {x.name: x for x in result.verdicts}
    assert v["mapping"].outcome == "pass" and v["mapping"].details["probe"] == "demodulate"
    adapter = RecordedAdapter.from_spec(load_device(path))
    assert adapter.capabilities == {"demodulate"}
    with pytest.raises(AdapterError, match="no recording for these samples"):
        adapter.demodulate(np.array([0.5 + 0.5j]))


def test_replay_needs_a_contiguous_symbol_aligned_part(tmp_path):
    adapter = RecordedAdapter.from_spec(load_device(_recording(tmp_path, lambda z: z)))
    gold = golden_vector_set("16qam", "3gpp", segments=("de-bruijn",)).segments[0]
    part = gold.bits[40:80]  # symbols 10 .. 19
    np.testing.assert_array_equal(adapter.modulate(part), gold.samples[10:20])
    with pytest.raises(AdapterError, match="no recording for these bits"):
        adapter.modulate(gold.bits[41:81])  # the same stretch, shifted by one bit
    labels = golden_vector_set("16qam", "3gpp", segments=("labels",)).segments[0]
    # the last label of one segment and the first three of the next: present only across the
    # boundary (the de Bruijn sequence holds each label pair once, its first pair at the start)
    across = np.concatenate([labels.bits[-4:], gold.bits[:4 * 3]])
    with pytest.raises(AdapterError, match="no recording"):
        adapter.modulate(across)
    assert adapter.modulate(np.zeros(0, np.uint8)).size == 0


def test_header_problems_name_file_and_key(tmp_path):
    header = write_vector_set(golden_vector_set("qpsk", "3gpp"), tmp_path)
    (tmp_path / "qpsk-3gpp.iq.npy").write_bytes(
        (tmp_path / "qpsk-3gpp.iq.npy").read_bytes()[:-8] + b"\0" * 8)
    with pytest.raises(ConfigError) as info:
        read_vector_set(header)
    assert info.value.key == "samples.npy" and "SHA-256 does not match" in str(info.value)
    head = yaml.safe_load(header.read_text())
    head.pop("sha256")
    head["segments"][0]["symbols"] += 1
    header.write_text(yaml.safe_dump(head))
    with pytest.raises(ConfigError) as info:
        read_vector_set(header)
    assert info.value.key.startswith("segments") and info.value.file == str(header)
    assert "the payload holds" in str(info.value)
    head["segments"][0]["symbols"] -= 1
    head["scheme"]["modulation"] = "8qam"
    header.write_text(yaml.safe_dump(head))
    with pytest.raises(ConfigError, match="modulation='8qam'"):
        read_vector_set(header)
    head["scheme"]["modulation"] = "qpsk"
    for key, value, words in (("sample_format", "int8", "expected one of float32, int16"),
                              ("full_scale", float("inf"), "expected a finite number > 0")):
        header.write_text(yaml.safe_dump({**head, "samples": {**head["samples"], key: value}}))
        with pytest.raises(ConfigError) as info:
            read_vector_set(header)
        assert info.value.key == f"samples.{key}" and words in str(info.value)


def test_full_scale_of_a_recorded_device_is_checked(tmp_path):
    path = write_device(tmp_path, "rec", {
        "adapter": "recorded", "recording": str(VECTORS / "qpsk-3gpp.yaml"), "full_scale": -2,
        "scheme": {"modulation": "qpsk", "convention": "3gpp"}})
    with pytest.raises(ConfigError) as info:
        load_device(path)
    assert info.value.key == "full_scale" and "expected a finite number > 0" in str(info.value)


def test_recording_must_match_the_claimed_scheme(tmp_path):
    path = write_device(tmp_path, "rec", {
        "adapter": "recorded", "recording": str(VECTORS / "qpsk-3gpp.yaml"),
        "scheme": {"modulation": "16qam", "convention": "3gpp"}})
    with pytest.raises(ConfigError) as info:
        load_device(path)
    assert info.value.key == "recording" and "holds qpsk" in str(info.value)


def test_raw_only_int16_set_round_trips(tmp_path):
    vs = golden_vector_set("64qam", "3gpp", sample_format="int16", full_scale=2.0)
    header = write_vector_set(vs, tmp_path, npy=False)
    back = read_vector_set(header)
    assert back.sample_format == "int16" and (tmp_path / "64qam-3gpp.iq.ci16").is_file()
    # Q15 at full scale 2: a step is 2/32768, so rounding moves each of I and Q by at most
    # 1/32768 and a sample by at most sqrt(2)/32768
    assert np.max(np.abs(back.samples - vs.samples)) <= np.sqrt(2) / 32768
    assert np.array_equal(back.bits, vs.bits)


# -- SigMF (files written with the sigmf package) -------------------------------------------

def _sigmf(tmp_path, datatype="cf32_le", *, annotate=True, swap=False, scale=1.0):
    sigmf = pytest.importorskip("sigmf")
    from sigmf import SigMFFile

    gold = golden_vector_set("qpsk", "3gpp", segments=("labels", "de-bruijn"))
    data = np.concatenate([s.samples for s in gold.segments])
    if swap:
        data = data.imag + 1j * data.real
    base = tmp_path / "capture"
    if datatype == "cf32_le":
        data.astype(np.complex64).tofile(f"{base}.sigmf-data")
    else:  # ci16_le: interleaved int16, read back by sigmf as integer / 32768
        iq = np.empty(2 * data.size)
        iq[0::2], iq[1::2] = data.real, data.imag
        np.rint(iq / scale * 32768).astype("<i2").tofile(f"{base}.sigmf-data")
    meta = SigMFFile(data_file=f"{base}.sigmf-data", global_info={
        "core:datatype": datatype, "core:sample_rate": 1e6,
        "core:version": sigmf.__specification__,
        "core:extensions": [{"name": "modemverify", "version": "1.0.0", "optional": True}]})
    meta.add_capture(0, metadata={})
    start = 0
    for s in gold.segments:
        n = s.samples.size
        info = {"core:label": s.name}
        if annotate:
            info["modemverify:bits"] = "".join(map(str, s.bits))
        meta.add_annotation(start, n, metadata=info)
        start += n
    meta.tofile(f"{base}.sigmf-meta", overwrite=True)
    return base, gold


def _sigmf_device(tmp_path, **keys):
    return write_device(tmp_path, "sig", {
        "adapter": "recorded", "scheme": {"modulation": "qpsk", "convention": "3gpp"},
        "checks": TABLE_CHECKS, **keys})


def test_sigmf_cf32_with_bits_in_annotations(tmp_path):
    _sigmf(tmp_path)
    assert check(_sigmf_device(tmp_path, recording="capture.sigmf-meta")).ok
    _sigmf(tmp_path, swap=True)
    v = {x.name: x for x in check(_sigmf_device(tmp_path, recording="capture.sigmf-meta")).verdicts}
    assert v["mapping"].outcome == "fail" and "arms swapped" in v["mapping"].reason


def test_sigmf_ci16_with_full_scale_and_a_bits_sidecar(tmp_path):
    base, gold = _sigmf(tmp_path, "ci16_le", annotate=False, scale=2.0)
    np.save(tmp_path / "sent.npy", np.concatenate([s.bits for s in gold.segments]))
    path = _sigmf_device(tmp_path, recording="capture.sigmf-data", bits="sent.npy",
                         full_scale=2.0)
    adapter = RecordedAdapter.from_spec(load_device(path))
    np.testing.assert_allclose(adapter.modulate(gold.segments[0].bits), gold.segments[0].samples,
                               atol=2 / 32768)
    assert check(path).ok


def test_sigmf_without_bits_is_a_config_error(tmp_path):
    _sigmf(tmp_path, annotate=False)
    with pytest.raises(ConfigError, match="no bits for the samples"):
        load_device(_sigmf_device(tmp_path, recording="capture.sigmf-meta"))


# -- the export command ---------------------------------------------------------------------

def test_vectors_export_command(tmp_path):
    run = [sys.executable, "-m", "modemverify.cli", "vectors", "export"]
    proc = subprocess.run(run + ["--modulation", "16qam", "--convention", "ieee802.11",
                                 "--samples-per-symbol", "4", "--sample-format", "int16",
                                 "--full-scale", "2", "--out", str(tmp_path)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    vs = read_vector_set(tmp_path / "16qam-ieee802.11.yaml")
    assert vs.samples_per_symbol == 4 and vs.sample_format == "int16"
    # label 0000 held for 4 samples: (-3-3j)/sqrt(10), IEEE 802.11-2007 Table 17-9; the held
    # (rectangular) pulse has unit energy, so each sample is the symbol / sqrt(4)
    first = labels_segment(vs)[:8]
    np.testing.assert_allclose(first, np.repeat(S10 * np.array([-3 - 3j, -3 - 1j]), 4) / 2,
                               atol=1 / 16384)
    bad = subprocess.run(run + ["--modulation", "16qam", "--out", str(tmp_path)],
                         capture_output=True, text=True, timeout=120)
    assert bad.returncode == 2 and "--all or both --modulation and --convention" in bad.stderr
    shutil.rmtree(tmp_path)


# -- files that lie ---------------------------------------------------------------------------

def _forged_npy(path: Path, shape, descr="<c16", data=b"\0" * 64) -> None:
    """A .npy file whose header claims ``shape`` over a few bytes of data."""
    import io

    buf = io.BytesIO()
    np.lib.format.write_array_header_1_0(buf, {"descr": descr, "fortran_order": False,
                                               "shape": shape})
    path.write_bytes(buf.getvalue() + data)


@pytest.mark.parametrize("entry, name, key", [
    ("bits", "/etc/passwd", "bits.raw"),
    ("bits", "../outside.bits.u8", "bits.raw"),
    ("samples", "sub/../../outside.iq.npy", "samples.npy"),
])
def test_payload_paths_stay_in_the_headers_folder(tmp_path, entry, name, key):
    folder = tmp_path / "set"
    header = write_vector_set(golden_vector_set("qpsk", "3gpp"), folder)
    (tmp_path / "outside.bits.u8").write_bytes((folder / "qpsk-3gpp.bits.u8").read_bytes())
    (tmp_path / "outside.iq.npy").write_bytes((folder / "qpsk-3gpp.iq.npy").read_bytes())
    head = yaml.safe_load(header.read_text())
    head.pop("sha256")
    kind = key.rsplit(".", 1)[1]
    original = head[entry]
    head[entry] = {"count": original["count"], kind: name}
    header.write_text(yaml.safe_dump(head))
    with pytest.raises(ConfigError) as info:
        read_vector_set(header)
    assert info.value.key == key and info.value.file == str(header)
    assert f"{kind}={name!r}: payload files must be in the header's folder" in str(info.value)
    head[entry] = original  # the set's own file names are read as before
    header.write_text(yaml.safe_dump(head))
    vs = read_vector_set(header)
    assert vs.bits.size == 2 * vs.samples.size


def test_a_npy_header_claiming_1e11_elements_is_refused_before_allocation(tmp_path):
    header = write_vector_set(golden_vector_set("qpsk", "3gpp"), tmp_path)
    head = yaml.safe_load(header.read_text())
    head.pop("sha256")
    header.write_text(yaml.safe_dump(head))
    _forged_npy(tmp_path / "qpsk-3gpp.iq.npy", (10**11,))  # 1.6 TB if allocated
    with pytest.raises(ConfigError) as info:
        read_vector_set(header)
    assert info.value.key == "samples.npy"
    assert "its header claims an array of shape (100000000000,)" in str(info.value)
    assert "the file holds 64 bytes of data" in str(info.value)


def test_a_forged_bits_sidecar_is_refused(tmp_path):
    _sigmf(tmp_path, annotate=False)
    _forged_npy(tmp_path / "sent.npy", (10**11,), descr="|u1")
    with pytest.raises(ConfigError) as info:
        load_device(_sigmf_device(tmp_path, recording="capture.sigmf-meta", bits="sent.npy"))
    assert info.value.key == "bits" and "its header claims" in str(info.value)


def test_a_negative_sigmf_sample_start_is_a_bad_file(tmp_path):
    import json

    base, _ = _sigmf(tmp_path)
    meta = json.loads(Path(f"{base}.sigmf-meta").read_text())
    meta["annotations"][1]["core:sample_start"] = -4
    Path(f"{base}.sigmf-meta").write_text(json.dumps(meta))
    with pytest.raises(ConfigError) as info:
        load_device(_sigmf_device(tmp_path, recording="capture.sigmf-meta"))
    assert info.value.key == "recording"
    assert "annotations[1].core:sample_start=-4: expected a whole number >= 0" in \
        str(info.value)


def test_a_sigmf_meta_without_its_data_file_is_a_config_error(tmp_path):
    base, _ = _sigmf(tmp_path)
    Path(f"{base}.sigmf-data").unlink()
    with pytest.raises(ConfigError) as info:
        load_device(_sigmf_device(tmp_path, recording="capture.sigmf-meta"))
    assert info.value.key == "recording"
    assert "its data file capture.sigmf-data is missing" in str(info.value)
