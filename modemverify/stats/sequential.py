"""Wald's sequential probability ratio test (SPRT) for a bit error rate limit.

The device is fed bits block by block; the test decides, at the exact bit where the evidence
suffices, between

* H0: ``p = p0`` -- the device performs as theory predicts at the measured Eb/N0 (a good device);
* H1: ``p = p1`` -- the device is at the limit, theory at ``Eb/N0 - margin`` (``p1 > p0``).

After ``n`` bits with ``k`` errors the log likelihood ratio is
``llr = k ln(p1/p0) + (n - k) ln((1 - p1)/(1 - p0))``. The test decides *fail* (accept H1) as soon
as ``llr >= ln A`` and *pass* (accept H0) as soon as ``llr <= ln B``, with Wald's thresholds
``A = (1 - beta)/alpha`` and ``B = beta/(1 - alpha)``: ``alpha`` is the risk of failing a good
device, ``beta`` the risk of passing a device at the limit. The realised risks satisfy
``alpha' <= alpha/(1 - beta)``, ``beta' <= beta/(1 - alpha)`` and ``alpha' + beta' <= alpha + beta``
(A. Wald, Sequential Analysis, 1947 — from memory). For devices between p0 and p1 either
decision may come; that is the indifference zone the margin defines.

Exactness without a loop over bits: every correct bit adds ``ln((1-p1)/(1-p0)) < 0`` and every
error adds ``ln(p1/p0) > 0``, so ``llr`` can only reach ``ln A`` on an error and only reach
``ln B`` on a correct bit. :meth:`Sprt.update` therefore checks the cumulative value at each
error position and solves for the crossing inside each run of correct bits, all with numpy. The
log likelihood ratio is always evaluated from the integer counts ``(n, k)`` by the formula above,
never accumulated, so the stopping bit does not depend on how the stream is cut into blocks.

References
----------
.. [1] A. Wald, "Sequential tests of statistical hypotheses", Ann. Math. Statist.
   16(2):117-186, 1945 (citation details from memory).
.. [2] A. Wald, *Sequential Analysis*, Wiley, 1947 (Dover reprint): thresholds, the operating
   characteristic and the average sample number.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
from scipy import optimize, stats

from modemverify.errors import ConfigError
from modemverify.options import number_in, whole_number

__all__ = [
    "Decision", "SprtState", "Sprt", "wald_thresholds", "fixed_sample_size",
    "operating_characteristic", "expected_sample_size",
]


class Decision(NamedTuple):
    """Outcome of a sequential BER test.

    ``outcome`` is ``"pass"`` (accept H0: the device meets theory) or ``"fail"`` (accept H1: at
    or worse than the limit). A caller that stops feeding bits before a decision reports that
    itself (the BER check calls it *inconclusive*, never a pass). ``bits_used`` and
    ``errors_used`` count the bits up to and including the deciding one; ``llr`` is the log
    likelihood ratio there.
    """

    outcome: str
    bits_used: int
    errors_used: int
    llr: float


class SprtState(NamedTuple):
    """Bits and errors consumed so far and the current log likelihood ratio."""

    bits: int
    errors: int
    llr: float


def _probability(value, name: str) -> float:
    return number_in(value, name, 0.0, 1.0, open_low=True, open_high=True,
                     expected="a probability strictly between 0 and 1")

def _check_pair(p0, p1) -> tuple[float, float]:
    p0 = _probability(p0, "p0")
    p1 = _probability(p1, "p1")
    if not p1 > p0:
        raise ConfigError(f"p1={p1!r}: the limit must be a higher error rate than p0={p0!r} "
                          "(theory at Eb/N0 - margin, with margin > 0)")
    return p0, p1


def _check_risks(alpha, beta) -> tuple[float, float]:
    a = _probability(alpha, "alpha")
    b = _probability(beta, "beta")
    if not a + b < 1.0:
        raise ConfigError(f"alpha={a!r}, beta={b!r}: alpha + beta must be below 1")
    return a, b


def wald_thresholds(alpha: float = 0.05, beta: float = 0.05) -> tuple[float, float]:
    """Wald's thresholds ``(A, B) = ((1 - beta)/alpha, beta/(1 - alpha))`` on the likelihood ratio.

    Examples
    --------
    >>> a, b = wald_thresholds(0.05, 0.05)
    >>> round(a, 6), round(b, 6)
    (19.0, 0.052632)
    """
    a, b = _check_risks(alpha, beta)
    return (1.0 - b) / a, b / (1.0 - a)


class Sprt:
    """Sequential probability ratio test of a bit error rate, fed in blocks.

    Parameters
    ----------
    p0 : float
        Error rate of a good device (theory at the measured Eb/N0).
    p1 : float
        The limit (theory at Eb/N0 - margin), ``p1 > p0``.
    alpha : float
        Risk of failing a good device (deciding "fail" when ``p = p0``).
    beta : float
        Risk of passing a device at the limit (deciding "pass" when ``p = p1``).

    Attributes
    ----------
    log_a, log_b : float
        ``ln A`` and ``ln B`` of Wald's thresholds (:func:`wald_thresholds`), computed once.
    w_error, w_correct : float
        Log likelihood-ratio increment of an error, ``ln(p1/p0) > 0``, and of a correct bit,
        ``ln((1 - p1)/(1 - p0)) < 0``.

    Examples
    --------
    >>> t = Sprt(p0=1e-2, p1=2e-2)
    >>> d = t.update(np.array([], dtype=np.int64), 1000)   # 1000 correct bits
    >>> d.outcome, d.bits_used, d.errors_used
    ('pass', 291, 0)
    >>> t = Sprt(p0=1e-2, p1=2e-2)
    >>> t.update(np.array([3, 5, 9, 20, 21]), 1000).outcome   # errors come thick and fast
    'fail'

    """

    def __init__(self, p0: float, p1: float, alpha: float = 0.05, beta: float = 0.05):
        self.p0, self.p1 = _check_pair(p0, p1)
        self.alpha, self.beta = _check_risks(alpha, beta)
        a, b = wald_thresholds(self.alpha, self.beta)
        self.log_a = math.log(a)
        self.log_b = math.log(b)
        #: log likelihood-ratio increment of an error (> 0) and of a correct bit (< 0)
        self.w_error = math.log(self.p1 / self.p0)
        self.w_correct = math.log1p(-self.p1) - math.log1p(-self.p0)
        self._bits = 0
        self._errors = 0
        self._decision: Decision | None = None

    def __repr__(self) -> str:
        return (f"Sprt(p0={self.p0!r}, p1={self.p1!r}, alpha={self.alpha!r}, "
                f"beta={self.beta!r})")

    # the one formula; used everywhere so that results do not depend on block boundaries
    def _llr(self, n, k):
        return k * self.w_error + (n - k) * self.w_correct

    @property
    def state(self) -> SprtState:
        """Bits and errors consumed so far and the log likelihood ratio."""
        return SprtState(self._bits, self._errors, float(self._llr(self._bits, self._errors)))

    def restore(self, bits: int, errors: int) -> "Sprt":
        """Continue from ``bits`` consumed with ``errors`` among them, undecided (a resumed
        campaign); the log likelihood ratio follows from the counts.

        >>> t = Sprt(1e-2, 2e-2).restore(100, 1)
        >>> t.state.bits, t.state.errors
        (100, 1)
        """
        bits = _index(bits, "bits", minimum=0)
        errors = _index(errors, "errors", minimum=0)
        if errors > bits:
            raise ConfigError(f"errors={errors} > bits={bits}")
        if self._decision is not None or self._bits:
            raise ConfigError("restore() is for a fresh test")
        self._bits, self._errors = bits, errors
        return self

    def update(self, error_positions, block_len: int) -> Decision | None:
        """Consume one block of compared bits and return the decision if one is reached in it.

        Parameters
        ----------
        error_positions : array_like of int
            Indices (``0 .. block_len - 1``, strictly increasing) of the bit errors in the block.
        block_len : int
            Number of bits in the block.

        Returns
        -------
        Decision or None
            The decision at the exact deciding bit (the rest of the block is not consumed), or
            ``None`` to ask for more bits. Once decided, further calls return the same decision
            and consume nothing.
        """
        block_len = _index(block_len, "block_len", minimum=0)
        pos = np.asarray(error_positions)
        if pos.size == 0:
            pos = np.zeros(0, dtype=np.int64)
        if pos.ndim != 1 or not np.issubdtype(pos.dtype, np.integer):
            raise ConfigError(f"error_positions: expected a 1-D integer array, got "
                              f"dtype {pos.dtype}, shape {pos.shape}")
        pos = pos.astype(np.int64, copy=False)
        if pos.size and (pos[0] < 0 or pos[-1] >= block_len or np.any(np.diff(pos) <= 0)):
            raise ConfigError(f"error_positions: expected strictly increasing indices in "
                              f"[0, {block_len}), got {pos[:8].tolist()}"
                              f"{'...' if pos.size > 8 else ''}")
        if self._decision is not None:
            return self._decision

        n0, k0 = self._bits, self._errors
        m = pos.size
        j = np.arange(1, m + 1, dtype=np.int64)

        # 'fail' can only happen on an error bit: llr right after error j (1-based in block).
        n_at_err = n0 + pos + 1
        k_at_err = k0 + j
        fails = np.flatnonzero(self._llr(n_at_err, k_at_err) >= self.log_a)
        fail_n = int(n_at_err[fails[0]]) if fails.size else None

        # 'pass' can only happen inside a run of correct bits. Run g starts after error g
        # (g = 0: at the block start) and ends before error g + 1 (or at the block end).
        gap_k = k0 + np.arange(m + 1, dtype=np.int64)          # errors so far in run g
        gap_first = n0 + np.concatenate(([0], pos + 1)) + 1      # n after the run's first bit
        gap_last = n0 + np.concatenate((pos, [block_len]))       # n after its last bit
        has_bits = gap_last >= gap_first
        llr_start = self._llr(gap_first - 1, gap_k)              # value before the run
        # Solve llr_start + s * w_correct <= log_b for the smallest s >= 1 (w_correct < 0)...
        steps = np.ceil((self.log_b - llr_start) / self.w_correct)
        steps = np.clip(steps, 1.0, float(2 ** 62)).astype(np.int64)
        cand = np.minimum(gap_first - 1 + steps, gap_last + 1)
        # ...then undo the rounding of that division against the exact formula, which is
        # monotone in n; in practice these loops run at most once.
        while True:
            back = (cand - 1 >= gap_first) & (self._llr(cand - 1, gap_k) <= self.log_b)
            if not back.any():
                break
            cand = np.where(back, cand - 1, cand)
        while True:
            fwd = (cand <= gap_last) & (self._llr(cand, gap_k) > self.log_b)
            if not fwd.any():
                break
            cand = np.where(fwd, cand + 1, cand)
        crosses = has_bits & (cand <= gap_last)
        passes = np.flatnonzero(crosses)
        pass_n = int(cand[passes[0]]) if passes.size else None

        if fail_n is not None and (pass_n is None or fail_n < pass_n):
            self._consume_to(fail_n, pos, n0)
            self._decision = Decision("fail", self._bits, self._errors, self.state.llr)
        elif pass_n is not None:
            self._consume_to(pass_n, pos, n0)
            self._decision = Decision("pass", self._bits, self._errors, self.state.llr)
        else:
            self._bits = n0 + block_len
            self._errors = k0 + m
        return self._decision

    def _consume_to(self, n_stop: int, pos: np.ndarray, n0: int) -> None:
        self._errors += int(np.count_nonzero(n0 + pos + 1 <= n_stop))
        self._bits = n_stop



def _index(value, name: str, *, minimum: int) -> int:
    return whole_number(value, name, minimum)


def fixed_sample_size(p0: float, p1: float, alpha: float = 0.05, beta: float = 0.05, *,
                      method: str = "normal") -> int:
    """Bits a fixed-sample (Neyman-Pearson) test needs for the same risks as the SPRT.

    The one-sided test "fail when the error count reaches ``c``" must have
    ``P(fail | p0) <= alpha`` and ``P(pass | p1) <= beta``.

    Parameters
    ----------
    p0, p1 : float
        Good-device error rate and limit, ``p1 > p0``.
    alpha, beta : float
        Risks, as for :class:`Sprt`.
    method : {"normal", "exact"}
        ``"normal"``: ``n = ((z_a sqrt(p0 q0) + z_b sqrt(p1 q1)) / (p1 - p0))**2`` rounded up
        (``z`` standard normal quantiles; common practice). ``"exact"``: the smallest ``n``
        found by bisection for which the exact binomial test with the best threshold meets both
        risks (the binomial's discreteness makes feasibility slightly non-monotone in ``n``; the
        bisection returns a feasible ``n`` at the boundary).

    Returns
    -------
    int
        Number of bits.

    Examples
    --------
    >>> fixed_sample_size(1e-2, 2e-2), fixed_sample_size(1e-2, 2e-2, method="exact")
    (1552, 1625)
    """
    p0, p1 = _check_pair(p0, p1)
    a, b = _check_risks(alpha, beta)
    za, zb = stats.norm.isf(a), stats.norm.isf(b)
    n_normal = math.ceil(((za * math.sqrt(p0 * (1 - p0)) + zb * math.sqrt(p1 * (1 - p1)))
                          / (p1 - p0)) ** 2)
    if method == "normal":
        return n_normal
    if method != "exact":
        raise ConfigError(f"method={method!r}: expected 'normal' or 'exact'")

    def feasible(n: int) -> bool:
        c = stats.binom.isf(a, n, p0)  # smallest c with P0(K > c) <= alpha: fail when K > c
        return bool(stats.binom.cdf(c, n, p1) <= b)

    lo, hi = 1, max(2, n_normal)
    while not feasible(hi):
        lo, hi = hi, 2 * hi
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if feasible(mid):
            hi = mid
        else:
            lo = mid
    return hi


def _h_for_p(p: float, ls: float, lr: float) -> float:
    """Solve p = (1 - r^h) / (s^h - r^h) for h (Wald's OC parametrisation), ls = ln s, lr = ln r."""

    def p_of_h(h: float) -> float:
        if h == 0.0:
            return -lr / (ls - lr)
        num = -math.expm1(h * lr)
        den = math.exp(h * ls) - math.exp(h * lr)
        return num / den

    # p_of_h falls from 1 (h -> -inf) to 0 (h -> +inf). Bracket the root without letting
    # exp overflow: h ln s <= 700 on the positive side, h ln r <= 700 on the negative side.
    h_pos, h_neg = 700.0 / ls, -700.0 / -lr
    lo, hi = max(-1.0, h_neg), min(1.0, h_pos)
    while p_of_h(hi) > p and hi < h_pos:
        hi = min(2.0 * hi, h_pos)
    while p_of_h(lo) < p and lo > h_neg:
        lo = max(2.0 * lo, h_neg)
    return optimize.brentq(lambda h: p_of_h(h) - p, lo, hi, xtol=1e-14, maxiter=300)


def operating_characteristic(p_true: float, p0: float, p1: float, alpha: float = 0.05,
                             beta: float = 0.05) -> float:
    """Wald's approximation of the probability that the SPRT passes a device with rate ``p_true``.

    ``L(p) = (A^h - 1)/(A^h - B^h)`` where ``h != 0`` solves ``p (p1/p0)^h +
    (1 - p)((1 - p1)/(1 - p0))^h = 1`` (Wald 1947; boundary overshoot ignored). ``L(p0) = 1 -
    alpha`` and ``L(p1) = beta``.

    Examples
    --------
    >>> round(operating_characteristic(1e-2, 1e-2, 2e-2), 6)
    0.95
    """
    t = Sprt(p0, p1, alpha, beta)
    p = _rate(p_true)
    la, lb = t.log_a, t.log_b
    if p == 0.0:
        return 1.0
    if p == 1.0:
        return 0.0
    ls, lr = t.w_error, t.w_correct
    h = _h_for_p(p, ls, lr)
    if abs(h) < 1e-9:
        return la / (la - lb)
    # (A^h - 1)/(A^h - B^h), written with exp/expm1 of h ln A, h ln B to avoid overflow
    x, y = h * la, h * lb  # ln A^h, ln B^h; x and y have opposite signs
    if x > 0:  # divide through by A^h
        return -math.expm1(-x) / -math.expm1(y - x)
    # divide through by B^h
    return math.exp(-y) * math.expm1(x) / math.expm1(x - y)


def _rate(p_true) -> float:
    return number_in(p_true, "p_true", 0.0, 1.0, expected="a probability in [0, 1]")

def expected_sample_size(p_true: float, p0: float, p1: float, alpha: float = 0.05,
                         beta: float = 0.05) -> float:
    """Wald's approximation of the SPRT's average sample number (bits) at error rate ``p_true``.

    ``E[n] = (L(p) ln B + (1 - L(p)) ln A) / E[z]`` with ``E[z] = p ln(p1/p0) +
    (1 - p) ln((1 - p1)/(1 - p0))`` and ``L`` the operating characteristic; at the rate where
    ``E[z] = 0`` the limit ``-ln A ln B / E[z^2]`` is used. At ``p0`` this is
    ``((1 - alpha) ln B + alpha ln A)/E0[z]``, at ``p1`` ``(beta ln B + (1 - beta) ln A)/E1[z]``.
    Overshoot of the boundaries is ignored, so the true mean is slightly larger (Wald 1947).

    Examples
    --------
    >>> round(expected_sample_size(1e-2, 1e-2, 2e-2), 1)
    849.5
    """
    t = Sprt(p0, p1, alpha, beta)
    p = _rate(p_true)
    la, lb, ls, lr = t.log_a, t.log_b, t.w_error, t.w_correct
    ez = p * ls + (1 - p) * lr
    if p == t.p0:
        oc = 1.0 - t.alpha
    elif p == t.p1:
        oc = t.beta
    else:
        oc = operating_characteristic(p, t.p0, t.p1, t.alpha, t.beta)
    if abs(ez) < 1e-12 * max(ls, -lr):
        ez2 = p * ls * ls + (1 - p) * lr * lr
        return -la * lb / ez2
    return (oc * lb + (1.0 - oc) * la) / ez
