r"""Error vector magnitude (EVM) of measured symbols against their ideal reference.

The 3GPP definition (TS 38.101-2 Annex F.2 for the UE, same form in TS 38.101-1 Annex F; for
the base station TS 38.104 Annex B (FR1) / Annex C (FR2), annex letters from memory):

    ``EVM = sqrt( sum_v abs(z(v) - i(v))**2 / (N * P0) )``

with ``z`` the measured (timing- and frequency-corrected, equalised) symbols, ``i`` the ideal
reference symbols, ``N`` the number of symbols and ``P0`` the average power of the ideal
reference over the measurement set. Reported in percent and in dB (``20 log10 EVM``).

Data-aided EVM in AWGN relates to the SNR ``Es/N0`` (normalised to the reference power) by
``EVM_rms ~ 1 / sqrt(SNR)`` (R. A. Shafik, M. S. Rahman, A. H. M. R. Islam, "On the extended
relationships among EVM, BER and SNR as performance metrics", ICECE 2006):
:func:`snr_db_from_evm` and :func:`evm_from_snr_db`. The relation needs the *ideal* symbols; EVM
measured against decisions (non-data-aided) reads low at low SNR because errors are measured
to the nearest point (H. A. Mahmoud, H. Arslan, IEEE Trans. Wireless Commun., 2009).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from modemverify.errors import ConfigError, UnknownNameError

from ..options import as_1d_complex

__all__ = [
    "DEFAULT_EVM_LIMITS", "EVM_MODULATIONS", "EvmResult", "evm", "evm_limit",
    "snr_db_from_evm", "evm_from_snr_db",
]

#: Base-station EVM limits in percent, 3GPP TS 38.104, 6.5.2.2, Table 6.5.2.2-1 (NR; the same
#: four values as LTE's TS 36.104 Table 6.5.2-1, from memory for LTE). 1024QAM: 2.5 %, added to
#: the same table in Release 17 (FR1; from memory).
DEFAULT_EVM_LIMITS: dict[str, float] = {"qpsk": 17.5, "16qam": 12.5, "64qam": 8.0,
                                        "256qam": 3.5, "1024qam": 2.5}

#: Modulations :func:`evm_limit` knows; those without a 3GPP limit map to None.
EVM_MODULATIONS: tuple[str, ...] = ("bpsk", "qpsk", "8psk", "16qam", "64qam", "256qam",
                                    "1024qam", "pi/2-bpsk", "16apsk", "dbpsk", "dqpsk",
                                    "pi/4-dqpsk", "oqpsk", "32apsk")


@dataclass(frozen=True)
class EvmResult:
    """Outcome of :func:`evm`.

    Attributes
    ----------
    rms_percent : float
        ``100 * sqrt(sum(abs(z - i)**2) / (N * P0))``.
    rms_db : float
        ``20 log10(rms_percent / 100)`` (``-inf`` for a perfect match).
    peak_percent : float
        Largest single error vector magnitude, ``100 * max(abs(z - i)) / sqrt(P0)``.
    peak_index : int
        Index of that symbol.
    per_label : dict
        ``label -> (mean error vector, rms error in percent of sqrt(P0))`` over the symbols with
        that label; empty when no labels were given. A mean error far from 0 on some labels
        only points at a mapping or compression problem on those points.
    gain : complex
        The complex gain divided out before measuring (1 without equalisation).
    n_symbols : int
    p0 : float
        Average power of the ideal reference.
    """

    rms_percent: float
    rms_db: float
    peak_percent: float
    peak_index: int
    per_label: dict = field(default_factory=dict)
    gain: complex = 1 + 0j
    n_symbols: int = 0
    p0: float = 1.0


def evm(measured_symbols, ideal_symbols, labels=None, *, equalise: bool = False) -> EvmResult:
    r"""EVM per the 3GPP definition.

    Parameters
    ----------
    measured_symbols : array_like
        Complex symbols after timing and frequency correction (e.g. the matched filter output
        of an aligned waveform).
    ideal_symbols : array_like
        The reference symbols of the same bits, same length.
    labels : array_like of int, optional
        Constellation label of each symbol, for the per-label statistics.
    equalise : bool, optional
        First divide the measured symbols by the least-squares complex gain
        ``g = sum(z conj(i)) / sum(abs(i)**2)``. This is the single-carrier, one-tap analogue of
        the 3GPP EVM equaliser, which for OFDM estimates one coefficient per subcarrier
        (TS 38.104 Annex B, from memory); it removes a common scale and phase, nothing else.

    Returns
    -------
    EvmResult

    Raises
    ------
    ConfigError
        For empty, mismatched or non-finite inputs, an all-zero reference, or (with
        ``equalise``) an all-zero measurement.

    Examples
    --------
    >>> r = evm([1.1, -1, 1j, -1j], [1, -1, 1j, -1j])
    >>> round(r.rms_percent, 6), r.peak_index          # sqrt(0.01 / 4) = 5 %
    (5.0, 0)
    """
    z = as_1d_complex(measured_symbols, "measured_symbols")
    i = as_1d_complex(ideal_symbols, "ideal_symbols")
    if z.size == 0 or z.size != i.size:
        raise ConfigError(f"expected measured and ideal symbols of the same non-zero length, "
                          f"got {z.size} and {i.size}", key="measured_symbols")
    p0 = float(np.vdot(i, i).real) / i.size
    if p0 == 0:
        raise ConfigError("the ideal symbols have zero power", key="ideal_symbols")
    gain = 1 + 0j
    if equalise:
        c = complex(np.vdot(i, z))  # sum(z * conj(i))
        if c == 0:
            raise ConfigError("cannot equalise: the measured symbols are uncorrelated with "
                              "(or all zero against) the ideal ones", key="measured_symbols")
        gain = c / (p0 * i.size)
        z = z / gain
    e = z - i
    mag2 = e.real ** 2 + e.imag ** 2
    rms = math.sqrt(float(mag2.sum()) / (i.size * p0))
    peak_index = int(np.argmax(mag2))
    peak = math.sqrt(float(mag2[peak_index]) / p0)
    per_label = {}
    if labels is not None:
        lab = np.asarray(labels)
        if lab.shape != i.shape or not np.issubdtype(lab.dtype, np.integer):
            raise ConfigError(f"expected one integer label per symbol ({i.size}), got "
                              f"{lab.dtype} array of shape {lab.shape}", key="labels")
        # Grouped sums with bincount over the distinct labels: no loop over symbols.
        keys, inverse = np.unique(lab, return_inverse=True)
        count = np.bincount(inverse, minlength=keys.size)
        mean_e = (np.bincount(inverse, weights=e.real, minlength=keys.size)
                  + 1j * np.bincount(inverse, weights=e.imag, minlength=keys.size)) / count
        ms = np.bincount(inverse, weights=mag2, minlength=keys.size) / count
        per_label = {int(k): (complex(m), 100.0 * math.sqrt(v / p0))
                     for k, m, v in zip(keys, mean_e, ms)}
    rms_percent = 100.0 * rms
    return EvmResult(rms_percent=rms_percent,
                     rms_db=20.0 * math.log10(rms) if rms > 0 else -math.inf,
                     peak_percent=100.0 * peak, peak_index=peak_index, per_label=per_label,
                     gain=gain, n_symbols=int(i.size), p0=p0)


def evm_limit(modulation: str) -> float | None:
    """The 3GPP base-station EVM limit in percent (:data:`DEFAULT_EVM_LIMITS`).

    Returns None for BPSK and 8PSK: TS 38.104 Table 6.5.2.2-1 lists QPSK, 16QAM, 64QAM,
    256QAM and 1024QAM only (and, from memory, NR has pi/2-BPSK only on the uplink, where the
    UE requirement of TS 38.101-1 applies, and no 8PSK at all), so there is no published
    base-station figure to hold them to; nor for 16APSK and the differential schemes. The
    caller must supply one.

    Raises
    ------
    UnknownNameError
        For a modulation not in :data:`EVM_MODULATIONS`.

    Examples
    --------
    >>> evm_limit("16QAM"), evm_limit("8psk")
    (12.5, None)
    """
    name = modulation.lower() if isinstance(modulation, str) else modulation
    if name not in EVM_MODULATIONS:
        raise UnknownNameError("modulation", modulation, EVM_MODULATIONS, key="modulation")
    return DEFAULT_EVM_LIMITS.get(name)


def snr_db_from_evm(evm_percent: float) -> float:
    """SNR (``Es/N0`` in dB) at which data-aided EVM in AWGN is ``evm_percent``:
    ``-20 log10(EVM)`` (Shafik, Rahman & Islam, ICECE 2006).

    Examples
    --------
    >>> round(snr_db_from_evm(17.5), 2)
    15.14
    """
    v = float(evm_percent)
    if not (v > 0 and math.isfinite(v)):
        raise ConfigError(f"expected a positive EVM in percent, got {evm_percent!r}",
                          key="evm_percent")
    return -20.0 * math.log10(v / 100.0)


def evm_from_snr_db(snr_db: float) -> float:
    """Data-aided EVM in percent expected in AWGN at ``Es/N0 = snr_db``: ``100 / sqrt(SNR)``."""
    v = float(snr_db)
    if not math.isfinite(v):
        raise ConfigError(f"expected a finite SNR in dB, got {snr_db!r}", key="snr_db")
    return 100.0 * 10.0 ** (-v / 20.0)
