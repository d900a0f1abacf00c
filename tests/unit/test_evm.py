"""EVM per the 3GPP definition, its limits, and the EVM-SNR relation in AWGN.

Sources are named beside each check (document and section); "from memory" marks a section or
value not read from the document, and computed check values say how they were computed.
"""

import math

import numpy as np
import pytest
from scipy import stats

from modemverify.dsp.evm import (
    DEFAULT_EVM_LIMITS,
    evm,
    evm_from_snr_db,
    evm_limit,
    snr_db_from_evm,
)
from modemverify.errors import ConfigError, UnknownNameError
from modemverify.schemes.conventions import get_convention

QPSK = np.array([1 + 1j, 1 - 1j, -1 + 1j, -1 - 1j]) / np.sqrt(2)


def test_ideal_symbols_have_zero_evm():
    r = evm(QPSK, QPSK)
    assert (r.rms_percent, r.peak_percent, r.rms_db) == (0.0, 0.0, -math.inf)
    assert r.n_symbols == 4 and r.p0 == pytest.approx(1.0)


def test_hand_computed_value():
    # 3GPP definition (TS 38.101-2 Annex F.2; the same form in TS 38.101-1 Annex F):
    # sqrt(sum|z - i|^2 / (N P0)), P0 the average power of the ideal reference.
    # Errors 0.1, 0.1j, -0.2, 0 on unit-power QPSK: sum = 0.06, N = 4 -> sqrt(0.015) = 12.247 %;
    # peak 20 % at index 2; in dB 20 log10(0.12247) = -18.24 dB.
    err = np.array([0.1, 0.1j, -0.2, 0])
    r = evm(QPSK + err, QPSK)
    assert r.rms_percent == pytest.approx(100 * math.sqrt(0.015), rel=1e-12)
    assert r.rms_db == pytest.approx(20 * math.log10(math.sqrt(0.015)), rel=1e-12)
    assert (r.peak_percent, r.peak_index) == (pytest.approx(20.0), 2)


def test_normalised_to_the_reference_power():
    # P0 is the average power of the ideal reference: scaling both signals leaves EVM unchanged.
    err = np.array([0.1, 0.1j, -0.2, 0])
    assert evm(3 * (QPSK + err), 3 * QPSK).rms_percent == \
        pytest.approx(evm(QPSK + err, QPSK).rms_percent, rel=1e-12)
    assert evm(3 * (QPSK + err), 3 * QPSK).p0 == pytest.approx(9.0)


def test_per_label_statistics():
    labels = np.array([0, 1, 2, 3, 0, 1, 2, 3])
    ideal = QPSK[labels]
    err = np.zeros(8, dtype=complex)
    err[labels == 2] = 0.05 - 0.02j               # a constant offset on label 2 only
    err[labels == 3] = [0.1, -0.1]                # zero mean, rms 0.1 on label 3
    r = evm(ideal + err, ideal, labels)
    assert set(r.per_label) == {0, 1, 2, 3}
    assert r.per_label[0] == (0j, 0.0)
    mean2, rms2 = r.per_label[2]
    assert mean2 == pytest.approx(0.05 - 0.02j) and rms2 == pytest.approx(100 * abs(0.05 - 0.02j))
    mean3, rms3 = r.per_label[3]
    assert mean3 == pytest.approx(0, abs=1e-15) and rms3 == pytest.approx(10.0)
    with pytest.raises(ConfigError, match="labels"):
        evm(ideal, ideal, labels[:5])


def test_equalise_removes_one_complex_gain():
    # The single-tap analogue of the 3GPP EVM equaliser: z = g i + e gives EVM(e / g).
    rng = np.random.default_rng(4)
    ideal = QPSK[rng.integers(0, 4, 5000)]
    e = 0.05 * (rng.standard_normal(5000) + 1j * rng.standard_normal(5000))
    g = 0.6 * np.exp(0.7j)
    r = evm(g * ideal + e, ideal, equalise=True)
    assert r.gain == pytest.approx(g, rel=1e-2)
    # EVM of e/g against unit-power QPSK; the fitted gain absorbs the (tiny) part of e that
    # correlates with i, moving it by about rms(e) / (|g| sqrt(N)) = 1.7e-3 relative
    assert r.rms_percent == pytest.approx(100 * np.sqrt(np.mean(np.abs(e) ** 2)) / abs(g),
                                          rel=5e-3)
    assert evm(g * ideal + e, ideal).rms_percent > 40   # without it, the gain error dominates


@pytest.mark.parametrize("snr_db, expected", [(10, 31.62), (15, 17.78), (20, 10.00),
                                              (30, 3.16)])
def test_evm_matches_one_over_root_snr_for_16qam_in_awgn(snr_db, expected):
    # R. A. Shafik, M. S. Rahman, A. H. M. R. Islam, "On the extended relationships among EVM,
    # BER and SNR as performance metrics", ICECE 2006 (where in the paper: from memory):
    # data-aided EVM in AWGN is 1/sqrt(SNR), SNR = Es/N0 with EVM normalised to the reference
    # power; the 2-decimal values are 100/sqrt(SNR) evaluated at each SNR. 16QAM from
    # the 3GPP table (unit average power), each point equally often so P0 = 1 exactly. Then
    # 2 sum|n|^2 / N0 ~ chi-square(2N), which gives the interval for the measured EVM.
    points = np.asarray(get_convention("3gpp", "16qam").points)
    rng = np.random.default_rng(1000 + snr_db)
    n = 16 * 4096
    ideal = rng.permutation(np.repeat(points, n // 16))
    n0 = 10 ** (-snr_db / 10)
    z = ideal + math.sqrt(n0 / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    r = evm(z, ideal)
    assert r.p0 == pytest.approx(1.0, rel=1e-12)
    lo, hi = stats.chi2.ppf([1e-6, 1 - 1e-6], 2 * n) / (2 * n)
    assert 100 * math.sqrt(n0 * lo) < r.rms_percent < 100 * math.sqrt(n0 * hi)
    assert evm_from_snr_db(snr_db) == pytest.approx(expected, abs=5e-3)
    # against the 2-decimal values: their rounding (0.005) plus 5 standard deviations of the
    # estimate (relative sd of sqrt(chi2(2N)/2N) is 1/(2 sqrt(N)))
    assert r.rms_percent == pytest.approx(expected, abs=0.005 + expected * 5 / (2 * math.sqrt(n)))


@pytest.mark.parametrize("modulation, limit, snr_db", [("qpsk", 17.5, 15.14),
                                                       ("16qam", 12.5, 18.06),
                                                       ("64qam", 8.0, 21.94),
                                                       ("256qam", 3.5, 29.12),
                                                       # Release 17 row, from memory
                                                       ("1024qam", 2.5, 32.04)])
def test_limits_and_their_snr(modulation, limit, snr_db):
    # 3GPP TS 38.104, 6.5.2.2, Table 6.5.2.2-1 (NR BS EVM limits); the SNR each limit
    # corresponds to by EVM = 1/sqrt(SNR) (Shafik et al., ICECE 2006) is -20 log10(EVM),
    # evaluated to 2 decimals.
    assert evm_limit(modulation) == limit == DEFAULT_EVM_LIMITS[modulation]
    assert snr_db_from_evm(limit) == pytest.approx(snr_db, abs=5e-3)
    assert evm_from_snr_db(snr_db_from_evm(limit)) == pytest.approx(limit, rel=1e-12)


def test_no_published_limit_for_bpsk_and_8psk():
    assert evm_limit("bpsk") is None and evm_limit("8PSK") is None
    # 32APSK has none either (it is a known modulation: an evm check on it must not break)
    assert evm_limit("32apsk") is None
    with pytest.raises(UnknownNameError, match="modulation.*'64apsk'.*16qam"):
        evm_limit("64apsk")


def test_argument_checks():
    with pytest.raises(ConfigError, match="same non-zero length"):
        evm(QPSK[:3], QPSK)
    with pytest.raises(ConfigError, match="zero power"):
        evm(QPSK, np.zeros(4))
    with pytest.raises(ConfigError, match="finite"):
        evm(np.full(4, np.nan), QPSK)
    with pytest.raises(ConfigError, match="equalise"):
        evm(np.zeros(4), QPSK, equalise=True)
    with pytest.raises(ConfigError, match="evm_percent"):
        snr_db_from_evm(0)
