"""Implementation loss in dB, from the inverse of the theory curve.

Anchors: QPSK Pb = Q(sqrt(2 Eb/N0)) (J. G. Proakis and M. Salehi, Digital Communications, 5th
ed., 2008, ch. 4, section from memory), which puts Pb = 1e-4 at 8.398 dB and 1e-5 at 9.588 dB
(computed from the formula, Eb/N0 = Q^-1(p)^2 / 2), and the two-sided 95 % Clopper-Pearson upper
end for 0 errors, 1 - 0.025**(1/N) ~ 3.689/N (C. J. Clopper and E. S. Pearson, Biometrika
26(4):404-413, 1934).
"""

import math

import numpy as np
import pytest
from scipy import stats

from modemverify.errors import ConfigError, UnknownNameError
from modemverify.schemes.theory import THEORY_MODULATIONS, ber
from modemverify.stats import (
    LossEstimate,
    block_interval,
    clopper_pearson,
    implementation_loss_db,
    loss_from_counts,
)


@pytest.mark.parametrize("mod", THEORY_MODULATIONS)
@pytest.mark.parametrize("x", [2.0, 8.0, 12.0])
def test_theory_ber_gives_zero_loss(mod, x):
    est = implementation_loss_db(mod, x, ber(mod, x))
    assert est.loss_db == pytest.approx(0.0, abs=1e-8)
    assert math.isnan(est.low_db) and math.isnan(est.high_db)


@pytest.mark.parametrize("mod", THEORY_MODULATIONS)
def test_theory_half_a_db_lower_gives_half_a_db(mod):
    x = 10.0
    assert implementation_loss_db(mod, x, ber(mod, x - 0.5)).loss_db == pytest.approx(0.5,
                                                                                    abs=1e-8)
    # better than theory is a negative loss (possible by chance or a mis-calibrated channel)
    assert implementation_loss_db(mod, x, ber(mod, x + 1.0)).loss_db == pytest.approx(-1.0,
                                                                                    abs=1e-8)


def test_published_qpsk_points():
    # QPSK Pb 1e-4 at 8.398 dB, 1e-5 at 9.588 dB (Proakis & Salehi formula, see above), here
    # computed independently with scipy's normal quantile: Eb/N0 = norm.isf(p)**2 / 2
    for p, db in ((1e-4, 8.398), (1e-5, 9.588)):
        assert 10 * math.log10(stats.norm.isf(p) ** 2 / 2) == pytest.approx(db, abs=5e-4)
    assert implementation_loss_db("qpsk", 9.0, 1e-4).loss_db == pytest.approx(0.602, abs=5e-4)
    assert implementation_loss_db("qpsk", 10.0, 1e-5).loss_db == pytest.approx(0.412, abs=5e-4)


def test_interval_maps_to_ordered_loss_interval():
    # higher BER -> lower effective Eb/N0 -> larger loss
    errors, bits = 150, 10**7
    ci = clopper_pearson(errors, bits)
    est = implementation_loss_db("16qam", 13.0, errors / bits, ci)
    assert est.low_db < est.loss_db < est.high_db
    assert est.low_db == pytest.approx(implementation_loss_db("16qam", 13.0, ci.low).loss_db)
    assert est.high_db == pytest.approx(implementation_loss_db("16qam", 13.0, ci.high).loss_db)
    # a tuple works like an interval object, and so does block_interval's result
    assert implementation_loss_db("16qam", 13.0, errors / bits, (ci.low, ci.high)) == est
    blk = block_interval(np.full(10, 15), bits // 10)
    assert implementation_loss_db("16qam", 13.0, errors / bits, blk) == est
    assert loss_from_counts("16qam", 13.0, errors, bits) == est


def test_zero_errors_give_only_an_upper_bound():
    n = 10**6
    est = loss_from_counts("qpsk", 9.0, 0, n)
    assert est.loss_db == -math.inf and est.low_db == -math.inf
    # the upper end is the loss at the exact upper BER bound (two-sided 95 % Clopper-Pearson,
    # 1 - 0.025**(1/N) ~ -ln(0.025)/N = 3.689/N)
    assert est.high_db == pytest.approx(implementation_loss_db("qpsk", 9.0, 3.6889 / n).loss_db,
                                        abs=1e-4)
    assert est.describe() == f"at most {est.high_db:.2f} dB"


def test_ber_at_or_above_guessing_is_infinite_loss():
    for p in (0.5, 0.7, 1.0):
        assert implementation_loss_db("8psk", 6.0, p).loss_db == math.inf
    # an interval reaching 0.5 makes the upper end infinite but keeps a finite lower end
    est = implementation_loss_db("qpsk", 6.0, 0.45, (0.4, 0.5))
    assert math.isfinite(est.low_db) and est.high_db == math.inf
    assert est.low_db < est.loss_db
    assert est.describe() == f"{est.loss_db:.2f} dB ({est.low_db:.2f} .. +inf dB)"


def test_describe_point_and_interval():
    assert LossEstimate(0.4213, 0.31, 0.552).describe() == "0.42 dB (0.31 .. 0.55 dB)"
    assert LossEstimate(0.4213, math.nan, math.nan).describe(1) == "0.4 dB"


@pytest.mark.parametrize("args, match", [
    (("qpsk", 8.0, -0.1), "ber_measured"), (("qpsk", 8.0, 1.2), "ber_measured"),
    (("qpsk", 8.0, "x"), "ber_measured"), (("qpsk", math.nan, 1e-3), "ebn0_db"),
    (("qpsk", 8.0, 1e-3, (2e-3, 3e-3)), "must contain"),
    (("qpsk", 8.0, 1e-3, (1e-4,)), "interval"),
    (("qpsk", 8.0, 1e-3, (1e-4, 2.0)), "interval.high")])
def test_bad_arguments(args, match):
    with pytest.raises(ConfigError, match=match):
        implementation_loss_db(*args)


def test_unknown_modulation():
    with pytest.raises(UnknownNameError):
        implementation_loss_db("apsk32", 8.0, 1e-3)
