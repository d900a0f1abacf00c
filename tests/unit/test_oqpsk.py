"""Offset QPSK at waveform level: the QPSK table with the Q arm half a symbol late.

The devices are built independently of the reference (``devices/oqpsk.py``: numpy and
scipy.signal.upfirdn, its own RRC taps and table). Sources: OQPSK delays the quadrature arm by
half a symbol (Ts/2) against the in-phase arm, and with matched filtering in AWGN has the BER of
QPSK and, for the same pulse, the spectrum of QPSK (common practice).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from modemverify.config import parse_device
from modemverify.dsp.pulses import PulseShape
from modemverify.identify import identify
from modemverify.runner import check
from modemverify.schemes.conventions import get_convention
from modemverify.schemes.reference import ReferenceModem
from modemverify.schemes.rules import SymbolRule, align_arms, delay_arm
from modemverify.schemes.theory import ber, ser
from modemverify.vectors.bits import random_bits

DEVICE = Path(__file__).parent / "devices" / "oqpsk.py"
PULSE = {"shape": "rrc", "rolloff": 0.35, "span": 10}


def spec(modulation="oqpsk", offset=True, checks=None):
    return parse_device({
        "name": f"{modulation}-{'offset' if offset else 'plain'}", "adapter": "python",
        "target": f"{DEVICE}:Oqpsk", "params": {"offset": offset},
        "scheme": {"modulation": modulation, "convention": "gray", "samples_per_symbol": 8,
                   "pulse": PULSE},
        "checks": {"llr": False, "evm": {"limit_percent": 3.0},
                   "ber": {"ebn0_db": [4.3, 6.8]}, **(checks or {})}})


def verdicts(result):
    return {v.name: v for v in result.verdicts}


def test_the_reference_transmitter_is_the_independent_construction():
    rng = np.random.default_rng(3)
    bits = random_bits(rng, 2 * 300)
    conv = get_convention("gray", "oqpsk")
    ref = ReferenceModem(conv, 8, PulseShape("rrc", 8, rolloff=0.35, span=10))
    from_scipy = _device().modulate(bits)
    assert ref.modulate(bits).size == from_scipy.size == ref.waveform_length(300)
    np.testing.assert_allclose(ref.modulate(bits), from_scipy, atol=1e-9)
    # the Q arm is late by exactly half a symbol (4 samples at 8 per symbol): the plain QPSK
    # waveform's Q arm, shifted
    plain = _device(offset=False).modulate(bits)
    np.testing.assert_allclose(from_scipy.real[:plain.size], plain.real, atol=1e-12)
    np.testing.assert_allclose(from_scipy.imag[4:], plain.imag, atol=1e-12)
    # and the receiver's arm alignment is the exact inverse of the transmitter's delay
    rule = conv.rule
    np.testing.assert_array_equal(align_arms(delay_arm(plain, rule, 8), rule, 8), plain)
    assert ref.demodulate(from_scipy).tolist() == bits.tolist()


def _device(offset=True):
    import importlib.util
    spec_ = importlib.util.spec_from_file_location("oqpsk_device", DEVICE)
    module = importlib.util.module_from_spec(spec_)
    spec_.loader.exec_module(module)
    return module.Oqpsk(offset=offset)


def test_a_correct_oqpsk_device_passes_mapping_ber_spectrum_and_evm():
    v = verdicts(check(spec()))
    for name in ("alignment", "energy", "mapping", "gray", "roundtrip", "evm", "spectrum.obw",
                 "ber.ebn0=4.3dB", "ber.ebn0=6.8dB", "length.modulate", "length.demodulate"):
        assert v[name].outcome == "pass", (name, v[name].reason)
    # the 99 % bandwidth is QPSK's for the same pulse (common practice)
    assert "declared pulse gives" in v["spectrum.obw"].reason


def test_plain_qpsk_claimed_as_oqpsk_fails_mapping_naming_the_missing_half_symbol_delay():
    v = verdicts(check(spec(offset=False), only=["alignment", "mapping", "evm"]))
    reason = v["mapping"].reason
    assert v["mapping"].outcome == "fail"
    assert reason.startswith("the Q arm is not delayed")
    assert "half a symbol" in reason and "memory" not in reason
    assert v["mapping"].details["symbol_rule"].startswith("the Q arm is not delayed")
    # the alignment check says why the waveform is not the reference's, in the same terms
    assert v["alignment"].outcome == "fail"
    assert "the Q arm is not delayed" in v["alignment"].reason
    assert v["evm"].outcome == "fail"


def test_an_oqpsk_device_claimed_as_qpsk_fails_mapping_naming_the_half_symbol_delay():
    v = verdicts(check(spec("qpsk"), only=["alignment", "mapping"]))
    assert v["mapping"].outcome == "fail"
    assert v["mapping"].reason.startswith("the Q arm is delayed by half a symbol")
    assert "memory" not in v["mapping"].reason
    assert "the Q arm is delayed by half a symbol" in v["alignment"].reason


def test_identify_names_the_arm_delay():
    found = identify(spec(offset=False))
    assert found.symbol_rule.startswith("the Q arm is not delayed")
    assert found.claimed_rule == "the Q arm is delayed by half a symbol against the I arm"


def test_a_rule_describes_its_arm_delay():
    assert not SymbolRule(q_delay=0.5).plain
    assert get_convention("gray", "oqpsk").rule == SymbolRule(q_delay=0.5)
    assert get_convention("gray", "oqpsk").points.tolist() == \
        get_convention("gray", "qpsk").points.tolist()


@pytest.mark.parametrize("ebn0", [0.0, 4.3, 6.8, 9.6])
def test_oqpsk_theory_is_qpsk(ebn0):
    # common practice: OQPSK and QPSK have the same BER and SER with matched filtering in AWGN
    assert ber("oqpsk", ebn0) == ber("qpsk", ebn0)
    assert ser("oqpsk", ebn0) == ser("qpsk", ebn0)
