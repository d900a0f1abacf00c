"""Theoretical bit and symbol error probabilities over AWGN.

Every function takes Eb/N0 in dB (a scalar or any array shape, evaluated element-wise) and returns
the exact error probability of coherent (or, for DBPSK, differentially coherent) detection with
the optimum minimum-distance decision, complex AWGN of variance N0 and equiprobable symbols.
A scalar input gives a Python ``float``; an array input gives an ``ndarray`` of the same shape.

The named entry points :func:`ber`, :func:`ser` and :func:`ebn0_for_ber` cover
:data:`THEORY_MODULATIONS`; the order-generic functions :func:`psk_ser`, :func:`psk_ber`,
:func:`qam_ser` and :func:`qam_ber` are public so that other orders (16-PSK, 1024-QAM) and other
PSK labellings can be evaluated the same way.

Accuracy at low error rates matters (a BER limit of 1e-9 is common), so every tail probability is
computed from ``erfc``/``erfcx`` and never as ``1 - cdf``; the differences that remain (QPSK and
QAM symbol error) are written as ``2p - p**2`` instead of ``1 - (1 - p)**2``.

Formulas
--------
Notation: ``g = Eb/N0`` (linear), ``k = log2 M``, ``gs = k g`` (Es/N0), ``Q(x) = erfc(x/sqrt2)/2``.

* BPSK and Gray QPSK: ``Pb = Q(sqrt(2 g))`` (QPSK is two BPSK channels in quadrature);
  BPSK ``Ps = Pb``; QPSK ``Ps = 2q - q**2`` with ``q = Q(sqrt(2 g))``.
* DBPSK (differentially coherent detection): ``Pb = Ps = exp(-g) / 2``.
* pi/2-BPSK: BPSK (the turn on odd positions is known to the receiver; AWGN is circular).
* OQPSK: Gray QPSK (the half-symbol delay of the Q arm does not change the matched filter's
  output noise on either arm; common practice).
* DQPSK and pi/4-DQPSK, Gray, differential detection (the pi/4 offset of the phase changes
  does not change the phase difference's error): ``Pb = Q1(a, b) - I0(a b) exp(-(a^2+b^2)/2)/2``,
  ``a = sqrt(2 g (1 - 1/sqrt2))``, ``b = sqrt(2 g (1 + 1/sqrt2))``, Q1 the Marcum Q function
  (Proakis, differential PSK section; equation number from memory).
* M-DPSK symbol error: ``Ps = sin(pi/M)/(2pi) * integral_{-pi/2}^{pi/2}
  exp(-gs (1 - cos(pi/M) cos t)) / (1 - cos(pi/M) cos t) dt`` (Pawula, Rice and Roberts'
  phase-difference distribution; from memory), which is ``exp(-g)/2`` for M = 2.
* Any 2-D constellation (APSK): :func:`constellation_ber`, the exact probability of each
  nearest-point decision region (Voronoi cell) by a polar integral over its edges.
* M-PSK symbol error, Craig's form:
  ``Ps = (1/pi) * integral_0^((M-1)pi/M) exp(-gs sin^2(pi/M) / sin^2 t) dt``.
* M-PSK bit error, exact for any labelling: the received phase has the density
  ``p(t) = exp(-gs)/(2pi) * [1 + a sqrt(pi/2) erfcx(-a/sqrt2)]``, ``a = sqrt(2 gs) cos t``;
  its integral over the decision sector ``d`` steps round the circle gives ``P(d)``, and
  ``Pb = sum_d P(d) * hbar(d) / k``, with ``hbar(d)`` the Hamming distance between the labels of
  points ``d`` steps apart, averaged over the transmitted point.  The default labelling is the
  binary-reflected Gray code around the circle (point ``j`` at angle ``2 pi j / M`` carries label
  ``j ^ (j >> 1)``).  For 8-PSK the DVB-S2 labelling (ETSI EN 302 307-1, 5.4.2) has the same
  Hamming-distance profile and hence the same BER (checked in the tests).
* Square M-QAM with Gray labelling per dimension, bit error: the closed form of Cho and Yoon.
* Square M-QAM symbol error: ``Ps = 2p - p**2``, ``p = 2 (1 - 1/sqrt M) Q(sqrt(3 gs / (M - 1)))``.

References
----------
.. [1] J. G. Proakis and M. Salehi, *Digital Communications*, 5th ed., McGraw-Hill, 2008, ch. 4
   (BPSK, QPSK, DPSK, M-PSK phase density, square M-QAM symbol error). Section numbers from memory.
.. [2] J. W. Craig, "A new, simple and exact result for calculating the probability of error for
   two-dimensional signal constellations", Proc. IEEE MILCOM 1991.
.. [3] K. Cho and D. Yoon, "On the general BER expression of one- and two-dimensional amplitude
   modulations", IEEE Trans. Commun., vol. 50, no. 7, pp. 1074-1080, July 2002.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from scipy import integrate, optimize, special

from modemverify.errors import ConfigError, UnknownNameError
from modemverify.schemes.conventions import get_convention
from modemverify.schemes.labels import gray_code, hamming

__all__ = [
    "THEORY_MODULATIONS", "ber", "ser", "ebn0_for_ber", "DEFAULT_BER_TARGETS",
    "default_ebn0_points", "psk_ser", "psk_ber", "qam_ser", "qam_ber", "q_function",
    "dqpsk_ber", "dpsk_ser", "constellation_ber", "detection",
]

#: Names accepted by :func:`ber`, :func:`ser` and :func:`ebn0_for_ber`.
THEORY_MODULATIONS: tuple[str, ...] = ("bpsk", "pi/2-bpsk", "qpsk", "dbpsk", "dqpsk",
                                       "pi/4-dqpsk", "8psk", "16qam", "64qam", "256qam",
                                       "1024qam", "oqpsk", "16apsk", "32apsk")

_QAM_ORDERS = {"16qam": 16, "64qam": 64, "256qam": 256, "1024qam": 1024}

# Relative tolerance for the numerical integrals. Craig's and the phase-density integrands are
# smooth and positive, so quad reaches this easily; it keeps 7 significant digits at BER 1e-9.
_QUAD_EPSREL = 1e-11


def q_function(x):
    """Gaussian tail probability ``Q(x) = P(N(0, 1) > x) = erfc(x / sqrt 2) / 2``.

    Computed from ``erfc`` so that it keeps full relative precision in the far tail.

    >>> float(q_function(0.0))
    0.5
    """
    return 0.5 * special.erfc(np.asarray(x, dtype=float) / math.sqrt(2.0))


# --------------------------------------------------------------------------------------------
# argument handling


def _modulation(name, ring_ratio=None) -> str:
    key = name.strip().lower() if isinstance(name, str) else name
    if key not in THEORY_MODULATIONS:
        raise UnknownNameError("modulation with a theory curve", name, THEORY_MODULATIONS)
    if ring_ratio is not None:  # refuses a ring ratio that does not fit, or a scheme without one
        if key not in _APSK:
            raise ConfigError(f"{key} has no ring ratio")
        get_convention("dvb-s2", key, _ring_key(ring_ratio))
    return key


def _ebn0_linear(ebn0_db) -> tuple[np.ndarray, bool]:
    try:
        arr = np.asarray(ebn0_db, dtype=float)
    except (TypeError, ValueError):
        raise ConfigError(f"ebn0_db={ebn0_db!r}: expected a number or an array of numbers "
                          "(Eb/N0 in dB)") from None
    return 10.0 ** (arr / 10.0), arr.ndim == 0


def _out(values: np.ndarray, scalar: bool):
    return float(values) if scalar else values


def _check_order(order, kind: str, *, square: bool) -> int:
    if isinstance(order, (bool, np.bool_)) or not isinstance(order, (int, np.integer)):
        raise ConfigError(f"order={order!r}: expected an integer power of two")
    m = int(order)
    k = m.bit_length() - 1
    ok = m >= 2 and (1 << k) == m and (not square or (k % 2 == 0 and m >= 4))
    if not ok:
        want = "an even power of two >= 4 (square QAM)" if square else "a power of two >= 2"
        raise ConfigError(f"order={order!r}: {kind} needs {want}")
    return m


def _per_value(fn, gamma: np.ndarray, *args) -> np.ndarray:
    """Apply a cached scalar function to every distinct value of ``gamma``."""
    flat = gamma.reshape(-1)
    uniq, inverse = np.unique(flat, return_inverse=True)
    vals = np.array([fn(*args, float(g)) for g in uniq], dtype=float)
    return vals[inverse].reshape(gamma.shape)


# --------------------------------------------------------------------------------------------
# M-PSK


@lru_cache(maxsize=4096)
def _psk_ser_scalar(m: int, gs: float) -> float:
    if math.isnan(gs):
        return math.nan
    if gs == math.inf:
        return 0.0
    if gs == 0.0:
        return (m - 1) / m
    s2 = math.sin(math.pi / m) ** 2

    def craig(t: float) -> float:
        st = math.sin(t)
        return math.exp(-gs * s2 / (st * st)) if st > 0.0 else 0.0

    val, _ = integrate.quad(craig, 0.0, (m - 1) * math.pi / m, epsabs=0.0,
                            epsrel=_QUAD_EPSREL, limit=200)
    return val / math.pi


def _phase_pdf(t: float, gs: float) -> float:
    """Density of the received phase for a point sent at phase 0 (coherent, AWGN)."""
    a = math.sqrt(2.0 * gs) * math.cos(t)
    if a >= 0.0:
        # Both terms positive: exp(-gs) + sqrt(2 pi) a Phi(a) exp(-gs sin^2 t); the second form
        # avoids exp(gs cos^2 t) overflow at high SNR.
        phi = 0.5 * math.erfc(-a / math.sqrt(2.0))
        return (math.exp(-gs) + math.sqrt(2.0 * math.pi) * a * phi
                * math.exp(-gs * math.sin(t) ** 2)) / (2.0 * math.pi)
    # Back half: the two terms nearly cancel; erfcx keeps the difference accurate.
    return math.exp(-gs) / (2.0 * math.pi) * (
        1.0 + a * math.sqrt(math.pi / 2.0) * float(special.erfcx(-a / math.sqrt(2.0))))


@lru_cache(maxsize=4096)
def _psk_sector_probabilities(m: int, gs: float) -> tuple[float, ...]:
    """P(d) for d = 0 .. M-1: probability that the decision lands d steps away."""
    if gs == math.inf:
        return (1.0,) + (0.0,) * (m - 1)
    if gs == 0.0:
        return (1.0 / m,) * m
    half = math.pi / m
    probs = [0.0] * m
    for d in range(1, m // 2 + 1):
        lo = (2 * d - 1) * half
        hi = min((2 * d + 1) * half, math.pi)  # sector M/2 straddles pi: integrate half, x2
        val, _ = integrate.quad(_phase_pdf, lo, hi, args=(gs,), epsabs=0.0,
                                epsrel=_QUAD_EPSREL, limit=200)
        if d == m // 2:
            probs[d] = 2.0 * val
        else:
            probs[d] = probs[m - d] = val
    probs[0] = 1.0 - sum(probs[1:])  # by complement; the BER never uses it
    return tuple(probs)


@lru_cache(maxsize=64)
def _hamming_profile(labels: tuple[int, ...]) -> tuple[float, ...]:
    """hbar(d): mean Hamming distance between labels of points d steps apart."""
    lab = np.asarray(labels, dtype=np.int64)
    m = lab.size
    return tuple(float(np.mean(hamming(lab, np.roll(lab, -d)))) for d in range(m))


def _psk_labels(m: int, labels) -> tuple[int, ...]:
    if labels is None:
        return tuple(int(v) for v in gray_code(np.arange(m)))
    lab = tuple(int(v) for v in np.asarray(labels).reshape(-1))
    if sorted(lab) != list(range(m)):
        raise ConfigError(f"labels={list(lab)!r}: expected a permutation of 0..{m - 1} "
                          "listed in the order of the points around the circle")
    return lab


@lru_cache(maxsize=4096)
def _psk_ber_scalar(m: int, labels: tuple[int, ...], gs: float) -> float:
    if math.isnan(gs):
        return math.nan
    k = m.bit_length() - 1
    probs = _psk_sector_probabilities(m, gs)
    prof = _hamming_profile(labels)
    return sum(p * h for p, h in zip(probs[1:], prof[1:])) / k


def psk_ser(order: int, ebn0_db):
    """Exact symbol error probability of coherent M-PSK over AWGN (Craig's integral).

    Parameters
    ----------
    order : int
        Constellation size M, a power of two (2, 4, 8, 16, ...).
    ebn0_db : float or array_like
        Eb/N0 in dB.

    Returns
    -------
    float or ndarray
        Symbol error probability, same shape as ``ebn0_db``.

    References
    ----------
    J. W. Craig, IEEE MILCOM 1991; Simon & Alouini, *Digital Communication over Fading
    Channels*, ch. 8.

    Examples
    --------
    >>> f"{psk_ser(8, 10.0):.6e}"
    '3.034186e-03'
    """
    m = _check_order(order, "psk_ser", square=False)
    g, scalar = _ebn0_linear(ebn0_db)
    gs = g * (m.bit_length() - 1)
    return _out(_per_value(_psk_ser_scalar, gs, m), scalar)


def psk_ber(order: int, ebn0_db, labels=None):
    """Exact bit error probability of coherent M-PSK over AWGN for a given labelling.

    Integrates the received-phase density over each decision sector and weights it with the
    Hamming distance between the labels (see the module docstring).

    Parameters
    ----------
    order : int
        Constellation size M, a power of two.
    ebn0_db : float or array_like
        Eb/N0 in dB.
    labels : array_like of int, optional
        The label of each point, listed in order of increasing angle (point ``j`` at
        ``2 pi j / M`` plus any common rotation). Default: binary-reflected Gray,
        ``j ^ (j >> 1)``.

    Returns
    -------
    float or ndarray
        Bit error probability, same shape as ``ebn0_db``.

    Examples
    --------
    >>> f"{psk_ber(8, 10.0):.6e}"
    '1.011395e-03'
    """
    m = _check_order(order, "psk_ber", square=False)
    lab = _psk_labels(m, labels)
    g, scalar = _ebn0_linear(ebn0_db)
    gs = g * (m.bit_length() - 1)
    return _out(_per_value(_psk_ber_scalar, gs, m, lab), scalar)


# --------------------------------------------------------------------------------------------
# square M-QAM


@lru_cache(maxsize=16)
def _cho_yoon_coefficients(m: int) -> np.ndarray:
    """Weights c_i of erfc((2i+1) x), i = 0 .. sqrt(M)-2, summed over the bit index k.

    Pb(k) = (1/sqrt M) sum_{i=0}^{(1-2^-k) sqrt M - 1} (-1)^floor(i 2^(k-1)/sqrt M)
            * (2^(k-1) - floor(i 2^(k-1)/sqrt M + 1/2)) * erfc((2i+1) x)       (Cho & Yoon 2002)
    Integer arithmetic throughout, so the weights are exact.
    """
    r = math.isqrt(m)
    nbits = r.bit_length() - 1
    coef = np.zeros(r - 1, dtype=np.int64)
    for k in range(1, nbits + 1):
        w = 1 << (k - 1)
        i = np.arange((r - (r >> k)), dtype=np.int64)  # (1 - 2^-k) sqrt(M) terms
        sign = np.where((i * w // r) % 2 == 0, 1, -1)
        mult = w - (2 * i * w + r) // (2 * r)
        coef[: i.size] += sign * mult
    return coef


def qam_ber(order: int, ebn0_db):
    """Exact bit error probability of square M-QAM with Gray labelling per dimension (AWGN).

    Parameters
    ----------
    order : int
        Constellation size M, an even power of two (4, 16, 64, 256, 1024, ...).
    ebn0_db : float or array_like
        Eb/N0 in dB.

    Returns
    -------
    float or ndarray
        Bit error probability, same shape as ``ebn0_db``.

    References
    ----------
    K. Cho and D. Yoon, "On the general BER expression of one- and two-dimensional amplitude
    modulations", IEEE Trans. Commun., vol. 50, no. 7, pp. 1074-1080, July 2002.

    Examples
    --------
    >>> f"{qam_ber(16, 10.0):.6e}"
    '1.754151e-03'
    """
    m = _check_order(order, "qam_ber", square=True)
    g, scalar = _ebn0_linear(ebn0_db)
    k = m.bit_length() - 1
    r = math.isqrt(m)
    coef = _cho_yoon_coefficients(m).astype(float)
    x = np.sqrt(3.0 * k * g / (2.0 * (m - 1)))
    odd = 2.0 * np.arange(r - 1) + 1.0
    terms = special.erfc(x[..., None] * odd)  # x = inf gives erfc(inf) = 0, x = 0 gives 1
    pb = terms @ coef / (r * (k // 2))
    return _out(np.asarray(pb, dtype=float), scalar)


def qam_ser(order: int, ebn0_db):
    """Exact symbol error probability of square M-QAM over AWGN.

    ``Ps = 2p - p**2`` with ``p = 2 (1 - 1/sqrt M) Q(sqrt(3 Es/N0 / (M - 1)))``, the symbol error
    of one sqrt(M)-PAM dimension (Proakis & Salehi, 5th ed., ch. 4; section from memory).

    Examples
    --------
    >>> f"{qam_ser(16, 10.0):.6e}"
    '7.004294e-03'
    """
    m = _check_order(order, "qam_ser", square=True)
    g, scalar = _ebn0_linear(ebn0_db)
    k = m.bit_length() - 1
    p = 2.0 * (1.0 - 1.0 / math.sqrt(m)) * q_function(np.sqrt(3.0 * k * g / (m - 1)))
    return _out(np.asarray(2.0 * p - p * p, dtype=float), scalar)


# --------------------------------------------------------------------------------------------
# named entry points


# --------------------------------------------------------------------------------------------
# differential detection


def dqpsk_ber(ebn0_db):
    """Bit error probability of Gray DQPSK (and pi/4-DQPSK) with differential detection.

    ``Pb = Q1(a, b) - I0(a b) exp(-(a^2 + b^2) / 2) / 2`` with ``a = sqrt(2 g (1 - 1/sqrt 2))``,
    ``b = sqrt(2 g (1 + 1/sqrt 2))`` (Proakis, *Digital Communications*, differential PSK;
    equation number from memory). Q1 is scipy's non-central chi-square survival function,
    ``Q1(a, b) = ncx2.sf(b^2, 2, a^2)``; ``I0(x) exp(-x)`` is ``scipy.special.ive``.
    """
    from scipy import stats  # scipy.stats is slow to import; only the DQPSK curve needs it
    g, scalar = _ebn0_linear(ebn0_db)
    a = np.sqrt(2.0 * g * (1.0 - 1.0 / np.sqrt(2.0)))
    b = np.sqrt(2.0 * g * (1.0 + 1.0 / np.sqrt(2.0)))
    with np.errstate(invalid="ignore"):  # Eb/N0 = inf: inf - inf, handled below
        q1 = np.asarray(stats.ncx2.sf(b * b, 2, a * a), dtype=float)
        pb = q1 - 0.5 * special.ive(0, a * b) * np.exp(-0.5 * (a - b) ** 2)
    # far in the tail the two terms cancel (digits lost below about 1e-100): there the same
    # probability from the phase-difference distribution, (P(|psi| > pi/4) + P(|psi| >
    # 3pi/4)) / 2, a quadrature of a positive integrand (tested equal where both are exact)
    lost = ~(pb > 1e-6 * q1)
    if np.any(lost):
        gs = 2.0 * g[lost]
        pb = np.array(pb, dtype=float)
        pb[lost] = 0.5 * (_per_value(_dpsk_beyond, gs, math.pi / 4)
                          + _per_value(_dpsk_beyond, gs, 3 * math.pi / 4))
    return _out(np.clip(np.asarray(pb, dtype=float), 0.0, 0.5), scalar)


@lru_cache(maxsize=4096)
def _dpsk_beyond(theta: float, gs: float) -> float:
    """P(|phase difference| > theta) at Es/N0 = gs (Pawula, Rice and Roberts)."""
    if math.isinf(gs):
        return 0.0
    c, s_ = math.cos(theta), math.sin(theta)

    def f(t: float) -> float:
        d = 1.0 - c * math.cos(t)
        return math.exp(-gs * d) / d

    val, _ = integrate.quad(f, -math.pi / 2, math.pi / 2, epsabs=0.0, epsrel=_QUAD_EPSREL)
    return s_ / (2 * math.pi) * val


def _dpsk_ser_scalar(m: int, gs: float) -> float:
    return _dpsk_beyond(math.pi / m, gs)


def dpsk_ser(order: int, ebn0_db):
    """Symbol error probability of M-DPSK with differential detection over AWGN.

    ``Ps = sin(pi/M)/(2 pi) * integral_{-pi/2}^{pi/2} exp(-gs (1 - cos(pi/M) cos t)) /
    (1 - cos(pi/M) cos t) dt`` (R. F. Pawula, S. O. Rice, J. H. Roberts, "Distribution of the
    phase angle between two vectors perturbed by Gaussian noise", IEEE Trans. Commun., 1982;
    from memory); ``exp(-Eb/N0)/2`` for M = 2.
    """
    m = _check_order(order, "dpsk_ser", square=False)
    g, scalar = _ebn0_linear(ebn0_db)
    gs = (m.bit_length() - 1) * g
    return _out(_per_value(_dpsk_ser_scalar, gs, m), scalar)


# --------------------------------------------------------------------------------------------
# any two-dimensional constellation: exact integration over the decision regions

#: Gauss-Legendre nodes per cell edge (the integrand is a Gaussian times a smooth factor)
_GL_NODES = 96
#: how far (in noise standard deviations) beyond the constellation the cells are clipped
_CLIP_SIGMAS = 40.0


def _voronoi_cells(points: np.ndarray, half_width: float) -> list[np.ndarray]:
    """The nearest-point decision region of every point, clipped to a square, as the vertices
    of a convex polygon in counter-clockwise order."""
    from scipy.spatial import HalfspaceIntersection  # only the APSK curves need it
    xy = np.column_stack([points.real, points.imag])
    box = np.array([[1, 0, -half_width], [-1, 0, -half_width], [0, 1, -half_width],
                    [0, -1, -half_width]], dtype=float)
    cells = []
    for i, t in enumerate(xy):
        others = np.delete(xy, i, axis=0)
        # |x - t|^2 <= |x - u|^2  <=>  2 (u - t) . x + |t|^2 - |u|^2 <= 0
        hs = np.column_stack([2 * (others - t), (t @ t) - np.sum(others ** 2, axis=1)])
        v = HalfspaceIntersection(np.vstack([hs, box]), t).intersections
        c = v.mean(axis=0)
        v = v[np.argsort(np.arctan2(v[:, 1] - c[1], v[:, 0] - c[0]))]
        keep = np.r_[True, np.linalg.norm(np.diff(v, axis=0), axis=1) > 1e-12 * half_width]
        cells.append(v[keep])
    return cells


def _region_probabilities(points: np.ndarray, cells, sigma: float) -> np.ndarray:
    """P[s, t]: the probability that point s plus complex Gaussian noise (sigma per dimension)
    falls in cell t, for t != s.

    Seen from s (outside cell t), each ray enters the convex cell at r1 and leaves at r2 and
    contributes exp(-r1^2 / 2 sigma^2) - exp(-r2^2 / 2 sigma^2) / (2 pi): the sum over the
    cell's edges of the signed integral of exp(-r(theta)^2 / (2 sigma^2)) d theta / (2 pi),
    r(theta) = d / cos(theta - phi) along an edge at distance d. With t = tan(theta - phi)
    the integrand is exp(-d^2 (1 + t^2) / (2 sigma^2)) / (1 + t^2): a Gaussian in t times a
    smooth factor, integrated by Gauss-Legendre over the edge's t-range (clipped where the
    Gaussian is below exp(-800)).
    """
    nodes, weights = np.polynomial.legendre.leggauss(_GL_NODES)
    m = len(points)
    out = np.zeros((m, m))
    xy = np.column_stack([points.real, points.imag])
    for t_idx, poly in enumerate(cells):  # every sent point s at once, per cell t
        e = np.roll(poly, -1, axis=0) - poly                      # (E, 2), the same for all s
        length = np.linalg.norm(e, axis=1)
        unit = e / length[:, None]
        a = poly[None, :, :] - xy[:, None, :]                      # (m, E, 2)
        b = a + e[None, :, :]
        d = np.abs(a[..., 0] * e[:, 1] - a[..., 1] * e[:, 0]) / length
        # the signed positions of a and b along the edge, from the foot of the
        # perpendicular, in units of d: tan(theta - phi)
        dd = np.maximum(d, 1e-300)
        sa = np.sum(a * unit, axis=2) / dd
        sb = np.sum(b * unit, axis=2) / dd
        # orientation: counter-clockwise sweep seen from s is positive
        sign = np.sign(a[..., 0] * b[..., 1] - a[..., 1] * b[..., 0])
        ok = (d > 1e-12) & (sign != 0)
        lim = _CLIP_SIGMAS * sigma / dd
        lo = np.clip(np.minimum(sa, sb), -lim, lim)
        hi = np.clip(np.maximum(sa, sb), -lim, lim)
        half, mid = (hi - lo) / 2, (hi + lo) / 2
        tt = mid[..., None] + half[..., None] * nodes                # (m, E, N)
        z = (d[..., None] ** 2) * (1 + tt ** 2) / (2 * sigma ** 2)
        f = np.exp(-z) / (1 + tt ** 2)
        integral = half * (f @ weights)
        # a ray crossing the cell meets the near edges sweeping one way and the far edges
        # the other: the cell's probability is minus the signed sum (the sweeps cancel)
        out[:, t_idx] = -np.sum(np.where(ok, sign * integral, 0.0), axis=1) / (2 * np.pi)
    np.fill_diagonal(out, 0.0)
    return np.clip(out, 0.0, None)


def constellation_ber(points, ebn0_db, labels=None):
    """Exact bit error probability of any 2-D constellation with nearest-point decisions over
    AWGN (equiprobable points; ``points[label]``, or ``points[i]`` carrying ``labels[i]``).

    Method: the decision regions are the Voronoi cells of the points (scipy's
    ``HalfspaceIntersection``, clipped 40 noise standard deviations beyond the
    constellation); the probability of each cell given each sent point is an exact polar
    integral over the cell's edges (Craig's form, J. W. Craig, IEEE MILCOM 1991), evaluated by
    Gauss-Legendre quadrature; ``Pb = sum_s sum_t P(t|s) hamming(s, t) / (M log2 M)``.
    Used for APSK, which has no closed form; it reproduces the closed forms of Gray QPSK,
    8PSK and 16QAM (tested).
    """
    return _constellation_rates(points, ebn0_db, labels)[0]


def _constellation_rates(points, ebn0_db, labels=None):
    """(bit, symbol) error probabilities of :func:`constellation_ber`'s method."""
    pts = np.asarray(points, dtype=np.complex128)
    m = pts.size
    k = m.bit_length() - 1
    if m < 2 or (1 << k) != m:
        raise ConfigError(f"{m} points: expected a power of two >= 2")
    lab = np.arange(m) if labels is None else np.asarray(labels, dtype=np.int64)
    pts = pts / np.sqrt(np.mean(np.abs(pts) ** 2))
    h = hamming(lab[:, None], lab[None, :]).astype(float)
    g, scalar = _ebn0_linear(ebn0_db)
    flat = g.reshape(-1)
    pb, ps = np.empty(flat.size), np.empty(flat.size)
    for i, gi in enumerate(flat):
        if gi == 0:
            pb[i], ps[i] = 0.5, 1.0 - 1.0 / m
            continue
        if np.isinf(gi):
            pb[i] = ps[i] = 0.0
            continue
        sigma = math.sqrt(1.0 / (2.0 * k * gi))  # Es = 1, N0 = 1/(k g), N0/2 per dimension
        cells = _voronoi_cells(pts, float(np.max(np.abs(pts))) + _CLIP_SIGMAS * sigma)
        with np.errstate(over="ignore", invalid="ignore"):  # degenerate edges are masked
            p = _region_probabilities(pts, cells, sigma)
        pb[i] = float(np.sum(p * h) / (m * k))
        ps[i] = float(np.sum(p) / m)
    return _out(pb.reshape(g.shape), scalar), _out(ps.reshape(g.shape), scalar)


#: the APSK curves: DVB-S2 tables (ETSI EN 302 307-1 5.4.3, 5.4.4) by exact integration over
#: their decision regions, for the scheme's ring ratio
_APSK = ("16apsk", "32apsk")


@lru_cache(maxsize=4096)
def _apsk_rates(mod: str, ring_ratio, ebn0_db: float) -> tuple[float, float]:
    return _constellation_rates(get_convention("dvb-s2", mod, ring_ratio).points, ebn0_db)


def _ring_key(ring_ratio):
    """A ring ratio as a hashable tuple of floats (None stays None)."""
    if ring_ratio is None:
        return None
    return tuple(float(x) for x in np.atleast_1d(np.asarray(ring_ratio, dtype=float)))


def _apsk(mod: str, ring_ratio, ebn0_db, which: int):
    _, scalar = _ebn0_linear(ebn0_db)  # the same argument check as every curve
    arr = np.asarray(ebn0_db, dtype=float)
    ring = _ring_key(ring_ratio)
    vals = np.array([_apsk_rates(mod, ring, float(x))[which] for x in arr.reshape(-1)])
    return _out(vals.reshape(arr.shape), scalar)


def detection(modulation: str) -> str:
    """How the receiver of :func:`ber`'s curve decides: "differential detection" for DBPSK,
    DQPSK and pi/4-DQPSK, "coherent detection" otherwise.

    >>> detection("dqpsk"), detection("16qam")
    ('differential detection', 'coherent detection')
    """
    mod = _modulation(modulation)
    return ("differential detection" if mod in ("dbpsk", "dqpsk", "pi/4-dqpsk")
            else "coherent detection")


def ber(modulation: str, ebn0_db, *, ring_ratio=None):
    """Theoretical bit error probability over AWGN.

    Parameters
    ----------
    modulation : str
        One of :data:`THEORY_MODULATIONS` (case-insensitive).
    ebn0_db : float or array_like
        Eb/N0 in dB; ``inf`` gives 0, ``-inf`` gives 0.5.
    ring_ratio : float or tuple of float, optional
        APSK only: the ring ratios of the scheme (default: those of the first DVB-S2 code rate,
        as :func:`~modemverify.schemes.conventions.get_convention`); the curve is that of the
        DVB-S2 table on those rings, by :func:`constellation_ber`.

    Returns
    -------
    float or ndarray
        Bit error probability, same shape as ``ebn0_db``.

    Raises
    ------
    modemverify.errors.UnknownNameError
        For a modulation without a theory curve.

    Examples
    --------
    >>> f"{ber('qpsk', 10.0):.4e}"
    '3.8721e-06'
    >>> [f"{v:.4e}" for v in ber('bpsk', [0.0, 6.0])]
    ['7.8650e-02', '2.3883e-03']
    """
    mod = _modulation(modulation, ring_ratio)
    if mod in _APSK:
        return _apsk(mod, ring_ratio, ebn0_db, 0)
    if mod in ("bpsk", "pi/2-bpsk", "qpsk", "oqpsk"):
        g, scalar = _ebn0_linear(ebn0_db)
        return _out(q_function(np.sqrt(2.0 * g)), scalar)
    if mod in ("dqpsk", "pi/4-dqpsk"):
        return dqpsk_ber(ebn0_db)
    if mod == "dbpsk":
        g, scalar = _ebn0_linear(ebn0_db)
        return _out(0.5 * np.exp(-g), scalar)
    if mod == "8psk":
        return psk_ber(8, ebn0_db)
    return qam_ber(_QAM_ORDERS[mod], ebn0_db)


def ser(modulation: str, ebn0_db, *, ring_ratio=None):
    """Theoretical symbol error probability over AWGN (``ring_ratio``: as :func:`ber`).

    For BPSK and DBPSK a symbol is a bit, so ``ser == ber``.

    Examples
    --------
    >>> f"{ser('qpsk', 10.0):.6e}"
    '7.744201e-06'
    """
    mod = _modulation(modulation, ring_ratio)
    if mod in _APSK:
        return _apsk(mod, ring_ratio, ebn0_db, 1)
    if mod in ("bpsk", "pi/2-bpsk", "dbpsk"):
        return ber(mod, ebn0_db)
    if mod in ("dqpsk", "pi/4-dqpsk"):
        return dpsk_ser(4, ebn0_db)
    if mod in ("qpsk", "oqpsk"):
        g, scalar = _ebn0_linear(ebn0_db)
        q = q_function(np.sqrt(2.0 * g))
        return _out(2.0 * q - q * q, scalar)
    if mod == "8psk":
        return psk_ser(8, ebn0_db)
    return qam_ser(_QAM_ORDERS[mod], ebn0_db)


# Bracket for the inverse, widened on demand. Every curve tends to 0.5 as Eb/N0 -> -inf and
# falls monotonically, so a sign change always exists for 0 < target < 0.5.
_LOW_DB, _HIGH_DB, _LOWEST_DB, _HIGHEST_DB = -10.0, 20.0, -200.0, 200.0
_TINY = 1e-320  # log() floor so that an underflowed BER still compares as "below target"


@lru_cache(maxsize=1024)
def _inverse_scalar(mod: str, target: float, ring_ratio=None) -> float:
    if target == 0.0:
        return math.inf
    if target == 0.5:
        return -math.inf

    def f(x: float) -> float:
        return math.log(max(float(ber(mod, x, ring_ratio=ring_ratio)), _TINY)) - math.log(target)

    lo, hi = _LOW_DB, _HIGH_DB
    while f(lo) < 0.0:
        if lo <= _LOWEST_DB:
            # target is within rounding of 0.5: no finite Eb/N0 is distinguishable
            return -math.inf
        lo -= 30.0
    while f(hi) > 0.0:
        hi += 30.0  # ber underflows to 0 well before _HIGHEST_DB for any target > 1e-320
        if hi > _HIGHEST_DB:  # pragma: no cover - unreachable for target >= _TINY
            return math.inf
    return optimize.brentq(f, lo, hi, xtol=1e-12, rtol=4 * np.finfo(float).eps, maxiter=200)


def ebn0_for_ber(modulation: str, ber_target, *, ring_ratio=None):
    """Eb/N0 in dB at which the theoretical BER equals ``ber_target`` (inverse of :func:`ber`).

    Solved with :func:`scipy.optimize.brentq` on ``log(ber(x)) - log(target)`` over a bracket
    that is widened until it holds the root.

    Parameters
    ----------
    modulation : str
        One of :data:`THEORY_MODULATIONS`.
    ber_target : float or array_like
        Target bit error probabilities in ``[0, 0.5]``.
    ring_ratio : optional
        APSK only, as :func:`ber`. ``0`` gives ``inf``; ``0.5`` (and
        targets within rounding of it, above about 0.4999) gives ``-inf``.

    Returns
    -------
    float or ndarray
        Eb/N0 in dB, same shape as ``ber_target``.

    Raises
    ------
    modemverify.errors.ConfigError
        For a target outside ``[0, 0.5]`` or not a number.

    Examples
    --------
    >>> round(ebn0_for_ber('qpsk', 1e-5), 3)
    9.588
    """
    mod = _modulation(modulation, ring_ratio)
    ring = _ring_key(ring_ratio)
    try:
        t = np.asarray(ber_target, dtype=float)
    except (TypeError, ValueError):
        raise ConfigError(f"ber_target={ber_target!r}: expected a probability in [0, 0.5]") \
            from None
    bad = ~((t >= 0.0) & (t <= 0.5))  # also catches NaN
    if np.any(bad):
        first = t.reshape(-1)[np.flatnonzero(bad.reshape(-1))[0]]
        raise ConfigError(f"ber_target={float(first)!r}: expected a probability in [0, 0.5] "
                          "(0.5 is the BER of guessing)")
    flat = t.reshape(-1)
    uniq, inverse = np.unique(flat, return_inverse=True)
    vals = np.array([_inverse_scalar(mod, float(v), ring) for v in uniq], dtype=float)
    return _out(vals[inverse].reshape(t.shape), t.ndim == 0)


#: Bit error rates at which the checks measure by default (the ``ber`` check at all three,
#: the ``llr`` check at the first).
DEFAULT_BER_TARGETS: tuple[float, ...] = (1e-2, 1e-3, 1e-4)


def default_ebn0_points(modulation: str, targets=DEFAULT_BER_TARGETS, *,
                        ring_ratio=None) -> list[float]:
    """Eb/N0 in dB, rounded to a 0.1 dB grid, where the theoretical BER equals each target.

    The default measurement points of the ``ber`` check (and, with ``targets=(1e-2,)``, of the
    ``llr`` check): :func:`ebn0_for_ber` of each target, rounded to one decimal.

    Examples
    --------
    >>> default_ebn0_points('qpsk')
    [4.3, 6.8, 8.4]
    """
    return [round(float(ebn0_for_ber(modulation, p, ring_ratio=ring_ratio)), 1)
            for p in targets]
