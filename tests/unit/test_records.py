"""The records the reports read (modemverify.records) are what the oracles write.

A correct RRC-shaped 16QAM device (TS 38.211 5.1.4 table) and one with every label bit inverted
(the table rotated by 180 degrees) are checked with a spectral mask; every verdict that carries
a record must carry each of its required keys and no key the record does not declare.
"""

from __future__ import annotations

import pytest
from test_waveforms import RrcModem, run

from modemverify.records import (
    BerPointRecord,
    EvmRecord,
    ImportanceGuardRecord,
    MappingRecord,
    SoftOutputRecord,
    SpectrumRecord,
)

RECORDS = {"mapping": MappingRecord, "evm": EvmRecord, "spectrum.obw": SpectrumRecord,
           "llr.sign": SoftOutputRecord}


def _record_for(name):
    if name == "ber.importance_guard":
        return ImportanceGuardRecord
    return BerPointRecord if name.startswith("ber.") else RECORDS.get(name)


def assert_records(verdicts):
    """Every verdict with a record carries its required keys and no other; returns how many."""
    checked = 0
    for name, verdict in verdicts.items():
        record = _record_for(name)
        if record is None or verdict.outcome in ("skipped", "error") or not verdict.details:
            continue
        keys = set(verdict.details)
        assert record.__required_keys__ <= keys, (name, record.__required_keys__ - keys)
        assert keys <= record.__required_keys__ | record.__optional_keys__, name
        checked += 1
    return checked


@pytest.mark.parametrize("swap", [False, True], ids=["correct", "inverted"])
def test_every_record_has_exactly_its_declared_keys(swap):
    class Inverted(RrcModem):
        def modulate(self, bits):
            return super().modulate(1 - bits)

    v, _ = run(Inverted() if swap else RrcModem(),
               checks={"spectrum": {"mask": [[0.7, 0], [1.0, -30]]}, "llr": {"bits": 20000}})
    checked = assert_records(v)
    assert checked >= 4  # mapping, evm, spectrum.obw and the BER points
    if swap:
        assert set(v["mapping"].details) >= {"relation", "differing_labels"}
        # another table: evm is not judged (skipped, naming mapping), so it has no record
        assert v["evm"].outcome == "skipped"
    else:
        assert "eye" in v["evm"].details
    assert "mask_result" in v["spectrum.obw"].details
