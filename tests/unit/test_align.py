"""Alignment of a device waveform to the reference: delay, gain, frequency offset.

Fractional delays are made without the code under test: the same RRC-shaped QPSK symbols are
shaped at 32 (or 16) samples per symbol and decimated to 8 with different start phases, so the
device is the same continuous-time waveform sampled a known fraction of a sample later. Noise
comes from the project's calibrated Awgn stage.
"""

import math

import numpy as np
import pytest

from modemverify.dsp.align import Alignment, apply_alignment, estimate_alignment
from modemverify.dsp.pulses import PulseShape
from modemverify.errors import ConfigError
from modemverify.vectors.channels import Awgn


def qpsk(rng, n):
    return ((2 * rng.integers(0, 2, n) - 1) + 1j * (2 * rng.integers(0, 2, n) - 1)) / np.sqrt(2)


def waveforms(seed, n_symbols=2000, over=4):
    """(reference, phases): RRC QPSK at 8 sps and its 8*over-sps version for decimation."""
    rng = np.random.default_rng(seed)
    s = qpsk(rng, n_symbols)
    fine = PulseShape("rrc", 8 * over, rolloff=0.35, span=10).shape_symbols(s)
    fine *= math.sqrt(over)  # unit energy per symbol again after keeping 1 sample in `over`
    return fine[0::over], fine


def delayed(fine, over, phase, lead):
    """Device = waveform sampled phase/over of a sample later, with `lead` extra zeros (lead<0:
    first samples cut). device(t + delay) = ref(t) with delay = lead - phase/over."""
    x = fine[phase::over]
    return np.concatenate([np.zeros(lead), x]) if lead >= 0 else x[-lead:]


def noisy(x, seed, esn0_db):
    awgn = Awgn(ebn0_db=esn0_db - 10 * math.log10(2), bits_per_symbol=2, samples_per_symbol=8)
    return awgn.apply(x, np.random.default_rng(seed))


# ---------------------------------------------------------------------------------------------
# delays


@pytest.mark.parametrize("lead", [0, 3, 17, 250, -5, -40])
def test_integer_delays_including_leads_and_cuts(lead):
    ref, _ = waveforms(1)
    dev = np.concatenate([np.zeros(lead), ref, np.zeros(11)]) if lead >= 0 else ref[-lead:]
    a = estimate_alignment(dev, ref)
    assert a.delay_samples == pytest.approx(lead, abs=1e-4)
    assert a.gain == pytest.approx(1.0, abs=1e-4)
    assert a.correlation == pytest.approx(1.0, abs=1e-6)
    assert a.overlap == ref.size - max(0, -lead)


@pytest.mark.parametrize("over, phase", [(4, 1), (2, 1), (4, 3)])
@pytest.mark.parametrize("lead", [0, 9, -6])
def test_fractional_delays_noiseless(over, phase, lead):
    ref, fine = waveforms(2, over=over)
    dev = delayed(fine, over, phase, lead)
    a = estimate_alignment(dev, ref)
    assert a.delay_samples == pytest.approx(lead - phase / over, abs=0.02)
    # measured: within 1e-4 of the true value
    assert a.delay_samples == pytest.approx(lead - phase / over, abs=1e-3)


@pytest.mark.parametrize("over, phase", [(4, 1), (2, 1)])
def test_fractional_delays_in_awgn(over, phase):
    # Es/N0 = 20 dB (per-sample SNR 11 dB at 8 sps), 4000 symbols. The Cramer-Rao bound for a
    # known waveform's delay, var = 1 / (8 pi^2 B_rms^2 Es/N0 n) (Kay, Fundamentals of
    # Statistical Signal Processing: Estimation Theory, 1993, from memory), with the RRC's rms
    # bandwidth ~0.29 Rs = 0.036 cycles/sample, gives sigma ~ 0.005 samples: 0.02 is 4 sigma.
    ref, fine = waveforms(3, n_symbols=4000, over=over)
    dev = noisy(delayed(fine, over, phase, 12), seed=30 + phase, esn0_db=20)
    a = estimate_alignment(dev, ref)
    assert a.delay_samples == pytest.approx(12 - phase / over, abs=0.02)


def test_delay_search_respects_max_delay():
    ref, _ = waveforms(4)
    dev = np.concatenate([np.zeros(60), ref])
    assert estimate_alignment(dev, ref, max_delay=64).delay_samples == pytest.approx(60, abs=1e-4)
    a = estimate_alignment(dev, ref, max_delay=10)
    assert abs(a.delay_samples) <= 10
    assert a.correlation < 0.3  # the true peak was outside the window
    with pytest.raises(ConfigError, match="max_delay"):
        estimate_alignment(dev, ref, max_delay=-1)


# ---------------------------------------------------------------------------------------------
# gain, phase and frequency


def test_gain_and_phase():
    ref, _ = waveforms(5)
    g = 0.3 * np.exp(2.0j)
    a = estimate_alignment(np.concatenate([np.zeros(4), g * ref]), ref)
    assert a.gain == pytest.approx(g, abs=1e-6)
    assert np.angle(a.gain) == pytest.approx(2.0, abs=1e-5)


@pytest.mark.parametrize("f", [1e-4, -1e-4, 2e-3])
def test_frequency_offset_noiseless(f):
    # 2e-3 cycles/sample turns the phase 32 times across the 16000-sample search segment, which
    # wipes out the coherent correlation: the frequency-robust search must take over.
    ref, fine = waveforms(6)
    x = delayed(fine, 4, 1, 7)
    n = np.arange(x.size)
    dev = 0.8 * np.exp(0.5j) * x * np.exp(2j * np.pi * f * n)
    a = estimate_alignment(dev, ref)
    assert a.freq_offset == pytest.approx(f, rel=0.05)
    assert a.delay_samples == pytest.approx(7 - 0.25, abs=0.02)
    assert abs(a.gain) == pytest.approx(0.8, rel=1e-3)
    # measured: the offset to better than 1e-7 relative without noise
    assert a.freq_offset == pytest.approx(f, rel=1e-3)


def test_frequency_offset_in_awgn():
    # Es/N0 = 20 dB, 4000 symbols (delay tolerance as in test_fractional_delays_in_awgn)
    ref, fine = waveforms(7, n_symbols=4000)
    x = delayed(fine, 4, 2, 20)
    n = np.arange(x.size)
    dev = noisy(x * np.exp(2j * np.pi * 1e-4 * n), seed=70, esn0_db=20)
    a = estimate_alignment(dev, ref)
    assert a.freq_offset == pytest.approx(1e-4, rel=0.05)
    assert a.delay_samples == pytest.approx(20 - 0.5, abs=0.02)


def test_no_frequency_estimate_when_disabled():
    ref, _ = waveforms(8)
    a = estimate_alignment(np.concatenate([np.zeros(3), ref]), ref, estimate_frequency=False)
    assert a.freq_offset == 0.0 and a.delay_samples == pytest.approx(3, abs=1e-4)


# ---------------------------------------------------------------------------------------------
# applying an alignment


def test_apply_alignment_leaves_a_small_residual():
    # delay 13.25 (fractional), phase, gain and frequency offset together, noiseless
    ref, fine = waveforms(9)
    x = delayed(fine, 4, 3, 14)
    n = np.arange(x.size)
    dev = 1.7 * np.exp(-1.2j) * x * np.exp(2j * np.pi * 3e-4 * n)
    a = estimate_alignment(dev, ref)
    y = apply_alignment(dev, a, ref.size)
    assert y.size == ref.size
    rms = np.sqrt(np.mean(np.abs(y - ref) ** 2) / np.mean(np.abs(ref) ** 2))
    assert rms < 0.01
    # the estimate's own figure is measured on its window (the overlap less 32 samples each
    # end), which sees the same error level
    assert a.residual_evm == pytest.approx(100 * rms, rel=0.02)
    # measured: ~0.25 %, from the span-10 pulse's spectral sidelobes aliasing at 8 sps


def test_apply_alignment_by_hand():
    # integer delay and gain only: out[m] = device[m + delay] / gain, zero beyond the device
    dev = np.arange(10, dtype=complex)
    out = apply_alignment(dev, Alignment(3.0, 2.0 + 0j, 0.0, 0.0, 1.0, 7), 9)
    np.testing.assert_allclose(out, [1.5, 2, 2.5, 3, 3.5, 4, 4.5, 0, 0])
    out = apply_alignment(dev, Alignment(-2.0, 1.0 + 0j, 0.0, 0.0, 1.0, 8), 4)
    np.testing.assert_allclose(out, [0, 0, 0, 1])
    with pytest.raises(ConfigError, match="gain"):
        apply_alignment(dev, Alignment(0.0, 0j, 0.0, 0.0, 0.0, 0), 4)


def test_fractional_apply_is_band_limited_interpolation():
    # Advancing the device by the known fraction recovers the other decimation phase.
    ref, fine = waveforms(10)
    dev = delayed(fine, 4, 2, 0)                    # ref(t + 0.5)
    y = apply_alignment(dev, Alignment(-0.5, 1 + 0j, 0.0, 0.0, 1.0, 0), ref.size)
    inner = slice(100, ref.size - 100)              # away from the band-limited edge ringing
    assert np.max(np.abs(y[inner] - ref[inner])) < 0.01


# ---------------------------------------------------------------------------------------------
# unrelated input and argument checks


def test_unrelated_noise_has_low_correlation():
    ref, _ = waveforms(11)
    rng = np.random.default_rng(110)
    dev = rng.standard_normal(ref.size) + 1j * rng.standard_normal(ref.size)
    a = estimate_alignment(dev, ref)
    assert a.correlation < 0.05
    assert a.residual_evm > 90


def test_zero_device_and_bad_inputs():
    ref, _ = waveforms(12, n_symbols=100)
    a = estimate_alignment(np.zeros(ref.size, dtype=complex), ref)
    assert a.gain == 0 and a.correlation == 0
    with pytest.raises(ConfigError, match="reference.*zeros"):
        estimate_alignment(ref, np.zeros(10, dtype=complex))
    with pytest.raises(ConfigError, match="device"):
        estimate_alignment(np.array([], dtype=complex), ref)
    with pytest.raises(ConfigError, match="finite"):
        estimate_alignment(np.full(10, np.nan, dtype=complex), ref)
