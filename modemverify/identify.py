"""``modemverify identify``: describe a device's mapping with no claim needed.

Reports the measured table, whether it is Gray, its normalisation, the closest known
convention and the simplest transforms relating them.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

import numpy as np

from .bench import open_bench
from .oracles._table import measure_table
from .schemes.conventions import conventions_for
from .schemes.geometry import MEASURED_RTOL, all_distinct, nearest_neighbour_pairs
from .schemes.labels import hamming, label_string
from .schemes.rules import rule_family
from .schemes.transforms import DEFAULT_TOLERANCE, relate
from .spec import DeviceSpec

__all__ = ["IdentifyResult", "identify", "render_identification"]


@dataclass(frozen=True)
class IdentifyResult:
    """What :func:`identify` found; every field is always present (None where it does not
    apply). :meth:`to_json` is the ``--json`` record, :meth:`render` the text."""

    device: str
    modulation: str
    bits_per_symbol: int
    #: how the table was probed: ``modulate`` or ``demodulate``
    probe: str
    #: label string -> [I, Q]
    mapping: dict[str, list[float]]
    #: mean |point|^2; None when a point is not finite
    average_energy: float | None
    #: 1/sqrt(average_energy): the factor that would give unit energy
    normalisation: float | None
    #: False when the point of some label depends on its neighbours
    memoryless: bool
    gray: bool
    mean_neighbour_hamming: float | None
    closest_convention: str | None = None
    closest_source: str | None = None
    #: the simplest descriptions of the device table in terms of the closest convention
    relation: list[str] = field(default_factory=list)
    relation_detail: list[dict] = field(default_factory=list)
    scale: float | None = None
    #: conventions the table equals exactly (up to a positive gain)
    matches: list[str] = field(default_factory=list)
    #: other conventions the table relates to, with their descriptions
    others: dict[str, list[str]] = field(default_factory=dict)
    label_order: str = "each label lists its bits in the order they are fed to modulate"
    #: the claimed modulation's symbol rule, when the table was read under one
    claimed_rule: str | None = None
    #: when the table depends on its neighbours under the claimed rule but not under another
    #: (a turn on other positions, a differential encoding...): how it differs
    symbol_rule: str | None = None

    def __repr__(self) -> str:
        what = (f"matches {', '.join(self.matches)}" if self.matches else
                f"closest {self.closest_convention}" if self.closest_convention else
                "no known convention")
        return f"IdentifyResult({self.device!r}, {self.modulation}, {what})"

    def to_json(self) -> dict:
        return asdict(self)

    def render(self) -> str:
        return render_identification(self)


def identify(spec: DeviceSpec, tolerance: float = DEFAULT_TOLERANCE, *,
             adapter=None) -> IdentifyResult:
    """Measure and describe the device's mapping; raises AdapterError if the device fails.

    ``adapter`` is an already-open adapter to use instead of opening the spec's device.
    """
    bench = open_bench(spec, adapter)
    try:
        table = measure_table(bench)
        rule_text = None
        if table.source == "modulate" and not np.all(table.spread <= tolerance):
            # the points depend on the neighbours under the claimed rule: is there a rule
            # (position, previous symbol) under which they do not?
            for rule, found in rule_family(bench.convention.rule):
                other = measure_table(bench, rule)
                if np.all(other.spread <= tolerance):
                    table, rule_text = other, found
                    break
    finally:
        bench.device.close()
    k = bench.k
    pts = table.points
    finite = bool(np.all(np.isfinite(pts)))
    distinct = all_distinct(pts)
    energy = float(np.mean(np.abs(pts) ** 2)) if finite else None
    if distinct and k > 1:
        i, j = nearest_neighbour_pairs(pts, MEASURED_RTOL)
        h = hamming(i, j)
        gray, mean_h = bool(np.all(h == 1)), float(h.mean())
    else:
        gray, mean_h = bool(distinct), (1.0 if distinct else None)
    found = dict(
        device=spec.name, modulation=spec.scheme.modulation, bits_per_symbol=k,
        probe=table.source,
        mapping={label_string(l, k): [float(p.real), float(p.imag)] for l, p in enumerate(pts)},
        average_energy=energy, normalisation=float(1 / np.sqrt(energy)) if energy else None,
        memoryless=bool(np.all(table.spread <= tolerance)), gray=gray,
        mean_neighbour_hamming=mean_h, symbol_rule=rule_text,
        claimed_rule=(None if bench.convention.rule.plain
                      else bench.convention.rule.describe()))
    candidates = []
    for conv in conventions_for(spec.scheme.modulation, spec.scheme.ring_ratio):
        rels = relate(conv.points, pts, tolerance) if distinct else []
        if rels:
            candidates.append((rels[0].cost, conv, rels))
    if not candidates:
        return IdentifyResult(**found)
    best_cost = min(c for c, _, _ in candidates)
    closest = [(conv, rels) for c, conv, rels in candidates if c == best_cost]
    conv, rels = closest[0]
    return IdentifyResult(
        **found, closest_convention=conv.name, closest_source=conv.source,
        relation=[r.describe() for r in rels], relation_detail=[r.to_json() for r in rels],
        scale=rels[0].scale, matches=[c.name for c, _ in closest if best_cost == 0],
        others={c.name: [r.describe() for r in rr] for _, c, rr in candidates
                if c.name != conv.name})


def render_identification(result: IdentifyResult) -> str:
    """Human-readable text of :func:`identify`'s result."""
    info = result.to_json()
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
    if info["normalisation"]:
        lines.append(f"Average symbol energy: {info['average_energy']:.6g} "
                     f"(normalisation 1/{1 / info['normalisation']:.6g})")
    if info.get("claimed_rule"):
        lines.append(f"Table read under the {info['modulation']} rule: {info['claimed_rule']}")
    if info.get("symbol_rule"):
        lines.append(f"Symbol rule: {info['symbol_rule']}; the table above is read under it")
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
        others = {name: rels for name, rels in info["others"].items()
                  if name not in info["matches"]}
        if others:
            lines.append("Against the other conventions for this modulation:")
            for name, rels in others.items():
                lines.append(f"  {name}: {rels[0]}")
                for other in rels[1:]:
                    lines.append(f"    the same thing as: {other}")
    return "\n".join(lines)
