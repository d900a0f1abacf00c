"""Wald's SPRT for a BER limit: thresholds, exact stopping bit, operating characteristic, ASN.

Primary sources: A. Wald, "Sequential tests of statistical hypotheses", Ann. Math. Statist.
16(2):117-186, 1945 (citation details from memory), and A. Wald, *Sequential Analysis*, Wiley,
1947. The threshold approximations, the realised-risk bounds and the OC/ASN identities below
are from memory, not read in the book for these tests.
"""

import math

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st
from scipy import stats

from modemverify.errors import ConfigError
from modemverify.schemes.theory import ber, ebn0_for_ber
from modemverify.stats import (
    Decision,
    Sprt,
    clopper_pearson,
    expected_sample_size,
    fixed_sample_size,
    operating_characteristic,
    wald_thresholds,
)

# ---------------------------------------------------------------------------------------------
# thresholds


@pytest.mark.parametrize("alpha, beta, a, b", [
    (0.05, 0.05, 19.0, 0.05263), (0.05, 0.10, 18.0, 0.10526), (0.01, 0.01, 99.0, 0.010101)])
def test_wald_thresholds(alpha, beta, a, b):
    # Wald 1947: A = (1 - beta)/alpha, B = beta/(1 - alpha) (approximations from memory)
    got_a, got_b = wald_thresholds(alpha, beta)
    assert got_a == pytest.approx(a, rel=1e-12)
    assert got_b == pytest.approx(b, rel=1e-4)
    t = Sprt(1e-3, 2e-3, alpha, beta)
    assert t.log_a == pytest.approx(math.log(a), rel=1e-12)
    assert t.log_b == pytest.approx(math.log(b), rel=1e-4)


def test_log_thresholds_symmetric_for_equal_risks():
    # Wald 1947 (from memory): alpha = beta = 0.05 -> ln A = ln 19 = 2.944, ln B = -2.944
    t = Sprt(1e-3, 2e-3)
    assert t.log_a == pytest.approx(2.944, abs=5e-4)
    assert t.log_b == pytest.approx(-2.944, abs=5e-4)


# ---------------------------------------------------------------------------------------------
# exact stopping bit versus a per-bit reference


def reference_sprt(bits, p0, p1, alpha, beta):
    """Textbook SPRT, one bit at a time (Wald's SPRT for Bernoulli trials, common practice):
    after n bits with k errors, ln L = k ln(p1/p0) + (n - k) ln((1 - p1)/(1 - p0));
    fail when >= ln((1 - beta)/alpha), pass when <= ln(beta/(1 - alpha))."""
    ln_a = math.log((1 - beta) / alpha)
    ln_b = math.log(beta / (1 - alpha))
    # ln((1-p1)/(1-p0)) as log1p(-p1) - log1p(-p0), as the module does: with "round" rates
    # (p0 = 0.25, p1 = 0.75, beta = 0.25) the ratio can equal ln B exactly, and two spellings of
    # the same logarithm then differ in the last bit and break the tie differently
    w_correct = math.log1p(-p1) - math.log1p(-p0)
    k = 0
    for n, bit in enumerate(bits, start=1):
        k += int(bit)
        llr = k * math.log(p1 / p0) + (n - k) * w_correct
        if llr >= ln_a:
            return ("fail", n, k)
        if llr <= ln_b:
            return ("pass", n, k)
    return None


def feed(sprt, bits, cuts):
    """Feed ``bits`` to ``sprt`` in blocks cut at ``cuts``; return the decision or None."""
    bits = np.asarray(bits, dtype=bool)
    edges = [0, *sorted(set(c for c in cuts if 0 < c < bits.size)), bits.size]
    for lo, hi in zip(edges[:-1], edges[1:]):
        d = sprt.update(np.flatnonzero(bits[lo:hi]), hi - lo)
        if d is not None:
            return d
    return None


def check_against_reference(bits, p0, p1, alpha, beta, cuts):
    t = Sprt(p0, p1, alpha, beta)
    got = feed(t, bits, cuts)
    want = reference_sprt(bits, p0, p1, alpha, beta)
    if want is None:
        assert got is None
        assert t.state.bits == len(bits) and t.state.errors == int(np.sum(bits))
    else:
        assert got is not None, f"reference decided {want}, block-fed test did not"
        assert (got.outcome, got.bits_used, got.errors_used) == want
        assert t.state.bits == want[1] and t.state.errors == want[2]
        assert got.llr == pytest.approx(
            want[2] * math.log(p1 / p0) + (want[1] - want[2]) * math.log((1 - p1) / (1 - p0)),
            rel=1e-12, abs=1e-12)
    return got


rates = st.tuples(st.floats(0.01, 0.3), st.floats(1.3, 3.0)).map(
    lambda t: (t[0], min(t[0] * t[1], 0.9)))
risks = st.tuples(st.floats(0.005, 0.3), st.floats(0.005, 0.3))


@given(rates=rates, risks=risks, seed=st.integers(0, 2**32 - 1),
       level=st.sampled_from([0.5, 1.0, 1.5, 3.0]), n_bits=st.integers(0, 1500),
       cuts=st.lists(st.integers(0, 1500), max_size=25))
@settings(max_examples=150, deadline=None)
def test_block_fed_equals_per_bit_reference(rates, risks, seed, level, n_bits, cuts):
    # streams drawn at rates around p0 and p1 so both boundaries are reached
    p0, p1 = rates
    q = min(level * p0 if level < 1.5 else level * p1 / 1.5, 0.95)
    bits = np.random.default_rng(seed).random(n_bits) < q
    check_against_reference(bits, p0, p1, *risks, cuts)


@given(bits=st.lists(st.booleans(), max_size=200), rates=rates, risks=risks,
       cuts=st.lists(st.integers(0, 200), max_size=10))
@settings(max_examples=150, deadline=None)
@example(bits=[False], rates=(0.25, 0.75), risks=(0.25, 0.25), cuts=[])  # llr == ln B exactly
def test_block_fed_equals_reference_on_arbitrary_patterns(bits, rates, risks, cuts):
    # hypothesis-chosen error patterns (bursts, error-free runs) shrink to a minimal stream
    check_against_reference(bits, *rates, *risks, cuts)


@given(seed=st.integers(0, 2**32 - 1), cuts_a=st.lists(st.integers(0, 3000), max_size=40),
       cuts_b=st.lists(st.integers(0, 3000), max_size=5))
@settings(max_examples=50, deadline=None)
def test_stopping_independent_of_block_cuts(seed, cuts_a, cuts_b):
    bits = np.random.default_rng(seed).random(3000) < 0.015  # between p0 and p1
    decisions = []
    for cuts in (cuts_a, cuts_b, []):
        t = Sprt(1e-2, 2e-2)
        decisions.append((feed(t, bits, cuts), t.state))
    assert decisions[0] == decisions[1] == decisions[2]


def test_fail_lands_on_an_error_and_pass_on_a_correct_bit():
    t = Sprt(1e-2, 2e-2)
    d = t.update(np.array([3, 5, 9, 20, 21]), 1000)
    assert d.outcome == "fail" and d.bits_used == 22 and d.errors_used == 5
    t = Sprt(1e-2, 2e-2)
    d = t.update(np.array([], dtype=np.int64), 1000)
    # smallest n with n ln(0.98/0.99) <= ln(0.05/0.95)
    n = math.ceil(math.log(0.05 / 0.95) / math.log(0.98 / 0.99))
    assert d == Decision("pass", n, 0, d.llr) and n == 291


def test_after_decision_nothing_is_consumed():
    t = Sprt(1e-2, 2e-2)
    d = t.update(np.array([], dtype=np.int64), 1000)
    state = t.state
    assert t.update(np.array([0, 1, 2]), 10) is d
    assert t.state == state


def test_undecided_state_counts_every_bit():
    t = Sprt(1e-2, 2e-2)
    assert t.update(np.array([4]), 50) is None
    assert t.state.bits == 50 and t.state.errors == 1
    assert t.state.llr == pytest.approx(math.log(2) + 49 * math.log(0.98 / 0.99))


# ---------------------------------------------------------------------------------------------
# operating characteristic and average sample number, measured


def simulate(p, p0, p1, n_streams, seed, block=512, max_blocks=400):
    """Run ``n_streams`` SPRTs on i.i.d. errors at rate ``p``; error positions from geometric
    gaps (numpy), fed in blocks. A stream undecided after ``max_blocks`` gives None."""
    out = []
    for child in np.random.SeedSequence(seed).spawn(n_streams):
        rng = np.random.default_rng(child)
        pos = np.cumsum(rng.geometric(p, int(1.3 * p * block * max_blocks) + 50)) - 1
        t = Sprt(p0, p1)
        d = None
        for b in range(max_blocks):
            lo, hi = np.searchsorted(pos, [b * block, (b + 1) * block])
            d = t.update(pos[lo:hi] - b * block, block)
            if d is not None:
                break
        out.append(d)
    return out


def test_measured_risks_within_wald_bounds():
    # Wald 1947 (from memory): realised risks alpha' <= alpha/(1 - beta),
    # beta' <= beta/(1 - alpha). 600 streams each; measured with these seeds: false fails at
    # p0 4.83 % and passes at p1 5.17 % (3000-stream runs: 3.7-4.4 % and 5.0-5.7 %).
    p0, p1, alpha, beta = 1e-2, 2e-2, 0.05, 0.05
    at_p0 = simulate(p0, p0, p1, 600, seed=11)
    at_p1 = simulate(p1, p0, p1, 600, seed=12)
    assert all(d is not None for d in at_p0 + at_p1)
    false_fail = sum(d.outcome == "fail" for d in at_p0)
    false_pass = sum(d.outcome == "pass" for d in at_p1)
    # binomial slack: the measured rate must be consistent (99 % Clopper-Pearson) with the risk
    assert clopper_pearson(false_fail, 600, 0.99).low <= alpha
    assert clopper_pearson(false_pass, 600, 0.99).low <= beta / (1 - alpha)
    # and the test really separates the hypotheses
    assert false_fail < 60 and false_pass < 60
    # Wald's average sample number ignores overshoot; measured means are close (here 844.7 vs
    # 849.5 at p0, 770.2 vs 677.1 at p1: the fail boundary is crossed by jumps of ln 2)
    mean0 = np.mean([d.bits_used for d in at_p0])
    mean1 = np.mean([d.bits_used for d in at_p1])
    assert mean0 == pytest.approx(expected_sample_size(p0, p0, p1, alpha, beta), rel=0.15)
    assert 0.9 <= mean1 / expected_sample_size(p1, p0, p1, alpha, beta) <= 1.25


def test_measured_operating_characteristic_between_hypotheses():
    # Wald's OC approximation at p = 1.5e-2 (L = 0.4187); measured 0.4333 here (600 streams),
    # 0.4217 with 3000
    p = 1.5e-2
    runs = simulate(p, 1e-2, 2e-2, 600, seed=5)
    passed = sum(d.outcome == "pass" for d in runs) / 600
    assert passed == pytest.approx(operating_characteristic(p, 1e-2, 2e-2), abs=0.07)


# ---------------------------------------------------------------------------------------------
# planning formulas


def test_oc_and_asn_identities():
    # Wald 1947 (from memory): L(p0) = 1 - alpha, L(p1) = beta;
    # E0[n] = ((1 - alpha) ln B + alpha ln A)/E0[z], E1[n] = (beta ln B + (1 - beta) ln A)/E1[z]
    p0, p1, alpha, beta = 1e-5, 2.8e-5, 0.05, 0.1
    la, lb = math.log((1 - beta) / alpha), math.log(beta / (1 - alpha))
    ez0 = p0 * math.log(p1 / p0) + (1 - p0) * math.log((1 - p1) / (1 - p0))
    ez1 = p1 * math.log(p1 / p0) + (1 - p1) * math.log((1 - p1) / (1 - p0))
    assert operating_characteristic(p0, p0, p1, alpha, beta) == pytest.approx(1 - alpha)
    assert operating_characteristic(p1, p0, p1, alpha, beta) == pytest.approx(beta)
    e0 = ((1 - alpha) * lb + alpha * la) / ez0
    e1 = (beta * lb + (1 - beta) * la) / ez1
    # (rel 1e-9: E[z] is a small difference; the module uses log1p, this test plain log)
    assert expected_sample_size(p0, p0, p1, alpha, beta) == pytest.approx(e0, rel=1e-9)
    assert expected_sample_size(p1, p0, p1, alpha, beta) == pytest.approx(e1, rel=1e-9)
    # the general path (solving for Wald's h) is continuous with the special cases
    assert expected_sample_size(p0 * (1 + 1e-8), p0, p1, alpha, beta) == pytest.approx(e0,
                                                                                      rel=1e-5)
    assert expected_sample_size(p1 * (1 - 1e-8), p0, p1, alpha, beta) == pytest.approx(e1,
                                                                                      rel=1e-5)
    # and with the E[z] = 0 limit -ln A ln B / E[z^2]
    ls, lr = math.log(p1 / p0), math.log((1 - p1) / (1 - p0))
    p_star = -lr / (ls - lr)
    limit = -la * lb / (p_star * ls**2 + (1 - p_star) * lr**2)
    for p in (p_star * (1 - 1e-6), p_star, p_star * (1 + 1e-6)):
        assert expected_sample_size(p, p0, p1, alpha, beta) == pytest.approx(limit, rel=1e-4)
    # OC falls from 1 to 0; a perfect device passes after ln B / ln((1-p1)/(1-p0)) bits
    grid = np.geomspace(1e-7, 1e-3, 30)
    oc = [operating_characteristic(p, p0, p1, alpha, beta) for p in grid]
    assert np.all(np.diff(oc) <= 0) and oc[0] > 0.999 and oc[-1] < 1e-6
    assert operating_characteristic(0.0, p0, p1) == 1.0
    assert expected_sample_size(0.0, p0, p1, alpha, beta) == pytest.approx(lb / lr)


def test_fixed_sample_size_meets_both_risks():
    # the exact fixed-sample test, checked with scipy's binomial distribution: fail when the
    # error count exceeds c; P0(fail) <= alpha, P1(pass) <= beta; one bit fewer is not enough
    for p0, p1 in [(1e-2, 2e-2), (1e-3, 1.5e-3)]:
        n = fixed_sample_size(p0, p1, 0.05, 0.05, method="exact")

        def feasible(m):
            c = stats.binom.isf(0.05, m, p0)
            return stats.binom.sf(c, m, p0) <= 0.05 and stats.binom.cdf(c, m, p1) <= 0.05

        assert feasible(n) and not feasible(n - 1)
        normal = fixed_sample_size(p0, p1)
        assert normal == pytest.approx(n, rel=0.1)  # normal approximation, common practice


def test_asn_ratio_qpsk_1e5_half_db_margin():
    # QPSK at BER 1e-5 (9.588 dB from Pb = Q(sqrt(2 Eb/N0)), Proakis & Salehi, Digital
    # Communications, 5th ed., ch. 4, section from memory) with a 0.5 dB margin, 5 % risks:
    # p1 = ber('qpsk', 9.088 dB) = 2.8329e-5. Measured: fixed-sample sizes 598 761 bits (exact
    # binomial) / 579 776 (normal); Wald's ASN 334 766 at p0 and 237 245 at p1; ratios to the
    # exact fixed size 0.559 and 0.396 (to the normal one 0.577 and 0.409).
    x = ebn0_for_ber("qpsk", 1e-5)
    p0, p1 = ber("qpsk", x), ber("qpsk", x - 0.5)
    assert p0 == pytest.approx(1e-5, rel=1e-9)
    assert p1 == pytest.approx(2.8329e-5, rel=1e-4)
    for method in ("exact", "normal"):
        n_fixed = fixed_sample_size(p0, p1, 0.05, 0.05, method=method)
        assert expected_sample_size(p0, p0, p1) / n_fixed < 0.6
        assert expected_sample_size(p1, p0, p1) / n_fixed < 0.6
    n_exact = fixed_sample_size(p0, p1, method="exact")
    assert expected_sample_size(p0, p0, p1) / n_exact == pytest.approx(0.56, abs=0.01)
    assert expected_sample_size(p1, p0, p1) / n_exact == pytest.approx(0.40, abs=0.01)


# ---------------------------------------------------------------------------------------------
# arguments


@pytest.mark.parametrize("kwargs, name", [
    (dict(p0=2e-3, p1=1e-3), "p1"), (dict(p0=0.0, p1=1e-3), "p0"), (dict(p0=1e-3, p1=1.0), "p1"),
    (dict(p0=1e-3, p1=2e-3, alpha=0.0), "alpha"), (dict(p0=1e-3, p1=2e-3, beta=1.5), "beta"),
    (dict(p0=1e-3, p1=2e-3, alpha=0.6, beta=0.5), "alpha")])
def test_sprt_rejects_bad_arguments(kwargs, name):
    with pytest.raises(ConfigError, match=name):
        Sprt(**kwargs)


@pytest.mark.parametrize("positions, block_len", [
    ([3, 2], 10), ([0, 10], 10), ([-1], 10), ([1, 1], 10), ([0.5], 10), ([[1]], 10)])
def test_update_rejects_bad_positions(positions, block_len):
    with pytest.raises(ConfigError, match="error_positions"):
        Sprt(1e-2, 2e-2).update(np.array(positions), block_len)


def test_update_rejects_bad_block_len_and_planning_arguments():
    with pytest.raises(ConfigError, match="block_len"):
        Sprt(1e-2, 2e-2).update(np.array([], dtype=np.int64), -1)
    with pytest.raises(ConfigError, match="method"):
        fixed_sample_size(1e-2, 2e-2, method="wald")
    with pytest.raises(ConfigError, match="p_true"):
        expected_sample_size(1.5, 1e-2, 2e-2)
    assert Sprt(1e-2, 2e-2).update(np.array([], dtype=np.int64), 0) is None
