"""Measuring a device's label-to-point table (shared by mapping, gray, energy and identify), and
whether the mapping verdict found another table than the claimed one (which evm and llr need)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..bench import Bench
from ..schemes.geometry import all_distinct, minimum_distance
from ..schemes.labels import bits_to_labels, labels_to_bits
from ..schemes.rules import SymbolRule, undo_rule
from ..vectors.coverage import de_bruijn_labels


@dataclass(frozen=True)
class MeasuredTable:
    """The device's table and how it was obtained.

    ``points[l]`` is the device's point for label ``l`` (the mean over every occurrence in the
    probe). ``spread[l]`` is the largest distance of one occurrence from that mean, in units of
    the minimum distance: a memoryless mapper has spread 0; a mapper whose point depends on the
    previous symbols (a state or buffering bug) does not. ``source`` is ``"modulate"`` or
    ``"demodulate"`` (decisions on the reference points, when the device only demodulates).
    """

    points: np.ndarray
    spread: np.ndarray
    source: str
    probe_symbols: int
    #: energy per symbol of the raw device output (None for a demodulate probe)
    energy_per_symbol: float | None = None
    #: the symbol rule undone before the table was read (the claimed convention's)
    rule: SymbolRule | None = None


def measure_table(bench: Bench, rule: SymbolRule | None = None) -> MeasuredTable:
    """Probe the device once per bench (cached); raises AdapterError if the device misbehaves.

    The table is read with the claimed convention's symbol rule undone, or with ``rule``
    (the same probe: a device read as if it followed another rule, to name a rule defect).
    """
    key = "table" if rule is None else ("table", rule)
    if key not in bench.cache:
        if bench.device.has("modulate"):
            rule = rule or bench.convention.rule
            # an arm delay is read on the waveform: the probe of a bench whose reference has it
            bench.cache[key] = _from_modulate(bench.read_as(rule), rule)
        else:
            bench.cache[key] = _from_demodulate(bench)
    return bench.cache[key]


def _reference_spread(bench: Bench, probe, rule: SymbolRule) -> float:
    """The largest deviation of a symbol from its label's mean in the reference's own
    waveform of the probe (its pulse's residual ISI), at the reference's scale, read as the
    device's table is (the same symbol rule undone)."""
    k = bench.k
    ref = bench.reference
    labels = probe.labels
    sym = ref.symbols(ref.modulate(labels_to_bits(probe.sent, k)), probe.sent.size)
    sym = sym[probe.pad:probe.pad + labels.size]
    if not rule.plain:
        sym = undo_rule(sym, rule, start=probe.pad)
        if rule.differential:
            labels, sym = labels[1:], sym[1:]
    m = 1 << k
    counts = np.maximum(np.bincount(labels, minlength=m), 1)
    means = (np.bincount(labels, weights=sym.real, minlength=m)
             + 1j * np.bincount(labels, weights=sym.imag, minlength=m)) / counts
    return float(np.max(np.abs(sym - means[labels]))) if labels.size else 0.0


def _gain(points: np.ndarray, reference: np.ndarray) -> complex:
    """The least-squares gain from the reference's points to the measured ones."""
    den = np.vdot(reference, reference).real
    return complex(np.vdot(reference, points) / den) if den > 0 else 1.0


def _from_modulate(bench: Bench, rule: SymbolRule) -> MeasuredTable:
    m = 1 << bench.k
    # the probe of every label pair (Bench.label_probe: wrapped by a filter span each side on a
    # shaped waveform, only the middle judged)
    probe = bench.label_probe()
    labels, sym, samples = probe.labels, probe.symbols, probe.samples
    if not rule.plain:
        # the judged symbols sit at positions pad... of the sent sequence; a differential
        # rule judges each symbol against the one before, so the first judged symbol (whose
        # predecessor is not judged) is left out
        sym = undo_rule(sym, rule, start=probe.pad)
        if rule.differential:
            labels, sym = labels[1:], sym[1:]
    counts = np.bincount(labels, minlength=m)
    points = (np.bincount(labels, weights=sym.real, minlength=m)
              + 1j * np.bincount(labels, weights=sym.imag, minlength=m)) / counts
    dev = np.abs(sym - points[labels])
    spread = np.zeros(m)
    np.maximum.at(spread, labels, dev)
    dmin = minimum_distance(points) if all_distinct(points) else 0.0
    scale = dmin if dmin > 0 else max(np.sqrt(np.mean(np.abs(points) ** 2)), 1e-300)
    if bench.spec.scheme.pulse.has_isi:
        # a Gaussian pulse is not Nyquist: every symbol carries its neighbours' ISI, so the
        # memory test cannot tell a state bug from the pulse (documented limitation)
        spread = np.zeros(m)
    elif bench.spec.scheme.shaped:
        # a pulse truncated to its span leaves some ISI of its own (RRC 0.35 over 10 symbols:
        # 0.08 minimum distances of 64QAM): the reference's own modem, on the same probe, has
        # it too, so only the spread beyond the reference's counts against the device
        spread = np.maximum(spread - _reference_spread(bench, probe, rule) * np.abs(
            _gain(points, bench.convention.points)), 0.0)
    # energy per symbol, as sum(|x|^2) over the waveform relative to the reference symbols of
    # the same probe (so the probe's one extra label does not bias it): exactly |gain|^2 times
    # the convention's unit energy for a device that differs from it by a gain
    ref_sym = bench.convention.points[probe.sent]
    es = float(np.vdot(samples, samples).real / np.vdot(ref_sym, ref_sym).real
               * np.mean(np.abs(bench.convention.points) ** 2))
    return MeasuredTable(points=points, spread=spread / scale, source="modulate",
                         probe_symbols=int(labels.size), energy_per_symbol=es, rule=rule)


def _from_demodulate(bench: Bench) -> MeasuredTable:
    k = bench.k
    m = 1 << k
    ref = bench.convention.points
    labels = de_bruijn_labels(k, order=2)
    samples = bench.reference.modulate(labels_to_bits(labels, k))
    bits = bench.device.demodulate(samples, n_bits=labels.size * k)
    decided = bits_to_labels(bits, k)
    # the device's label for each probe label, and whether it is always the same
    first = np.full(m, -1)
    first[labels[::-1]] = decided[::-1]
    inconsistent = decided != first[labels]
    spread = np.zeros(m)
    np.maximum.at(spread, labels, inconsistent.astype(float))
    points = np.full(m, np.nan + 1j * np.nan)
    hits = np.bincount(first, minlength=m)
    for probe_label in range(m):  # m <= 256: a table, not a hot path
        if hits[first[probe_label]] == 1:
            points[first[probe_label]] = ref[probe_label]
    return MeasuredTable(points=points, spread=spread, source="demodulate",
                         probe_symbols=int(labels.size))


def claimed_table_failed(bench: Bench, consequence: str) -> str | None:
    """The reason to skip a check that judges the device against the claimed table, when this
    run's ``mapping`` verdict found another table (labels at other points, or decisions two
    labels share); None otherwise — also when mapping failed only because the points depend on
    their neighbours (the table is the claimed one; EVM and soft outputs measure that spread)."""
    v = bench.verdicts.get("mapping")
    if v is None or v.outcome != "fail" or "differing_labels" not in v.details:
        return None
    return f"not judged because mapping failed: {consequence}"
