"""The weighted error rate of importance sampling: its tally, interval, diagnostics and tests.

A symbol ``i`` sent with importance-sampled noise contributes ``X_i = w_i e_i / k``: its weight
(true over biased noise density, :mod:`modemverify.vectors.biasing`) times its bit errors over
the bits per symbol. For a memoryless detector the ``X_i`` are independent and identically
distributed with mean the BER, so the estimate is their mean, and its variance is estimated
from the same draws (``sum X`` and ``sum X^2``, kept per block in a :class:`WeightedTally`).

**The interval** (:func:`weighted_interval`) is Student's t on that mean with the effective
sample size of the error contributions minus one as its degrees of freedom (conservative
beside the normal interval the central limit theorem gives), clipped at 0.

**The sequential rule** looks after every block; look ``j`` (1, 2, ...) is taken at the risk
:func:`look_risk` ``= 2 risk / ((j + 1) (j + 2))``, whose sum over every look there could ever
be is ``risk`` (a Bonferroni split over the looks), so the stated risk holds however many looks
the point takes; even the first look spends only a third of it, so every interval a verdict
reports is wider than the nominal one of its risk.

**Diagnostics** (:func:`diagnose`): the estimate is only trusted when the error contributions
are spread over many symbols: an effective sample size ``(sum X)^2 / sum X^2`` of at least
:data:`MIN_ESS` (A. Kong, "A note on importance sampling using standardized weights", Technical
Report 348, Dept. of Statistics, University of Chicago, 1992; the form here is the common
practice applied to the non-zero contributions), and no single symbol carrying more than
:data:`MAX_SHARE` of the sum. A heavy-tailed weight distribution shows as a few symbols with
most of the sum: the classic way importance sampling underestimates its own variance.

**The neighbour test** (:func:`neighbour_test`): for a memoryless detector, a symbol's weighted
errors do not depend on how the noise of the symbol before (or after) it was drawn. The tally
keeps the contributions split by the component of the previous and the next symbol (the true
density or a biased one); a device whose decisions use its neighbours' noise (an equaliser, a
tracking loop, a decision-feedback error) shows a difference, which a two-sample z test (the
variance pooled over both groups) finds.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np
from scipy import stats as _st

from .intervals import ConfidenceInterval

__all__ = ["MIN_ESS", "MAX_SHARE", "NEIGHBOUR_ALPHA", "WeightedTally", "weighted_interval",
           "look_risk", "diagnose", "neighbour_test", "NeighbourTest"]

#: fewest effective error contributions an estimate is trusted with
MIN_ESS = 100.0
#: largest share of the weighted error sum one symbol may carry
MAX_SHARE = 0.05
#: level of each neighbour test (previous and next symbol): a memoryless device is called
#: dependent with this probability, which makes a point inconclusive (never a wrong verdict)
NEIGHBOUR_ALPHA = 5e-4

_GROUPS = ("prev_true", "prev_biased", "next_true", "next_biased")


def _moments(x: np.ndarray) -> list[float]:
    return [float(x.size), float(x.sum()), float(np.dot(x, x))]


@dataclass
class WeightedTally:
    """Sums of the weighted error contributions ``X`` of the symbols sent so far.

    ``n`` symbols, ``s = sum X``, ``ss = sum X^2``, ``top = max X``, ``hits`` the symbols with at
    least one bit error, and ``groups``: ``[n, s, ss]`` of the symbols whose previous (next)
    symbol's noise came from the true density or from a biased component.
    """

    n: float = 0.0
    s: float = 0.0
    ss: float = 0.0
    top: float = 0.0
    hits: float = 0.0
    groups: dict = field(default_factory=lambda: {g: [0.0, 0.0, 0.0] for g in _GROUPS})

    @classmethod
    def of(cls, x: np.ndarray, true_noise: np.ndarray) -> "WeightedTally":
        """The tally of one block: contributions ``x`` and whether each symbol's noise came from
        the true density (``true_noise``)."""
        x = np.asarray(x, dtype=np.float64)
        t = np.asarray(true_noise, dtype=bool)
        n = x.size
        g = {
            "prev_true": _moments(x[1:][t[:-1]]), "prev_biased": _moments(x[1:][~t[:-1]]),
            "next_true": _moments(x[:-1][t[1:]]), "next_biased": _moments(x[:-1][~t[1:]]),
        }
        return cls(float(n), float(x.sum()), float(np.dot(x, x)),
                   float(x.max()) if n else 0.0, float(np.count_nonzero(x)), g)

    def add(self, other: "WeightedTally") -> "WeightedTally":
        return WeightedTally(self.n + other.n, self.s + other.s, self.ss + other.ss,
                             max(self.top, other.top), self.hits + other.hits,
                             {g: [a + b for a, b in zip(self.groups[g], other.groups[g])]
                              for g in _GROUPS})

    def to_json(self) -> dict:
        return {f.name: getattr(self, f.name) for f in fields(self)}

    @classmethod
    def from_json(cls, d: dict) -> "WeightedTally":
        return cls(**{f.name: d[f.name] for f in fields(cls)})

    @property
    def mean(self) -> float:
        """The BER estimate."""
        return self.s / self.n if self.n else math.nan

    @property
    def variance_of_mean(self) -> float:
        """The estimated variance of :attr:`mean`."""
        if self.n < 2:
            return math.inf
        var = max(self.ss - self.s * self.s / self.n, 0.0) / (self.n - 1)
        return var / self.n

    @property
    def ess(self) -> float:
        """Effective sample size of the error contributions, ``(sum X)^2 / sum X^2``."""
        return self.s * self.s / self.ss if self.ss > 0 else 0.0

    @property
    def max_share(self) -> float:
        """The largest single contribution's share of the sum."""
        return self.top / self.s if self.s > 0 else 0.0

    def plain_bits_for_same_width(self, k: int) -> float:
        """Bits plain sampling needs for an estimate of the same variance: ``p (1 - p) / var``."""
        p, v = self.mean, self.variance_of_mean
        if not (p > 0 and 0 < v < math.inf):
            return math.nan
        return p * (1 - p) / v


def weighted_interval(tally: WeightedTally, confidence: float) -> ConfidenceInterval:
    """Two-sided interval for the BER from a tally (see the module text), clipped to [0, 1]."""
    p = tally.mean
    if not tally.n or tally.s <= 0:
        return ConfidenceInterval(0.0, 1.0 if not tally.n else math.nan, confidence,
                                  method="importance/t")
    df = max(tally.ess - 1.0, 1.0)
    t = float(_st.t.ppf(0.5 + confidence / 2, df))
    half = t * math.sqrt(tally.variance_of_mean)
    return ConfidenceInterval(max(p - half, 0.0), min(p + half, 1.0), confidence,
                              method="importance/t")


def look_risk(risk: float, look: int) -> float:
    """The risk spent at look ``look`` (1, 2, ...): ``2 risk / ((look + 1) (look + 2))``.

    >>> round(sum(look_risk(0.05, j) for j in range(1, 10_000)), 5)
    0.04999
    >>> round(look_risk(0.05, 1), 5)
    0.01667
    """
    return 2 * risk / ((look + 1) * (look + 2))


def diagnose(tally: WeightedTally) -> str:
    """Why the weights cannot be trusted yet, or ``""``."""
    if tally.s <= 0:
        return "no weighted bit errors yet"
    if tally.ess < MIN_ESS:
        return (f"the effective sample size of the weighted errors is {tally.ess:.3g}, below "
                f"{MIN_ESS:g}")
    if tally.max_share > MAX_SHARE:
        return (f"one symbol carries {100 * tally.max_share:.3g} % of the weighted errors "
                f"(at most {100 * MAX_SHARE:g} % is trusted)")
    return ""


@dataclass(frozen=True)
class NeighbourTest:
    """The two neighbour tests: z statistics and p-values (previous, next symbol)."""

    z_prev: float
    p_prev: float
    z_next: float
    p_next: float

    def dependent(self, alpha: float = NEIGHBOUR_ALPHA) -> str:
        """How the errors depend on the neighbours' noise, or ``""`` if no test rejects."""
        out = []
        for side, z, p in (("previous", self.z_prev, self.p_prev),
                           ("next", self.z_next, self.p_next)):
            if p < alpha:
                out.append(f"how the {side} symbol's noise was drawn (z = {z:+.1f}, "
                           f"p = {max(p, 1e-300):.2g})")
        if not out:
            return ""
        return "the weighted errors depend on " + " and on ".join(out)


def _two_sample(a: list[float], b: list[float]) -> tuple[float, float]:
    (na, sa, ssa), (nb, sb, ssb) = a, b
    n = na + nb
    if na < 2 or nb < 2 or (sa <= 0 and sb <= 0):
        return 0.0, 1.0
    s, ss = sa + sb, ssa + ssb
    var = max(ss - s * s / n, 0.0) / (n - 1)  # pooled: one distribution if memoryless
    if var <= 0:
        return 0.0, 1.0
    z = (sa / na - sb / nb) / math.sqrt(var * (1 / na + 1 / nb))
    return z, float(2 * _st.norm.sf(abs(z)))


def neighbour_test(tally: WeightedTally) -> NeighbourTest:
    """Two-sample z tests of the contributions after (before) a true-density symbol against
    those after (before) a biased one, with the variance pooled over both groups (for a
    memoryless device they are one distribution; pooling keeps a group that happens to hold
    none of the rare large contributions from looking falsely precise)."""
    g = tally.groups
    zp, pp = _two_sample(g["prev_true"], g["prev_biased"])
    zn, pn = _two_sample(g["next_true"], g["next_biased"])
    return NeighbourTest(zp, pp, zn, pn)
