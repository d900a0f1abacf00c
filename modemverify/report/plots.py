"""Figures for the human report. Each plotter reads a run's verdicts and writes PNG files.

A plotter is a function ``(result, folder, stem) -> list[Figure]``; add one to ``PLOTTERS``.
matplotlib runs with the non-interactive Agg backend.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np


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


def constellation_plot(result, folder: Path, stem: str) -> list[Figure]:
    """Device points with their labels over the claimed convention's points."""
    mapping = next((v for v in result.verdicts if v.name == "mapping" and "table" in v.details),
                   None)
    if mapping is None:
        return []
    plt = _pyplot()
    conv = result.spec.scheme.reference
    table = mapping.details["table"]
    labels = list(table)
    dev = np.array([complex(*table[l]) for l in labels])
    k = len(labels[0])
    fig, ax = plt.subplots(figsize=(6.4, 6.4), dpi=100)
    ref = conv.points
    ax.scatter(ref.real, ref.imag, s=260, facecolors="none", edgecolors="0.6",
               label=f"{conv.name} reference")
    finite = np.isfinite(dev)
    bad = set(mapping.details.get("differing_labels", []))
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
    ax.set_title(f"{result.spec.name}: {mapping.outcome.upper()} mapping")
    ax.legend(loc="upper right", fontsize=8)
    fig.tight_layout()
    name = f"{stem}-constellation.png"
    fig.savefig(folder / name)
    plt.close(fig)
    return [Figure("Constellation", name,
                   "Device points (blue; red where they differ from the claim) with their labels "
                   "(bits in the order fed to modulate); grey circles and labels are the claimed "
                   "convention.")]


PLOTTERS = [constellation_plot]
