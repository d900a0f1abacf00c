"""Soft outputs: a flipped sign, a mis-scaled LLR and a lossy demapper are caught."""

from __future__ import annotations

import numpy as np
import pytest

from modemverify.oracles.llr import best_scale, mutual_information
from modemverify.runner import check_object

S10 = np.sqrt(10)


class Qam16Soft:
    """TS 38.211 5.1.4 16QAM with a max-log demapper written out per axis (independent of
    modemverify): LLR(b) = (min_{x:b=1}|y-x|^2 - min_{x:b=0}|y-x|^2) / N0, positive -> bit 0."""

    def __init__(self, scale=1.0, flip=False, positive_bit=0, drop_q=False):
        labels = np.arange(16)
        b = (labels[:, None] >> np.arange(3, -1, -1)) & 1
        i = (1 - 2 * b[:, 0]) * (2 - (1 - 2 * b[:, 2]))
        q = (1 - 2 * b[:, 1]) * (2 - (1 - 2 * b[:, 3]))
        self.points = (i + 1j * q) / S10
        self.bits = b
        self.scale, self.flip, self.drop_q = scale, flip, drop_q
        self.positive_bit = positive_bit

    def modulate(self, bits):
        b = np.asarray(bits).reshape(-1, 4)
        return self.points[b @ np.array([8, 4, 2, 1])]

    def demodulate_soft(self, samples, noise_var):
        d = np.abs(np.asarray(samples)[:, None] - self.points[None, :]) ** 2
        out = np.empty((len(samples), 4))
        for j in range(4):
            out[:, j] = (d[:, self.bits[:, j] == 1].min(1) - d[:, self.bits[:, j] == 0].min(1))
        out /= noise_var
        if self.drop_q:
            out[:, 3] *= 0.05  # nearly erases one bit's information
        out *= self.scale * (-1 if (self.flip or self.positive_bit == 1) else 1)
        return out.ravel()


def llr_verdicts(dev, **scheme):
    res = check_object(dev, modulation="16qam", convention="3gpp", **scheme)
    return {v.name: v for v in res.verdicts if v.name.startswith("llr")}


def test_correct_soft_demapper_passes():
    vs = llr_verdicts(Qam16Soft())
    assert [v.outcome for v in vs.values()] == ["pass"] * 3, [v.reason for v in vs.values()]


def test_flipped_sign_fails_and_says_so():
    vs = llr_verdicts(Qam16Soft(flip=True))
    assert vs["llr.sign"].outcome == "fail" and "sign is flipped" in vs["llr.sign"].reason
    assert "llr_positive_bit: 1" in vs["llr.sign"].reason


def test_declared_opposite_convention_passes():
    vs = llr_verdicts(Qam16Soft(positive_bit=1), llr_positive_bit=1)
    assert all(v.outcome == "pass" for v in vs.values())


@pytest.mark.parametrize("scale,words", [(2.5, "over-confident"), (0.4, "under-confident")])
def test_mis_scaled_llrs_fail_with_the_best_fit_scale(scale, words):
    vs = llr_verdicts(Qam16Soft(scale=scale))
    v = vs["llr.calibration"]
    assert v.outcome == "fail" and words in v.reason
    assert v.statistic == pytest.approx(1 / scale, rel=0.1)


def test_information_loss_fails_mutual_information():
    vs = llr_verdicts(Qam16Soft(drop_q=True))
    assert vs["llr.mutual_information"].outcome == "fail"


def test_bpsk_llr_closed_form_is_calibrated():
    # BPSK exact LLR 2Ay/sigma^2 (project reference sheet section 7: A = 0.7, sigma^2 = 0.3,
    # y = -1, 0.1, 0.9 -> -4.6667, 0.4667, 4.2; derived from the Gaussian likelihoods)
    a, s2 = 0.7, 0.3
    y = np.array([-1, 0.1, 0.9])
    np.testing.assert_allclose(2 * a * y / s2, [-4.6667, 0.4667, 4.2], atol=1e-4)
    rng = np.random.default_rng(1)
    bits = rng.integers(0, 2, 200_000)
    rx = a * (1 - 2 * bits) + rng.normal(0, np.sqrt(s2), bits.size)
    llr = 2 * a * rx / s2
    s, se = best_scale(llr, bits)
    assert abs(s - 1) < 4 * se
    # MI of BPSK at this SNR lies between 0 and 1, and perfect LLRs give 1
    assert 0 < mutual_information(llr, bits) < 1
    assert mutual_information(np.where(bits == 0, 50.0, -50.0), bits) == pytest.approx(1.0)
