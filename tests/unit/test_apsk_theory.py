"""The APSK BER and SER curves the ``ber`` check uses: the DVB-S2 tables on the scheme's rings.

ETSI EN 302 307-1 5.4.3 (16APSK, Table 9 ring ratios) and 5.4.4 (32APSK, Table 10) give the
tables; there is no closed form for their error rates, so ``schemes.theory`` integrates the
Gaussian exactly over each point's decision region (its Voronoi cell), numerically (polar form
over the cell's edges, Gauss-Legendre; J. W. Craig, IEEE MILCOM 1991). Each curve is checked
against an independent Monte Carlo through the reference demapper: the integrated value must
lie inside the 99.9 % Clopper-Pearson interval of the counted errors (Clopper & Pearson,
Biometrika 26, 1934).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from modemverify.errors import ConfigError
from modemverify.runner import check_object
from modemverify.schemes.conventions import get_convention
from modemverify.schemes.labels import bits_to_labels
from modemverify.schemes.reference import ReferenceModem
from modemverify.schemes.theory import (THEORY_MODULATIONS, ber, default_ebn0_points,
                                        ebn0_for_ber, ser)
from modemverify.vectors.bits import random_bits


def _monte_carlo(modulation, ring, ebn0_db, n_symbols, seed):
    """(bit errors, bits, symbol errors) of the DVB-S2 table on ``ring`` through AWGN and the
    reference demapper (nearest point)."""
    conv = get_convention("dvb-s2", modulation, ring)
    ref = ReferenceModem(conv)
    k = conv.bits_per_symbol
    rng = np.random.default_rng(seed)
    bits = random_bits(rng, n_symbols * k)
    x = ref.modulate(bits)
    n0 = 1.0 / (k * 10 ** (ebn0_db / 10))  # Es = 1
    y = x + np.sqrt(n0 / 2) * (rng.standard_normal(x.size) + 1j * rng.standard_normal(x.size))
    got = ref.slice_bits(y)
    sym_err = int(np.count_nonzero(bits_to_labels(got, k) != bits_to_labels(bits, k)))
    return int(np.count_nonzero(got != bits)), bits.size, sym_err


@pytest.mark.parametrize("modulation,ring,ebn0_db", [
    ("16apsk", (3.15,), 8.0),     # code rate 2/3, Table 9
    ("16apsk", (2.57,), 10.0),    # code rate 9/10
    ("32apsk", (2.84, 5.27), 11.0),  # code rate 3/4, Table 10
    ("32apsk", (2.53, 4.30), 12.0),  # code rate 9/10
])
def test_the_curve_holds_a_monte_carlo_of_the_reference_demapper(modulation, ring, ebn0_db):
    errors, bits, sym_err = _monte_carlo(modulation, ring, ebn0_db, 200_000, seed=13)
    assert errors > 1000  # enough errors for a tight interval
    b = stats.binomtest(errors, bits).proportion_ci(confidence_level=0.999)
    assert b.low < ber(modulation, ebn0_db, ring_ratio=ring) < b.high
    s = stats.binomtest(sym_err, 200_000).proportion_ci(confidence_level=0.999)
    assert s.low < ser(modulation, ebn0_db, ring_ratio=ring) < s.high


def test_the_ring_ratio_changes_the_curve_and_defaults_to_the_first_code_rate():
    assert {"16apsk", "32apsk"} <= set(THEORY_MODULATIONS)
    assert ber("16apsk", 9.0) == ber("16apsk", 9.0, ring_ratio=3.15)
    assert ber("16apsk", 9.0, ring_ratio=2.85) != ber("16apsk", 9.0)
    assert ber("32apsk", 12.0) == ber("32apsk", 12.0, ring_ratio=(2.84, 5.27))
    x = ebn0_for_ber("16apsk", 1e-3, ring_ratio=2.85)
    assert ber("16apsk", x, ring_ratio=2.85) == pytest.approx(1e-3, rel=1e-6)
    assert default_ebn0_points("16apsk", ring_ratio=2.85) != default_ebn0_points("16apsk")
    np.testing.assert_allclose(ber("16apsk", [8.0, 10.0]),
                               [ber("16apsk", 8.0), ber("16apsk", 10.0)], rtol=0)


def test_a_ring_ratio_that_does_not_fit_is_refused():
    with pytest.raises(ConfigError, match="qpsk has no ring ratio"):
        ber("qpsk", 8.0, ring_ratio=2.0)
    with pytest.raises(ConfigError, match="has 2 ring ratios"):
        ber("32apsk", 8.0, ring_ratio=3.0)


class _LossyApsk:
    """A 16APSK device on the code-rate 3/4 rings whose demodulator adds its own complex noise
    (variance ``extra``) before the nearest-point decision: an exact implementation loss."""

    def __init__(self, extra: float, seed: int = 5):
        self.points = get_convention("dvb-s2", "16apsk", (2.85,)).points
        self.extra = extra
        self.rng = np.random.default_rng(seed)

    def modulate(self, bits):
        return self.points[bits_to_labels(np.asarray(bits, dtype=np.uint8), 4)]

    def demodulate(self, samples):
        y = np.asarray(samples)
        y = y + np.sqrt(self.extra / 2) * (self.rng.standard_normal(y.size)
                                           + 1j * self.rng.standard_normal(y.size))
        idx = np.abs(y[:, None] - self.points[None, :]).argmin(axis=1)
        return ((idx[:, None] >> np.arange(3, -1, -1)) & 1).astype(np.uint8).ravel()


@pytest.mark.parametrize("loss_db,outcome", [(0.0, "pass"), (1.5, "fail")])
def test_the_ber_check_judges_an_apsk_device_against_its_rings_curve(loss_db, outcome):
    ebn0 = 11.0
    n0 = 1.0 / (4 * 10 ** (ebn0 / 10))
    device = _LossyApsk(extra=n0 * (10 ** (loss_db / 10) - 1))
    result = check_object(device, modulation="16apsk", convention="dvb-s2", code_rate="3/4",
                          checks={"ber": {"ebn0_db": [ebn0]}, "llr": False, "roundtrip": False})
    v = result.verdict(f"ber.ebn0={ebn0:g}dB")
    assert v.outcome == outcome, v.reason
    assert v.details["theory_ber"] == ber("16apsk", ebn0, ring_ratio=2.85)
    if outcome == "fail":
        assert "worse than the 0.5 dB margin allows" in v.reason
