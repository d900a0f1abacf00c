"""Samples per symbol without a declared pulse: rectangular hold and integrate-and-dump.

With ``samples_per_symbol > 1`` and no pulse, a symbol is held for ``sps`` samples (an NRZ
rectangular pulse) and the matched filter is the integrate-and-dump correlator that averages each
symbol's samples (common practice: the correlator receiver of a rectangular pulse).
"""

from __future__ import annotations

import numpy as np


def hold(symbols: np.ndarray, sps: int) -> np.ndarray:
    """Repeat each symbol ``sps`` times."""
    symbols = np.asarray(symbols)
    return symbols if sps == 1 else np.repeat(symbols, sps)


def integrate_dump(samples: np.ndarray, sps: int) -> np.ndarray:
    """Mean of each consecutive group of ``sps`` samples (length must be a multiple of sps)."""
    samples = np.asarray(samples)
    if sps == 1:
        return samples
    return samples.reshape(-1, sps).mean(axis=1)
