"""Figures for the human report. Each plotter reads a run's verdicts and writes PNG files.

A plotter is a function ``(result, folder, stem) -> list[Figure]``; add one to ``PLOTTERS``.
matplotlib runs with the non-interactive Agg backend.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import cast

import numpy as np

from ..records import BerPointRecord, EvmRecord, MappingRecord, SpectrumRecord
from ..schemes.theory import ber as theory_ber

__all__ = ["Figure", "constellation_plot", "waterfall_plot", "psd_plot", "eye_plot", "PLOTTERS"]


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
    k = len(labels[0])
    fig, ax = plt.subplots(figsize=(6.4, 6.4), dpi=100)
    ref = conv.points
    evm_v = next((v for v in result.verdicts if v.name == "evm" and "cloud" in v.details), None)
    if evm_v is not None:
        cloud = np.array(cast(EvmRecord, evm_v.details)["cloud"])
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
    ax.set_title(f"{result.subject.name}: {mapping.outcome.upper()} mapping")
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.09), ncol=2, fontsize=8)
    name = _save(plt, fig, folder, f"{stem}-constellation.png")
    return [Figure("Constellation", name,
                   "Device points (blue; red where they differ from the claim) with their labels "
                   "(bits in the order fed to modulate); grey circles and labels are the claimed "
                   "convention.")]


def waterfall_plot(result, folder: Path, stem: str) -> list[Figure]:
    """Measured BER with interval bars over the theory curve and the margin (limit) curve."""
    pts = [v for v in result.verdicts if v.name.startswith("ber.") and "ebn0_db" in v.details]
    if not pts:
        return []
    plt = _pyplot()
    mod = result.subject.scheme.modulation
    records = [cast(BerPointRecord, v.details) for v in pts]
    x = np.array([r["ebn0_db"] for r in records])
    margin = records[0]["margin_db"]
    grid = np.linspace(x.min() - 2, x.max() + 1.5, 200)
    fig, ax = plt.subplots(figsize=(7, 4.8), dpi=100)
    ax.semilogy(grid, theory_ber(mod, grid), "k-", lw=1.2, label=f"theory ({mod}, AWGN)")
    ax.semilogy(grid, theory_ber(mod, grid - margin), "k--", lw=0.9,
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
    return [Figure("Spectrum", name, "Welch PSD of the device's output with the measured 99 % "
                   "occupied-bandwidth edges (dashed), the declared pulse's (dotted) and the "
                   "mask, if one was given.")]


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


PLOTTERS = [constellation_plot, waterfall_plot, psd_plot, eye_plot]
