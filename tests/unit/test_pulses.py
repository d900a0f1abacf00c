"""Pulse shapes: taps against independent libraries, Nyquist and energy properties, spectra.

Sources are named beside each check (document and section); "from memory" marks a section or
value not read from the document, and computed check values say how they were computed.
Independent implementations: scikit-commpy
(``commpy.filters.rrcosfilter``) and komm (``RaisedCosinePulse``, its ``root()``, and
``GaussianPulse``).
"""

import math

import numpy as np
import pytest
from scipy import integrate, signal, special, stats

from modemverify.dsp.psd import occupied_bandwidth, welch_psd, x_db_bandwidth
from modemverify.dsp.pulses import PULSE_SHAPES, PulseShape, pulse_taps
from modemverify.errors import ConfigError, UnknownNameError
from modemverify.vectors.channels import Awgn

commpy_filters = pytest.importorskip("commpy.filters")
komm = pytest.importorskip("komm")


def unit(h):
    h = np.asarray(h, dtype=float)
    return h / np.sqrt(np.sum(h ** 2))


def qpsk(rng, n):
    return ((2 * rng.integers(0, 2, n) - 1) + 1j * (2 * rng.integers(0, 2, n) - 1)) / np.sqrt(2)


# ---------------------------------------------------------------------------------------------
# taps


@pytest.mark.parametrize("shape, kw", [("rrc", {"rolloff": 0.35}), ("rc", {"rolloff": 0.5}),
                                       ("gaussian", {"bt": 0.3}), ("rectangular", {})])
@pytest.mark.parametrize("sps", [2, 4, 8])
def test_taps_unit_energy_odd_length_peak_in_middle(shape, kw, sps):
    h = pulse_taps(shape, sps, **kw)
    assert h.dtype == np.float64
    assert np.sum(h ** 2) == pytest.approx(1.0, abs=1e-14)
    if shape == "rectangular":
        assert h.size == sps and np.all(h == h[0])
    else:
        span = 10 if shape in ("rrc", "rc") else 4
        assert h.size == span * sps + 1
        assert int(np.argmax(h)) == span * sps // 2
        np.testing.assert_allclose(h, h[::-1], atol=1e-15)  # even pulse


@pytest.mark.parametrize("alpha", [0.22, 0.25, 0.35, 0.5, 1.0])
@pytest.mark.parametrize("sps, span", [(8, 10), (4, 16)])
def test_rrc_matches_commpy(alpha, sps, span):
    # scikit-commpy's rrcosfilter samples t = (n - N/2) / Fs for n = 0 ... N-1 (Ts = 1): with
    # N = span*sps + 2 its grid runs from -(span*sps/2 + 1)/sps to span*sps/2/sps, so dropping
    # its first tap gives our symmetric grid. alpha = 0.25, 0.5 and 1.0 put grid points on the
    # singularities t = +-Ts/(4 alpha) (at sps 8 and 4), which commpy special-cases too.
    _, ref = commpy_filters.rrcosfilter(span * sps + 2, alpha, 1.0, float(sps))
    np.testing.assert_allclose(pulse_taps("rrc", sps, rolloff=alpha, span=span),
                               unit(ref[1:]), atol=1e-12)


@pytest.mark.parametrize("alpha", [0.0, 0.25, 0.35, 0.5, 1.0])
def test_rrc_matches_komm_root_raised_cosine(alpha):
    # komm: RaisedCosinePulse(rolloff).root() is the RRC pulse; taps(sps, span=(a, b)) samples
    # t = n/sps for n = a*sps ... b*sps.
    ref = komm.RaisedCosinePulse(rolloff=alpha).root().taps(8, span=(-5, 5))
    np.testing.assert_allclose(pulse_taps("rrc", 8, rolloff=alpha, span=10), unit(ref),
                               atol=1e-9)


@pytest.mark.parametrize("alpha", [0.0, 0.25, 0.35, 0.5, 1.0])
def test_rc_matches_komm(alpha):
    # alpha = 0.25 and 0.5 put grid points on the singularity t = +-Ts/(2 alpha).
    ref = komm.RaisedCosinePulse(rolloff=alpha).taps(8, span=(-5, 5))
    np.testing.assert_allclose(pulse_taps("rc", 8, rolloff=alpha, span=10), unit(ref),
                               atol=1e-12)


@pytest.mark.parametrize("bt", [0.25, 0.3, 0.5])
def test_gaussian_matches_komm(bt):
    # komm's GaussianPulse(half_power_bandwidth=B) has spectrum exp(-(ln2/2)(f/B)^2), 3 dB down
    # at f = B: with Ts = 1 that is the GMSK filter of bandwidth-time product B*Ts.
    ref = komm.GaussianPulse(half_power_bandwidth=bt).taps(8, span=(-2, 2))
    np.testing.assert_allclose(pulse_taps("gaussian", 8, bt=bt), unit(ref), atol=1e-12)


def test_gaussian_bt_is_the_3db_bandwidth():
    # GMSK definition: B is the 3 dB bandwidth of the Gaussian filter (Murota & Hirade 1981,
    # from memory). |H(B)|^2 / |H(0)|^2 = 1/2 on the closed form and on long taps.
    p = PulseShape("gaussian", 16, bt=0.3, span=8)
    for truncated in (False, True):
        s = p.psd(np.array([0.0, 0.3]), truncated=truncated)
        assert s[1] / s[0] == pytest.approx(0.5, rel=1e-6)


@pytest.mark.parametrize("shape, alpha, sps", [("rrc", 0.25, 8), ("rrc", 0.5, 4),
                                               ("rc", 0.25, 8), ("rc", 0.5, 4)])
def test_singular_taps_equal_the_limit(shape, alpha, sps):
    # The closed forms are 0/0 at t = 1/(4a) (rrc) or 1/(2a) (rc); the tap there must equal the
    # limit, i.e. lie between the formula's values just either side (checked at +-1e-5 Ts,
    # where the formula is still accurate and the pulse is smooth).
    span = 10
    c = span * sps // 2
    t0 = 1 / (4 * alpha) if shape == "rrc" else 1 / (2 * alpha)
    k = c + round(t0 * sps)
    raw = pulse_taps(shape, sps, rolloff=alpha, span=span)

    def formula(t):
        if shape == "rrc":
            a = alpha
            return ((np.sin(np.pi * t * (1 - a)) + 4 * a * t * np.cos(np.pi * t * (1 + a)))
                    / (np.pi * t * (1 - (4 * a * t) ** 2)))
        return np.sinc(t) * np.cos(np.pi * alpha * t) / (1 - (2 * alpha * t) ** 2)

    # Undo the energy normalisation using the peak tap (t = 0 is well conditioned for rc; for
    # rrc its value is the limit 1 - a + 4a/pi).
    peak = 1 - alpha + 4 * alpha / np.pi if shape == "rrc" else 1.0
    scale = raw[c] / peak
    lo, hi = formula(t0 - 1e-5), formula(t0 + 1e-5)
    assert raw[k] / scale == pytest.approx((lo + hi) / 2, abs=1e-8)


def test_rectangular_taps():
    np.testing.assert_array_equal(pulse_taps("rectangular", 4), [0.5, 0.5, 0.5, 0.5])


# ---------------------------------------------------------------------------------------------
# Nyquist property of the matched cascade


@pytest.mark.parametrize("alpha", [0.22, 0.35, 0.5])
def test_rrc_cascade_is_nyquist_to_truncation_accuracy(alpha):
    # rrc * rrc is the raised cosine, which is zero at every non-zero multiple of Ts (Nyquist
    # criterion; Proakis & Salehi, Digital Communications, ch. 9, from memory). A band-limited
    # pulse sampled above Nyquist convolves exactly like the continuous one, so the only ISI is
    # from cutting the taps at +-span/2. Write the long pulse as p = a + b (a inside the span):
    # a*a = p*p - 2 a*b - b*b, so ISI(a/|a|) <= (2 |a| |b| + |b|^2) / |a|^2 (Cauchy-Schwarz).
    sps, span = 8, 10
    long = pulse_taps("rrc", sps, rolloff=alpha, span=2000)
    c, half = long.size // 2, span * sps // 2
    a = long[c - half:c + half + 1]
    b = np.concatenate([long[:c - half], long[c + half + 1:]])
    na, nb = np.linalg.norm(a), np.linalg.norm(b)
    bound = (2 * na * nb + nb ** 2) / na ** 2

    h = pulse_taps("rrc", sps, rolloff=alpha, span=span)
    g = np.convolve(h, h)
    at_symbols = g[g.size // 2::sps]
    assert at_symbols[0] == pytest.approx(1.0, abs=1e-12)  # unit energy: peak = sum(h^2)
    assert np.max(np.abs(at_symbols[1:])) <= bound
    # measured: 1.3e-3, 5.8e-3, 4.6e-3 for alpha 0.22, 0.35, 0.5 at span 10
    assert np.max(np.abs(at_symbols[1:])) < 1e-2
    # with the long pulse itself the ISI vanishes (to its own, far smaller, truncation)
    gl = signal.fftconvolve(long, long)
    assert np.max(np.abs(gl[gl.size // 2::sps][1:200])) < 1e-8


def test_rrc_cascade_is_the_raised_cosine():
    # Same identity seen whole: rrc * rrc equals the rc pulse at every sample (both formulas
    # checked against each other; Proakis & Salehi ch. 9, from memory).
    sps = 8
    long = pulse_taps("rrc", sps, rolloff=0.35, span=400)
    g = signal.fftconvolve(long, long)
    c = g.size // 2
    rc = pulse_taps("rc", sps, rolloff=0.35, span=10)
    mid = g[c - 40:c + 41]
    np.testing.assert_allclose(mid / mid[40], rc / rc[40], atol=2e-5)


# ---------------------------------------------------------------------------------------------
# shaping and matched filtering


def test_shape_lengths_and_delay_conventions():
    p = PulseShape("rrc", 8, rolloff=0.35, span=10)
    assert (p.delay, p.tail, p.output_length(5)) == (40.0, 80, 120)
    x = p.shape_symbols(np.array([0, 0, 1, 0, 0], dtype=complex))
    assert x.size == 120
    # symbol 2 peaks at 2*sps + delay; the last sps-1 samples are the zero run-out
    assert int(np.argmax(np.abs(x))) == 2 * 8 + 40
    assert np.all(x[-7:] == 0)
    r = PulseShape("rectangular", 4)
    assert (r.delay, r.tail) == (1.5, 0)
    np.testing.assert_array_equal(r.shape_symbols(np.array([2.0, -2.0])),
                                  [1, 1, 1, 1, -1, -1, -1, -1])


def test_rrc_roundtrip_returns_symbols_up_to_truncation_isi():
    rng = np.random.default_rng(20240501)
    s = qpsk(rng, 4000)
    p = PulseShape("rrc", 8, rolloff=0.35, span=32)
    y = p.matched_filter(p.shape_symbols(s), s.size)
    # Worst case ISI is bounded by the sum of |ISI taps| (measured 7e-3 at span 32 for unit
    # symbols); the rms error is the ISI power, about -55 dB here.
    h = p.taps
    g = np.convolve(h, h)
    isi = np.abs(g[g.size // 2::8][1:])
    assert np.max(np.abs(y - s)) <= 2 * isi.sum() + 1e-12
    assert np.sqrt(np.mean(np.abs(y - s) ** 2)) < 3e-3


def test_rectangular_roundtrip_is_exact():
    rng = np.random.default_rng(7)
    s = qpsk(rng, 100)
    p = PulseShape("rectangular", 8)
    np.testing.assert_allclose(p.matched_filter(p.shape_symbols(s), 100), s, atol=1e-14)


@pytest.mark.parametrize("shape, kw", [("rc", {"rolloff": 0.35}), ("gaussian", {"bt": 0.3})])
def test_non_nyquist_matched_filters_leave_isi(shape, kw):
    # Documented behaviour: rc and gaussian matched-filter cascades are not Nyquist, so a plain
    # matched filter leaves ISI of a few percent (not an equaliser).
    rng = np.random.default_rng(11)
    s = qpsk(rng, 2000)
    p = PulseShape(shape, 8, **kw)
    y = p.matched_filter(p.shape_symbols(s), s.size)
    assert np.sqrt(np.mean(np.abs(y - s) ** 2)) > 0.02


def test_matched_filter_accepts_short_or_long_input():
    rng = np.random.default_rng(3)
    s = qpsk(rng, 50)
    p = PulseShape("rrc", 4, rolloff=0.5, span=8)
    x = p.shape_symbols(s)
    full = p.matched_filter(x, 50)
    np.testing.assert_allclose(p.matched_filter(np.concatenate([x, np.ones(9)]), 50), full)
    # Tail dropped (zero beyond the end): symbol k uses input samples k*sps ... k*sps + 32,
    # so exactly the last span = 8 symbols change.
    cut = p.matched_filter(x[:50 * 4], 50)
    np.testing.assert_allclose(cut[:42], full[:42], atol=1e-12)
    assert np.all(np.abs(cut[42:] - full[42:]) > 0)


def test_energy_convention_matches_awgn_nominal():
    # modemverify.vectors.channels.Awgn, energy='nominal': Es = sps * mean(|x|^2) = 1 for a
    # unit-energy shaper, and the unit-energy matched filter turns per-sample complex noise of
    # variance N0 into per-symbol noise of variance N0 (= Awgn.noise_variance()).
    rng = np.random.default_rng(99)
    sps, n = 8, 20000
    p = PulseShape("rrc", sps, rolloff=0.35, span=10)
    s = qpsk(rng, n)
    x = p.shape_symbols(s)
    es = sps * np.mean(np.abs(x[:n * sps]) ** 2)
    # i.i.d. symbols: the estimate's relative standard error is about 1/sqrt(n) (PAPR ~ 2)
    assert es == pytest.approx(1.0, abs=5 * 2 / math.sqrt(n))
    awgn = Awgn(ebn0_db=5.0, bits_per_symbol=2, samples_per_symbol=sps)
    noise = awgn.apply(np.zeros(x.size, dtype=complex), rng)
    w = p.matched_filter(noise, n)
    n0 = awgn.noise_variance()
    # sum |w|^2 / (N0/2) ~ chi-square with 2n degrees of freedom: symbol-spaced samples of
    # rrc-filtered white noise are uncorrelated because the cascade is Nyquist.
    m = w.size
    stat = 2 * np.sum(np.abs(w) ** 2) / n0
    lo, hi = stats.chi2.ppf([1e-6, 1 - 1e-6], 2 * m)
    assert lo < stat < hi


# ---------------------------------------------------------------------------------------------
# spectra and occupied bandwidth


@pytest.mark.parametrize("shape, kw", [("rrc", {"rolloff": 0.35}), ("rc", {"rolloff": 0.35}),
                                       ("gaussian", {"bt": 0.3}), ("rectangular", {})])
def test_theoretical_psd_integrates_to_one(shape, kw):
    p = PulseShape(shape, 8, **kw)
    f = lambda v: float(p.psd(np.array([v]))[0])  # noqa: E731
    if shape == "rectangular":
        # integral of sinc^2 over the real line is 1; sum per lobe, then the 1/(pi^2 v) tail
        total = sum(integrate.quad(f, k, k + 1)[0] for k in range(-400, 400))
        assert total == pytest.approx(1.0, abs=2 / (np.pi ** 2 * 400))
    else:
        assert integrate.quad(f, -5, 5, points=[-0.325, 0.325], limit=200)[0] == \
            pytest.approx(1.0, abs=1e-9)
    # the sampled spectrum integrates to 1 over one period (Parseval with unit-energy taps)
    v = np.linspace(-4, 4, 16001)[:-1]
    assert np.mean(p.psd(v, truncated=True)) * 8 == pytest.approx(1.0, abs=1e-9)


@pytest.mark.parametrize("alpha", [0.22, 0.35, 0.5, 1.0])
def test_raised_cosine_spectrum_confined_and_nyquist_symmetric(alpha):
    # Standard raised-cosine result: the spectrum is confined to |f| <= (1+alpha) Rs/2, the
    # absolute (100 %) bandwidth (Proakis & Salehi, Digital Communications, ch. 9, chapter from
    # memory); and the Nyquist criterion in
    # frequency: X(f) + X(Rs - f) = X(0) on [0, Rs] (vestigial symmetry about Rs/2).
    p = PulseShape("rrc", 8, rolloff=alpha)
    edge = (1 + alpha) / 2
    f = np.linspace(0, 3, 3001)
    s = p.psd(f)
    assert np.all(s[f > edge + 1e-12] == 0)
    assert np.all(s[f < edge - 1e-3] > 0)
    g = np.linspace(0, 1, 1001)
    np.testing.assert_allclose(p.psd(g) + p.psd(1 - g), 1.0, atol=1e-12)
    np.testing.assert_allclose(PulseShape("rc", 8, rolloff=alpha).psd(f),
                               s ** 2 / (1 - alpha / 4), atol=1e-15)


@pytest.mark.parametrize("alpha, obw", [(0.22, 1.0849), (0.25, 1.1031), (0.35, 1.1667),
                                        (0.5, 1.2680), (1.0, 1.6330)])
def test_rrc_99_percent_occupied_bandwidth(alpha, obw):
    # 99 % occupied bandwidth of the theoretical PSD (the raised-cosine spectrum, which is the
    # transmit PSD for i.i.d. zero-mean symbols; Proakis & Salehi ch. 9, from memory), computed
    # independently with scipy (numerical integration of the spectrum and a root find), 4
    # decimals; for alpha = 0.35 a Welch PSD of simulated RRC-shaped QPSK gives 1.168 Rs. The
    # definition (0.5 % of the power beyond each limit) is ITU Radio Regulations No. 1.153,
    # repeated in Rec. ITU-R SM.328 (from memory). The absolute bandwidth (1 + alpha) Rs is NOT
    # the 99 % bandwidth.
    p = PulseShape("rrc", 8, rolloff=alpha)
    w = p.occupied_bandwidth(0.99)
    assert w == pytest.approx(obw, abs=5e-5)
    assert w < 1 + alpha


def test_gaussian_occupied_bandwidth_closed_form():
    # For S(f) ~ exp(-(f/b)^2), b = bt/sqrt(ln 2), the power within +-w/2 is erf(w/(2b)), so the
    # 99 % width is 2 b erfinv(0.99) (scipy.special; independent of the quad/root search).
    bt = 0.3
    b = bt / math.sqrt(math.log(2))
    assert PulseShape("gaussian", 8, bt=bt).occupied_bandwidth(0.99) == \
        pytest.approx(2 * b * special.erfinv(0.99), rel=1e-9)


def test_rectangular_pulse_bandwidths():
    # S(f) = Ts sinc^2(f Ts) (Sklar, Digital Communications, 2nd ed., sec. 1.7.2, bandwidth
    # criteria; table from memory, where the 99 % width is given as about 20.6/Ts). Values
    # computed from that spectrum: main lobe 0.902823 of the power (Si-function closed form and
    # quadrature agree), first nulls at +-1/Ts (null-to-null 2/Ts), half-power width 0.886/Ts,
    # 90 % width 1.697/Ts, 99 % 20.57/Ts (numerical integration and root finds).
    p = PulseShape("rectangular", 8)
    main = integrate.quad(lambda v: float(p.psd(np.array([v]))[0]), -1, 1)[0]
    assert main == pytest.approx(0.902823, abs=1e-6)
    assert p.psd(np.array([-1.0, 1.0])) == pytest.approx([0.0, 0.0], abs=1e-30)
    f = np.linspace(-3, 3, 60001)
    assert x_db_bandwidth(f, p.psd(f), 10 * math.log10(2))[0] == pytest.approx(0.886, abs=5e-4)
    assert p.occupied_bandwidth(0.90) == pytest.approx(1.697, abs=5e-4)
    assert p.occupied_bandwidth(0.99) == pytest.approx(20.57, abs=5e-3)


def test_sampled_hold_bandwidth_tends_to_the_continuous_value():
    # A sampled rectangular hold has the aliased sinc^2 (Dirichlet) spectrum
    # sin^2(pi f) / (sps^2 sin^2(pi f / sps)) (scipy.special.diric squared), whose 99 % width
    # approaches 20.57/Ts only as sps grows: the tails beyond the sample rate fold back.
    widths = []
    for sps in (64, 256, 1024):
        p = PulseShape("rectangular", sps)
        f = np.linspace(-3.3, 3.3, 777)
        np.testing.assert_allclose(p.psd(f, truncated=True),
                                   special.diric(2 * np.pi * f / sps, sps) ** 2, atol=1e-12)
        widths.append(p.occupied_bandwidth(truncated=True))
    assert widths[0] < widths[1] < widths[2] < 20.57  # 18.91, 20.47, 20.57 (measured)
    assert widths[2] == pytest.approx(20.57, rel=1e-3)


def test_truncated_rrc_spectrum_approaches_the_closed_form():
    p = PulseShape("rrc", 16, rolloff=0.35, span=64)
    f = np.linspace(-2, 2, 801)
    assert np.max(np.abs(p.psd(f, truncated=True) - p.psd(f))) < 2e-3
    # the untruncated value is 1.1667 Rs (see test_rrc_99_percent_occupied_bandwidth); a Welch
    # PSD of simulated QPSK with these taps (span 64, 16 samples/symbol) gives 1.168 Rs
    assert p.occupied_bandwidth(truncated=True) == pytest.approx(1.1667, abs=1e-3)


def test_welch_obw_of_rrc_qpsk_matches_theory():
    # A Welch PSD of simulated RRC-shaped QPSK (span 64, 16 sps; numpy and scipy.signal.welch,
    # computed independently of modemverify) gives a 99 % width of 1.168 Rs against 1.1667
    # from the theoretical PSD.
    rng = np.random.default_rng(5150)
    p = PulseShape("rrc", 16, rolloff=0.35, span=64)
    x = p.shape_symbols(qpsk(rng, 1 << 16))
    f, s = welch_psd(x, 16)
    w, lo, hi = occupied_bandwidth(f, s)
    assert w == pytest.approx(1.168, abs=0.006)
    assert lo == pytest.approx(-hi, abs=0.01)


# ---------------------------------------------------------------------------------------------
# argument checks


def test_bad_arguments_raise_config_errors():
    with pytest.raises(UnknownNameError, match="pulse shape.*'rrcc'.*rrc"):
        pulse_taps("rrcc", 8, rolloff=0.35)
    with pytest.raises(ConfigError, match="rolloff.*required"):
        pulse_taps("rrc", 8)
    with pytest.raises(ConfigError, match=r"rolloff.*\[0, 1\].*1.5"):
        pulse_taps("rrc", 8, rolloff=1.5)
    with pytest.raises(ConfigError, match="bt"):
        pulse_taps("gaussian", 8)
    with pytest.raises(ConfigError, match="bt.*only applies"):
        pulse_taps("rrc", 8, rolloff=0.3, bt=0.3)
    with pytest.raises(ConfigError, match="span.*even"):
        pulse_taps("rrc", 3, rolloff=0.3, span=5)
    with pytest.raises(ConfigError, match="sps"):
        PulseShape("rrc", 0, rolloff=0.3)
    with pytest.raises(ConfigError, match="fraction"):
        PulseShape("rrc", 8, rolloff=0.3).occupied_bandwidth(1.0)
    assert set(PULSE_SHAPES) == {"rrc", "rc", "rectangular", "gaussian"}


@pytest.mark.parametrize("shape,kw", [("rrc", {"rolloff": 0.35, "span": 10}),
                                      ("rc", {"rolloff": 0.5, "span": 6}),
                                      ("gaussian", {"bt": 0.5, "span": 4})])
@pytest.mark.parametrize("sps", [2, 4, 8])
def test_polyphase_filters_equal_scipy_upfirdn(shape, kw, sps):
    # the BLAS polyphase shaper and matched filter against scipy.signal.upfirdn (the
    # general-purpose reference implementation of the same convolutions)
    from scipy import signal

    p = PulseShape(shape, sps, **kw)
    rng = np.random.default_rng(sps)
    n = 40_000  # crosses the shaper's chunk boundary
    s = rng.standard_normal(n) + 1j * rng.standard_normal(n)
    y = p.shape_symbols(s)
    ref = signal.upfirdn(p.taps, s, up=sps)
    np.testing.assert_allclose(y[:ref.size], ref, atol=1e-12)
    assert not np.any(y[ref.size:])
    x = y + 0.1 * (rng.standard_normal(y.size) + 1j * rng.standard_normal(y.size))
    mf = signal.upfirdn(np.conj(p.taps[::-1]), x, down=sps)[p.span:p.span + n]
    np.testing.assert_allclose(p.matched_filter(x, n), mf, atol=1e-12)
