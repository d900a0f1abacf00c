"""Reference constellations and labelling conventions, as data.

A :class:`Convention` is a table from k-bit labels to complex points at unit average symbol
energy, plus where it comes from. The label integer has the first bit fed to the modulator as its
most significant bit (see :mod:`modemverify.schemes.labels`), so ``points[0b0010]`` is the point
for the bit sequence 0, 0, 1, 0.

References
----------
.. [3GPP] 3GPP TS 38.211, *NR; Physical channels and modulation*, clause 5.1 (5.1.2 BPSK,
   5.1.3 QPSK, 5.1.4 16QAM, 5.1.5 64QAM, 5.1.6 256QAM); the same tables as TS 36.211 clause 7.1.
.. [80211] IEEE Std 802.11-2007, 17.3.5.7 (OFDM PHY data modulation and mapping), Tables 17-6
   (K_MOD) to 17-10; the same content as IEEE 802.11a-1999 Tables 81 to 85. 256-QAM follows the
   same rule with K_MOD = 1/sqrt(170) in the VHT PHY of IEEE 802.11ac (from memory).
.. [DVBS2] ETSI EN 302 307-1, 5.4.1 (QPSK, Figure 9) and 5.4.2 (8PSK, Figure 10), rho^2 = 1.
.. [GRAY] "gray" and "natural" are generic labellings (common practice): PSK point m sits at
   angle 2*pi*m/M (+45 degrees for QPSK) and carries label gray(m) or m; square QAM takes the first
   half of the label bits for I and the second half for Q, each a PAM axis whose levels, in
   ascending order, carry the labels gray(i) or i.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from ..errors import ConfigError, UnknownNameError
from .geometry import nearest_neighbour_pairs
from .labels import gray_code, hamming, labels_to_bits
from .rules import PLAIN, SymbolRule

__all__ = [
    "MODULATIONS", "CONVENTION_ORDER", "Convention", "CONVENTIONS", "get_convention",
    "conventions_for", "RING_RATIOS", "ring_ratio_for",
]

#: modulation name -> bits per symbol
MODULATIONS: dict[str, int] = {
    "bpsk": 1, "qpsk": 2, "8psk": 3, "16qam": 4, "64qam": 6, "256qam": 8, "1024qam": 10,
    "pi/2-bpsk": 1, "16apsk": 4, "32apsk": 5, "dbpsk": 1, "dqpsk": 2, "pi/4-dqpsk": 2,
    "oqpsk": 2,
}

#: the symbol rule each modulation sends its table under (see :mod:`.rules`); the table of a
#: differential scheme gives the phase change a label sets
_RULES: dict[str, SymbolRule] = {
    "pi/2-bpsk": SymbolRule(turn_deg=90.0, turn_on="odd"),   # TS 38.211 5.1.1
    "dbpsk": SymbolRule(differential=True),
    "dqpsk": SymbolRule(differential=True),
    "pi/4-dqpsk": SymbolRule(differential=True),
    # offset QPSK: the QPSK table, the Q arm of the waveform half a symbol late (common practice)
    "oqpsk": SymbolRule(q_delay=0.5),
}

#: DVB-S2 ring ratios per code rate, ETSI EN 302 307-1: 16APSK gamma = R2/R1 (5.4.3, Table 9);
#: 32APSK gamma1 = R2/R1, gamma2 = R3/R1 (5.4.4, Table 10; table numbers from memory)
RING_RATIOS: dict[str, dict[str, tuple[float, ...]]] = {
    "16apsk": {"2/3": (3.15,), "3/4": (2.85,), "4/5": (2.75,), "5/6": (2.70,),
               "8/9": (2.60,), "9/10": (2.57,)},
    "32apsk": {"3/4": (2.84, 5.27), "4/5": (2.72, 4.87), "5/6": (2.64, 4.64),
               "8/9": (2.54, 4.33), "9/10": (2.53, 4.30)},
}

#: the code rate whose ring ratios are the default
_DEFAULT_RATE = {"16apsk": "2/3", "32apsk": "3/4"}


def ring_ratio_for(modulation: str, code_rate: str) -> tuple[float, ...]:
    """The ring ratios EN 302 307-1 gives ``modulation`` at ``code_rate`` ("3/4")."""
    table = RING_RATIOS.get(modulation, {})
    if code_rate not in table:
        raise UnknownNameError(f"{modulation} code rate", code_rate, table)
    return table[code_rate]

#: the order in which conventions are preferred when several describe a device equally well
CONVENTION_ORDER = ("3gpp", "ieee802.11", "dvb-s2", "gray", "natural")


@dataclass(frozen=True)
class Convention:
    """One published (or generic) label-to-point table at unit average energy.

    Attributes
    ----------
    name : str
        Convention name, e.g. ``"3gpp"``.
    modulation : str
        Modulation name, e.g. ``"16qam"``.
    points : numpy.ndarray
        complex128, ``points[label]`` is the point for that label.
    normalisation : float
        The factor the standard multiplies its integer grid by (1/sqrt(10) for 16QAM), kept to
        name a missing normalisation in a failure reason.
    is_gray : bool
        Whether nearest neighbours differ in exactly one bit.
    source : str
        Document and clause the table comes from.
    """

    name: str
    modulation: str
    points: np.ndarray = field(repr=False)
    normalisation: float
    is_gray: bool
    source: str
    #: how a symbol follows from its label's point (position, previous symbol)
    rule: SymbolRule = PLAIN
    #: APSK: each ring's radius over the inner ring's (None for other modulations)
    ring_ratio: tuple[float, ...] | None = None

    @property
    def bits_per_symbol(self) -> int:
        return MODULATIONS[self.modulation]


def _bits_matrix(k: int) -> np.ndarray:
    """Row ``label`` holds that label's bits, first-fed bit in column 0."""
    return labels_to_bits(np.arange(1 << k), k).reshape(-1, k).astype(np.int64)


def _3gpp_axis(bits: np.ndarray) -> np.ndarray:
    """Amplitude on one axis from its bits (c0 = sign, then magnitude bits), TS 38.211 5.1.

    Implements (1-2c0)[2^(m-1) - (1-2c1)[2^(m-2) - (1-2c2)[...]]] for m bits.
    """
    m = bits.shape[1]
    inner = np.ones(bits.shape[0])
    for j in range(m - 1, 0, -1):
        inner = 2 ** (m - j) - (1 - 2 * bits[:, j]) * inner
    return (1 - 2 * bits[:, 0]) * inner


def _3gpp(modulation: str) -> tuple[np.ndarray, float]:
    k = MODULATIONS[modulation]
    b = _bits_matrix(k)
    if modulation in ("bpsk", "pi/2-bpsk"):
        # 5.1.2 BPSK; 5.1.1 pi/2-BPSK is the same point turned by 90 degrees on odd positions
        # (the rule, in _RULES)
        s = 1 / np.sqrt(2)
        return s * ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 0])), s
    i_bits, q_bits = b[:, 0::2], b[:, 1::2]
    m = 1 << k
    s = 1 / np.sqrt(2 * (m - 1) / 3)
    return s * (_3gpp_axis(i_bits) + 1j * _3gpp_axis(q_bits)), s


def _pam_levels(n_levels: int) -> np.ndarray:
    return np.arange(-(n_levels - 1), n_levels, 2, dtype=float)


def _axis_from_labels(axis_labels: np.ndarray, n_bits: int, gray: bool) -> np.ndarray:
    """Level for each axis label, levels ascending carry labels gray(i) (or i)."""
    n = 1 << n_bits
    idx = np.arange(n)
    lab = gray_code(idx) if gray else idx
    level_of_label = np.empty(n)
    level_of_label[lab] = _pam_levels(n)
    return level_of_label[axis_labels]


def _square_qam(modulation: str, gray: bool) -> tuple[np.ndarray, float]:
    k = MODULATIONS[modulation]
    half = k // 2
    labels = np.arange(1 << k)
    i_lab, q_lab = labels >> half, labels & ((1 << half) - 1)
    m = 1 << k
    s = 1 / np.sqrt(2 * (m - 1) / 3)
    pts = _axis_from_labels(i_lab, half, gray) + 1j * _axis_from_labels(q_lab, half, gray)
    return s * pts, s


def _ieee80211(modulation: str) -> tuple[np.ndarray, float]:
    if modulation == "bpsk":
        # Table 17-7: b0 = 0 -> I = -1, b0 = 1 -> I = +1, Q = 0.
        return np.array([-1.0 + 0j, 1.0 + 0j]), 1.0
    if modulation == "qpsk":
        # Table 17-8: b0 -> I, b1 -> Q, 0 -> -1, 1 -> +1; K_MOD = 1/sqrt(2).
        s = 1 / np.sqrt(2)
        b = _bits_matrix(2)
        return s * ((2 * b[:, 0] - 1) + 1j * (2 * b[:, 1] - 1)), s
    # Tables 17-9, 17-10: first half of the bits -> I, second half -> Q; ascending levels carry
    # the binary-reflected Gray labels (00 -3, 01 -1, 11 +1, 10 +3).
    return _square_qam(modulation, gray=True)


def _psk(modulation: str, gray: bool) -> tuple[np.ndarray, float]:
    k = MODULATIONS[modulation]
    m = 1 << k
    offset = np.pi / 4 if m == 4 else 0.0
    idx = np.arange(m)
    lab = gray_code(idx) if gray else idx
    pts = np.empty(m, dtype=complex)
    pts[lab] = np.exp(1j * (2 * np.pi * idx / m + offset))
    return pts, 1.0


#: EN 302 307-1 Figure 13 (16APSK): the labels at increasing angle on the inner ring (from
#: pi/4, step pi/2) and on the outer ring (from pi/12, step pi/6)
_APSK16_INNER = (0b1100, 0b1110, 0b1111, 0b1101)
_APSK16_OUTER = (0b0100, 0b0000, 0b1000, 0b1010, 0b0010, 0b0110, 0b0111, 0b0011, 0b1011,
                 0b1001, 0b0001, 0b0101)


#: EN 302 307-1 Figure 14 (32APSK): inner ring from pi/4, step pi/2; middle ring from pi/12,
#: step pi/6; outer ring from 0, step pi/8 (two public DVB-S2 mappers agree)
_APSK32_INNER = (0b10001, 0b10101, 0b10111, 0b10011)
_APSK32_MIDDLE = (0b10000, 0b00000, 0b00001, 0b00101, 0b00100, 0b10100, 0b10110, 0b00110,
                  0b00111, 0b00011, 0b00010, 0b10010)
_APSK32_OUTER = (0b11000, 0b01000, 0b11001, 0b01001, 0b01101, 0b11101, 0b01100, 0b11100,
                 0b11110, 0b01110, 0b11111, 0b01111, 0b01011, 0b11011, 0b01010, 0b11010)


def _apsk(modulation: str, gammas: tuple[float, ...]) -> tuple[np.ndarray, float]:
    if modulation == "16apsk":
        rings = ((_APSK16_INNER, np.pi / 4, 1.0), (_APSK16_OUTER, np.pi / 12, gammas[0]))
    else:
        rings = ((_APSK32_INNER, np.pi / 4, 1.0), (_APSK32_MIDDLE, np.pi / 12, gammas[0]),
                 (_APSK32_OUTER, 0.0, gammas[1]))
    m = 1 << MODULATIONS[modulation]
    pts = np.empty(m, dtype=complex)
    for labels, start, radius in rings:
        n = len(labels)
        pts[list(labels)] = radius * np.exp(1j * (start + np.arange(n) * 2 * np.pi / n))
    # R1 so that the average energy is 1 (5.4.3: 4 R1^2 + 12 R2^2 = 16; 5.4.4 likewise)
    r1 = 1 / np.sqrt(np.mean(np.abs(pts) ** 2))
    return r1 * pts, r1


def _dvbs2(modulation: str, ring_ratio: tuple[float, ...] | None = None
           ) -> tuple[np.ndarray, float]:
    if modulation.endswith("apsk"):
        return _apsk(modulation, ring_ratio)
    if modulation == "qpsk":
        # Figure 9: 00 -> pi/4, 01 -> 7pi/4, 10 -> 3pi/4, 11 -> 5pi/4 (same as 3GPP QPSK).
        angles = np.array([1, 7, 3, 5]) * np.pi / 4
    else:
        # Figure 10: 000 pi/4, 001 0, 010 pi, 011 5pi/4, 100 pi/2, 101 7pi/4, 110 3pi/4,
        # 111 3pi/2 (leftmost label bit = first bit = MSB).
        angles = np.array([1, 0, 4, 5, 2, 7, 3, 6]) * np.pi / 4
    return np.exp(1j * angles), 1.0


def _differential(modulation: str, gray: bool) -> tuple[np.ndarray, float]:
    """Phase changes: DBPSK 0 -> 0, 1 -> pi; DQPSK m*pi/2, pi/4-DQPSK pi/4 + m*pi/2, the
    change with index m carrying gray(m) or m (common practice)."""
    m = 1 << MODULATIONS[modulation]
    idx = np.arange(m)
    lab = gray_code(idx) if gray else idx
    offset = np.pi / 4 if modulation == "pi/4-dqpsk" else 0.0
    pts = np.empty(m, dtype=complex)
    pts[lab] = np.exp(1j * (2 * np.pi * idx / m + offset))
    return pts, 1.0


#: square QAM orders every QAM convention defines
_QAM = ("16qam", "64qam", "256qam", "1024qam")
_GENERIC = tuple(m for m in MODULATIONS if m not in ("pi/2-bpsk", "16apsk", "32apsk"))

_BUILDERS = {
    "3gpp": (("bpsk", "pi/2-bpsk", "qpsk") + _QAM, _3gpp,
             "3GPP TS 38.211 5.1 (TS 36.211 7.1; 5.1.1 pi/2-BPSK, 5.1.7 1024QAM)"),
    "ieee802.11": (("bpsk", "qpsk") + _QAM, _ieee80211,
                   ("IEEE Std 802.11-2007 17.3.5.7, Tables 17-6 to 17-10 (1024-QAM: the same "
                    "rule in the HE PHY of IEEE 802.11ax, from memory)")),
    "dvb-s2": (("qpsk", "8psk", "16apsk", "32apsk"), _dvbs2,
               "ETSI EN 302 307-1 5.4.1-5.4.4, Figures 9-10 and 13-14, Tables 9-10"),
    "gray": (_GENERIC, None, "generic binary-reflected Gray labelling (common practice)"),
    "natural": (_GENERIC, None, "generic natural-binary labelling (common practice)"),
}

CONVENTIONS: tuple[str, ...] = tuple(_BUILDERS)


def _generic(name: str, modulation: str) -> tuple[np.ndarray, float]:
    gray = name == "gray"
    if _RULES.get(modulation, PLAIN).differential:
        return _differential(modulation, gray)
    if modulation.endswith("psk"):
        return _psk(modulation, gray)
    return _square_qam(modulation, gray)


def _is_gray(points: np.ndarray) -> bool:
    i, j = nearest_neighbour_pairs(points)
    return bool(np.all(hamming(i, j) == 1))


@lru_cache(maxsize=None)
def get_convention(name: str, modulation: str, ring_ratio=None) -> Convention:
    """Look up the table of ``name`` for ``modulation``.

    ``ring_ratio`` is the APSK ring ratio: 16APSK R2/R1 (a number), 32APSK R2/R1 and R3/R1 (two);
    default: those of code rate 2/3 (16APSK) or 3/4 (32APSK), EN 302 307-1 Tables 9 and 10.
    Other modulations take none.

    Raises
    ------
    UnknownNameError
        For an unknown modulation or convention.
    ConfigError
        When the convention does not define that modulation (3GPP has no 8PSK).

    Examples
    --------
    >>> c = get_convention("3gpp", "qpsk")
    >>> [complex(round(p.real, 4), round(p.imag, 4)) for p in c.points]
    [(0.7071+0.7071j), (0.7071-0.7071j), (-0.7071+0.7071j), (-0.7071-0.7071j)]
    """
    if modulation not in MODULATIONS:
        raise UnknownNameError("modulation", modulation, MODULATIONS)
    if name not in _BUILDERS:
        raise UnknownNameError("convention", name, _BUILDERS)
    mods, builder, source = _BUILDERS[name]
    if modulation not in mods:
        raise ConfigError(f"convention {name!r} defines no {modulation}; it defines "
                          f"{', '.join(mods)}")
    apsk = modulation.endswith("apsk")
    if ring_ratio is not None and not apsk:
        raise ConfigError(f"{modulation} has no ring ratio")
    if apsk:
        ring_ratio = _ring_ratios(modulation, ring_ratio)
        points, norm = builder(modulation, ring_ratio)
    else:
        points, norm = builder(modulation) if builder else _generic(name, modulation)
    points = np.asarray(points, dtype=np.complex128)
    points.setflags(write=False)
    return Convention(name=name, modulation=modulation, points=points, normalisation=norm,
                      is_gray=_is_gray(points), source=source,
                      rule=_RULES.get(modulation, PLAIN), ring_ratio=ring_ratio)


def _ring_ratios(modulation: str, given) -> tuple[float, ...]:
    want = len(RING_RATIOS[modulation][_DEFAULT_RATE[modulation]])
    if given is None:
        return RING_RATIOS[modulation][_DEFAULT_RATE[modulation]]
    r = tuple(float(x) for x in (given if isinstance(given, (list, tuple)) else [given]))
    if len(r) != want:
        raise ConfigError(f"ring ratio {list(r)}: {modulation} has {want} ring ratio"
                          f"{'s' if want > 1 else ''} (each ring's radius over the inner one's)")
    if not all(x > 1 for x in r) or list(r) != sorted(r):
        raise ConfigError(f"ring ratio {list(r)}: expected increasing numbers above 1")
    return r


def conventions_for(modulation: str, ring_ratio: float | None = None) -> list[Convention]:
    """Every convention that defines ``modulation``, in preference order."""
    return [get_convention(n, modulation, ring_ratio) for n in CONVENTION_ORDER
            if modulation in _BUILDERS[n][0]]
