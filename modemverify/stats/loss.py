"""Implementation loss: how many dB of Eb/N0 a device gives away against theory.

A device measured at Eb/N0 = ``x`` dB with bit error rate ``p`` behaves like an ideal receiver at
the *effective* Eb/N0 ``x_eff`` where the theory curve equals ``p``; the implementation loss is
``x - x_eff`` (positive: worse than theory). An interval for ``p`` maps to an interval for the
loss through the same inversion, because the theory curve falls monotonically: a higher BER means
a lower effective Eb/N0 and a larger loss. Measuring loss this way is common practice in modem
verification (the margin a BER limit allows is stated in the same dB).

Edge cases
----------
* No errors: the point estimate ``p = 0`` means "better than any finite loss" (``-inf``), and so
  does the interval's lower end; only the upper end (from the upper BER bound) is informative.
  :meth:`LossEstimate.describe` says "at most ... dB".
* ``p >= 0.5`` (theory's maximum, the BER of guessing; reached only as Eb/N0 -> -inf): the loss
  is ``+inf``.
"""

from __future__ import annotations

import math
from typing import NamedTuple

from modemverify.errors import ConfigError
from modemverify.options import number_in
from modemverify.schemes.theory import ebn0_for_ber
from modemverify.stats.intervals import clopper_pearson

__all__ = ["LossEstimate", "implementation_loss_db", "loss_from_counts"]


class LossEstimate(NamedTuple):
    """Implementation loss in dB with its interval (``low_db <= loss_db <= high_db``).

    ``low_db``/``high_db`` are NaN when no BER interval was given; ``-inf`` means unbounded
    below (no errors seen), ``+inf`` a BER at or above 0.5.
    """

    loss_db: float
    low_db: float
    high_db: float

    def describe(self, digits: int = 2) -> str:
        """One line for a report, e.g. ``'0.42 dB (0.31 .. 0.55 dB)'`` or ``'at most 0.61 dB'``.

        Examples
        --------
        >>> LossEstimate(0.4213, 0.31, 0.552).describe()
        '0.42 dB (0.31 .. 0.55 dB)'
        >>> LossEstimate(-math.inf, -math.inf, 0.614).describe()
        'at most 0.61 dB'
        """
        def fmt(v: float) -> str:
            return f"{v:.{digits}f}" if math.isfinite(v) else ("+inf" if v > 0 else "-inf")

        if math.isnan(self.low_db) and math.isnan(self.high_db):
            return f"{fmt(self.loss_db)} dB"
        if self.low_db == -math.inf and math.isfinite(self.high_db):
            if self.loss_db == -math.inf:
                return f"at most {fmt(self.high_db)} dB"
            return f"{fmt(self.loss_db)} dB (at most {fmt(self.high_db)} dB)"
        return f"{fmt(self.loss_db)} dB ({fmt(self.low_db)} .. {fmt(self.high_db)} dB)"


def _ber_value(value, name: str) -> float:
    return number_in(value, name, 0.0, 1.0, expected="a bit error rate in [0, 1]")

def _loss_at(modulation: str, ebn0_db: float, p: float, ring_ratio=None) -> float:
    if p >= 0.5:
        return math.inf
    # p = 0 gives inf -> loss -inf
    return ebn0_db - float(ebn0_for_ber(modulation, p, ring_ratio=ring_ratio))


def implementation_loss_db(modulation: str, ebn0_db: float, ber_measured: float,
                           interval=None, *, ring_ratio=None) -> LossEstimate:
    """Implementation loss in dB of a device measured at ``ebn0_db`` with BER ``ber_measured``.

    ``loss = ebn0_db - ebn0_for_ber(modulation, ber_measured)``; the interval ends are the losses
    at the BER interval's ends.

    Parameters
    ----------
    modulation : str
        A name from :data:`modemverify.schemes.theory.THEORY_MODULATIONS`.
    ebn0_db : float
        The Eb/N0 (dB) the channel was set to.
    ber_measured : float
        Measured bit error rate (errors / bits), in [0, 1].
    interval : (low, high) or object with ``.low`` and ``.high``, optional
        Confidence interval for the BER (for instance from
        :func:`~modemverify.stats.clopper_pearson` or :func:`~modemverify.stats.block_interval`).
        Must contain ``ber_measured``.
    ring_ratio : optional
        APSK only: the scheme's ring ratios (see :func:`~modemverify.schemes.theory.ber`).

    Returns
    -------
    LossEstimate
        ``(loss_db, low_db, high_db)``; without an interval ``low_db`` and ``high_db`` are NaN.

    Raises
    ------
    modemverify.errors.ConfigError
        For a BER outside [0, 1], an interval that does not contain ``ber_measured``, or an
        unknown modulation (:class:`~modemverify.errors.UnknownNameError`).

    Examples
    --------
    >>> from modemverify.schemes.theory import ber
    >>> round(implementation_loss_db("qpsk", 8.0, ber("qpsk", 7.5)).loss_db, 9)
    0.5
    """
    try:
        x = float(ebn0_db)
    except (TypeError, ValueError):
        x = math.nan
    if not math.isfinite(x):
        raise ConfigError(f"ebn0_db={ebn0_db!r}: expected a finite Eb/N0 in dB")
    p = _ber_value(ber_measured, "ber_measured")
    loss = _loss_at(modulation, x, p, ring_ratio)
    if interval is None:
        return LossEstimate(loss, math.nan, math.nan)
    if hasattr(interval, "low") and hasattr(interval, "high"):
        lo_raw, hi_raw = interval.low, interval.high
    else:
        try:
            lo_raw, hi_raw = interval
        except (TypeError, ValueError):
            raise ConfigError(f"interval={interval!r}: expected (low, high) or an object with "
                              ".low and .high") from None
    lo = _ber_value(lo_raw, "interval.low")
    hi = _ber_value(hi_raw, "interval.high")
    if not lo <= p <= hi:
        raise ConfigError(f"interval=({lo!r}, {hi!r}): must contain ber_measured={p!r}")
    return LossEstimate(loss, _loss_at(modulation, x, lo, ring_ratio),
                        _loss_at(modulation, x, hi, ring_ratio))


def loss_from_counts(modulation: str, ebn0_db: float, errors: int, bits: int,
                     confidence: float = 0.95, *, ring_ratio=None) -> LossEstimate:
    """Implementation loss from raw counts, with the exact (Clopper-Pearson) BER interval.

    Assumes independent bit errors; for block counts with bursts, build the interval with
    :func:`~modemverify.stats.block_interval` and call :func:`implementation_loss_db`.

    Examples
    --------
    >>> est = loss_from_counts("qpsk", 9.0, 0, 10**6)
    >>> est.loss_db, est.low_db, round(est.high_db, 3)
    (-inf, -inf, -1.02)
    """
    ci = clopper_pearson(errors, bits, confidence)
    return implementation_loss_db(modulation, ebn0_db, errors / bits, ci, ring_ratio=ring_ratio)
