"""Biased channel noise for importance sampling: a mixture the errors are common under.

Plain Monte Carlo at a BER of 1e-9 needs about 1e10 bits. Importance sampling draws the noise
``n`` of each symbol from a biased density ``q`` instead of the true density ``f`` (complex
Gaussian, variance ``N0``) and weights the symbol's bit errors by ``f(n) / q(n)``; the weighted
error rate is an unbiased estimate of the BER for any demodulator whose decision on a symbol
depends only on that symbol's noise (a memoryless, symbol-by-symbol detector), because the
harness knows the noise it drew.

The biased density here is a **mixture** (multiple importance sampling with the balance
heuristic: E. Veach and L. J. Guibas, "Optimally combining sampling techniques for Monte Carlo
rendering", SIGGRAPH 1995, section 3; its one-sample form is the mixture density), drawn per
symbol, with three kinds of component:

* the **true density** itself, with weight :data:`DEFENSIVE` (a defensive mixture:
  T. Hesterberg, "Weighted average importance sampling and defensive mixture distributions",
  Technometrics 37(2), 1995): every weight is then at most ``1 / DEFENSIVE``, so no single
  symbol can carry an unbounded weight;
* a **variance-scaled** density (variance ``c N0``, with the nearest decision boundary at
  :data:`SCALED_SIGMAS` standard deviations), weight :data:`SCALED`: it reaches error regions
  in every direction, including ones the translations below do not aim at (conventional
  importance sampling by variance scaling: M. C. Jeruchim, "Techniques for estimating the bit
  error rate in the simulation of digital communication systems", IEEE JSAC 2(1), 1984,
  section V);
* **mean translations** of the true density, one per nearest neighbour of the transmitted
  point, each shifted half way to that neighbour, onto the decision boundary between them
  (improved importance sampling by mean translation: P. J. Smith, M. Shafi and H. Gao, "Quick
  simulation: a review of importance sampling techniques in communications systems", IEEE
  JSAC 15(4), 1997, section III-B: the shift that minimises the variance for a single
  boundary puts the mean on the boundary). They share the remaining weight equally.

The neighbours are the claimed constellation's **Gabriel neighbours** (no other point lies in
the circle whose diameter joins the two points): exactly the pairs whose decision boundary
passes through their midpoint, which carry the dominant error events at high Eb/N0 (for QAM
the horizontal and vertical neighbours, for PSK the two around the circle).

The weight of a symbol whose noise is ``n`` is ``f(n) / q(n)`` with ``q`` the whole mixture,
computed from the noise actually drawn::

    1 / (a0 + as exp(|n|^2 (1 - 1/c) / N0) / c
            + sum_j aj exp((2 Re(n conj(mu_j)) - |mu_j|^2) / N0))
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError
from ..schemes.rules import PLAIN, SymbolRule, apply_rule

__all__ = ["DEFENSIVE", "SCALED", "SCALED_SIGMAS", "KIND_TRUE", "KIND_SCALED",
           "KIND_SHIFTED", "gabriel_neighbours", "NoiseMixture", "BiasedNoise"]

#: weight of the true density in the mixture (every weight is at most its inverse)
DEFENSIVE = 0.1
#: weight of the variance-scaled component
SCALED = 0.2
#: the variance-scaled component puts the nearest decision boundary this many of its standard
#: deviations (per dimension) from the transmitted point
SCALED_SIGMAS = 2.0

#: the component a symbol's noise was drawn from (``BiasedNoise.kind``)
KIND_TRUE, KIND_SCALED, KIND_SHIFTED = 0, 1, 2


def gabriel_neighbours(points: np.ndarray, rtol: float = 1e-9) -> list[np.ndarray]:
    """For each point, the indices of its Gabriel neighbours.

    Point ``j`` is a Gabriel neighbour of ``i`` when no third point lies inside or on the
    circle whose diameter is the segment ``i``-``j``: then the decision boundary between the
    two passes through their midpoint. (A QAM square's diagonal has the other two corners on
    its circle, and its boundary only touches the midpoint at a corner: not a neighbour.)
    Candidates are the points within twice each point's nearest distance, so the work is
    small for 1024 points.

    >>> qpsk = np.array([1 + 1j, 1 - 1j, -1 + 1j, -1 - 1j]) / 2 ** 0.5
    >>> [sorted(n.tolist()) for n in gabriel_neighbours(qpsk)]
    [[1, 2], [0, 3], [0, 3], [1, 2]]
    """
    p = np.asarray(points, dtype=np.complex128)
    d = np.abs(p[:, None] - p[None, :])
    np.fill_diagonal(d, np.inf)
    near = d.min(axis=1)
    out = []
    for i in range(p.size):
        cand = np.flatnonzero(d[i] <= 2 * near[i] * (1 + rtol))
        centre = (p[i] + p[cand]) / 2
        radius = d[i, cand] / 2
        # distance of every point to every candidate circle's centre
        inside = np.abs(p[None, :] - centre[:, None]) <= radius[:, None] * (1 + rtol)
        inside[:, i] = False
        inside[np.arange(cand.size), cand] = False
        out.append(cand[~inside.any(axis=1)])
    return out


@dataclass(frozen=True)
class BiasedNoise:
    """Noise drawn from the mixture, with its weights."""

    #: the complex noise of each symbol
    noise: np.ndarray
    #: ``f(n) / q(n)`` of each symbol
    weights: np.ndarray
    #: the component each symbol's noise came from: KIND_TRUE, KIND_SCALED or KIND_SHIFTED
    kind: np.ndarray


class NoiseMixture:
    """The biased density of one claimed constellation (one table point per label).

    ``rule`` is the scheme's symbol rule: a position-dependent turn turns the translations with
    the symbol (pi/2-BPSK); a differential rule is refused (its detector decides on two symbols'
    noise, so per-symbol weights are not valid).
    """

    def __init__(self, points: np.ndarray, rule: SymbolRule = PLAIN):
        if rule.differential:
            raise ConfigError("importance sampling needs a symbol-by-symbol detector; a "
                              "differential scheme decides on two symbols' noise",
                              key="scheme.modulation")
        if rule.q_delay:
            raise ConfigError("importance sampling biases each symbol's noise at its own "
                              "instant; an offset arm is decided at another",
                              key="scheme.modulation")
        self.points = np.asarray(points, dtype=np.complex128)
        self.rule = rule
        nb = gabriel_neighbours(self.points)
        self.counts = np.array([n.size for n in nb], dtype=np.int64)
        width = int(self.counts.max())
        self.shifts = np.zeros((self.points.size, width), dtype=np.complex128)
        for i, n in enumerate(nb):
            self.shifts[i, :n.size] = (self.points[n] - self.points[i]) / 2
        #: half the smallest distance from each point to a neighbour's boundary
        self.half_distance = np.array([np.abs(self.shifts[i, :c]).min()
                                       for i, c in enumerate(self.counts)])

    def draw(self, labels: np.ndarray, n0: float, rng: np.random.Generator,
             base: np.ndarray | None = None) -> BiasedNoise:
        """Noise for symbols of ``labels`` at noise density ``n0`` (complex variance).

        Draws, in this order: one uniform per symbol (its component), then ``2 n`` standard
        normals (interleaved I, Q). ``base``: the true noise of each symbol, already drawn
        (complex Gaussian of variance ``n0``, independent per symbol: the matched-filter
        projections of a waveform's white noise); then no normals are drawn and the result's
        ``noise`` is ``base`` changed by each symbol's component.
        """
        labels = np.asarray(labels, dtype=np.int64)
        n = labels.size
        u = rng.random(n)
        if base is None:
            w = rng.standard_normal(2 * n).view(np.complex128) * math.sqrt(n0 / 2)
        else:
            w = np.array(base, dtype=np.complex128)
        kind = np.full(n, KIND_SHIFTED, dtype=np.int8)
        kind[u < DEFENSIVE + SCALED] = KIND_SCALED
        kind[u < DEFENSIVE] = KIND_TRUE
        # variance scale per symbol: the nearest boundary at SCALED_SIGMAS sigma, never below
        # the true variance
        c_point = np.maximum(1.0, self.half_distance ** 2 / (SCALED_SIGMAS ** 2 * n0 / 2))
        c = c_point[labels]
        scaled = kind == KIND_SCALED
        w[scaled] *= np.sqrt(c[scaled])
        counts = self.counts[labels]
        shifted = kind == KIND_SHIFTED
        frac = (u - DEFENSIVE - SCALED) / (1 - DEFENSIVE - SCALED)
        j = np.minimum((frac * counts).astype(np.int64), counts - 1)
        mu = self.shifts[labels]                      # (n, J)
        turn = self._turns(n)
        if turn is not None:
            mu = mu * turn[:, None]
        w[shifted] += mu[shifted, j[shifted]]
        # q(n) / f(n), every component, from the noise drawn
        a_shift = (1 - DEFENSIVE - SCALED) / counts
        with np.errstate(over="ignore"):
            ratio = DEFENSIVE + SCALED / c * np.exp(np.abs(w) ** 2 * (1 - 1 / c) / n0)
            valid = np.arange(mu.shape[1])[None, :] < counts[:, None]
            expo = (2 * (w[:, None] * np.conj(mu)).real - np.abs(mu) ** 2) / n0
            ratio = ratio + a_shift * np.where(valid, np.exp(expo), 0.0).sum(axis=1)
        weights = 1.0 / ratio
        return BiasedNoise(w, weights, kind)

    def _turns(self, n: int) -> np.ndarray | None:
        if self.rule.plain:
            return None
        return apply_rule(np.ones(n, dtype=np.complex128), self.rule)
