"""Schemes whose symbol depends on its position or on the previous symbol (pi/2-BPSK, DBPSK,
DQPSK, pi/4-DQPSK), 16APSK ring ratios and 1024QAM: tables against the published formulas, and
devices with one defect each failing ``mapping`` with the defect named.

Every device here is an ordinary python target written from the standard's formula, not from
modemverify's tables.
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import TableModem

from modemverify.options import validate_options
from modemverify.oracles import ORACLES
from modemverify.runner import run_oracle
from modemverify.schemes.conventions import get_convention


def run(bench, name, **opts):
    oracle = ORACLES[name]
    return list(run_oracle(oracle, bench, validate_options(oracle.options, opts, file=None,
                                                           key=name), seed=7))


def _bits(bits, k):
    return np.asarray(bits).reshape(-1, k)


class Pi2Bpsk:
    """3GPP TS 38.211 5.1.1: d(i) = e^{j pi/2 (i mod 2)} / sqrt 2 [(1-2b(i)) + j(1-2b(i))].

    ``turn_on`` (1: odd, as the standard; 0: even) and ``turn`` (the angle, pi/2 in the
    standard) make the defective variants."""

    def __init__(self, turn_on=1, turn=np.pi / 2):
        self.turn_on, self.turn = turn_on, turn

    def modulate(self, bits):
        b = np.asarray(bits, dtype=float)
        i = np.arange(b.size)
        on = (i % 2) == self.turn_on
        return np.exp(1j * self.turn * on) / np.sqrt(2) * ((1 - 2 * b) + 1j * (1 - 2 * b))


class Dpsk:
    """Differential PSK: the symbol is the previous one turned by ``phases[label]`` (the first
    against phase 0). ``phases`` in units of pi/2 per label, plus ``offset``."""

    def __init__(self, k, phases, offset=0.0, sign=1, differential=True):
        self.k, self.phases, self.offset = k, np.asarray(phases, float), offset
        self.sign, self.differential = sign, differential

    def modulate(self, bits):
        b = _bits(bits, self.k)
        lab = b @ (1 << np.arange(self.k - 1, -1, -1))
        step = self.sign * (self.phases[lab] * np.pi / 2 + self.offset)
        return np.exp(1j * (np.cumsum(step) if self.differential else step))


# Gray phase changes (common practice): DBPSK 0 -> 0, 1 -> pi; DQPSK 00 -> 0, 01 -> pi/2,
# 11 -> pi, 10 -> 3pi/2; pi/4-DQPSK the same plus pi/4 (00 -> pi/4, 01 -> 3pi/4, 11 -> -3pi/4,
# 10 -> -pi/4, the TIA IS-54 table, from memory)
DBPSK = (1, [0, 2])
DQPSK = (2, [0, 1, 3, 2])


def test_pi2_bpsk_3gpp_points():
    # TS 38.211 5.1.1: even i: 0 -> (1+j)/sqrt2, 1 -> (-1-j)/sqrt2 (the table; odd i turned)
    c = get_convention("3gpp", "pi/2-bpsk")
    assert np.allclose(c.points, np.array([1 + 1j, -1 - 1j]) / np.sqrt(2))
    assert c.rule.turn_deg == 90 and c.rule.turn_on == "odd"


def test_correct_pi2_bpsk_passes_mapping(bench_for):
    [v] = run(bench_for(Pi2Bpsk(), "pi/2-bpsk", "3gpp"), "mapping")
    assert v.outcome == "pass", v.reason


def test_pi2_turn_on_even_positions_is_named(bench_for):
    [v] = run(bench_for(Pi2Bpsk(turn_on=0), "pi/2-bpsk", "3gpp"), "mapping")
    assert v.outcome == "fail"
    assert "90-degree turn is applied on even positions instead of odd" in v.reason


def test_pi2_turn_the_other_way_is_named(bench_for):
    [v] = run(bench_for(Pi2Bpsk(turn=-np.pi / 2), "pi/2-bpsk", "3gpp"), "mapping")
    assert v.outcome == "fail" and "-90 degrees instead of +90" in v.reason


def test_plain_bpsk_claimed_as_pi2_bpsk_names_the_missing_rotation(bench_for):
    [v] = run(bench_for(Pi2Bpsk(turn=0.0), "pi/2-bpsk", "3gpp"), "mapping")
    assert v.outcome == "fail" and "no position-dependent rotation" in v.reason
    assert "memory" not in v.reason


def test_pi2_bpsk_claimed_as_bpsk_is_recognised(bench_for):
    [v] = run(bench_for(Pi2Bpsk(), "bpsk", "3gpp"), "mapping")
    assert v.outcome == "fail" and "+90 degrees on odd positions" in v.reason
    assert "pi/2-BPSK" in v.reason and "memory" not in v.reason


@pytest.mark.parametrize("mod,k,phases,offset", [
    ("dbpsk", *DBPSK, 0.0), ("dqpsk", *DQPSK, 0.0), ("pi/4-dqpsk", *DQPSK, np.pi / 4)])
def test_differential_devices(bench_for, mod, k, phases, offset):
    [v] = run(bench_for(Dpsk(k, phases, offset), mod, "gray"), "mapping")
    assert v.outcome == "pass", v.reason
    if mod != "dbpsk":  # a phase change of pi is its own reverse
        [v] = run(bench_for(Dpsk(k, phases, offset, sign=-1), mod, "gray"), "mapping")
        assert v.outcome == "fail" and "phase increments reversed" in v.reason, v.reason
    [v] = run(bench_for(Dpsk(k, phases, offset, differential=False), mod, "gray"), "mapping")
    assert v.outcome == "fail" and "not the phase change" in v.reason, v.reason


def test_differential_roundtrip_through_reference(bench_for):
    bench = bench_for(Dpsk(*DQPSK), "dqpsk", "gray")
    bits = np.random.default_rng(3).integers(0, 2, 2000).astype(np.uint8)
    assert np.array_equal(bench.receive(bench.device.modulate(bits)), bits)


# --- 16APSK --------------------------------------------------------------------------------
# ETSI EN 302 307-1 5.4.3, Figure 13: inner ring (radius R1) labels at pi/4 + m pi/2:
# 1100, 1110, 1111, 1101; outer ring (R2 = gamma R1) at pi/12 + m pi/6: 0100, 0000, 1000,
# 1010, 0010, 0110, 0111, 0011, 1011, 1001, 0001, 0101 (two public DVB-S2 mappers agree);
# Table 9: gamma = 3.15 (2/3), 2.85 (3/4), 2.75 (4/5), 2.70 (5/6), 2.60 (8/9), 2.57 (9/10)
INNER = ["1100", "1110", "1111", "1101"]
OUTER = ["0100", "0000", "1000", "1010", "0010", "0110", "0111", "0011", "1011", "1001",
         "0001", "0101"]


def apsk16_table(gamma, outer_offset=np.pi / 12):
    t = np.empty(16, complex)
    for m, lab in enumerate(INNER):
        t[int(lab, 2)] = np.exp(1j * (np.pi / 4 + m * np.pi / 2))
    for m, lab in enumerate(OUTER):
        t[int(lab, 2)] = gamma * np.exp(1j * (outer_offset + m * np.pi / 6))
    return t / np.sqrt(np.mean(np.abs(t) ** 2))


@pytest.mark.parametrize("rate,gamma", [("2/3", 3.15), ("3/4", 2.85), ("4/5", 2.75),
                                        ("5/6", 2.70), ("8/9", 2.60), ("9/10", 2.57)])
def test_16apsk_table_per_code_rate(bench_for, rate, gamma):
    from conftest import make_spec
    c = make_spec("16apsk", "dvb-s2", code_rate=rate).scheme.reference
    assert c.ring_ratio == (gamma,)
    assert np.allclose(c.points, apsk16_table(gamma))
    assert np.isclose(np.mean(np.abs(c.points) ** 2), 1.0)


def test_16apsk_correct_device_passes_and_wrong_ring_ratio_is_named(bench_for):
    [v] = run(bench_for(TableModem(apsk16_table(3.15), 4), "16apsk", "dvb-s2",
                        code_rate="2/3"), "mapping")
    assert v.outcome == "pass", v.reason
    [v] = run(bench_for(TableModem(apsk16_table(2.85), 4), "16apsk", "dvb-s2",
                        code_rate="2/3"), "mapping")
    assert v.outcome == "fail" and "ring ratio 2.85 instead of 3.15" in v.reason, v.reason
    [v] = run(bench_for(TableModem(apsk16_table(3.0), 4), "16apsk", "dvb-s2",
                        ring_ratio=3.0), "mapping")
    assert v.outcome == "pass", v.reason


def test_16apsk_swapped_arms_is_named(bench_for):
    t = apsk16_table(2.85)
    [v] = run(bench_for(TableModem(t.imag + 1j * t.real, 4), "16apsk", "dvb-s2",
                        code_rate="3/4"), "mapping")
    assert v.outcome == "fail" and "I and Q arms swapped" in v.reason, v.reason


# --- 1024QAM -------------------------------------------------------------------------------
def _nr_1024qam(b):
    """TS 38.211 5.1.7 (the TS 36.211 7.1.6 constellation, from memory for the clause):
    d = 1/sqrt(682) {(1-2b0)[16-(1-2b2)[8-(1-2b4)[4-(1-2b6)[2-(1-2b8)]]]]
                   + j(1-2b1)[16-(1-2b3)[8-(1-2b5)[4-(1-2b7)[2-(1-2b9)]]]]}"""
    s = 1 - 2 * b.astype(float)
    i = s[:, 0] * (16 - s[:, 2] * (8 - s[:, 4] * (4 - s[:, 6] * (2 - s[:, 8]))))
    q = s[:, 1] * (16 - s[:, 3] * (8 - s[:, 5] * (4 - s[:, 7] * (2 - s[:, 9]))))
    return (i + 1j * q) / np.sqrt(682)


def test_1024qam_3gpp_is_the_formula():
    b = (np.arange(1024)[:, None] >> np.arange(9, -1, -1)) & 1
    assert np.allclose(get_convention("3gpp", "1024qam").points, _nr_1024qam(b))


def test_1024qam_ieee80211_rule():
    # IEEE 802.11ax HE PHY (from memory): first five bits -> I, last five -> Q, ascending
    # levels -31..31 carry the binary-reflected Gray labels, K_MOD = 1/sqrt(682)
    lv = np.arange(-31, 32, 2)
    g = np.arange(32) ^ (np.arange(32) >> 1)
    level = np.empty(32)
    level[g] = lv
    lab = np.arange(1024)
    want = (level[lab >> 5] + 1j * level[lab & 31]) / np.sqrt(682)
    c = get_convention("ieee802.11", "1024qam")
    assert np.allclose(c.points, want) and c.is_gray


@pytest.mark.parametrize("mod,conv,device", [
    ("pi/2-bpsk", "3gpp", lambda: Pi2Bpsk()),
    ("dqpsk", "gray", lambda: Dpsk(*DQPSK)),
    ("pi/4-dqpsk", "gray", lambda: Dpsk(*DQPSK, offset=np.pi / 4))])
def test_evm_of_a_correct_rule_device_is_zero(bench_for, mod, conv, device):
    # the ideal symbols follow the scheme's rule (no published limit: one given)
    [v] = run(bench_for(device(), mod, conv), "evm", limit_percent=1.0)
    assert v.outcome == "pass" and v.statistic < 1e-6, v.reason


# --- identify --------------------------------------------------------------------------------
def test_identify_names_the_position_dependent_turn():
    from conftest import make_spec

    from modemverify.adapters.python import PythonAdapter
    from modemverify.identify import identify
    r = identify(make_spec("bpsk", "3gpp"), adapter=PythonAdapter(Pi2Bpsk()))
    assert r.symbol_rule is not None and "+90 degrees on odd positions" in r.symbol_rule
    assert r.memoryless and r.matches[0] == "3gpp"
    assert "Symbol rule:" in r.render()
    r = identify(make_spec("pi/2-bpsk", "3gpp"), adapter=PythonAdapter(Pi2Bpsk(turn_on=0)))
    assert "even positions instead of odd" in r.symbol_rule


def test_identify_names_a_missing_differential_encoding():
    from conftest import make_spec

    from modemverify.adapters.python import PythonAdapter
    from modemverify.identify import identify
    r = identify(make_spec("dqpsk", "gray"),
                 adapter=PythonAdapter(Dpsk(*DQPSK, differential=False)))
    assert "not the phase change" in r.symbol_rule and r.matches == ["gray"]


# --- 32APSK --------------------------------------------------------------------------------
# ETSI EN 302 307-1 5.4.4, Figure 14 (figure number from memory): inner ring R1 at pi/4 +
# m pi/2: 10001, 10101, 10111, 10011; middle ring R2 = gamma1 R1 at pi/12 + m pi/6: 10000,
# 00000, 00001, 00101, 00100, 10100, 10110, 00110, 00111, 00011, 00010, 10010; outer ring
# R3 = gamma2 R1 at m pi/8: 11000, 01000, 11001, 01001, 01101, 11101, 01100, 11100, 11110,
# 01110, 11111, 01111, 01011, 11011, 01010, 11010 (two public DVB-S2 mappers agree);
# Table 10: (gamma1, gamma2) = 3/4 (2.84, 5.27), 4/5 (2.72, 4.87), 5/6 (2.64, 4.64),
# 8/9 (2.54, 4.33), 9/10 (2.53, 4.30)
RINGS32 = (
    (["10001", "10101", "10111", "10011"], np.pi / 4),
    (["10000", "00000", "00001", "00101", "00100", "10100", "10110", "00110", "00111",
      "00011", "00010", "10010"], np.pi / 12),
    (["11000", "01000", "11001", "01001", "01101", "11101", "01100", "11100", "11110",
      "01110", "11111", "01111", "01011", "11011", "01010", "11010"], 0.0))


def apsk32_table(g1, g2):
    t = np.empty(32, complex)
    for (labels, start), r in zip(RINGS32, (1.0, g1, g2)):
        for m, lab in enumerate(labels):
            t[int(lab, 2)] = r * np.exp(1j * (start + m * 2 * np.pi / len(labels)))
    return t / np.sqrt(np.mean(np.abs(t) ** 2))


@pytest.mark.parametrize("rate,g1,g2", [("3/4", 2.84, 5.27), ("4/5", 2.72, 4.87),
                                        ("5/6", 2.64, 4.64), ("8/9", 2.54, 4.33),
                                        ("9/10", 2.53, 4.30)])
def test_32apsk_table_per_code_rate(rate, g1, g2):
    from conftest import make_spec
    c = make_spec("32apsk", "dvb-s2", code_rate=rate).scheme.reference
    assert c.ring_ratio == (g1, g2)
    assert np.allclose(c.points, apsk32_table(g1, g2))


def test_32apsk_correct_passes_and_wrong_outer_ring_is_named(bench_for):
    [v] = run(bench_for(TableModem(apsk32_table(2.84, 5.27), 5), "32apsk", "dvb-s2",
                        code_rate="3/4"), "mapping")
    assert v.outcome == "pass", v.reason
    [v] = run(bench_for(TableModem(apsk32_table(2.84, 4.87), 5), "32apsk", "dvb-s2",
                        code_rate="3/4"), "mapping")
    assert v.outcome == "fail" and "ring ratio 4.87 instead of 5.27 (ring 3 to ring 1)" \
        in v.reason, v.reason


def test_ring_ratio_keys_are_checked():
    from conftest import make_spec

    from modemverify.errors import ConfigError
    with pytest.raises(ConfigError, match="only an APSK modulation"):
        make_spec("16qam", "3gpp", ring_ratio=3.0)
    with pytest.raises(ConfigError, match="give one"):
        make_spec("16apsk", "dvb-s2", ring_ratio=3.0, code_rate="2/3")
    with pytest.raises(ConfigError, match="has 2 ring ratios"):
        make_spec("32apsk", "dvb-s2", ring_ratio=3.0)
    with pytest.raises(ConfigError, match="expected one of 2/3"):
        make_spec("16apsk", "dvb-s2", code_rate="1/2")
    with pytest.raises(ConfigError, match="32apsk has the code rates 3/4"):
        make_spec("32apsk", "dvb-s2", code_rate="2/3")
    with pytest.raises(ConfigError, match="expected a value > 1"):
        make_spec("16apsk", "dvb-s2", ring_ratio=0.5)


def test_the_apsk_ber_check_holds_the_device_to_its_ring_ratios_curve(bench_for):
    # a device on the rings of code rate 3/4 (gamma 2.85, ETSI EN 302 307-1 Table 9), claimed
    # so: judged against the curve of those rings (schemes.theory.ber with the ring ratio)
    from modemverify.schemes.theory import ber
    bench = bench_for(TableModem(apsk16_table(2.85), 4), "16apsk", "dvb-s2", code_rate="3/4")
    [v] = run(bench, "ber", ebn0_db=[9.0])
    assert v.outcome == "pass", v.reason
    assert v.details["theory_ber"] == ber("16apsk", 9.0, ring_ratio=2.85)
    assert v.details["theory_ber"] != ber("16apsk", 9.0)


def test_decreasing_ring_ratios_are_refused():
    from conftest import make_spec

    from modemverify.errors import ConfigError
    with pytest.raises(ConfigError, match="increasing numbers above 1"):
        make_spec("32apsk", "dvb-s2", ring_ratio=[5.0, 2.0])
