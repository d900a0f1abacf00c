"""Reference tables against the published ones.

Sources are named beside each check (document and clause); "from memory" marks a clause, table
or figure number not read from the document.
"""

from __future__ import annotations

import numpy as np
import pytest

from modemverify.errors import ConfigError, UnknownNameError
from modemverify.schemes.conventions import (
    CONVENTIONS,
    MODULATIONS,
    conventions_for,
    get_convention,
)

S2, S10, S42, S170 = np.sqrt(2), np.sqrt(10), np.sqrt(42), np.sqrt(170)


def table(conv, mod):
    return get_convention(conv, mod).points


def test_3gpp_qpsk_table():
    # 3GPP TS 38.211 5.1.3: d = ((1-2b(2i)) + j(1-2b(2i+1)))/sqrt2; first bit -> I, 0 -> +.
    expected = np.array([1 + 1j, 1 - 1j, -1 + 1j, -1 - 1j]) / S2
    np.testing.assert_allclose(table("3gpp", "qpsk"), expected, atol=1e-12)


def test_3gpp_bpsk_on_the_diagonal():
    # TS 38.211 5.1.2 (clause number from memory): d = (1-2b)(1+j)/sqrt2 (points on the
    # 45-degree diagonal).
    np.testing.assert_allclose(table("3gpp", "bpsk"), np.array([1 + 1j, -1 - 1j]) / S2)


def test_3gpp_16qam_table_rows():
    # TS 36.211 Table 7.1.3-1 / TS 38.211 5.1.4 (clause number from memory): 0000 (1+j),
    # 0001 (1+3j), 0010 (3+j),
    # 0011 (3+3j), all / sqrt10; the rest follow from the sign bits b0 (I) and b1 (Q).
    t = table("3gpp", "16qam") * S10
    np.testing.assert_allclose(t[:4], [1 + 1j, 1 + 3j, 3 + 1j, 3 + 3j], atol=1e-12)
    np.testing.assert_allclose(t[0b1000], -1 + 1j, atol=1e-12)
    np.testing.assert_allclose(t[0b0101], 1 - 3j, atol=1e-12)
    np.testing.assert_allclose(t[0b1111], -3 - 3j, atol=1e-12)


def _formula_3gpp(bits, levels):
    """The TS 38.211 5.1.5/5.1.6 nested formula written out for one axis (bits c0, c1, ...);
    clause numbers from memory."""
    inner = 1.0
    for j in range(len(bits) - 1, 0, -1):
        inner = levels[j] - (1 - 2 * bits[j]) * inner
    return (1 - 2 * bits[0]) * inner


@pytest.mark.parametrize("mod,norm,levels", [
    ("64qam", S42, [4, 4, 2]),       # TS 38.211 5.1.5: (1-2b0)[4-(1-2b2)[2-(1-2b4)]]
    ("256qam", S170, [8, 8, 4, 2]),  # TS 38.211 5.1.6: (1-2b0)[8-(1-2b2)[4-(1-2b4)[2-(1-2b6)]]]
])
def test_3gpp_high_order_formula(mod, norm, levels):
    k = MODULATIONS[mod]
    t = table("3gpp", mod) * norm
    for label in range(1 << k):
        b = [(label >> (k - 1 - i)) & 1 for i in range(k)]
        i = _formula_3gpp(b[0::2], levels)
        q = _formula_3gpp(b[1::2], levels)
        assert t[label] == pytest.approx(i + 1j * q, abs=1e-9)


@pytest.mark.parametrize("conv", CONVENTIONS)
def test_unit_average_energy(conv):
    # TS 38.211 5.1 / TS 36.211 7.1 normalisations, IEEE 802.11-2007 Table 17-6 K_MOD,
    # EN 302 307-1 rho^2 = 1: every table has unit average energy.
    for c in conventions_for_all(conv):
        assert np.mean(np.abs(c.points) ** 2) == pytest.approx(1.0, abs=1e-12)


def conventions_for_all(conv):
    return [c for m in MODULATIONS for c in conventions_for(m) if c.name == conv]


def test_normalisation_factors():
    # TS 36.211 7.1: BPSK, QPSK 1/sqrt2; 16QAM 1/sqrt10; 64QAM 1/sqrt42; 256QAM 1/sqrt170.
    assert get_convention("3gpp", "qpsk").normalisation == pytest.approx(1 / S2)
    assert get_convention("3gpp", "16qam").normalisation == pytest.approx(1 / S10)
    assert get_convention("3gpp", "64qam").normalisation == pytest.approx(1 / S42)
    assert get_convention("3gpp", "256qam").normalisation == pytest.approx(1 / S170)
    # IEEE 802.11-2007 Table 17-6: K_MOD 1/sqrt10 for 16-QAM, 1/sqrt42 for 64-QAM.
    assert get_convention("ieee802.11", "16qam").normalisation == pytest.approx(1 / S10)
    assert get_convention("ieee802.11", "64qam").normalisation == pytest.approx(1 / S42)


def test_80211_bpsk_qpsk():
    # IEEE 802.11-2007 Tables 17-7, 17-8 (Figure 17-10): bit 0 -> -1, bit 1 -> +1; QPSK
    # b0 -> I, b1 -> Q.
    np.testing.assert_allclose(table("ieee802.11", "bpsk"), [-1, 1])
    np.testing.assert_allclose(table("ieee802.11", "qpsk") * S2, [-1 - 1j, -1 + 1j, 1 - 1j, 1 + 1j])


def test_80211_16qam_axis():
    # IEEE 802.11-2007 Table 17-9: b0b1 -> I, b2b3 -> Q: 00 -3, 01 -1, 11 +1, 10 +3.
    t = table("ieee802.11", "16qam") * S10
    axis = {0b00: -3, 0b01: -1, 0b11: 1, 0b10: 3}
    for label in range(16):
        assert t[label] == pytest.approx(axis[label >> 2] + 1j * axis[label & 3])


def test_80211_64qam_axis():
    # IEEE 802.11-2007 Table 17-10: b0b1b2 -> I: 000 -7, 001 -5, 011 -3, 010 -1, 110 +1,
    # 111 +3, 101 +5, 100 +7; b3b4b5 -> Q alike.
    t = table("ieee802.11", "64qam") * S42
    axis = {0b000: -7, 0b001: -5, 0b011: -3, 0b010: -1, 0b110: 1, 0b111: 3, 0b101: 5, 0b100: 7}
    for label in range(64):
        assert t[label] == pytest.approx(axis[label >> 3] + 1j * axis[label & 7])


def test_3gpp_and_80211_differ():
    # Derived from TS 38.211 5.1.4 and IEEE 802.11 Table 17-9: label 0000 is (1+j)/sqrt10 in
    # 3GPP and (-3-3j)/sqrt10 in 802.11 (opposite sign rule, different labels).
    assert table("3gpp", "16qam")[0] * S10 == pytest.approx(1 + 1j)
    assert table("ieee802.11", "16qam")[0] * S10 == pytest.approx(-3 - 3j)


def test_dvbs2_qpsk_equals_3gpp():
    # ETSI EN 302 307-1 5.4.1, Figure 9 (clause and figure numbers from memory): 00 pi/4,
    # 01 7pi/4, 10 3pi/4, 11 5pi/4 (same as 3GPP QPSK).
    np.testing.assert_allclose(table("dvb-s2", "qpsk"), table("3gpp", "qpsk"), atol=1e-12)


def test_dvbs2_8psk():
    # ETSI EN 302 307-1 5.4.2, Figure 10 (clause and figure numbers from memory): 000 pi/4,
    # 001 0, 010 pi, 011 5pi/4, 100 pi/2, 101 7pi/4, 110 3pi/4, 111 3pi/2.
    angles = np.array([1, 0, 4, 5, 2, 7, 3, 6]) * np.pi / 4
    np.testing.assert_allclose(table("dvb-s2", "8psk"), np.exp(1j * angles), atol=1e-12)


def nearest_pairs_by_count(points, n_pairs):
    """The ``n_pairs`` closest pairs of distinct points, checked to be exactly the pairs at the
    minimum distance (the next pair is farther)."""
    i, j = np.triu_indices(len(points), 1)
    d = np.abs(points[i] - points[j])
    order = np.argsort(d, kind="stable")
    near, rest = order[:n_pairs], order[n_pairs:]
    assert d[near].max() - d[near].min() < 1e-9
    if rest.size:
        assert d[rest].min() > d[near].max() + 1e-9
    return i[near], j[near]


@pytest.mark.parametrize("mod", [m for m in MODULATIONS if not m.endswith("apsk")])
def test_gray_flags(mod):  # (16APSK's rings: tests/unit/test_symbol_rules.py)
    # Common practice: the published tables are Gray; natural binary is not (beyond BPSK). A
    # labelling is Gray when every pair of nearest neighbours differs in one bit; an r x r
    # square grid has 2 r (r - 1) such pairs, M-PSK (M > 2) has M, BPSK one.
    order = 1 << MODULATIONS[mod]
    r = int(round(np.sqrt(order)))
    n_pairs = 1 if order == 2 else order if mod.endswith("psk") else 2 * r * (r - 1)
    for c in conventions_for(mod):
        i, j = nearest_pairs_by_count(c.points, n_pairs)
        one_bit = all(bin(int(a) ^ int(b)).count("1") == 1 for a, b in zip(i, j))
        assert c.is_gray == one_bit
        assert c.is_gray == (c.name != "natural" or order == 2)


def test_unknown_names():
    with pytest.raises(UnknownNameError, match="known: .*16qam"):
        get_convention("3gpp", "17qam")
    with pytest.raises(UnknownNameError, match="no convention named 'gpp'"):
        get_convention("gpp", "qpsk")
    with pytest.raises(ConfigError, match="defines no 8psk"):
        get_convention("3gpp", "8psk")
