"""Figures for the human report. Each plotter reads a run's verdicts and writes PNG files.

A plotter is a function ``(result, folder, stem) -> list[Figure]``; add one to ``PLOTTERS``.
matplotlib runs with the non-interactive Agg backend.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import cast

import numpy as np

from ..records import (
    BerPointRecord,
    CompareEvmRecord,
    CompareSpectrumRecord,
    EvmRecord,
    MappingRecord,
    SoftOutputRecord,
    SpectrumRecord,
)
from ..schemes.theory import ber as theory_ber

__all__ = [
    "Figure", "constellation_plot", "waterfall_plot", "psd_plot", "eye_plot", "PLOTTERS",
    "per_label_evm_plot", "compare_plots", "soft_output_plot",
]


@dataclass(frozen=True)
class Figure:
    title: str
    file: str
    caption: str


def _pyplot():
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


def _save(plt, fig, folder: Path, name: str) -> str:
    fig.tight_layout()
    fig.savefig(folder / name)
    plt.close(fig)
    return name


def constellation_plot(result, folder: Path, stem: str) -> list[Figure]:
    """Device points with their labels over the claimed convention's points."""
    mapping = next((v for v in result.verdicts if v.name == "mapping" and "table" in v.details),
                   None)
    if mapping is None:
        return []
    plt = _pyplot()
    conv = result.subject.scheme.reference
    record = cast(MappingRecord, mapping.details)
    table = record["table"]
    labels = list(table)
    dev = np.array([complex(*table[l]) for l in labels])
    # drawn at the measured scale: the device's points divided by their RMS gain over the
    # unit-energy claim, so a table on the integer grid sits on the reference circles
    finite_pts = dev[np.isfinite(dev)]
    gain = float(np.sqrt(np.mean(np.abs(finite_pts) ** 2))) if finite_pts.size else 1.0
    gain = gain if np.isfinite(gain) and gain > 0 else 1.0
    dev = dev / gain
    k = len(labels[0])
    fig, ax = plt.subplots(figsize=(6.4, 6.4), dpi=100)
    ref = conv.points
    evm_v = next((v for v in result.verdicts if v.name == "evm" and "cloud" in v.details), None)
    if evm_v is not None:
        cloud = np.array(cast(EvmRecord, evm_v.details)["cloud"]) / gain
        ax.scatter(cloud[:, 0], cloud[:, 1], s=2, color="tab:orange", alpha=0.35,
                   label="device symbols (EVM probe)", zorder=1)
    ax.scatter(ref.real, ref.imag, s=260, facecolors="none", edgecolors="0.6",
               label=f"{conv.name} reference")
    finite = np.isfinite(dev)
    bad = set(record.get("differing_labels", []))
    colours = ["tab:red" if l in bad else "tab:blue" for l in labels]
    ax.scatter(dev.real[finite], dev.imag[finite], s=18,
               c=[c for c, f in zip(colours, finite) if f], label="device", zorder=3)
    fs = 9 if k <= 4 else 6 if k <= 6 else 4
    for l, p, f in zip(labels, dev, finite):
        if f:
            ax.annotate(l, (p.real, p.imag), textcoords="offset points", xytext=(0, 6),
                        ha="center", fontsize=fs, color="tab:red" if l in bad else "black")
    for l, p in enumerate(ref):  # reference labels, small and grey, under the circles
        ax.annotate(format(l, f"0{k}b"), (p.real, p.imag), textcoords="offset points",
                    xytext=(0, -11), ha="center", fontsize=max(fs - 2, 3), color="0.55")
    ax.axhline(0, color="0.85", lw=0.8)
    ax.axvline(0, color="0.85", lw=0.8)
    ax.set_aspect("equal")
    ax.set_xlabel("I")
    ax.set_ylabel("Q")
    scale = "" if abs(gain - 1) < 1e-3 else f" (device scaled by 1/{gain:.4g})"
    ax.set_title(f"{result.subject.name}: {mapping.outcome.upper()} mapping{scale}")
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.09), ncol=2, fontsize=8)
    name = _save(plt, fig, folder, f"{stem}-constellation.png")
    return [Figure("Constellation", name,
                   "Device points (blue; red where they differ from the claim) with their labels "
                   "(bits in the order fed to modulate), at the measured scale (divided by the "
                   f"device's RMS amplitude, {gain:.4g}); grey circles and labels are the claimed "
                   "convention at unit average energy.")]


def waterfall_plot(result, folder: Path, stem: str) -> list[Figure]:
    """Measured BER with interval bars over the theory curve and the margin (limit) curve."""
    pts = [v for v in result.verdicts if v.name.startswith("ber.") and "limit_ber" in v.details]
    if not pts:
        return []
    plt = _pyplot()
    mod = result.subject.scheme.modulation
    records = [cast(BerPointRecord, v.details) for v in pts]
    x = np.array([r["ebn0_db"] for r in records])
    margin = records[0]["margin_db"]
    grid = np.linspace(x.min() - 2, x.max() + 1.5, 200)
    fig, ax = plt.subplots(figsize=(7, 4.8), dpi=100)
    ring = result.subject.scheme.ring_ratio
    ax.semilogy(grid, theory_ber(mod, grid, ring_ratio=ring), "k-", lw=1.2,
                label=f"theory ({mod}, AWGN)")
    ax.semilogy(grid, theory_ber(mod, grid - margin, ring_ratio=ring), "k--", lw=0.9,
                label=f"limit: theory {margin:g} dB worse")
    colours = {"pass": "tab:green", "fail": "tab:red", "inconclusive": "tab:orange",
               "error": "tab:purple"}
    for v in pts:
        ber = v.statistic if v.statistic and v.statistic > 0 else None
        lo, hi = v.interval if v.interval else (np.nan, np.nan)
        c = colours.get(v.outcome, "0.5")
        y = ber if ber else hi
        if y and y > 0:
            lower = max(y - lo, 0) if ber else 0
            ax.errorbar([v.details["ebn0_db"]], [y], yerr=[[lower], [max(hi - y, 0)]],
                        fmt="o" if ber else "v", color=c, capsize=4, ms=6)
            ax.annotate(v.outcome, (v.details["ebn0_db"], y), textcoords="offset points",
                        xytext=(6, 6), fontsize=8, color=c)
    ax.set_xlabel("Eb/N0 (dB)")
    ax.set_ylabel("bit error rate")
    ax.grid(True, which="both", alpha=0.3)
    ax.set_title(f"{result.subject.name}: BER vs theory")
    ax.legend(fontsize=8, loc="lower left")
    name = _save(plt, fig, folder, f"{stem}-ber.png")
    return [Figure("BER waterfall", name,
                   "Measured BER (markers; bars: the confidence interval used for the decision; "
                   "a triangle marks an upper bound where no error was seen) against the theory "
                   "curve and the limit curve shifted by the margin.")]


def psd_plot(result, folder: Path, stem: str) -> list[Figure]:
    """Welch PSD with the occupied-bandwidth edges, the declared pulse's value and the mask."""
    v = next((v for v in result.verdicts if v.name == "spectrum.obw" and "psd" in v.details),
             None)
    if v is None:
        return []
    plt = _pyplot()
    d = cast(SpectrumRecord, v.details)
    f = np.array(d["f_rs"])
    psd = np.array(d["psd"])
    db = 10 * np.log10(np.maximum(psd / psd.max(), 1e-15))
    fig, ax = plt.subplots(figsize=(7.5, 4.5), dpi=100)
    ax.plot(f, db, lw=0.9, label="device (Welch)")
    pulse = result.subject.scheme.pulse
    if pulse is not None and not pulse.is_rectangular:
        theory = np.asarray(pulse.psd(f, truncated=True), dtype=float)
        if theory.max() > 0:
            ax.plot(f, 10 * np.log10(np.maximum(theory / theory.max(), 1e-15)), lw=0.9,
                    color="0.3", alpha=0.8, label=f"declared {pulse.describe()} (theory)")
    for edge in d["obw_edges_rs"]:
        ax.axvline(edge, color="tab:green", ls="--", lw=0.9)
    half = d["expected_obw_rs"] / 2
    for edge in (-half, half):
        ax.axvline(edge, color="0.4", ls=":", lw=0.9)
    ax.plot([], [], color="tab:green", ls="--", label=f"99 % OBW {d['obw_rs']:.3f} Rs")
    ax.plot([], [], color="0.4", ls=":", label=f"declared pulse {d['expected_obw_rs']:.3f} Rs")
    if d.get("mask"):
        pts = np.array(d["mask"], dtype=float)
        xs = np.concatenate([-pts[::-1, 0], pts[:, 0]])
        ys = np.concatenate([pts[::-1, 1], pts[:, 1]])
        ax.plot(xs, ys, color="tab:red", lw=1.2, label="mask (dBc)")
    ax.set_xlabel("frequency offset (symbol rates)")
    ax.set_ylabel("PSD (dB relative to peak)")
    ax.set_ylim(max(db.min(), -100), 5)
    ax.grid(True, alpha=0.3)
    ax.set_title(f"{result.subject.name}: spectrum ({v.outcome.upper()} occupied bandwidth)")
    ax.legend(fontsize=8, loc="lower center")
    name = _save(plt, fig, folder, f"{stem}-psd.png")
    return [Figure("Spectrum", name, "Welch PSD of the device's output over the declared "
                   "pulse's theoretical PSD (grey, with the filter's truncation), with the "
                   "measured 99 % occupied-bandwidth edges (dashed), the declared pulse's "
                   "(dotted) and the mask, if one was given.")]


def eye_plot(result, folder: Path, stem: str) -> list[Figure]:
    """Eye diagram of the in-phase matched-filter output."""
    v = next((v for v in result.verdicts if v.name == "evm" and "eye" in v.details), None)
    if v is None or not v.details["eye"]["traces"]:
        return []
    plt = _pyplot()
    eye = cast(EvmRecord, v.details)["eye"]
    sps = eye["sps"]
    t = (np.arange(2 * sps + 1) - sps) / sps
    fig, ax = plt.subplots(figsize=(6, 4), dpi=100)
    for tr in eye["traces"]:
        ax.plot(t, tr, color="tab:blue", lw=0.5, alpha=0.3)
    ax.axvline(0, color="0.5", lw=0.8, ls=":")
    ax.set_xlabel("time (symbols, 0 = sampling instant)")
    ax.set_ylabel("I after the matched filter")
    ax.set_title(f"{result.subject.name}: eye diagram")
    ax.grid(True, alpha=0.3)
    name = _save(plt, fig, folder, f"{stem}-eye.png")
    return [Figure("Eye diagram", name, "In-phase component after alignment and the matched "
                   "filter, two symbols around each sampling instant.")]


def per_label_evm_plot(result, folder: Path, stem: str) -> list[Figure]:
    """RMS EVM per label, against the limit: which labels carry the error."""
    v = next((v for v in result.verdicts if v.name == "evm" and "per_label" in v.details), None)
    if v is None or not v.details["per_label"]:
        return []
    d = cast(EvmRecord, v.details)
    labels = sorted(d["per_label"])
    rms = np.array([d["per_label"][l][1] for l in labels])
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(max(6.0, 0.12 * len(labels) + 2), 3.6), dpi=100)
    ax.bar(range(len(labels)), rms, color=["tab:red" if x > d["limit_percent"] else "tab:blue"
                                           for x in rms])
    ax.axhline(d["limit_percent"], color="tab:red", ls="--", lw=1,
               label=f"limit {d['limit_percent']:g} %")
    ax.axhline(d["rms_percent"], color="0.3", ls=":", lw=1,
               label=f"all labels {d['rms_percent']:.3g} %")
    if len(labels) <= 64:
        ax.set_xticks(range(len(labels)), labels, rotation=90, fontsize=6)
    ax.set_xlabel("label (bits in the order fed to modulate)")
    ax.set_ylabel("RMS EVM (%)")
    ax.set_title(f"{result.subject.name}: EVM per label ({v.outcome.upper()})")
    ax.legend(fontsize=8)
    name = _save(plt, fig, folder, f"{stem}-evm-labels.png")
    return [Figure("EVM per label", name, "RMS error vector of each label's symbols in % of the "
                   "reference RMS (3GPP definition), against the limit (dashed); a label far "
                   "above the others points at a mapping or saturation defect, a uniform level "
                   "at noise or filtering.")]


def compare_plots(result, folder: Path, stem: str) -> list[Figure]:
    """compare: A and B's spectra overlaid, and B's error vectors over A's symbols."""
    out = []
    spec = next((v for v in result.verdicts if v.name == "compare.spectrum"
                 and "psd_a_db" in v.details), None)
    if spec is not None:
        d = cast(CompareSpectrumRecord, spec.details)
        plt = _pyplot()
        fig, ax = plt.subplots(figsize=(7.5, 4.2), dpi=100)
        ax.plot(d["f_rs"], d["psd_a_db"], lw=1.2, label="A (reference implementation)")
        ax.plot(d["f_rs"], d["psd_b_db"], lw=0.9, ls="--", label="B (judged)")
        ax.axhline(d["floor_db"], color="0.6", lw=0.8, ls=":",
                   label=f"judged above {d['floor_db']:g} dB")
        ax.set_ylim(max(min(d["psd_a_db"]), -100), 5)
        ax.set_xlabel("frequency offset (symbol rates)")
        ax.set_ylabel("PSD (dB relative to own peak)")
        ax.grid(True, alpha=0.3)
        ax.set_title(f"{result.subject.name}: spectra ({spec.outcome.upper()})")
        ax.legend(fontsize=8, loc="lower center")
        out.append(Figure("Spectra of A and B", _save(plt, fig, folder, f"{stem}-ab-psd.png"),
                          "Welch PSDs of both implementations on the same bits, each relative "
                          "to its own peak; the difference is judged where A is above the "
                          "dotted level."))
    ev = next((v for v in result.verdicts if v.name == "compare.evm" and "error" in v.details),
              None)
    if ev is not None:
        d = cast(CompareEvmRecord, ev.details)
        a = np.array(d["a_symbols"])
        e = np.array(d["error"])
        plt = _pyplot()
        fig, axes = plt.subplots(1, 2, figsize=(9, 4.3), dpi=100)
        axes[0].scatter(a[:, 0], a[:, 1], s=3, color="0.6", label="A")
        axes[0].scatter(a[:, 0] + e[:, 0], a[:, 1] + e[:, 1], s=2, color="tab:blue",
                        alpha=0.5, label="B")
        axes[0].set_aspect("equal")
        axes[0].set_title("symbols")
        axes[0].legend(fontsize=8)
        axes[1].scatter(e[:, 0], e[:, 1], s=2, color="tab:red", alpha=0.5)
        axes[1].set_aspect("equal")
        axes[1].set_title(f"error vectors B - A (RMS {d['rms_percent']:.3g} %)")
        for ax in axes:
            ax.grid(True, alpha=0.3)
            ax.set_xlabel("I")
            ax.set_ylabel("Q")
        fig.suptitle(f"{result.subject.name}: {ev.outcome.upper()} EVM of B against A",
                     fontsize=10)
        out.append(Figure("Error vectors of B against A",
                          _save(plt, fig, folder, f"{stem}-ab-error.png"),
                          "B's symbols over A's on the same bits (after alignment and A's "
                          "matched filter), and the error vectors themselves: a ring or a tilt "
                          "shows a gain or phase difference, a cloud noise or quantisation."))
    return out


def soft_output_plot(result, folder: Path, stem: str) -> list[Figure]:
    """LLR histograms per transmitted bit value, and the calibration curve."""
    v = next((v for v in result.verdicts if v.name == "llr.sign" and "edges" in v.details),
             None)
    if v is None:
        return []
    d = cast(SoftOutputRecord, v.details)
    edges = np.array(d["edges"])
    centres = (edges[:-1] + edges[1:]) / 2
    plt = _pyplot()
    fig, (left, right) = plt.subplots(1, 2, figsize=(10, 4), dpi=100)
    width = edges[1] - edges[0]
    left.bar(centres, d["bit0"], width=width, alpha=0.55, color="tab:blue", label="bit sent 0")
    left.bar(centres, d["bit1"], width=width, alpha=0.55, color="tab:orange",
             label="bit sent 1")
    left.set_xlabel("device LLR (positive = bit 0)")
    left.set_ylabel("bits")
    left.legend(fontsize=8)
    left.set_title("LLR histograms per bit value")
    lim = float(edges[-1])
    right.plot([-lim, lim], [-lim, lim], color="0.6", ls="--", lw=1, label="calibrated")
    right.plot(d["centres"], d["empirical"], marker="o", ms=3, color="tab:red",
               label="measured")
    right.set_xlabel("device LLR")
    right.set_ylabel("log(bits sent as 0 / bits sent as 1)")
    right.legend(fontsize=8)
    right.grid(True, alpha=0.3)
    right.set_title("calibration")
    fig.suptitle(f"{result.subject.name}: soft outputs ({v.outcome.upper()} llr.sign)",
                 fontsize=10)
    name = _save(plt, fig, folder, f"{stem}-llr.png")
    return [Figure("Soft outputs", name, "Left: the device's LLRs for bits sent as 0 and as 1 "
                   "(well separated, and on the correct sides of 0, for a good demapper). "
                   "Right: in bins of the LLR, the log-ratio of bits sent as 0 to bits sent as "
                   "1; a calibrated LLR lies on the dashed diagonal, an over-confident one is "
                   "flatter, a sign-flipped one falls.")]


PLOTTERS = [constellation_plot, per_label_evm_plot, waterfall_plot, psd_plot, eye_plot,
            soft_output_plot, compare_plots]
