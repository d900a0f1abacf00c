"""Symbol rules: how a symbol depends on its position or on the previous symbol.

A :class:`~modemverify.schemes.conventions.Convention`'s table gives one point per label. Most
schemes send that point as it is; some do not:

- a **position-dependent turn** (pi/2-BPSK, 3GPP TS 38.211 5.1.1): the point of symbol ``i`` is
  turned by ``turn_deg`` when ``i`` is odd (``turn_on="odd"``), counting from 0;
- a **differential** rule (DBPSK, DQPSK, pi/4-DQPSK): the table gives the *phase change* a label
  sets, and symbol ``i`` is symbol ``i - 1`` times that change (the symbol before the first is
  1, phase 0);
- an **arm delay** (offset QPSK): the symbols are the table points, but the quadrature arm of
  the shaped waveform is sent ``q_delay`` symbols after the in-phase arm (half a symbol, common
  practice). This one is a property of the waveform, not of the symbol sequence:
  :func:`delay_arm` applies it after the pulse shaping and :func:`align_arms` undoes it before
  the matched filter, both in the reference modem alone.

:func:`apply_rule` sends a sequence of table points under a rule; :func:`undo_rule` recovers the
table points from symbols, so that everything judged on a table (mapping, gray, identify,
the reference slicer) judges a rule-bearing scheme exactly as a memoryless one.
:func:`rule_family` lists the rules a device may follow instead of the claimed one, so that a
difference is named in those terms.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["PLAIN", "SymbolRule", "apply_rule", "rule_family", "undo_rule", "arm_delay_samples",
           "delay_arm", "align_arms"]


@dataclass(frozen=True)
class SymbolRule:
    """How the sent symbol follows from its label's table point.

    ``turn_deg`` is the rotation applied at the positions ``turn_on`` (``"odd"`` or
    ``"even"``, positions counted from 0); ``differential`` says the table point is a phase
    change applied to the previous symbol; ``q_delay`` is the delay of the quadrature arm of
    the waveform, in symbols (0.5 for offset QPSK).
    """

    turn_deg: float = 0.0
    turn_on: str = "odd"
    differential: bool = False
    q_delay: float = 0.0

    @property
    def plain(self) -> bool:
        """True when the waveform carries each table point as it is (no memory, no position
        dependence, no arm delay)."""
        return not self.differential and self.turn_deg % 360 == 0 and self.q_delay == 0

    def describe(self) -> str:
        if self.plain:
            return "each label's point is sent as it is"
        parts = []
        if self.turn_deg % 360:
            parts.append(f"the point is turned by {_deg(self.turn_deg)} degrees on "
                         f"{self.turn_on} positions")
        if self.differential:
            parts.append("the label sets the phase change from the previous symbol")
        if self.q_delay:
            parts.append(f"the Q arm is delayed by {_symbols(self.q_delay)} against the I arm")
        return "; ".join(parts)


def _symbols(x: float) -> str:
    return "half a symbol" if x == 0.5 else f"{x:g} symbols"


#: the rule of a memoryless table
PLAIN = SymbolRule()


def _deg(x: float) -> str:
    x = (x + 180) % 360 - 180
    return f"{x:+g}"


def _turns(rule: SymbolRule, n: int, start: int) -> np.ndarray | None:
    if rule.turn_deg % 360 == 0:
        return None
    pos = np.arange(start, start + n)
    on = (pos % 2 == 1) if rule.turn_on == "odd" else (pos % 2 == 0)
    return np.where(on, np.exp(1j * np.radians(rule.turn_deg)), 1.0)


def apply_rule(points: np.ndarray, rule: SymbolRule, start: int = 0) -> np.ndarray:
    """The symbols sent for the table points ``points`` (one per symbol), the first at position
    ``start``."""
    sym = np.asarray(points, dtype=np.complex128)
    if rule.plain:
        return sym
    if rule.differential:
        # unit-magnitude phase changes: the running product is the phase; the magnitude of
        # each symbol is its own point's (DPSK tables have unit magnitude)
        sym = np.cumprod(sym / np.where(sym == 0, 1, np.abs(sym))) * np.abs(sym)
    t = _turns(rule, sym.size, start)
    return sym if t is None else sym * t


def undo_rule(symbols: np.ndarray, rule: SymbolRule, start: int = 0,
              previous: complex | None = None) -> np.ndarray:
    """The table points behind ``symbols`` sent under ``rule`` from position ``start``.

    For a differential rule, symbol ``i`` is divided by the phase of symbol ``i - 1``;
    ``previous`` is the symbol before the first (default: phase 0, the rule's start).
    """
    y = np.asarray(symbols, dtype=np.complex128)
    if rule.plain:
        return y
    t = _turns(rule, y.size, start)
    if t is not None:
        y = y * np.conj(t)
    if rule.differential and y.size:
        before = np.empty_like(y)
        before[0] = 1.0 if previous is None else previous
        before[1:] = y[:-1]
        mag = np.abs(before)
        phase = np.where(mag > 0, before / np.where(mag > 0, mag, 1), 1.0)
        y = y * np.conj(phase)
    return y


def arm_delay_samples(rule: SymbolRule, samples_per_symbol: int) -> int:
    """The Q arm's delay in samples (0 for every rule but an arm delay)."""
    return int(round(rule.q_delay * samples_per_symbol))


def delay_arm(waveform: np.ndarray, rule: SymbolRule, samples_per_symbol: int) -> np.ndarray:
    """A shaped waveform with its Q arm sent ``rule.q_delay`` symbols late: the I arm is
    followed by that many zero samples, the Q arm preceded by them (``d`` samples longer)."""
    d = arm_delay_samples(rule, samples_per_symbol)
    x = np.asarray(waveform, dtype=np.complex128)
    if d == 0:
        return x
    out = np.zeros(x.size + d, dtype=np.complex128)
    out.real[:x.size] = x.real
    out.imag[d:] = x.imag
    return out


def align_arms(waveform: np.ndarray, rule: SymbolRule, samples_per_symbol: int) -> np.ndarray:
    """The inverse of :func:`delay_arm`: the Q arm advanced by the rule's delay (``d`` samples
    shorter), so that both arms peak at the symbol instants again."""
    d = arm_delay_samples(rule, samples_per_symbol)
    y = np.asarray(waveform, dtype=np.complex128)
    if d == 0:
        return y
    n = max(y.size - d, 0)
    return y.real[:n] + 1j * y.imag[d:d + n]


def rule_family(rule: SymbolRule) -> list[tuple[SymbolRule, str]]:
    """Rules a device may follow instead of ``rule``, each with how it differs, in words.

    For a positional turn: the turn on the other positions, the other way, or not at all; for
    a differential rule: absolute (not differential) mapping; for an arm delay: none; for a
    plain table: a 90-degree turn on odd or even positions, a differential mapping, or the Q arm
    delayed by half a symbol (an arm delay only shows on a waveform of an even number of samples
    per symbol: :func:`arm_delay_samples` is 0 otherwise, and the reading is the plain one).
    """
    out: list[tuple[SymbolRule, str]] = []
    if rule.q_delay:
        out.append((SymbolRule(rule.turn_deg, rule.turn_on, rule.differential, 0.0),
                    (f"the Q arm is not delayed: I and Q change at the same instants, where the "
                     f"claimed scheme delays Q by {_symbols(rule.q_delay)} (offset)")))
    if rule.turn_deg % 360:
        other = "even" if rule.turn_on == "odd" else "odd"
        d = _deg(rule.turn_deg)
        out += [
            (SymbolRule(rule.turn_deg, other, rule.differential),
             (f"the {abs(float(_deg(rule.turn_deg))):g}-degree turn is applied on {other} "
              f"positions instead of {rule.turn_on}")),
            (SymbolRule(-rule.turn_deg, rule.turn_on, rule.differential),
             (f"the turn on {rule.turn_on} positions is {_deg(-rule.turn_deg)} degrees "
              f"instead of {d}")),
            (SymbolRule(-rule.turn_deg, other, rule.differential),
             (f"the turn is {_deg(-rule.turn_deg)} degrees on {other} positions instead of "
              f"{d} on {rule.turn_on}")),
            (SymbolRule(0.0, rule.turn_on, rule.differential),
             (f"no position-dependent rotation: the {d}-degree turn on {rule.turn_on} "
              f"positions is missing")),
        ]
    if rule.differential:
        out.append((SymbolRule(rule.turn_deg, rule.turn_on, False),
                    ("the label sets the absolute point, not the phase change from the "
                     "previous symbol (no differential encoding)")))
    if rule.plain:
        for on in ("odd", "even"):
            for deg in (90.0, -90.0):
                out.append((SymbolRule(deg, on),
                            (f"the points are turned by {_deg(deg)} degrees on {on} "
                             f"positions (a position-dependent rotation, as in pi/2-BPSK)")))
        out.append((SymbolRule(differential=True),
                    ("the label sets the phase change from the previous symbol (differential "
                     "encoding)")))
        out.append((SymbolRule(q_delay=0.5),
                    ("the Q arm is delayed by half a symbol against the I arm (offset "
                     "modulation, as in OQPSK)")))
    return out
