"""``identify`` reports the tables of real third-party communications libraries exactly.

The devices under test here are general-purpose open-source libraries from the package registry
(komm, scikit-commpy): their own modulators define the expected tables, read back from the
libraries themselves, not from modemverify.
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import make_spec

from modemverify.adapters.python import PythonAdapter
from modemverify.identify import identify
from modemverify.runner import check_object

komm = pytest.importorskip("komm")
commpy_mod = pytest.importorskip("commpy.modulation")


class KommDevice:
    """komm constellation + labeling: bits -> labeling index -> constellation point."""

    def __init__(self, constellation, labeling):
        self.points = constellation.matrix.ravel()
        self.labeling = labeling
        self.k = labeling.num_bits

    def modulate(self, bits):
        idx = self.labeling.bits_to_indices(np.asarray(bits, dtype=int))
        return self.points[np.asarray(idx).ravel()]

    def expected_table(self):
        """label (bits as fed) -> point, read from the library's labeling matrix."""
        out = {}
        for index, row in enumerate(self.labeling.matrix):
            out["".join(map(str, row))] = self.points[index]
        return out


class CommpyDevice:
    def __init__(self, modem):
        self.modem = modem
        self.k = modem.num_bits_symbol

    def modulate(self, bits):
        return np.asarray(self.modem.modulate(np.asarray(bits, dtype=int)))

    def expected_table(self):
        out = {}
        for label in range(1 << self.k):
            bits = [(label >> (self.k - 1 - i)) & 1 for i in range(self.k)]
            out["".join(map(str, bits))] = complex(self.modulate(np.array(bits))[0])
        return out


def devices():
    return [
        ("komm 16QAM reflected", "16qam",
         lambda: KommDevice(komm.QAMConstellation(16), komm.ReflectedRectangularLabeling((2, 2)))),
        ("komm 64QAM reflected", "64qam",
         lambda: KommDevice(komm.QAMConstellation(64), komm.ReflectedRectangularLabeling((3, 3)))),
        ("komm 8PSK reflected", "8psk",
         lambda: KommDevice(komm.PSKConstellation(8), komm.ReflectedLabeling(3))),
        ("komm 8PSK natural", "8psk",
         lambda: KommDevice(komm.PSKConstellation(8), komm.NaturalLabeling(3))),
        ("commpy QPSK", "qpsk", lambda: CommpyDevice(commpy_mod.PSKModem(4))),
        ("commpy 8PSK", "8psk", lambda: CommpyDevice(commpy_mod.PSKModem(8))),
        ("commpy 16QAM", "16qam", lambda: CommpyDevice(commpy_mod.QAMModem(16))),
        ("commpy 64QAM", "64qam", lambda: CommpyDevice(commpy_mod.QAMModem(64))),
    ]


@pytest.mark.parametrize("name,mod,make", devices(), ids=[d[0] for d in devices()])
def test_identify_reports_library_table_exactly(name, mod, make):
    dev = make()
    conv = "dvb-s2" if mod == "8psk" else "3gpp"
    info = identify(make_spec(mod, conv), adapter=PythonAdapter(dev))
    expected = dev.expected_table()
    assert set(info.mapping) == set(expected)
    for label, point in expected.items():
        assert info.mapping[label] == pytest.approx([point.real, point.imag], abs=1e-12)
    # Gray flag against a brute-force check on the library's own table (common practice
    # definition: nearest neighbours differ in one bit)
    pts = np.array([expected[l] for l in sorted(expected)])
    labs = [int(l, 2) for l in sorted(expected)]
    d = np.abs(pts[:, None] - pts[None, :])
    np.fill_diagonal(d, np.inf)
    nn = d <= d.min() * (1 + 1e-6)
    brute_gray = all(bin(labs[i] ^ labs[j]).count("1") == 1 for i, j in zip(*np.nonzero(nn)))
    assert info.gray == brute_gray
    assert info.average_energy == pytest.approx(np.mean(np.abs(pts) ** 2))
    # every one is a relabelling of a known unit-energy table, by a gain of the library's scale
    assert info.closest_convention is not None and info.relation
    assert abs(info.scale) == pytest.approx(np.sqrt(np.mean(np.abs(pts) ** 2)))


def test_komm_reflected_16qam_is_80211_up_to_scale():
    # komm's reflected rectangular labeling puts the first half of the bits on I with
    # ascending Gray levels, as IEEE 802.11-2007 Table 17-9 does (and modemverify's generic gray).
    dev = KommDevice(komm.QAMConstellation(16), komm.ReflectedRectangularLabeling((2, 2)))
    info = identify(make_spec("16qam", "3gpp"), adapter=PythonAdapter(dev))
    assert set(info.matches) == {"ieee802.11", "gray"}
    assert info.normalisation == pytest.approx(1 / np.sqrt(10))


def test_check_flags_library_that_does_not_follow_the_claim():
    # commpy's QAM is not the 3GPP table: claiming 3GPP must fail the mapping check,
    # while its Gray property is reported on its own.
    res = check_object(CommpyDevice(commpy_mod.QAMModem(16)), modulation="16qam",
                       convention="3gpp")
    mapping = next(v for v in res.verdicts if v.name == "mapping")
    assert mapping.outcome == "fail"
