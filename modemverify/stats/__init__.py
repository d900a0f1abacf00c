"""Statistics for BER decisions: exact intervals, sequential tests, implementation loss.

* :mod:`~modemverify.stats.intervals` -- Clopper-Pearson intervals and one-sided bounds, and a
  burst-aware interval for per-block error counts (both return one
  :class:`~modemverify.stats.intervals.ConfidenceInterval`), with the burst rule
  (:meth:`~modemverify.stats.intervals.DispersionTest.bursty`);
* :mod:`~modemverify.stats.sequential` -- Wald's SPRT between theory and the BER limit, with
  the fixed-sample size, operating characteristic and average sample number for planning;
* :mod:`~modemverify.stats.loss` -- implementation loss in dB with its interval.
"""

from modemverify.stats.intervals import (
    DISPERSION_ALPHA,
    ConfidenceInterval,
    DispersionTest,
    block_interval,
    clopper_pearson,
    dispersion_test,
    lower_bound,
    upper_bound,
)
from modemverify.stats.loss import (
    LossEstimate,
    implementation_loss_db,
    loss_from_counts,
)
from modemverify.stats.sequential import (
    Decision,
    Sprt,
    SprtState,
    expected_sample_size,
    fixed_sample_size,
    operating_characteristic,
    wald_thresholds,
)

__all__ = [
    "DISPERSION_ALPHA",
    "ConfidenceInterval",
    "Decision",
    "DispersionTest",
    "LossEstimate",
    "Sprt",
    "SprtState",
    "block_interval",
    "clopper_pearson",
    "dispersion_test",
    "expected_sample_size",
    "fixed_sample_size",
    "implementation_loss_db",
    "loss_from_counts",
    "lower_bound",
    "operating_characteristic",
    "upper_bound",
    "wald_thresholds",
]
