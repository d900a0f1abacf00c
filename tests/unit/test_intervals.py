"""BER confidence intervals against published values, scipy, and a bursty-error simulation.

Primary sources: C. J. Clopper and E. S. Pearson, Biometrika 26(4):404-413, 1934 (the exact
interval); the worked example of M. C. Jeruchim, P. Balaban and K. S. Shanmugan, *Simulation of
Communication Systems*, 2nd ed., 2000 (section not recorded); J. A. Hanley and A. Lippman-Hand,
JAMA 249(13):1743-1745, 1983 (rule of three; citation details from memory); scipy's
``BinomTestResult.proportion_ci`` documentation.
"""

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from modemverify.errors import ConfigError
from modemverify.stats import (
    DISPERSION_ALPHA,
    ConfidenceInterval,
    block_interval,
    clopper_pearson,
    dispersion_test,
    lower_bound,
    upper_bound,
)


def test_scipy_documentation_example():
    # scipy docs, BinomTestResult.proportion_ci example: binomtest(7, 50, p=0.1).proportion_ci()
    # -> ConfidenceInterval(low=0.05819170033997342, high=0.2673960024970084)
    ci = clopper_pearson(7, 50)
    assert ci.low == pytest.approx(0.0581917, rel=1e-6)
    assert ci.high == pytest.approx(0.267396, rel=1e-6)
    low, high = ci  # unpacks like scipy's ConfidenceInterval
    assert (low, high) == (ci.low, ci.high)


def test_one_result_type_for_every_interval():
    # clopper_pearson and block_interval return the same frozen type; it records its level and
    # how it was made, and has no dispersion estimate unless built from block counts
    ci = clopper_pearson(7, 50, 0.9)
    assert type(ci) is ConfidenceInterval
    assert (ci.confidence_level, ci.dispersion, ci.method) == (0.9, None, "clopper-pearson")
    with pytest.raises(dataclasses.FrozenInstanceError):
        ci.low = 0.0
    blk = block_interval([3, 5, 4, 6, 2, 4, 5, 3, 4, 4], 10_000, 0.9)
    assert type(blk) is ConfidenceInterval and blk.confidence_level == 0.9
    assert blk.dispersion == pytest.approx(
        dispersion_test([3, 5, 4, 6, 2, 4, 5, 3, 4, 4], 10_000).phi, rel=1e-15)
    assert tuple(blk) == tuple(clopper_pearson(40, 100_000, 0.9))


def test_worked_example_100_errors_in_a_million():
    # M. C. Jeruchim, P. Balaban, K. S. Shanmugan, Simulation of Communication Systems, 2nd ed.,
    # 2000 -- worked example (section not recorded), 100 errors in 1e6 bits:
    # 95 % [0.0000814, 0.0001216], 90 % [0.0000841, 0.0001181]; 5 digits from scipy.
    ci95 = clopper_pearson(100, 10**6, 0.95)
    assert ci95.low == pytest.approx(8.1365e-5, rel=1e-4)
    assert ci95.high == pytest.approx(1.2163e-4, rel=1e-4)
    ci90 = clopper_pearson(100, 10**6, 0.90)
    assert ci90.low == pytest.approx(8.4140e-5, rel=1e-4)
    assert ci90.high == pytest.approx(1.1808e-4, rel=1e-4)
    # rule of thumb "about 100 errors for +-20 %": M. C. Jeruchim, "Techniques for estimating
    # the bit error rate in the simulation of digital communication systems", IEEE JSAC
    # SAC-2(1):153-170, 1984 (attribution from memory); exact 95 % is -18.6 % / +21.6 %
    assert ci95.low / 1e-4 - 1 == pytest.approx(-0.186, abs=5e-4)
    assert ci95.high / 1e-4 - 1 == pytest.approx(0.216, abs=5e-4)


@pytest.mark.parametrize("n, times_n", [(10**3, 2.9912), (10**6, 2.9957)])
def test_rule_of_three(n, times_n):
    # J. A. Hanley, A. Lippman-Hand, JAMA 249(13):1743-1745, 1983 (citation details from
    # memory): 0 errors in N bits -> one-sided 95 % upper bound 1 - 0.05**(1/N) ~ 2.996/N
    ub = upper_bound(0, n, 0.95)
    assert ub == pytest.approx(1 - 0.05 ** (1 / n), rel=1e-9)
    assert ub * n == pytest.approx(times_n, abs=1e-4)  # N (1 - 0.05**(1/N)), evaluated


def test_rule_of_three_pitfall_two_sided():
    # the rule of three is one-sided (Hanley & Lippman-Hand 1983); the two-sided 95 %
    # Clopper-Pearson upper end for 0 errors is 1 - 0.025**(1/N) ~ -ln(0.025)/N = 3.689/N
    # (Clopper & Pearson 1934), and the rule of three is the upper end of the two-sided 90 %
    n = 10**6
    assert clopper_pearson(0, n, 0.95).high * n == pytest.approx(3.6889, abs=1e-4)
    assert clopper_pearson(0, n, 0.95).low == 0.0
    assert upper_bound(0, n, 0.95) == pytest.approx(clopper_pearson(0, n, 0.90).high, rel=1e-9)


@given(k=st.integers(0, 500), extra=st.integers(0, 10**7),
       conf=st.sampled_from([0.8, 0.9, 0.95, 0.99, 0.999]))
@settings(max_examples=60, deadline=None)
def test_agrees_with_scipy_binomtest_and_tail_equations(k, extra, conf):
    # Clopper & Pearson (Biometrika 26(4):404-413, 1934): the ends solve
    # P(K >= k | low) = a/2 and P(K <= k | high) = a/2.
    n = k + extra
    if n == 0:
        return
    a = 1 - conf
    ci = clopper_pearson(k, n, conf)
    # scipy's own exact interval (scipy docs, BinomTestResult.proportion_ci); scipy solves with
    # brentq at an absolute tolerance of 2e-12, hence the abs term
    ref = stats.binomtest(k, n).proportion_ci(confidence_level=conf, method="exact")
    assert ci.low == pytest.approx(ref.low, rel=1e-8, abs=1e-11)
    assert ci.high == pytest.approx(ref.high, rel=1e-8, abs=1e-11)
    # the defining tail equations, with scipy's binomial distribution
    if k > 0:
        assert stats.binom.sf(k - 1, n, ci.low) == pytest.approx(a / 2, rel=1e-7)
    if k < n:
        assert stats.binom.cdf(k, n, ci.high) == pytest.approx(a / 2, rel=1e-7)
    # one-sided bounds are the ends of the two-sided interval at level 2c - 1
    assert upper_bound(k, n, (1 + conf) / 2) == pytest.approx(ci.high, rel=1e-12)
    assert lower_bound(k, n, (1 + conf) / 2) == pytest.approx(ci.low, rel=1e-12, abs=1e-300)


@pytest.mark.parametrize("k", [0, 1, 10, 100])
def test_exact_at_low_bit_error_rates(k):
    # At BER ~1e-11 the binomial interval is the exact Poisson (gamma) interval
    # [G^-1(a/2; k), G^-1(1 - a/2; k + 1)] / n to within k/n (F. Garwood, Biometrika 1936,
    # citation from memory; common practice; the Poisson figures -18.6 % / +21.6 % for 100
    # errors are those of the Jeruchim et al. worked example above).
    # scipy.stats.binomtest(...).proportion_ci is off by up to 13 % here (absolute brentq
    # tolerance), so this is checked against the gamma quantiles instead.
    n = 10**13
    ci = clopper_pearson(k, n, 0.95)
    low = 0.0 if k == 0 else stats.gamma.ppf(0.025, k) / n
    assert ci.low == pytest.approx(low, rel=1e-9)
    assert ci.high == pytest.approx(stats.gamma.isf(0.025, k + 1) / n, rel=1e-9)
    assert upper_bound(k, n, 0.95) == pytest.approx(stats.gamma.isf(0.05, k + 1) / n, rel=1e-9)
    if k == 0:  # rule of three (Hanley & Lippman-Hand 1983) and -ln(0.025) = 3.6889
        assert upper_bound(0, n) * n == pytest.approx(2.9957, abs=1e-4)
        assert ci.high * n == pytest.approx(3.6889, abs=1e-4)
    if k == 100:
        assert ci.low * n / 100 - 1 == pytest.approx(-0.186, abs=5e-4)
        assert ci.high * n / 100 - 1 == pytest.approx(0.216, abs=5e-4)


@pytest.mark.parametrize("args, name", [
    ((5, 4), "errors"), ((-1, 10), "errors"), ((1, 0), "n"), ((1.5, 10), "errors"),
    ((True, 10), "errors"), ((1, 10, 1.0), "confidence"), ((1, 10, 0), "confidence"),
    ((1, 10, "high"), "confidence")])
def test_clopper_pearson_rejects_bad_arguments(args, name):
    with pytest.raises(ConfigError, match=name):
        clopper_pearson(*args)


# ---------------------------------------------------------------------------------------------
# over-dispersion


def test_dispersion_statistic_equals_contingency_chi_square():
    # Pearson's X^2 for homogeneity of B binomial proportions is the chi-square of the 2 x B
    # table (errors, correct bits); scipy.stats.chi2_contingency computes it independently.
    rng = np.random.default_rng(3)
    n = rng.integers(5_000, 20_000, 30)
    k = rng.binomial(n, 2e-3)
    k[4] += 25  # some extra dispersion so the statistic is not trivially small
    test = dispersion_test(k, n)
    ref = stats.chi2_contingency(np.vstack([k, n - k]), correction=False)
    assert test.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert test.pvalue == pytest.approx(ref.pvalue, rel=1e-8)
    assert test.dof == ref.dof == 29
    assert test.phi == pytest.approx(ref.statistic / 29, rel=1e-12)


def _gilbert_block_counts(rng, n_blocks, block_len, mean_good, mean_bad):
    """Error counts per block of a Gilbert-style two-state channel, without a loop over bits.

    Sojourns in the good state (no errors) and the bad state (every bit wrong) are geometric
    with means ``mean_good`` and ``mean_bad`` bits; the first state is drawn from the
    stationary law (sojourns are memoryless, so the process is stationary and the true error
    rate is exactly mean_bad / (mean_good + mean_bad)). Errors in [0, x) are counted from the
    sorted burst starts with searchsorted.
    """
    total = n_blocks * block_len
    n_pairs = int(1.5 * total / (mean_good + mean_bad)) + 20
    while True:
        good = rng.geometric(1.0 / mean_good, n_pairs)
        bad = rng.geometric(1.0 / mean_bad, n_pairs)
        if rng.random() < mean_bad / (mean_good + mean_bad):
            good[0] = 0  # start inside a burst
        starts = np.cumsum(good) + np.concatenate(([0], np.cumsum(bad)[:-1]))
        if starts[-1] >= total:
            break
        n_pairs *= 2
    before = np.concatenate(([0], np.cumsum(bad)[:-1]))  # error bits before each burst
    edges = np.arange(n_blocks + 1, dtype=np.int64) * block_len
    idx = np.searchsorted(starts, edges, side="right") - 1
    safe = np.maximum(idx, 0)
    errors_before_edge = np.where(
        idx >= 0, before[safe] + np.minimum(edges - starts[safe], bad[safe]), 0)
    return np.diff(errors_before_edge)


def test_bursty_errors_naive_interval_undercovers_block_interval_covers():
    # Bursts of geometric length, mean 20 bits, true BER 1e-3; 100 blocks of 20 000 bits
    # (about 100 bursts, 2000 errors per run). Measured with this seed: naive binomial 95 %
    # interval covers the true rate in 25.25 % of 400 runs, block_interval in 95.75 % (seeds
    # 2-10: 24.5-27 % and 93.75-97.5 %); the dispersion factor is about 38 (~ E[L^2]/E[L]).
    mean_good, mean_bad, n_blocks, block_len = 19_980, 20, 100, 20_000
    p_true = mean_bad / (mean_good + mean_bad)
    naive = ours = 0
    reps = 400
    for child in np.random.SeedSequence(1).spawn(reps):
        rng = np.random.default_rng(child)
        k = _gilbert_block_counts(rng, n_blocks, block_len, mean_good, mean_bad)
        ci = clopper_pearson(int(k.sum()), n_blocks * block_len)
        naive += ci.low <= p_true <= ci.high
        res = block_interval(k, block_len)
        ours += res.low <= p_true <= res.high
        assert res.method == "clopper-pearson/design-effect"
        assert res.dispersion > 5
    assert naive / reps < 0.85
    assert ours / reps >= 0.90


def test_independent_errors_keep_exact_interval():
    # With binomial block counts the dispersion test rarely fires (nominal 1 % level); the
    # coverage stays that of Clopper-Pearson. Measured: 2 of 400 widened, 94 % covered (seed 7;
    # seeds 8-16: 1-8 widened, 92.75-98.5 % covered).
    reps, widened, covered, plain = 400, 0, 0, 0
    for child in np.random.SeedSequence(7).spawn(reps):
        k = np.random.default_rng(child).binomial(20_000, 1e-3, 100)
        res = block_interval(k, 20_000)
        widened += res.method != "clopper-pearson"
        covered += res.low <= 1e-3 <= res.high
        # the method follows the burst rule, and it is the one rule block_interval applies
        test = dispersion_test(k, 20_000)
        assert (res.method == "clopper-pearson") == (not test.bursty())
        if res.method == "clopper-pearson":  # not widened: exact interval of the pooled counts
            assert tuple(res) == tuple(clopper_pearson(int(k.sum()), 2_000_000))
            plain += 1
    assert widened <= 12  # binomial(400, 0.01): mean 4, P(> 12) < 1e-3
    assert plain == reps - widened
    assert covered / reps >= 0.91  # CP is conservative; slack for 400 runs


def test_design_effect_widens_by_sqrt_phi():
    # strongly over-dispersed counts: the half-width grows by about sqrt(phi) (quasi-binomial
    # variance phi p (1 - p) / n; Kish 1965 design effect, citation from memory)
    k = np.array([0, 0, 40, 0, 0, 0, 35, 0, 0, 0, 0, 45, 0, 0, 0, 0, 50, 0, 0, 30] * 3)
    res = block_interval(k, 10_000)
    plain = clopper_pearson(int(k.sum()), k.size * 10_000)
    assert res.method == "clopper-pearson/design-effect"
    assert res.dispersion == pytest.approx(dispersion_test(k, 10_000).phi)
    ratio = (res.high - res.low) / (plain.high - plain.low)
    assert ratio == pytest.approx(math.sqrt(res.dispersion), rel=0.1)
    p_hat = k.sum() / (k.size * 10_000)
    assert res.low < p_hat < res.high


def test_block_interval_edge_cases():
    # no errors: nothing to estimate dispersion from, exact interval of the pooled counts
    res = block_interval(np.zeros(20, dtype=int), 1000)
    assert res.dispersion is None and res.method == "clopper-pearson"
    assert res.low == 0.0 and res.high == pytest.approx(clopper_pearson(0, 20_000).high)
    # one block: no dispersion estimate
    res = block_interval([7], 1000)
    assert res.dispersion is None
    assert (res.low, res.high) == tuple(clopper_pearson(7, 1000))
    # per-block lengths
    res = block_interval([3, 1, 4], [1000, 500, 2000])
    assert (res.low, res.high) == tuple(clopper_pearson(8, 3500))


@pytest.mark.parametrize("k, n, match", [
    ([], 100, "errors_per_block"), ([[1, 2]], 100, "errors_per_block"),
    ([1.5, 2], 100, "errors_per_block"), ([-1, 2], 100, "errors_per_block"),
    ([1, 2], 0, "bits_per_block"), ([1, 2], [10, 10, 10], "bits_per_block"),
    ([11, 2], 10, "errors_per_block\\[0\\]")])
def test_block_interval_rejects_bad_arguments(k, n, match):
    with pytest.raises(ConfigError, match=match):
        block_interval(k, n)


def test_burst_rule_threshold():
    # phi > 1 and P(chi-square >= X^2) < alpha (Pearson's X^2 with B - 1 degrees of freedom;
    # quasi-binomial dispersion, common practice); the p-value is scipy's chi2.sf
    k = np.array([0, 0, 40, 0, 0, 0, 35, 0, 0, 0, 0, 45, 0, 0, 0, 0, 50, 0, 0, 30] * 3)
    test = dispersion_test(k, 10_000)
    assert test.pvalue == pytest.approx(stats.chi2.sf(test.statistic, k.size - 1), rel=1e-12)
    assert test.phi > 1 and test.bursty() and test.bursty(DISPERSION_ALPHA)
    assert DISPERSION_ALPHA == 0.01
    # at a level just below its p-value the same counts are not called bursty
    borderline = np.array([8, 2, 6, 3, 7, 1, 5, 4, 9, 2, 6, 3])
    t2 = dispersion_test(borderline, 5_000)
    assert t2.bursty(t2.pvalue * 1.001) and not t2.bursty(t2.pvalue * 0.999)
    # under-dispersed counts (phi < 1) are never bursty, whatever the level
    even = dispersion_test(np.full(30, 5), 5_000)
    assert even.phi == 0.0 and not even.bursty(0.999)
    # no estimate, no bursts
    assert not dispersion_test([0, 0, 0], 100).bursty()
    with pytest.raises(ConfigError, match="dispersion_alpha"):
        test.bursty(1.5)


def test_block_interval_rejects_bad_levels():
    with pytest.raises(ConfigError, match="dispersion_alpha"):
        block_interval([1, 2], 10, dispersion_alpha=0)
    with pytest.raises(ConfigError, match="confidence"):
        block_interval([1, 2], 10, confidence=95)
