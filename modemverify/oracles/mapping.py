"""``mapping``: the device's label-to-point table equals the claimed convention.

Equality is up to a positive real gain (the ``energy`` check judges scale). On a mismatch the
reason names the transform that relates the two tables (arms swapped, label bits reversed,
polarity inverted, rotation, conjugation), or lists the labels that differ. The table is probed
with a de Bruijn sequence of labels, so a mapper whose output depends on the previous symbol is
caught too.
"""

from __future__ import annotations

import numpy as np

from ..options import Opt
from ..records import MappingRecord
from ..schemes.conventions import conventions_for
from ..schemes.labels import label_string
from ..schemes.rules import rule_family
from ..schemes.transforms import (DEFAULT_TOLERANCE, differing_labels, explain_difference,
                                  explain_rule)
from ..verdict import Verdict
from ._table import measure_table
from .base import Oracle

__all__ = ["MappingOracle", "ORACLE"]


def _fmt_point(z: complex) -> str:
    return f"{z.real:+.4f}{z.imag:+.4f}j"


class MappingOracle(Oracle):
    name = "mapping"
    order = 50
    summary = "label-to-point table equals the claimed convention (up to a positive gain)"
    options = {
        "tolerance": Opt("number", DEFAULT_TOLERANCE,
                         "largest deviation of a point, as a fraction of the minimum distance",
                         minimum=0, exclusive_minimum=True),
    }

    def run(self, bench, opts, rng, seed):
        table = measure_table(bench)
        conv = bench.convention
        k = bench.k
        tol = opts["tolerance"]
        details: MappingRecord = {"table": {label_string(l, k): [float(p.real), float(p.imag)]
                             for l, p in enumerate(table.points)},
                   "probe": table.source}
        memory = np.nonzero(table.spread > tol)[0]
        if table.source == "modulate" and (len(memory)
                                           or differing_labels(conv.points, table.points, tol)[1]):
            other = _other_rule(bench, tol)
            if other is not None:
                _, found = other
                details["symbol_rule"] = found
                return [Verdict(self.name, "fail", explain_rule(found, conv.rule,
                                                                name=conv.name),
                                statistic=float(table.spread.max()), limit=tol,
                                counterexample=f"a de Bruijn sequence of {table.probe_symbols} "
                                               f"labels", seed=seed, details=details)]
        if len(memory):
            worst = int(memory[np.argmax(table.spread[memory])])
            what = ("decision" if table.source == "demodulate"
                    else f"point (spread {table.spread[worst]:.2f} minimum distances)")
            return [Verdict(
                self.name, "fail",
                f"the {what} for label {label_string(worst, k)} depends on the neighbouring "
                f"symbols ({len(memory)} of {len(table.points)} labels): the mapper has memory "
                f"or mixes symbols", statistic=float(table.spread.max()), limit=tol,
                counterexample=f"label {label_string(worst, k)} in a de Bruijn sequence of "
                               f"{table.probe_symbols} labels", seed=seed, details=details)]
        if table.source == "demodulate" and np.any(np.isnan(table.points)):
            missing = [label_string(l, k) for l in np.nonzero(np.isnan(table.points))[0]]
            details["differing_labels"] = missing
            return [Verdict(self.name, "fail",
                            f"the demodulator never decides labels {', '.join(missing[:8])} on "
                            f"the {conv.name} points: two points share a decision", seed=seed,
                            details=details)]
        gain, bad = differing_labels(conv.points, table.points, tol)
        if not bad:
            return [Verdict(self.name, "pass",
                            f"all {len(table.points)} labels map to the {conv.name} "
                            f"{conv.modulation} points (gain {gain:.4g})",
                            statistic=0.0, limit=tol, seed=seed, details=details)]
        reason, rels = explain_difference(conv.points, table.points, bad, gain, k, tol,
                                          name=conv.name, differential=conv.rule.differential)
        exactly = [other.name for other in conventions_for(conv.modulation)
                   if other.name != conv.name
                   and not differing_labels(other.points, table.points, tol)[1]]
        if exactly:
            reason += (f"; the device table is exactly the {' and the '.join(exactly)} "
                       f"table{'s' if len(exactly) > 1 else ''}: claim "
                       f"scheme.convention: {exactly[0]} if that is what it should be")
        details["relation"] = [r.to_json() for r in rels]
        l0 = bad[0]
        ce = (f"bits={list(map(int, label_string(l0, k)))} -> "
              f"{_fmt_point(table.points[l0])} (expected {_fmt_point(gain * conv.points[l0])})")
        details["differing_labels"] = [label_string(l, k) for l in bad]
        return [Verdict(self.name, "fail", reason, statistic=float(len(bad)), limit=0.0,
                        unit="labels differ", counterexample=ce, seed=seed, details=details)]


def _other_rule(bench, tol):
    """(rule, how it differs) when the device's table is the claimed one under another symbol
    rule (a turn on other positions, no differential encoding...); None otherwise."""
    conv = bench.convention
    for rule, found in rule_family(conv.rule):
        t = measure_table(bench, rule)
        if np.all(t.spread <= tol) and not differing_labels(conv.points, t.points, tol)[1]:
            return rule, found
    return None


ORACLE = MappingOracle()
