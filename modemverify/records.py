"""The typed records in :attr:`Verdict.details <modemverify.verdict.Verdict.details>`.

A verdict's ``details`` is a JSON-serialisable mapping; the verdicts that reports draw from
carry one of the records below (``TypedDict``: at run time a plain dict, so ``verdicts.json``
is unchanged). Oracles build them; plotters and the HTML report read them and nothing else.
Keys marked ``NotRequired`` appear only where the text says.
"""

# no ``from __future__ import annotations`` here: TypedDict reads NotRequired from the live
# annotations
from typing import TypedDict

try:  # Python 3.11
    from typing import NotRequired
except ImportError:  # pragma: no cover - Python 3.10
    from typing_extensions import NotRequired

__all__ = [
    "MappingRecord", "EyeRecord", "EvmRecord", "BerPointRecord", "ImportanceGuardRecord",
    "MaskRecord",
    "SpectrumRecord", "CompareEvmRecord", "CompareSpectrumRecord", "SoftOutputRecord",
    "CounterexampleRecord", "KeptRecord",
]


class MappingRecord(TypedDict):
    """``mapping``: the measured table."""

    #: label string (bits in the order fed to modulate) -> [I, Q] of the device's point
    table: dict[str, list[float]]
    #: how the table was probed: ``modulate`` or ``demodulate``
    probe: str
    #: on a fail: the simplest relations to the claimed table (``Relation.to_json``)
    relation: NotRequired[list[dict]]
    #: on a fail: the labels whose point differs from the claim
    differing_labels: NotRequired[list[str]]


class EyeRecord(TypedDict):
    """In-phase matched-filter output around symbol peaks, two symbols wide."""

    sps: int
    traces: list[list[float]]


class EvmRecord(TypedDict):
    """``evm``: the error vector and the symbols it was measured on."""

    rms_percent: float
    rms_db: float
    peak_percent: float
    limit_percent: float
    #: label string -> [|mean error|, RMS error] in percent
    per_label: dict[str, list[float]]
    #: up to 2000 measured symbols [I, Q] and their labels (integers)
    cloud: list[list[float]]
    cloud_labels: list[int]
    #: shaped waveforms only
    eye: NotRequired[EyeRecord]


class BerPointRecord(TypedDict):
    """``ber.ebn0=<x>dB``: one Eb/N0 point of the BER check."""

    ebn0_db: float
    theory_ber: float
    limit_ber: float
    margin_db: float
    bits: int
    errors: int
    decided_after_bits: int
    decided_after_errors: int
    #: ``sprt`` or ``interval``
    method: str
    risk: float
    loss_db: float
    loss_interval_db: list[float]
    #: over-dispersion of the per-sub-block error counts, None without an estimate
    dispersion: float | None
    sub_block_bits: int
    #: ``nominal`` or ``measured``
    energy: str
    sides: str
    impairments: str
    #: precision of the noise drawn: ``float32`` or ``float64``
    noise: str
    #: blocks of the schedule used (blocks.block_schedule)
    blocks: int
    #: method: importance only: the weighted errors' effective sample size, the largest
    #: weight's share of the estimate, the device calls (modulate + demodulate pairs), and
    #: the bits plain sampling would need for the same interval width and how many times more
    #: that is than the bits sent
    ess: NotRequired[float]
    max_weight_share: NotRequired[float]
    device_calls: NotRequired[int]
    plain_bits_same_width: NotRequired[float]
    speedup: NotRequired[float]


class ImportanceGuardRecord(TypedDict):
    """``ber.importance_guard``: importance against plain sampling where plain is affordable."""

    ebn0_db: float
    theory_ber: float
    plain_ber: float
    plain_interval: tuple[float, float]
    plain_bits: int
    importance_ber: float
    importance_interval: tuple[float, float]
    importance_bits: int
    ess: float
    max_share: float
    #: the agreement test: z of the difference and its two-sided p-value
    z: float
    p_value: float
    #: why importance sampling is not trusted for this device, or ""
    why: str


class MaskRecord(TypedDict):
    worst_margin_db: float
    worst_freq_rs: float
    violations: list[list[float]]


class SpectrumRecord(TypedDict):
    """``spectrum.obw``: the Welch PSD and the bandwidths measured on it."""

    #: frequency in symbol rates and the PSD (linear), thinned to at most about 2048 points
    f_rs: list[float]
    psd: list[float]
    obw_rs: float
    obw_edges_rs: list[float]
    expected_obw_rs: float
    x_db: float
    x_db_width_rs: float
    x_db_edges_rs: list[float]
    #: the device file's mask, [[offset_rs, dBc], ...], or None
    mask: list | None
    #: the declared scheme, as text
    pulse: str
    #: with a mask only
    mask_result: NotRequired[MaskRecord]


class CompareEvmRecord(TypedDict):
    """``compare.evm``: A's symbols and B's error vectors against them (up to 2000)."""

    a_symbols: list[list[float]]
    error: list[list[float]]
    rms_percent: float


class CompareSpectrumRecord(TypedDict):
    """``compare.spectrum``: both Welch PSDs, each in dB from its own peak."""

    f_rs: list[float]
    psd_a_db: list[float]
    psd_b_db: list[float]
    #: the level below A's peak under which the difference is not judged
    floor_db: float


class SoftOutputRecord(TypedDict):
    """``llr.sign``: the device's LLRs (in the positive-means-bit-0 convention) as histograms
    per transmitted bit value, and the calibration curve."""

    #: 61 bin edges and the counts of LLRs of bits sent as 0 and as 1
    edges: list[float]
    bit0: list[int]
    bit1: list[int]
    #: LLR bin centres and log(bits sent as 0 / bits sent as 1) in each (bins of >= 50 bits)
    centres: list[float]
    empirical: list[float]
    #: on a partial sign failure: the share of agreeing signs per label bit
    per_bit_agreement: NotRequired[list[float]]


class CounterexampleRecord(TypedDict):
    """``details["counterexample"]`` of a failing ``roundtrip``, ``streaming.modulate`` or
    ``streaming.demodulate``: the input it failed on, as the next run replays it (kept beside
    the report, ``vectors.kept``)."""

    #: the verdict that failed
    verdict: str
    #: the bits, one character 0/1 per bit, in the order they are fed
    bits: str
    #: streaming only: the split, in symbols per chunk
    chunks: NotRequired[list[int]]


class KeptRecord(TypedDict):
    """``details["kept"]``: the kept counterexamples of an earlier run, tried first."""

    tried: int
    #: the positions (in the order kept) of those that still fail
    failing: list[int]
