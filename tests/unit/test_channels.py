"""Channel stages: AWGN calibration, impairments, composition and device-file configuration.

Conventions (common practice): complex AWGN has variance N0 (N0/2 per real dimension);
Eb = Es / k. Statistical checks use exact distributions from scipy.stats at a stated confidence
with fixed seeds, so they are deterministic.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import yaml
from scipy import stats

from modemverify.errors import ConfigError, UnknownNameError
from modemverify.vectors.channels import (
    CHANNEL_KINDS,
    Awgn,
    Channel,
    DcOffset,
    FrequencyOffset,
    IqImbalance,
    PhaseOffset,
    Quantise,
    channel_from_config,
)

ALPHA = 1e-3  # two-sided level of every statistical check below


def rng(seed: int) -> np.random.Generator:
    return np.random.default_rng(np.random.SeedSequence(seed))


def qpsk(n: int, seed: int) -> np.ndarray:
    """Unit-energy QPSK (3GPP TS 38.211 5.1.3 mapping) from random bits."""
    b = rng(seed).integers(0, 2, size=(n, 2))
    return ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1])) / math.sqrt(2)


def unit_energy_rect(symbols: np.ndarray, sps: int) -> np.ndarray:
    """Rectangular pulse with sum(p**2) = 1: each symbol's sps samples carry its energy."""
    return np.repeat(symbols, sps) / math.sqrt(sps)


def expected_n0(ebn0_db: float, k: int, es: float = 1.0) -> float:
    return es / k / 10 ** (ebn0_db / 10)


def chi2_interval(dof: int) -> tuple[float, float]:
    return stats.chi2.ppf(ALPHA / 2, dof), stats.chi2.ppf(1 - ALPHA / 2, dof)


# --------------------------------------------------------------------------------------------
# AWGN


@pytest.mark.parametrize("ebn0_db, k, sps, seed", [(0.0, 1, 1, 1), (6.0, 2, 1, 2), (10.0, 4, 8, 3),
                                                  (-3.0, 6, 4, 4), (3.0, 8, 2, 5)])
def test_noise_variance_is_n0_per_sample(ebn0_db, k, sps, seed):
    n = 100_000
    x = unit_energy_rect(qpsk(n // sps, seed), sps)
    awgn = Awgn(ebn0_db, k, sps)
    n0 = expected_n0(ebn0_db, k)
    assert awgn.noise_variance() == pytest.approx(n0, rel=1e-12)
    w = awgn.apply(x, rng(100 + seed)) - x
    # sum(Re(w)^2) / (N0/2) ~ chi-square(n), likewise Im; and sum(abs(w)^2) / (N0/2) ~ chi2(2n).
    lo, hi = chi2_interval(n)
    for part in (w.real, w.imag):
        assert lo <= np.sum(part ** 2) / (n0 / 2) <= hi
    lo, hi = chi2_interval(2 * n)
    assert lo <= np.sum(np.abs(w) ** 2) / (n0 / 2) <= hi
    # I and Q noise independent: Pearson correlation test.
    assert stats.pearsonr(w.real, w.imag).pvalue > ALPHA


def test_measured_energy_agrees_with_nominal_for_unit_energy_input():
    for sps in (1, 4):
        x = unit_energy_rect(qpsk(4096, 7), sps)  # every symbol has energy exactly 1
        nominal, measured = Awgn(5.0, 2, sps), Awgn(5.0, 2, sps, energy="measured")
        assert measured.symbol_energy(x) == pytest.approx(1.0, rel=1e-12)
        assert measured.noise_variance(x) == pytest.approx(nominal.noise_variance(), rel=1e-12)
        assert np.allclose(measured.apply(x, rng(8)), nominal.apply(x, rng(8)), rtol=0,
                           atol=1e-12)


def test_measured_energy_scales_with_the_input():
    x = qpsk(4096, 9)
    nominal, measured = Awgn(5.0, 2), Awgn(5.0, 2, energy="measured")
    assert measured.noise_variance(3 * x) == pytest.approx(9 * nominal.noise_variance(), rel=1e-12)
    # Same seed: the measured-energy noise is exactly 3 times the nominal one.
    noise_nominal = nominal.apply(x, rng(10)) - x
    noise_measured = measured.apply(3 * x, rng(10)) - 3 * x
    assert np.allclose(noise_measured, 3 * noise_nominal, rtol=1e-12, atol=1e-12)
    # nominal_es rescales Es the same way.
    assert Awgn(5.0, 2, nominal_es=9.0).noise_variance() == pytest.approx(
        measured.noise_variance(3 * x), rel=1e-12)
    # Es = mean(abs(x)^2) * sps, also for a strided view and sps > 1.
    y = np.linspace(0.1, 2.0, 999) * np.exp(1j * np.arange(999))
    assert Awgn(5.0, 2, 3, energy="measured").symbol_energy(y[::2]) == pytest.approx(
        3 * np.mean(np.abs(y[::2]) ** 2), rel=1e-12)
    with pytest.raises(ConfigError) as info:
        measured.noise_variance()
    assert info.value.key == "samples"
    with pytest.raises(ConfigError):
        measured.apply(np.zeros(8, complex), rng(0))


def theory_bpsk(ebn0_db: float) -> float:
    # Pb = Q(sqrt(2 Eb/N0)) with Q = scipy.stats.norm.sf: J. G. Proakis and M. Salehi, Digital
    # Communications, 5th ed., ch. 4 (section from memory). The published values of this curve
    # are checked against modemverify.schemes.theory in test_theory.py
    # (test_bpsk_values_published); here it is the independent yardstick for the channel.
    return stats.norm.sf(math.sqrt(2 * 10 ** (ebn0_db / 10)))


def _ber_in_interval(errors: int, n_bits: int, ebn0_db: float) -> None:
    ci = stats.binomtest(errors, n_bits).proportion_ci(confidence_level=1 - ALPHA,
                                                      method="exact")  # Clopper-Pearson
    assert ci.low <= theory_bpsk(ebn0_db) <= ci.high, (errors / n_bits, ci)


@pytest.mark.parametrize("ebn0_db", [4.0, 6.0])
def test_bpsk_monte_carlo_matches_theory(ebn0_db):
    n = 400_000
    bits = rng(11).integers(0, 2, n)
    x = (1.0 - 2.0 * bits).astype(np.complex128)  # BPSK, Es = Eb = 1
    y = Awgn(ebn0_db, 1).apply(x, rng(12))
    _ber_in_interval(int(np.count_nonzero((y.real < 0) != bits)), n, ebn0_db)


@pytest.mark.parametrize("ebn0_db", [4.0, 6.0])
def test_gray_qpsk_oversampled_integrate_and_dump_matches_theory(ebn0_db):
    # Gray QPSK has the BPSK bit error rate, each of I and Q being a BPSK channel (Proakis &
    # Salehi, Digital Communications, 5th ed., ch. 4; section from memory). With sps = 8 and a
    # unit-energy rectangular pulse, integrate-and-dump must see Es/N0: this checks the
    # per-sample calibration (a noise level off by a factor sps would move the BER by decades).
    sps, n_sym = 8, 100_000
    b = rng(13).integers(0, 2, size=(n_sym, 2))
    s = ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1])) / math.sqrt(2)
    y = Awgn(ebn0_db, 2, sps).apply(unit_energy_rect(s, sps), rng(14))
    z = y.reshape(-1, sps).sum(axis=1) / math.sqrt(sps)  # matched filter at the symbol instant
    errors = np.count_nonzero((z.real < 0) != b[:, 0]) + np.count_nonzero((z.imag < 0) != b[:, 1])
    _ber_in_interval(int(errors), 2 * n_sym, ebn0_db)


def test_reproducible_from_seed_sequence_and_out_buffer():
    x = unit_energy_rect(qpsk(5000, 15), 2)
    ch = Channel((Awgn(4.0, 2, 2), PhaseOffset(10), Quantise(8, 2.0)))
    a = ch.apply(x, np.random.default_rng(np.random.SeedSequence(2024)))
    b = ch.apply(x, np.random.default_rng(np.random.SeedSequence(2024)))
    assert a.tobytes() == b.tobytes()  # bit-identical
    c = ch.apply(x, np.random.default_rng(np.random.SeedSequence(2025)))
    assert not np.array_equal(a, c)
    # The preallocated and in-place paths draw exactly the same noise.
    awgn = Awgn(4.0, 2, 2)
    fresh = awgn.apply(x, rng(16))
    out = np.empty_like(x)
    assert awgn.apply(x, rng(16), out=out) is out and out.tobytes() == fresh.tobytes()
    inplace = x.copy()
    awgn.apply(inplace, rng(16), out=inplace)
    assert inplace.tobytes() == fresh.tobytes()
    assert np.array_equal(x, unit_energy_rect(qpsk(5000, 15), 2))  # input untouched
    bad_outs = [(x, np.empty(x.size, np.complex64)),  # wrong dtype
                (x, np.empty(x.size + 1, complex)),  # wrong length
                (x[::2], out[::2]),  # not contiguous
                (x[:-1], x[1:])]  # overlaps the input by all but one sample
    for samples, bad in bad_outs:
        with pytest.raises(ConfigError) as info:
            awgn.apply(samples, rng(0), out=bad)
        assert info.value.key == "out"
    assert awgn.apply(np.zeros(0, complex), rng(0)).size == 0


# --------------------------------------------------------------------------------------------
# deterministic impairments


@pytest.mark.parametrize("degrees", [-170.0, -45.0, 0.0, 10.0, 90.0, 179.5])
def test_phase_offset_rotates_by_the_exact_angle(degrees):
    x = qpsk(64, 17) * np.linspace(0.5, 2.0, 64)
    y = PhaseOffset(degrees).apply(x, None)
    assert np.allclose(np.abs(y), np.abs(x), rtol=1e-14)
    assert np.allclose(np.angle(y * np.conj(x)), math.radians(degrees), rtol=0, atol=1e-12)
    assert PhaseOffset(90).apply(np.array([1.0 + 0j]), None)[0] == pytest.approx(1j, abs=1e-15)


def test_frequency_offset_ramp_and_block_continuity():
    f = 0.013
    x = qpsk(1000, 18)
    y = FrequencyOffset(f).apply(x, None)
    assert np.allclose(y / x, np.exp(2j * np.pi * f * np.arange(1000)), rtol=0, atol=1e-12)
    steps = np.angle(y[1:] / x[1:] * np.conj(y[:-1] / x[:-1]))
    assert np.allclose(steps, 2 * np.pi * f, atol=1e-12)
    # Stateless but continuous when each block is told where it starts.
    m = 377
    parts = np.concatenate((FrequencyOffset(f).apply(x[:m], None),
                            FrequencyOffset(f, start_sample=m).apply(x[m:], None)))
    assert np.array_equal(parts, y)
    with pytest.raises(ConfigError) as info:
        FrequencyOffset(0.7)
    assert info.value.key == "cycles_per_sample"


def textbook_irr(gain_db: float, phase_deg: float) -> float:
    # Image-rejection ratio for gain mismatch g and phase mismatch phi (common practice; e.g.
    # Razavi, RF Microelectronics, from memory): (1 + 2g cos phi + g^2) / (1 - 2g cos phi + g^2).
    g, phi = 10 ** (gain_db / 20), math.radians(phase_deg)
    return (1 + 2 * g * math.cos(phi) + g * g) / (1 - 2 * g * math.cos(phi) + g * g)


def test_iq_imbalance_identity():
    x = qpsk(256, 19) * 1.7
    assert np.array_equal(IqImbalance(0.0, 0.0).apply(x, None), x)
    assert IqImbalance().image_rejection_ratio == math.inf


@pytest.mark.parametrize("gain_db, phase_deg", [(1.0, 5.0), (-0.5, 2.0), (0.0, -3.0), (2.0, 0.0)])
def test_iq_imbalance_image_rejection_of_a_tone(gain_db, phase_deg):
    n, bin_ = 256, 8
    tone = np.exp(2j * np.pi * bin_ * np.arange(n) / n)
    stage = IqImbalance(gain_db, phase_deg)
    y = stage.apply(tone, None)
    assert np.array_equal(y.real, tone.real)  # the I arm is untouched
    spectrum = np.abs(np.fft.fft(y)) ** 2
    measured = spectrum[bin_] / spectrum[-bin_]  # wanted tone over its image
    assert measured == pytest.approx(textbook_irr(gain_db, phase_deg), rel=1e-9)
    assert stage.image_rejection_ratio == pytest.approx(textbook_irr(gain_db, phase_deg),
                                                        rel=1e-12)
    # Everything else in the spectrum is empty (the model is linear in x and conj(x)).
    others = np.delete(spectrum, [bin_, n - bin_])
    assert others.max() < 1e-18 * spectrum[bin_]


def test_iq_imbalance_small_error_approximation():
    # Common rule of thumb (from memory): IRR ~ 4 / (eps^2 + phi^2) with eps = g - 1. It drops
    # terms of relative order eps (about 1.2 % here), hence the 3 % tolerance.
    stage = IqImbalance(0.1, 0.5)
    eps, phi = stage.gain - 1, math.radians(0.5)
    assert stage.image_rejection_ratio == pytest.approx(4 / (eps ** 2 + phi ** 2), rel=0.03)
    with pytest.raises(ConfigError) as info:
        IqImbalance(0.0, 90.0)
    assert info.value.key == "phase_deg"


def test_dc_offset():
    x = qpsk(32, 20)
    for given, value in ((0.25, 0.25 + 0j), ([0.1, -0.2], 0.1 - 0.2j), ("0.1 - 0.2j", 0.1 - 0.2j),
                         (1j, 1j)):
        stage = DcOffset(given)
        assert stage.offset == value
        assert np.array_equal(stage.apply(x, None), x + value)
    for bad in ("abc", [1, 2, 3], float("nan"), True):
        with pytest.raises(ConfigError) as info:
            DcOffset(bad)
        assert info.value.key == "offset"


@pytest.mark.parametrize("mode", ["mid-rise", "mid-tread"])
@pytest.mark.parametrize("bits", [1, 3, 8])
def test_quantiser_levels_and_clipping(mode, bits):
    q = Quantise(bits, 2.0, mode)
    step = 4.0 / 2 ** bits
    assert q.step == step
    ramp = np.linspace(-2.5, 2.5, 20_001)
    y = q.apply(ramp + 1j * ramp[::-1], None)
    levels = np.unique(y.real)
    assert levels.size == 2 ** bits and np.allclose(levels, q.levels(), atol=1e-12)
    assert np.allclose(np.diff(levels), step)
    top, bottom = (2.0 - step / 2, -2.0 + step / 2) if mode == "mid-rise" else (2.0 - step, -2.0)
    assert levels.max() == pytest.approx(top) and levels.min() == pytest.approx(bottom)
    big = q.apply(np.array([10 + 10j, -10 - 10j]), None)
    assert big[0] == pytest.approx(complex(top, top)) and big[1] == pytest.approx(
        complex(bottom, bottom))
    assert np.array_equal(y.imag, q.apply(ramp[::-1], None).real)  # I and Q quantised alike


@pytest.mark.parametrize("mode", ["mid-rise", "mid-tread"])
def test_quantisation_error_is_step_squared_over_12(mode):
    # Uniform quantiser, input uniform over whole cells: error uniform on [-step/2, step/2],
    # mean square step^2/12 (common practice). e^2 then has variance step^4/180, so the sample
    # mean is checked against a normal interval at level ALPHA.
    q = Quantise(6, 1.0, mode)
    d, n = q.step, 200_000
    lo = -1.0 if mode == "mid-rise" else -1.0 - d / 2
    u = rng(21).uniform(lo, lo + 2.0, size=2 * n)
    x = u[:n] + 1j * u[n:]
    e = q.apply(x, None) - x
    for part in (e.real, e.imag):
        assert np.abs(part).max() <= d / 2 + 1e-12
        z = stats.norm.isf(ALPHA / 2)
        assert abs(np.mean(part ** 2) - d * d / 12) <= z * d * d / math.sqrt(180 * n)
        assert abs(np.mean(part)) <= z * d / math.sqrt(12 * n)


# --------------------------------------------------------------------------------------------
# composition and configuration


def test_channel_applies_stages_in_order():
    x = qpsk(16, 22)
    a = Channel((PhaseOffset(90), DcOffset(1)))
    b = Channel([DcOffset(1), PhaseOffset(90)])
    assert np.allclose(a.apply(x, rng(0)), x * 1j + 1, atol=1e-15)
    assert np.allclose(b.apply(x, rng(0)), (x + 1) * 1j, atol=1e-15)
    assert isinstance(b.stages, tuple)
    assert np.array_equal(Channel(()).apply(x, rng(0)), x)
    assert Channel(()).describe() == "identity"
    assert a.describe() == "phase offset 90 deg -> DC offset 1+0j"
    with pytest.raises(ConfigError) as info:
        Channel((PhaseOffset(1), "awgn"))
    assert info.value.key == "stages[1]"
    with pytest.raises(ConfigError) as info:
        a.apply(np.zeros((2, 2), complex), rng(0))
    assert info.value.key == "samples"


DEVICE_FILE = """
channel:
  - {kind: awgn, ebn0_db: 6}
  - {kind: phase_offset, degrees: 10}
  - {kind: frequency_offset, cycles_per_sample: 0.001}
  - {kind: iq_imbalance, gain_db: 0.5, phase_deg: 2}
  - {kind: dc_offset, offset: [0.01, -0.02]}
  - {kind: quantise, bits: 10, full_scale: 1.5, mode: mid-tread}
"""


def test_channel_from_device_file():
    entries = yaml.safe_load(DEVICE_FILE)["channel"]
    ch = channel_from_config(entries, bits_per_symbol=4, samples_per_symbol=2)
    assert ch == Channel((Awgn(6, 4, 2), PhaseOffset(10), FrequencyOffset(0.001),
                          IqImbalance(0.5, 2), DcOffset(0.01 - 0.02j),
                          Quantise(10, 1.5, "mid-tread")))
    assert set(CHANNEL_KINDS) == {s.kind for s in ch.stages}
    assert channel_from_config(None, bits_per_symbol=2) == Channel(())
    assert channel_from_config([{"kind": "awgn", "ebn0_db": 3, "energy": "measured"}],
                               bits_per_symbol=2).stages[0].energy == "measured"


@pytest.mark.parametrize("entries, key, words", [
    ([{"kind": "awgn", "ebn0_db": 6}, {"kind": "phase_offset", "degrees": "x"}],
     "channel[1].degrees", ["'x'", "expected a number"]),
    ([{"kind": "awgn", "ebn0_db": True}], "channel[0].ebn0_db", ["True", "number"]),
    ([{"kind": "awgn"}], "channel[0].ebn0_db", ["missing"]),
    ([{"kind": "awgn", "ebn0_db": 6, "snr": 3}], "channel[0].snr", ["unknown key", "ebn0_db"]),
    ([{"kind": "awgn", "ebn0_db": 6, "bits_per_symbol": 3}], "channel[0].bits_per_symbol",
     ["scheme"]),
    ([{"kind": "awgn", "ebn0_db": 6, "energy": "peak"}], "channel[0].energy",
     ["'peak'", "'measured'"]),
    ([{"kind": "awgn", "ebn0_db": 6, "nominal_es": -1}], "channel[0].nominal_es", ["positive"]),
    ([{"ebn0_db": 6}], "channel[0].kind", ["missing", "awgn"]),
    (["awgn"], "channel[0]", ["mapping"]),
    ({"kind": "awgn"}, "channel", ["list"]),
    ([{"kind": "quantise", "bits": 0, "full_scale": 1}], "channel[0].bits", ["0"]),
    ([{"kind": "quantise", "bits": 4}], "channel[0].full_scale", ["missing"]),
    ([{"kind": "frequency_offset", "cycles_per_sample": 0.75}],
     "channel[0].cycles_per_sample", ["0.75", "0.5"]),
    ([{"kind": "dc_offset", "offset": "zero"}], "channel[0].offset", ["'zero'"]),
])
def test_config_errors_name_entry_and_key(entries, key, words):
    with pytest.raises(ConfigError) as info:
        channel_from_config(entries, bits_per_symbol=2, samples_per_symbol=1)
    assert info.value.key == key
    text = str(info.value)
    assert text.startswith(key + ": ")
    for w in words:
        assert w in text


def test_unknown_kind_lists_known_kinds():
    with pytest.raises(UnknownNameError) as info:
        channel_from_config([{"kind": "rayleigh"}], bits_per_symbol=2)
    assert info.value.key == "channel[0].kind" and info.value.name == "rayleigh"
    assert info.value.known == sorted(CHANNEL_KINDS)
    with pytest.raises(ConfigError) as info:
        channel_from_config([], bits_per_symbol=0)
    assert info.value.key == "bits_per_symbol"
