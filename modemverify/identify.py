"""``modemverify identify``: describe a device's mapping with no claim needed.

Reports the measured table, whether it is Gray, its normalisation, the closest known
convention and the simplest transforms relating them.
"""

from __future__ import annotations

import numpy as np

from .bench import open_bench
from .oracles._table import measure_table
from .schemes.conventions import conventions_for
from .schemes.geometry import MEASURED_RTOL, all_distinct, nearest_neighbour_pairs
from .schemes.labels import hamming, label_string
from .schemes.transforms import DEFAULT_TOLERANCE, relate
from .spec import DeviceSpec


def identify(spec: DeviceSpec, tolerance: float = DEFAULT_TOLERANCE, *, adapter=None) -> dict:
    """Measure and describe the device's mapping; raises AdapterError if the device fails.

    ``adapter`` is an already-open adapter to use instead of opening the spec's device.
    """
    bench = open_bench(spec, adapter)
    try:
        table = measure_table(bench)
    finally:
        bench.device.close()
    k = bench.k
    pts = table.points
    finite = bool(np.all(np.isfinite(pts)))
    distinct = all_distinct(pts)
    out: dict = {
        "device": spec.name,
        "modulation": spec.scheme.modulation,
        "bits_per_symbol": k,
        "label_order": "each label lists its bits in the order they are fed to modulate",
        "probe": table.source,
        "mapping": {label_string(l, k): [float(p.real), float(p.imag)] for l, p in enumerate(pts)},
        "average_energy": float(np.mean(np.abs(pts) ** 2)) if finite else None,
        "memoryless": bool(np.all(table.spread <= tolerance)),
    }
    if distinct and k > 1:
        i, j = nearest_neighbour_pairs(pts, MEASURED_RTOL)
        h = hamming(i, j)
        out["gray"] = bool(np.all(h == 1))
        out["mean_neighbour_hamming"] = float(h.mean())
    else:
        out["gray"] = bool(distinct)
        out["mean_neighbour_hamming"] = 1.0 if distinct else None
    if out["average_energy"]:
        out["normalisation"] = float(1 / np.sqrt(out["average_energy"]))
    candidates = []
    for conv in conventions_for(spec.scheme.modulation):
        rels = relate(conv.points, pts, tolerance) if distinct else []
        if not rels:
            continue
        candidates.append((rels[0].cost, conv, rels))
    if not candidates:
        out["closest_convention"] = None
        out["relation"] = []
        out["matches"] = []
        return out
    best_cost = min(c for c, _, _ in candidates)
    closest = [(conv, rels) for c, conv, rels in candidates if c == best_cost]
    conv, rels = closest[0]
    out["closest_convention"] = conv.name
    out["closest_source"] = conv.source
    out["relation"] = [r.describe() for r in rels]
    out["relation_detail"] = [r.to_json() for r in rels]
    out["scale"] = rels[0].scale
    out["matches"] = [c.name for c, rels_ in closest if best_cost == 0]
    out["others"] = {c.name: [r.describe() for r in rr] for _, c, rr in candidates
                     if c.name != conv.name}
    return out


def render_identification(info: dict) -> str:
    """Human-readable text of :func:`identify`'s result."""
    k = info["bits_per_symbol"]
    lines = [f"Device {info['device']}: {info['modulation']}, {k} bits/symbol "
             f"(table probed through {info['probe']})",
             "label  (bits in the order fed to modulate)   I          Q"]
    for lab, (re, im) in info["mapping"].items():
        lines.append(f"  {lab:<{max(k, 5)}}  {re:+.6f}  {im:+.6f}")
    gray = info["gray"]
    lines.append(f"Gray: {'yes' if gray else 'no'}"
                 + (f" (mean neighbour Hamming distance {info['mean_neighbour_hamming']:.3f})"
                    if info.get("mean_neighbour_hamming") is not None else ""))
    if info.get("average_energy") is not None:
        lines.append(f"Average symbol energy: {info['average_energy']:.6g} "
                     f"(normalisation 1/{1 / info['normalisation']:.6g})")
    if not info["memoryless"]:
        lines.append("WARNING: the point for some labels depends on the neighbouring symbols")
    if info["closest_convention"] is None:
        lines.append("Closest convention: none of the known conventions has this point set")
    else:
        rel = info["relation"]
        if info["matches"]:
            lines.append(f"Matches: {', '.join(info['matches'])} exactly (up to scale "
                         f"{info['scale']:.6g})")
        else:
            lines.append(f"Closest convention: {info['closest_convention']} "
                         f"({info['closest_source']})")
            lines.append(f"Relation: {rel[0]}")
            for other in rel[1:]:
                lines.append(f"  the same thing as: {other}")
    return "\n".join(lines)
