"""The Verdict: one judged property of one device.

Oracles return Verdicts; reporters only format them. A failing property is a Verdict with
``outcome == "fail"``, never an exception.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, replace
from typing import Any

from .text import clean

__all__ = ["OUTCOMES", "GATING", "gates", "ranked", "Verdict"]

#: outcomes, in the order a summary lists them
OUTCOMES = ("fail", "error", "inconclusive", "pass", "skipped")

#: outcomes that make ``modemverify check`` exit 1 (inconclusive only when the device file says)
GATING = frozenset({"fail", "error"})


def gates(outcome: str, fail_on_inconclusive: bool = False) -> bool:
    """True when a verdict with this outcome fails the run: the one gating policy, read by
    :class:`~modemverify.runner.RunResult`, the console and JUnit."""
    return outcome in GATING or (fail_on_inconclusive and outcome == "inconclusive")


def ranked(verdicts) -> list["Verdict"]:
    """Verdicts in the order a summary lists them: by outcome (:data:`OUTCOMES`), then as run."""
    order = {o: i for i, o in enumerate(OUTCOMES)}
    return [v for _, v in sorted(enumerate(verdicts), key=lambda iv: (order[iv[1].outcome],
                                                                       iv[0]))]


@dataclass(frozen=True)
class Verdict:
    """One judged property.

    Attributes
    ----------
    name : str
        Stable dotted name, e.g. ``mapping``, ``length.modulate``, ``ber.ebn0=6dB``.
    outcome : str
        ``pass``, ``fail``, ``inconclusive``, ``error`` (the device or the harness broke while
        judging) or ``skipped`` (the property does not apply to this device).
    reason : str
        One line a person can act on.
    statistic : float or None
        What was measured (BER, energy in dB, mean Hamming distance, ...).
    interval : tuple of float or None
        Confidence interval of the statistic, at ``confidence``.
    limit : float or None
        The value the statistic was held against.
    counterexample : str or None
        The smallest input that shows the failure, as text.
    seed : int or None
        Reproduces the verdict: ``modemverify check FILE --seed SEED``.
    duration_s : float
        Time the oracle took.
    details : dict
        JSON-serialisable extras for reports (tables, per-label errors, bits used); the verdicts
        that reports draw from carry a typed record of :mod:`modemverify.records`.
    """

    name: str
    outcome: str
    reason: str
    statistic: float | None = None
    interval: tuple[float, float] | None = None
    confidence: float | None = None
    limit: float | None = None
    unit: str = ""
    counterexample: str | None = None
    seed: int | None = None
    duration_s: float = 0.0
    details: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self):
        if self.outcome not in OUTCOMES:
            raise ValueError(f"outcome={self.outcome!r}: expected one of {OUTCOMES}")
        # text from a device reaches terminals, XML and HTML: cleaned once, here
        for name in ("name", "reason", "unit"):
            object.__setattr__(self, name, clean(getattr(self, name)))
        if self.counterexample is not None:
            object.__setattr__(self, "counterexample", clean(self.counterexample))

    @property
    def passed(self) -> bool:
        return self.outcome == "pass"

    def __repr__(self) -> str:
        stat = "" if self.statistic is None else f", statistic={self.statistic!r}"
        return f"Verdict({self.name!r}, {self.outcome!r}{stat})"

    def with_(self, **changes) -> "Verdict":
        return replace(self, **changes)

    def render(self) -> str:
        """Multi-line text: counterexample first, then the statistic, then how to rerun."""
        lines = [f"{self.outcome.upper()} {self.name}: {self.reason}"]
        if self.counterexample:
            lines.append(f"Minimal counterexample: {self.counterexample}")
        if self.statistic is not None:
            s = f"Measured {_num(self.statistic)}{(' ' + self.unit) if self.unit else ''}"
            if self.interval is not None:
                conf = f" {self.confidence:.0%}" if self.confidence else ""
                lo, hi = (_num(x) for x in self.interval)
                s += f" ({conf.strip()} interval {lo} to {hi})"
            if self.limit is not None:
                s += f"; limit {_num(self.limit)}"
            lines.append(s)
        if self.seed is not None:
            lines.append(f"Seed: {self.seed}")
        return "\n".join(lines)

    def to_json(self) -> dict[str, Any]:
        d = asdict(self)
        for key in ("statistic", "limit"):
            d[key] = _json_num(d[key])
        if d["interval"] is not None:
            d["interval"] = [_json_num(x) for x in d["interval"]]
        return d


    @classmethod
    def from_json(cls, d: dict[str, Any]) -> "Verdict":
        """The inverse of :meth:`to_json` (a resumed campaign's decided points).

        >>> v = Verdict("x", "pass", "ok", statistic=float("inf"), interval=(0.0, 1.0))
        >>> Verdict.from_json(v.to_json()) == v
        True
        """
        d = dict(d)
        for key in ("statistic", "limit"):
            d[key] = _from_json_num(d.get(key))
        if d.get("interval") is not None:
            d["interval"] = tuple(_from_json_num(x) for x in d["interval"])
        return cls(**d)


def _from_json_num(x):
    return float(x) if isinstance(x, str) and x in ("inf", "-inf", "nan") else x


def _num(x: float) -> str:
    if x is None:
        return "-"
    if isinstance(x, float) and (math.isinf(x) or math.isnan(x)):
        return str(x)
    ax = abs(x)
    if ax != 0 and (ax < 1e-3 or ax >= 1e5):
        return f"{x:.3e}"
    return f"{x:.4g}"


def _json_num(x):
    if isinstance(x, float) and (math.isinf(x) or math.isnan(x)):
        return str(x)
    return x
