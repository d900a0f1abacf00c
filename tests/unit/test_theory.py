"""Theory BER/SER curves against published values and independent computations.

Sources are named beside each check (document and section); "from memory" marks a section or
value not read from the document, and computed check values say how they were computed.
All textbook section and equation numbers here are from memory.
"""

import math

import numpy as np
import pytest
from scipy import integrate, stats

from modemverify.errors import ConfigError, UnknownNameError
from modemverify.schemes import theory
from modemverify.schemes.theory import (
    THEORY_MODULATIONS,
    ber,
    ebn0_for_ber,
    psk_ber,
    psk_ser,
    qam_ber,
    qam_ser,
    ser,
)


def lin(db):
    return 10.0 ** (np.asarray(db, dtype=float) / 10.0)


# ---------------------------------------------------------------------------------------------
# BPSK / QPSK / DBPSK closed forms


@pytest.mark.parametrize("target, ebn0_db", [(1e-3, 6.790), (1e-4, 8.398), (1e-5, 9.588),
                                             (1e-6, 10.530)])
def test_qpsk_ebn0_for_ber_published(target, ebn0_db):
    # Pb = Q(sqrt(2 Eb/N0)) for BPSK and Gray QPSK (Proakis & Salehi, Digital Communications,
    # 5th ed., ch. 4; 4th ed. sec. 5.2; sections from memory); the Eb/N0 values are its inverse,
    # computed as 10 log10(norm.isf(Pb)**2 / 2) with scipy.stats, to 3 decimals.
    assert ebn0_for_ber("qpsk", target) == pytest.approx(ebn0_db, abs=5e-4)
    assert ebn0_for_ber("bpsk", target) == pytest.approx(ebn0_db, abs=5e-4)


@pytest.mark.parametrize("target", [1e-3, 1e-6, 1e-9, 1e-12])
def test_bpsk_inverse_matches_normal_quantile(target):
    # Eb/N0 = norm.isf(p)**2 / 2 (linear) inverts Pb = Q(sqrt(2 Eb/N0)): scipy's normal
    # quantile is an independent inverse, and 1e-9/1e-12 check the far tail is not lost.
    expected = 10 * math.log10(stats.norm.isf(target) ** 2 / 2)
    assert ebn0_for_ber("bpsk", target) == pytest.approx(expected, abs=1e-9)


def test_bpsk_values_published():
    # Pb = Q(sqrt(2 Eb/N0)) (Proakis & Salehi, 5th ed., ch. 4) evaluated with scipy.stats.norm.sf
    # at 0, 4, 6, 8, 10 dB, 4 significant digits
    got = ber("bpsk", [0.0, 4.0, 6.0, 8.0, 10.0])
    np.testing.assert_allclose(got, [7.865e-2, 1.250e-2, 2.388e-3, 1.909e-4, 3.872e-6],
                               rtol=6e-4)


def test_bpsk_equals_scipy_normal_tail():
    # Q(x) = norm.sf(x): scipy's survival function is an independent implementation
    x = np.linspace(-5, 16, 43)
    np.testing.assert_allclose(ber("bpsk", x), stats.norm.sf(np.sqrt(2 * lin(x))), rtol=1e-12)
    assert ber("bpsk", 16.0) < 1e-15  # far tail keeps relative precision (not 1 - cdf = 0)
    assert ber("bpsk", 16.0) > 0


def test_qpsk_ser_published():
    # QPSK symbol error, exact: Ps = 2q - q^2, q = Q(sqrt(2 Eb/N0)) (Proakis & Salehi, 5th ed.,
    # ch. 4); 10 dB -> 7.744201e-6, computed with scipy and equal to Craig's integral
    # (J. W. Craig, IEEE MILCOM 1991) evaluated with scipy.integrate.quad to 1e-12
    assert ser("qpsk", 10.0) == pytest.approx(7.744201e-6, rel=1e-6)


def test_dbpsk_published():
    # DBPSK (differentially coherent): Pb = exp(-Eb/N0)/2 (Proakis & Salehi, 5th ed., DPSK
    # section; from memory); Pb 1e-3/1e-4/1e-5/1e-6 at 7.934/9.303/10.342/11.180 dB, computed
    # as 10 log10(-ln(2 Pb))
    for target, db in [(1e-3, 7.934), (1e-4, 9.303), (1e-5, 10.342), (1e-6, 11.180)]:
        assert ebn0_for_ber("dbpsk", target) == pytest.approx(db, abs=5e-4)
        assert ber("dbpsk", db) == pytest.approx(target, rel=2e-3)
    assert ser("dbpsk", 7.0) == ber("dbpsk", 7.0)
    assert ber("dbpsk", 0.0) == pytest.approx(0.5 * math.exp(-1.0), rel=1e-15)


# ---------------------------------------------------------------------------------------------
# M-PSK


@pytest.mark.parametrize("order, ebn0_db, expected", [
    (8, 10.0, 3.034186e-3), (16, 10.0, 8.099516e-2), (8, 6.0, 6.143974e-2),
    (16, 6.0, 2.709039e-1)])
def test_psk_ser_published(order, ebn0_db, expected):
    # Craig's form Ps = (1/pi) int_0^{(M-1)pi/M} exp(-gs sin^2(pi/M) / sin^2 t) dt (J. W. Craig,
    # "A new, simple and exact result for calculating the probability of error for
    # two-dimensional signal constellations", IEEE MILCOM 1991), computed with
    # scipy.integrate.quad; the phase-pdf integral (Proakis & Salehi) gives the same values
    assert psk_ser(order, ebn0_db) == pytest.approx(expected, rel=1e-6)
    if order == 8:
        assert ser("8psk", ebn0_db) == pytest.approx(expected, rel=1e-6)


def _ser_from_phase_pdf_double_integral(order, ebn0_db):
    """Ps = 1 - int_{-pi/M}^{pi/M} p(t) dt with the phase density in its textbook form
    p(t) = (1/2pi) e^{-gs sin^2 t} int_0^inf v e^{-(v - sqrt(2 gs) cos t)^2 / 2} dv
    (Proakis & Salehi, Digital Communications, 5th ed., M-ary PSK error probability; equation
    numbers from memory). Inner integral numerically, independent of the module's closed form."""
    gs = math.log2(order) * float(lin(ebn0_db))

    def pdf(t):
        a = math.sqrt(2 * gs) * math.cos(t)
        inner, _ = integrate.quad(lambda v: v * math.exp(-(v - a) ** 2 / 2), 0, np.inf,
                                  epsabs=0, epsrel=1e-12)
        return math.exp(-gs * math.sin(t) ** 2) * inner / (2 * math.pi)

    inside, _ = integrate.quad(pdf, -math.pi / order, math.pi / order, epsabs=0, epsrel=1e-12)
    return 1.0 - inside


@pytest.mark.parametrize("order, ebn0_db", [(8, 6.0), (8, 10.0), (16, 8.0)])
def test_psk_craig_equals_phase_pdf(order, ebn0_db):
    # two exact forms of the same probability (Craig 1991 and the phase pdf; they agree to
    # 1e-9 for M = 2, 4, 8, 16 with scipy.integrate.quad)
    assert psk_ser(order, ebn0_db) == pytest.approx(
        _ser_from_phase_pdf_double_integral(order, ebn0_db), rel=1e-8)


def test_psk_low_orders_reduce_to_closed_forms():
    # M = 2 and M = 4 through the general PSK machinery must give BPSK/QPSK's closed forms
    # (Proakis & Salehi, 5th ed., ch. 4: Gray QPSK is two BPSK channels; the QPSK phase-pdf
    # integral equals Q(sqrt(2 Eb/N0)) to 1e-12 with scipy.integrate.quad)
    x = np.array([-3.0, 0.0, 4.0, 8.0, 12.0, 14.0])
    q = stats.norm.sf(np.sqrt(2 * lin(x)))
    np.testing.assert_allclose(psk_ber(4, x), q, rtol=1e-9)
    np.testing.assert_allclose(psk_ber(2, x), q, rtol=1e-9)
    np.testing.assert_allclose(psk_ser(4, x), 2 * q - q * q, rtol=1e-9)
    np.testing.assert_allclose(psk_ser(2, x), q, rtol=1e-9)


@pytest.mark.parametrize("ebn0_db, expected", [(6.0, 2.048197e-2), (10.0, 1.011395e-3),
                                               (14.0, 8.756327e-7)])
def test_8psk_gray_ber_exact_published(ebn0_db, expected):
    # Computed with scipy.integrate.quad: the phase-pdf integral (Proakis & Salehi, M-ary PSK)
    # over each decision sector times the Hamming distance of its label, with the DVB-S2
    # labels (ETSI EN 302 307-1, 5.4.2, Figure 10)
    assert ber("8psk", ebn0_db) == pytest.approx(expected, rel=1e-6)


def test_8psk_dvbs2_labels_same_ber_as_reflected_gray():
    # ETSI EN 302 307-1, 5.4.2, Figure 10: 000 -> pi/4, 001 -> 0, 010 -> pi, 011 -> 5pi/4,
    # 100 -> pi/2, 101 -> 7pi/4, 110 -> 3pi/4, 111 -> 3pi/2. Both labellings are Gray, so the
    # sector-by-Hamming-distance integral gives the same BER (computed as in the test above).
    angle_of = {0b000: 1, 0b001: 0, 0b010: 4, 0b011: 5, 0b100: 2, 0b101: 7, 0b110: 3,
                0b111: 6}  # in steps of pi/4
    around = [lab for lab, _ in sorted(angle_of.items(), key=lambda kv: kv[1])]
    x = np.array([2.0, 6.0, 10.0, 14.0])
    np.testing.assert_allclose(psk_ber(8, x, labels=around), ber("8psk", x), rtol=1e-12)
    # a non-Gray labelling (natural binary) must come out worse: the check can fail
    assert np.all(psk_ber(8, x, labels=range(8)) > ber("8psk", x))


def test_8psk_nearest_neighbour_approximation():
    # Pb ~ (2/log2 M) Q(sqrt(2 log2M Eb/N0) sin(pi/M)) (Proakis & Salehi, 5th ed.; Goldsmith,
    # Wireless Communications, ch. 6; sections from memory); evaluated with scipy: at 10 dB
    # identical to the exact value to 7 digits, at 6 dB 2.047992e-2
    def approx(db):
        return (2 / 3) * stats.norm.sf(math.sqrt(6 * float(lin(db))) * math.sin(math.pi / 8))

    assert approx(6.0) == pytest.approx(2.047992e-2, rel=1e-6)
    assert ber("8psk", 10.0) == pytest.approx(approx(10.0), rel=5e-7)
    assert ber("8psk", 6.0) > approx(6.0)


# ---------------------------------------------------------------------------------------------
# square QAM


@pytest.mark.parametrize("mod, ebn0_db, expected", [
    ("16qam", 6.0, 2.787133e-2), ("16qam", 10.0, 1.754151e-3), ("16qam", 14.0, 2.763208e-6),
    ("64qam", 6.0, 8.381678e-2), ("64qam", 10.0, 2.653271e-2), ("64qam", 14.0, 2.154004e-3),
    ("256qam", 10.0, 7.859628e-2), ("256qam", 14.0, 2.909928e-2)])
def test_qam_ber_published(mod, ebn0_db, expected):
    # K. Cho and D. Yoon, "On the general BER expression of one- and two-dimensional amplitude
    # modulations", IEEE Trans. Commun. 50(7):1074-1080, July 2002 (formula text from memory),
    # evaluated with scipy.special.erfc; the values equal an independent brute-force Gray-PAM
    # computation to 1e-11 relative
    assert ber(mod, ebn0_db) == pytest.approx(expected, rel=1e-6)


@pytest.mark.parametrize("mod, ebn0_db, expected", [
    ("16qam", 10.0, 7.004294e-3), ("16qam", 14.0, 1.105280e-5), ("64qam", 10.0, 1.528598e-1)])
def test_qam_ser_published(mod, ebn0_db, expected):
    # Square M-QAM SER, exact: Ps = 1 - (1 - p)^2, p = 2(1 - 1/sqrt M) Q(sqrt(3 gs/(M-1)))
    # (Proakis & Salehi, 5th ed.; section from memory), evaluated with scipy.stats.norm.sf
    assert ser(mod, ebn0_db) == pytest.approx(expected, rel=1e-6)


def _gray_pam_ber_brute_force(order, ebn0_db):
    """BER of Gray sqrt(M)-PAM per dimension from the decision-region probabilities.

    Levels 2j - (r - 1), labels j ^ (j >> 1) (binary-reflected Gray), thresholds at the even
    integers between levels; P(region i | level j) as a difference of normal tail
    probabilities (norm.sf, on the side away from the sent level so no 1 - cdf appears).
    Square Gray M-QAM is two such PAMs, each carrying half the bits, so this is its BER.
    """
    r = math.isqrt(order)
    k = int(math.log2(order))
    gamma = float(lin(ebn0_db))
    es = 2 * (order - 1) / 3  # mean symbol energy of the +-1, +-3, ... grid in 2-D
    sigma = math.sqrt(es / (2 * k * gamma))  # N0 / 2 per dimension
    levels = 2.0 * np.arange(r) - (r - 1)
    lab = np.arange(r) ^ (np.arange(r) >> 1)
    lo = np.concatenate(([-np.inf], levels[:-1] + 1))  # region i = [lo_i, hi_i)
    hi = np.concatenate((levels[:-1] + 1, [np.inf]))
    total = 0.0
    for j, x in enumerate(levels):
        for i in range(r):
            if i == j:
                continue
            if i > j:
                p = stats.norm.sf((lo[i] - x) / sigma) - stats.norm.sf((hi[i] - x) / sigma)
            else:
                p = stats.norm.sf((x - hi[i]) / sigma) - stats.norm.sf((x - lo[i]) / sigma)
            total += p * bin(int(lab[i] ^ lab[j])).count("1")
    return total / (r * (k // 2))


@pytest.mark.parametrize("order", [4, 16, 64, 256, 1024])
def test_cho_yoon_equals_brute_force_gray_pam(order):
    # the Cho & Yoon (IEEE Trans. Commun. 2002) closed form against an independent brute-force
    # Gray PAM computation (they agree to <= 1e-11 relative for M = 4 ... 256)
    for db in [-2.0, 2.0, 6.0, 10.0, 14.0, 18.0, 22.0]:
        assert qam_ber(order, db) == pytest.approx(_gray_pam_ber_brute_force(order, db),
                                                   rel=1e-9)


def test_qam4_is_qpsk():
    x = np.linspace(-4, 14, 19)
    np.testing.assert_allclose(qam_ber(4, x), ber("qpsk", x), rtol=1e-12)
    np.testing.assert_allclose(qam_ser(4, x), ser("qpsk", x), rtol=1e-12)


def _map_3gpp_16qam(bits):
    """3GPP TS 38.211 5.1.4: d = {(1-2b0)[2-(1-2b2)] + j(1-2b1)[2-(1-2b3)]}/sqrt(10)."""
    b = bits.reshape(-1, 4).astype(float)
    s = 1 - 2 * b
    return ((s[:, 0] * (2 - s[:, 2])) + 1j * (s[:, 1] * (2 - s[:, 3]))) / math.sqrt(10)


def test_16qam_monte_carlo_inside_exact_interval():
    # Monte Carlo of Gray 16QAM (3GPP TS 38.211 5.1.4 mapping) at 8 dB with minimum-distance
    # detection; the theory value must lie in the 99.9 % Clopper-Pearson interval of the
    # measured BER (Clopper & Pearson 1934 via scipy.stats.binomtest).
    rng = np.random.default_rng(np.random.SeedSequence(20240816))
    n_bits = 2_000_000
    bits = rng.integers(0, 2, n_bits, dtype=np.uint8)
    tx = _map_3gpp_16qam(bits)
    ebn0 = float(lin(8.0))
    n0 = 1.0 / (4 * ebn0)  # Es = 1, Es = 4 Eb
    noise = rng.normal(scale=math.sqrt(n0 / 2), size=(tx.size, 2)) @ np.array([1, 1j])
    rx = tx + noise
    table_bits = ((np.arange(16)[:, None] >> np.arange(3, -1, -1)) & 1).astype(np.uint8)
    points = _map_3gpp_16qam(table_bits.reshape(-1))
    decided = np.argmin(np.abs(rx[:, None] - points[None, :]), axis=1)
    errors = int(np.count_nonzero(table_bits[decided].reshape(-1) != bits))
    ci = stats.binomtest(errors, n_bits).proportion_ci(confidence_level=0.999)
    assert ci.low <= ber("16qam", 8.0) <= ci.high
    # and the measurement is not so loose that anything passes: 64QAM's theory is outside
    assert not ci.low <= ber("64qam", 8.0) <= ci.high


def test_16qam_approximation_close_at_high_snr():
    # Square M-QAM approximation Pb ~ (2/log2 M)(1 - 1/sqrt M) erfc(sqrt(3 log2M Eb/N0 /
    # (2(M-1)))), for 16QAM (3/8) erfc(sqrt(0.4 Eb/N0)) (Proakis & Salehi, 5th ed.; the dominant
    # term of Cho & Yoon 2002): within 4e-6 relative of exact for 16QAM at >= 10 dB (computed)
    from scipy.special import erfc
    for db in (10.0, 14.0):
        assert ber("16qam", db) == pytest.approx(0.375 * erfc(math.sqrt(0.4 * lin(db))),
                                                 rel=5e-6)


# ---------------------------------------------------------------------------------------------
# inverse, shapes, limits, errors


@pytest.mark.parametrize("mod", THEORY_MODULATIONS)
def test_inverse_roundtrip(mod):
    x = np.array([-3.0, 0.0, 4.0, 9.5, 15.0])
    p = ber(mod, x)
    np.testing.assert_allclose(ebn0_for_ber(mod, p), x, atol=1e-8)
    assert ebn0_for_ber(mod, float(p[2])) == pytest.approx(4.0, abs=1e-8)  # scalar in, float out


@pytest.mark.parametrize("mod", THEORY_MODULATIONS)
def test_curves_monotone_with_limits(mod):
    x = np.linspace(-10, 30, 81)
    p = ber(mod, x)
    # strictly decreasing while representable; the closed forms underflow to 0 only beyond the
    # double range (BPSK, QPSK, DBPSK above about 28 dB), and then stay 0
    nz = int(np.count_nonzero(p))
    assert np.all(p[:nz] > 0) and not p[nz:].any()
    assert np.all(np.diff(p[:nz]) < 0)
    if nz < p.size:
        assert p[nz - 1] < 1e-250
    assert ber(mod, -np.inf) == pytest.approx(0.5, abs=1e-12)  # guessing
    assert ber(mod, np.inf) == 0.0
    assert np.all(ser(mod, x) >= p * (1 - 1e-12))  # a bit error needs a symbol error
    assert ebn0_for_ber(mod, 0.0) == np.inf
    assert ebn0_for_ber(mod, 0.5) == -np.inf


def test_vectorised_shapes_and_scalars():
    grid = np.array([[4.0, 8.0], [12.0, 8.0]])
    for mod in THEORY_MODULATIONS:
        out = ber(mod, grid)
        assert isinstance(out, np.ndarray) and out.shape == grid.shape
        assert out[0, 1] == out[1, 1] == ber(mod, 8.0)
        assert isinstance(ber(mod, 8.0), float)
        assert isinstance(ser(mod, 8.0), float)
    assert ebn0_for_ber("8psk", np.array([[1e-3, 1e-6]])).shape == (1, 2)


def test_8psk_curve_of_fifty_points_matches_pointwise():
    # the plotting use case: an array of 50 points equals 50 scalar evaluations (speed is
    # measured in benchmarks, not asserted here). Not bit-identical: numpy's vectorised power
    # may round 10**(x/10) one ulp differently from the scalar path.
    x = np.linspace(0.0, 16.0, 50)
    curve = ber("8psk", x)
    np.testing.assert_allclose(curve, [ber("8psk", float(v)) for v in x], rtol=1e-13)


def test_unknown_modulation():
    with pytest.raises(UnknownNameError) as err:
        ber("64apsk", 10.0)
    assert err.value.name == "64apsk"
    assert err.value.known == sorted(THEORY_MODULATIONS)
    assert "modulation with a theory curve" in str(err.value)
    with pytest.raises(UnknownNameError):
        ebn0_for_ber("qam16", 1e-3)
    assert ber("QPSK", 8.0) == ber("qpsk", 8.0)  # names are case-insensitive


@pytest.mark.parametrize("target", [-1e-3, 0.6, float("nan"), "x"])
def test_inverse_rejects_non_probabilities(target):
    with pytest.raises(ConfigError, match="ber_target"):
        ebn0_for_ber("qpsk", target)


def test_bad_orders_and_labels():
    with pytest.raises(ConfigError, match="order"):
        qam_ber(32, 10.0)  # not square
    with pytest.raises(ConfigError, match="order"):
        psk_ser(6, 10.0)
    with pytest.raises(ConfigError, match="labels"):
        psk_ber(8, 10.0, labels=[0, 1, 2, 3, 4, 5, 6, 6])
    with pytest.raises(ConfigError, match="ebn0_db"):
        ber("qpsk", "ten")


def test_public_names():
    assert set(theory.__all__) >= {"THEORY_MODULATIONS", "ber", "ser", "ebn0_for_ber"}
    assert THEORY_MODULATIONS == ("bpsk", "pi/2-bpsk", "qpsk", "dbpsk", "dqpsk", "pi/4-dqpsk",
                                  "8psk", "16qam", "64qam", "256qam", "1024qam", "oqpsk",
                                  "16apsk", "32apsk")


# ---------------------------------------------------------------------------------------------
# the schemes with a symbol rule, and 1024QAM


def test_pi2_bpsk_is_bpsk():
    # 3GPP TS 38.211 5.1.1: pi/2-BPSK is BPSK turned by 90 degrees on odd symbols; a known
    # rotation does not change the error probability in circular AWGN (common practice).
    # BPSK Pb = Q(sqrt(2 Eb/N0)) (Proakis & Salehi, Digital Communications, 5th ed., ch. 4;
    # section from memory): 6 dB 2.388e-3, 10 dB 3.872e-6; 1e-5 at 9.588 dB.
    assert ber("pi/2-bpsk", 6.0) == pytest.approx(2.388e-3, rel=2e-4)
    assert ber("pi/2-bpsk", 10.0) == pytest.approx(3.872e-6, rel=2e-4)
    assert ebn0_for_ber("pi/2-bpsk", 1e-5) == pytest.approx(9.588, abs=5e-4)
    assert ser("pi/2-bpsk", 7.0) == ber("bpsk", 7.0)


def _pawula_beyond(theta, gs):
    """P(|phase difference| > theta) of two noisy vectors at Es/N0 = gs (Pawula, Rice and
    Roberts, IEEE Trans. Commun. 1982; from memory), by direct quadrature."""
    c = math.cos(theta)
    val, _ = integrate.quad(lambda t: math.exp(-gs * (1 - c * math.cos(t))) / (1 - c * math.cos(t)),
                            -math.pi / 2, math.pi / 2, epsabs=0, epsrel=1e-12)
    return math.sin(theta) / (2 * math.pi) * val


@pytest.mark.parametrize("db", [0.0, 4.0, 8.0, 10.0, 12.0, 14.0])
def test_dqpsk_marcum_form_equals_phase_difference_integral(db):
    # Gray DQPSK, differential detection: Pb = Q1(a, b) - I0(ab) exp(-(a^2+b^2)/2)/2
    # (Proakis, Digital Communications, differential PSK section; from memory) against the
    # phase-difference distribution: a +-90 degree error costs one bit, 180 degrees two, so
    # Pb = (P(|psi| > pi/4) + P(|psi| > 3pi/4)) / 2 at Es/N0 = 2 Eb/N0.
    gs = 2 * float(lin(db))
    want = (_pawula_beyond(math.pi / 4, gs) + _pawula_beyond(3 * math.pi / 4, gs)) / 2
    assert ber("dqpsk", db) == pytest.approx(want, rel=1e-7)
    assert ber("pi/4-dqpsk", db) == ber("dqpsk", db)  # the pi/4 offset does not matter
    assert ser("dqpsk", db) == pytest.approx(_pawula_beyond(math.pi / 4, gs), rel=1e-7)


def test_dpsk_ser_of_two_points_is_dbpsk_published():
    # DBPSK Pb = exp(-Eb/N0)/2 (Proakis & Salehi, DPSK section; section from memory):
    # 1e-3 at 7.934 dB, 1e-5 at 10.342 dB
    assert theory.dpsk_ser(2, 7.934) == pytest.approx(1e-3, rel=2e-3)
    assert theory.dpsk_ser(2, 10.342) == pytest.approx(1e-5, rel=2e-3)


def test_dqpsk_penalty_over_coherent_qpsk():
    # common practice (from memory): differential detection of DQPSK costs about 2.3 dB
    # against coherent Gray QPSK at BER 1e-5 (9.588 dB coherent)
    gap = ebn0_for_ber("dqpsk", 1e-5) - ebn0_for_ber("qpsk", 1e-5)
    assert 2.2 < gap < 2.5


# ---------------------------------------------------------------------------------------------
# any constellation by integration over the decision regions (APSK)


@pytest.mark.parametrize("mod,conv", [("qpsk", "3gpp"), ("16qam", "3gpp"), ("8psk", "dvb-s2"),
                                      ("64qam", "ieee802.11")])
def test_region_integration_reproduces_the_closed_forms(mod, conv):
    # Gray QPSK Q(sqrt(2 Eb/N0)) (Proakis & Salehi, ch. 4, from memory), square QAM Cho & Yoon
    # (IEEE Trans. Commun. 50(7), 2002), 8PSK by the exact phase density: the integration over
    # the Voronoi cells must give the same BER
    from modemverify.schemes.conventions import get_convention
    pts = get_convention(conv, mod).points
    for db in [0.0, 4.0, 8.0, 12.0]:
        assert theory.constellation_ber(pts, db) == pytest.approx(ber(mod, db), rel=1e-6)


def test_16apsk_region_integration_inside_a_monte_carlo_interval():
    # no closed form for APSK: an independent Monte Carlo of nearest-point decisions on the
    # DVB-S2 16APSK table (ETSI EN 302 307-1 5.4.3, gamma 3.15) must hold the integrated BER
    # inside its 99.9 % Clopper-Pearson interval (Clopper & Pearson, Biometrika 1934)
    from modemverify.schemes.conventions import get_convention
    pts = get_convention("dvb-s2", "16apsk").points
    db, n = 8.0, 200_000
    rng = np.random.default_rng(2026)
    sent = rng.integers(0, 16, n)
    n0 = 1.0 / (4 * lin(db))
    y = pts[sent] + np.sqrt(n0 / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    dec = np.abs(y[:, None] - pts[None, :]).argmin(axis=1)
    errors = int(np.unpackbits(np.bitwise_xor(sent, dec).astype(np.uint8)).sum())
    ci = stats.binomtest(errors, 4 * n).proportion_ci(confidence_level=0.999)
    assert ci.low < theory.constellation_ber(pts, db) < ci.high
