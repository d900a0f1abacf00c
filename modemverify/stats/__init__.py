"""Statistics for BER decisions: exact intervals, sequential tests, implementation loss.

* :mod:`~modemverify.stats.intervals` -- Clopper-Pearson intervals and one-sided bounds, and a
  burst-aware interval for per-block error counts (both return one
  :class:`~modemverify.stats.intervals.ConfidenceInterval`), with the burst rule
  (:meth:`~modemverify.stats.intervals.DispersionTest.bursty`);
* :mod:`~modemverify.stats.sequential` -- Wald's SPRT between theory and the BER limit, with
  the fixed-sample size, operating characteristic and average sample number for planning;
* :mod:`~modemverify.stats.loss` -- implementation loss in dB with its interval;
* :mod:`~modemverify.stats.weighted` -- the weighted error rate of importance sampling: its
  tally, interval, sequential looks, weight diagnostics and the neighbour test.
"""

from __future__ import annotations

from . import intervals, loss, sequential, weighted

#: the submodules whose ``__all__`` this door re-exports
_SUBMODULES = (intervals, sequential, loss, weighted,)
_NAMES = {m.__name__.rsplit(".", 1)[1] for m in _SUBMODULES}
#: every public name of those submodules, except one that would hide a submodule of the same
#: name (``vectors.prbs`` is the submodule; its generator is ``vectors.prbs.prbs``)
__all__ = [n for m in _SUBMODULES for n in m.__all__ if n not in _NAMES]
globals().update({n: getattr(m, n) for m in _SUBMODULES for n in m.__all__ if n not in _NAMES})
