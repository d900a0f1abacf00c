"""Soft outputs: the reference demapper against closed forms; a flipped sign, a mis-scaled LLR
and a lossy demapper are caught."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate, stats

from modemverify.oracles.llr import best_scale, mutual_information
from modemverify.runner import check_object
from modemverify.schemes.conventions import get_convention
from modemverify.schemes.reference import ReferenceModem

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
    # the other parts keep their names, skipped with the verdict they depend on
    for part in ("llr.calibration", "llr.mutual_information"):
        assert vs[part].outcome == "skipped" and "llr.sign failed" in vs[part].reason


class Integer16Soft(Qam16Soft):
    """The same demapper on the integer grid (points at +-1, +-3: the table times sqrt(10)),
    its distances measured on that grid with the noise variance it is given."""

    def __init__(self, **kw):
        super().__init__(**kw)
        self.points = self.points * S10


def test_soft_outputs_are_judged_at_the_device_scale():
    # a normalisation defect fails energy; the LLRs, exact for the device's own points and the
    # noise it is told, pass (before, the unit-energy reference saw integer-grid samples)
    res = check_object(Integer16Soft(), modulation="16qam", convention="3gpp")
    v = {x.name: x for x in res.verdicts}
    assert v["energy"].outcome == "fail"
    for part in ("llr.sign", "llr.calibration", "llr.mutual_information"):
        assert v[part].outcome == "pass", v[part].reason
    assert "+10.00 dB from the reference" in v["llr.sign"].reason


def test_soft_outputs_are_skipped_naming_mapping_when_the_table_is_another():
    res = check_object(Qam16Soft(), modulation="16qam", convention="ieee802.11")
    v = {x.name: x for x in res.verdicts}
    assert v["mapping"].outcome == "fail"
    for part in ("llr.sign", "llr.calibration", "llr.mutual_information"):
        assert v[part].outcome == "skipped" and "mapping failed" in v[part].reason


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


def test_reference_demapper_matches_the_bpsk_closed_form():
    # BPSK x = +-A (bit 0 -> +A), y = x + n with n ~ N(0, sigma^2) per real dimension:
    # L = ln p(y|+A) / p(y|-A) = 2 A y / sigma^2, direct from the Gaussian likelihoods (the
    # channel-reliability form L = Lc y of Hagenauer, Offer & Papke, IEEE Trans. Inf. Theory
    # 42(2), 1996 - from memory). A = 0.7, sigma^2 = 0.3, y = -1, 0.1, 0.9 give -4.6667, 0.4667,
    # 4.2 (the formula evaluated by hand). Max-log is exact here: one point per hypothesis.
    # modemverify's generic BPSK has the points +1 (bit 0) and -1 (bit 1), so the same channel
    # is given in units of A: samples y / A, complex noise variance N0 = 2 sigma^2 / A^2. The
    # imaginary part of y carries no information about a real-axis BPSK bit.
    modem = ReferenceModem(get_convention("gray", "bpsk"))
    np.testing.assert_allclose(modem.points, [1, -1], atol=1e-15)
    a, s2 = 0.7, 0.3
    y = np.array([-1, 0.1, 0.9]) / a + 0.25j
    for max_log in (False, True):
        np.testing.assert_allclose(modem.demodulate_soft(y, 2 * s2 / a ** 2, max_log=max_log),
                                   [-4.6667, 0.4667, 4.2], atol=1e-4)


def test_reference_demapper_matches_the_3gpp_qpsk_closed_form():
    # TS 38.211 5.1.3 QPSK x = ((1-2b0) + j(1-2b1))/sqrt2 with complex noise variance N0:
    # L(b0) = 2 sqrt2 Re(y) / N0, L(b1) = 2 sqrt2 Im(y) / N0 (derived from the Gaussian
    # likelihoods: the other axis cancels, so max-log is exact too). y = 0.3 - 0.2j, N0 = 0.4
    # -> 2.1213, -1.4142.
    modem = ReferenceModem(get_convention("3gpp", "qpsk"))
    for max_log in (False, True):
        np.testing.assert_allclose(modem.demodulate_soft(np.array([0.3 - 0.2j]), 0.4,
                                                         max_log=max_log),
                                   [2.1213, -1.4142], atol=1e-4)


def test_calibration_and_information_of_exact_bpsk_llrs():
    # Exact LLRs 2 A y / sigma^2 (above) are calibrated: the best-fit scale is 1 within its
    # standard error. Their bitwise mutual information 1 - E[log2(1 + exp(-(1-2b) L))] is, for
    # BPSK in AWGN, an integral over L | b=0 ~ N(mu, 2 mu), mu = 2 A^2 / sigma^2 (from the same
    # formula: y | b=0 ~ N(A, sigma^2)), computed with scipy.integrate.quad; the estimate over
    # 2e5 bits has a standard error of about 1.7e-3.
    a, s2 = 0.7, 0.3
    rng = np.random.default_rng(1)
    bits = rng.integers(0, 2, 200_000)
    rx = a * (1 - 2 * bits) + rng.normal(0, np.sqrt(s2), bits.size)
    llr = 2 * a * rx / s2
    s, se = best_scale(llr, bits)
    assert abs(s - 1) < 4 * se
    mu = 2 * a ** 2 / s2
    loss = integrate.quad(lambda v: stats.norm.pdf(v, mu, np.sqrt(2 * mu))
                          * np.logaddexp(0.0, -v) / np.log(2), -np.inf, np.inf)[0]
    assert mutual_information(llr, bits) == pytest.approx(1 - loss, abs=1e-2)
    # the sign convention matters: the same LLRs read as "positive means bit 1" lose information
    assert mutual_information(-llr, bits) < 0
    assert mutual_information(np.where(bits == 0, 50.0, -50.0), bits) == pytest.approx(1.0)
