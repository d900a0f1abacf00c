"""Naming the transform between two tables."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from modemverify.schemes.conventions import MODULATIONS, conventions_for, get_convention
from modemverify.schemes.transforms import relate


def reorder(points, perm, k, mask=0):
    """Device table whose label l carries the reference point of P(l) xor mask."""
    out = np.empty_like(points)
    for l in range(1 << k):
        bits = [(l >> (k - 1 - i)) & 1 for i in range(k)]
        r = 0
        for i, p in enumerate(perm):
            r |= bits[i] << (k - 1 - p)
        out[l] = points[r ^ mask]
    return out


def test_qpsk_swap_is_bit_reversal():
    # Common practice: for QPSK, swapping I and Q is the same as reversing the two label bits.
    ref = get_convention("3gpp", "qpsk").points
    rels = relate(ref, ref.imag + 1j * ref.real)
    assert {r.describe() for r in rels} == {"label bits reversed (LSB first)",
                                            "I and Q arms swapped"}


def test_exact_match_is_identical():
    ref = get_convention("3gpp", "64qam").points
    assert relate(ref, 3.0 * ref)[0].describe() == "identical"


@pytest.mark.parametrize("mod", ["16qam", "64qam", "256qam"])
def test_lsb_first_named(mod):
    k = MODULATIONS[mod]
    ref = get_convention("3gpp", mod).points
    dev = reorder(ref, tuple(range(k - 1, -1, -1)), k)
    assert relate(ref, dev)[0].describe() == "label bits reversed (LSB first)"


def test_rotation_by_odd_angle():
    ref = get_convention("dvb-s2", "8psk").points
    rels = relate(ref, ref * np.exp(1j * np.radians(10)))
    assert rels[0].describe() == "rotated by 10 degrees"


def test_80211_vs_3gpp_16qam_is_reorder_and_inversion():
    # Derived from TS 38.211 5.1.4 and IEEE 802.11-2007 Table 17-9: 802.11 takes b0b1 for I and
    # b2b3 for Q, the first of each pair the sign (0 -> negative, 3GPP: 0 -> positive) and the
    # second the magnitude (0 -> 3, 3GPP: 0 -> 1). So 802.11 bits (b0, b1, b2, b3) carry the
    # inverted 3GPP bits (b0, b2, b1, b3): a swap of the middle bits and every bit inverted.
    rels = relate(get_convention("3gpp", "16qam").points,
                  get_convention("ieee802.11", "16qam").points)
    assert len(rels) == 1
    r = rels[0]
    assert (r.permutation, r.mask, r.conjugate, r.rotation_deg) == ((0, 2, 1, 3), 0b1111,
                                                                     False, 0.0)
    assert r.scale == pytest.approx(1.0)


def test_different_point_set_has_no_relation():
    ref = get_convention("3gpp", "16qam").points
    dev = ref.copy()
    dev[3] *= 1.3
    assert relate(ref, dev) == []


@settings(max_examples=60, deadline=None)
@given(data=st.data())
def test_any_bit_permutation_and_mask_is_recovered(data):
    mod = data.draw(st.sampled_from(["qpsk", "8psk", "16qam", "64qam"]))
    conv = data.draw(st.sampled_from([c.name for c in conventions_for(mod)]))
    k = MODULATIONS[mod]
    perm = tuple(data.draw(st.permutations(range(k))))
    mask = data.draw(st.integers(0, (1 << k) - 1))
    ref = get_convention(conv, mod).points
    dev = reorder(ref, perm, k, mask)
    rels = relate(ref, dev)
    assert rels, "a pure relabelling must be explained"
    # every description returned must reproduce the device table exactly
    for r in rels:
        pts = ref if not r.conjugate else np.conj(ref)
        g = r.scale * np.exp(1j * np.radians(r.rotation_deg))
        np.testing.assert_allclose(g * pts[list(r.assignment)], dev, atol=1e-6)
