"""``modemverify plan``: what a BER check will cost, before spending it.

For every Eb/N0 point of a device file's ``ber`` check it gives the theory BER and the limit,
the bits the sequential test needs on average when the device is at theory and when it is at
the limit (Wald's average sample number, :func:`~modemverify.stats.expected_sample_size`),
the bits a fixed-sample test with the same risks needs, and the wall time these take at the
device's throughput, measured on a short probe of real blocks (the device's own calls, the
noise and the error counting, in this process). With ``workers`` the time assumes the blocks
spread evenly over them (the BER benchmark measures how close two workers come on two cores);
a point whose average exceeds ``max_bits`` is flagged, as ``check`` warns.

The averages are Wald's approximations (overshoot ignored; the true means are slightly larger),
and a device between theory and the limit takes longer than either (the test's slowest case
is in that zone): the figures are a plan, not a promise.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

from .bench import open_bench
from .blocks import BlockJob, block_schedule, run_block
from .errors import ConfigError
from .oracles._importance import GUARD_ERRORS, GUARD_MAX_BITS
from .oracles.ber import ORACLE as BER
from .oracles.ber import PointPlan, block_sizes, computed_bits, noise_precision, plan_point
from .schemes.theory import THEORY_MODULATIONS, ebn0_for_ber
from .spec import DeviceSpec

__all__ = ["PROBE_SECONDS", "Plan", "plan", "render_plan"]

#: the probe sends blocks for at least this long (and at least two blocks)
PROBE_SECONDS = 0.5


@dataclass(frozen=True)
class Plan:
    """The plan of one device's BER check: its points and the measured throughput."""

    device: str
    modulation: str
    points: list[PointPlan]
    #: bits per second of one process on the probe (device, noise and counting)
    rate: float
    probe_bits: int
    workers: int
    risk: float
    #: ``plain`` or ``importance``
    method: str = "plain"
    #: importance sampling: the guard's Eb/N0, its theory BER, the plain bits it sends and the
    #: seconds they take at the plain rate
    guard: tuple[float, float, float, float] | None = None

    def seconds(self, bits: float) -> float:
        return bits / (self.rate * self.workers)


def plan(spec: DeviceSpec, *, workers: int = 1, adapter=None) -> Plan:
    """Measure the device's throughput on a probe and plan every point of its BER check.

    Raises ConfigError when the device file has no BER check to plan, and AdapterError when
    the device fails on the probe.
    """
    opts = spec.checks.get(BER.name)
    mod = spec.scheme.modulation
    if opts is None:
        raise ConfigError("the device file turns the ber check off; there is nothing to plan",
                          file=spec.file, key="checks.ber")
    if mod not in THEORY_MODULATIONS:
        raise ConfigError(f"no theory curve for {mod}: the ber check does not run, so there is "
                          f"nothing to plan", file=spec.file, key="scheme.modulation")
    points = BER.points(spec, opts)
    risk = BER.risk(opts, len(points))
    k = spec.scheme.bits_per_symbol
    plans = [plan_point(mod, x, opts, risk, k, ring_ratio=spec.scheme.ring_ratio)
             for x in points]
    guard = None
    bench = open_bench(spec, adapter)
    try:
        rate, probed = _probe(bench, opts, points[0], plans[0], opts["method"])
        if opts["method"] == "importance":  # the guard's plain sampling, at its own rate
            ring = spec.scheme.ring_ratio
            x = float(ebn0_for_ber(mod, opts["guard_ber"], ring_ratio=ring))
            plain_rate, _ = _probe(bench, opts, x, plan_point(mod, x, opts, risk, k,
                                                              ring_ratio=ring), "plain")
            bits = min(GUARD_ERRORS / opts["guard_ber"], GUARD_MAX_BITS)
            guard = (x, opts["guard_ber"], bits, bits / (plain_rate * workers))
    finally:
        bench.device.close()
    return Plan(spec.name, mod, plans, rate, probed, int(workers), risk, opts["method"], guard)


def _probe(bench, opts, ebn0, point: PointPlan, method: str) -> tuple[float, int]:
    """Bits per second over real blocks of a point (their own streams)."""
    sizes = point.sizes if point.sizes and method == opts["method"] else \
        block_sizes(bench.k, 1e-3, opts)
    precision = noise_precision(opts, point.theory_ber)
    bits = 0
    t0 = time.perf_counter()
    for i, offset, n in block_schedule(sizes.first, sizes.first, 1 << 40, sizes.unit):
        run_block(bench, BlockJob(BER.name, "plan.probe", i, offset, n, 0, ebn0,
                                  opts["energy"], tuple(opts["impairments"]), precision,
                                  method))
        bits += n
        took = time.perf_counter() - t0
        if i >= 1 and took >= PROBE_SECONDS:
            return bits / took, bits
    raise AssertionError("unreachable: the schedule is unbounded")


def _duration(seconds: float) -> str:
    if not math.isfinite(seconds):
        return "-"
    if seconds < 1:
        return f"{seconds * 1e3:.3g} ms"
    if seconds < 120:
        return f"{seconds:.3g} s"
    if seconds < 7200:
        return f"{seconds / 60:.3g} min"
    if seconds < 2 * 86400:
        return f"{seconds / 3600:.3g} h"
    return f"{seconds / 86400:.3g} days"


def render_plan(p: Plan) -> str:
    """The plan as console text: one line per point, then the totals."""
    lines = [f"{p.device}: BER plan for {p.modulation}, risk {p.risk:.3g} per point; "
             f"throughput {p.rate / 1e6:.3g} Mbit/s per process, measured on "
             f"{p.probe_bits:.3g} bits; {p.workers} worker{'s' if p.workers > 1 else ''}"]
    head = (f"  {'Eb/N0':>7}  {'theory':>9}  {'limit':>9}  {'bits at theory':>14}  "
            f"{'bits at limit':>13}  {'fixed-sample':>12}  {'max_bits':>9}  "
            f"{'time at theory':>14}  {'time at limit':>13}")
    lines.append(head)
    total = 0.0
    guard_s = 0.0
    if p.guard is not None:
        x, g, bits, guard_s = p.guard
        lines.append(f"  importance sampling: bits at theory and at the limit are the first "
                     f"block (a device away from the limit is decided there, one at the limit "
                     f"runs to max_bits); first the guard at {x:.3g} dB (theory {g:.3g}): "
                     f"about {bits:.3g} bits of plain sampling ({_duration(guard_s)})")
    for x in p.points:
        if x.sizes is None:
            lines.append(f"  {x.ebn0_db:>5g}dB  theory {x.theory_ber:.3g}, limit "
                         f"{x.limit_ber:.3g}: cannot be judged (skipped)")
            continue
        capped0 = computed_bits(x.asn_theory, x.sizes, x.max_bits)
        capped1 = computed_bits(x.asn_limit, x.sizes, x.max_bits)
        total += max(capped0, capped1)
        lines.append(
            f"  {x.ebn0_db:>5g}dB  {x.theory_ber:>9.3g}  {x.limit_ber:>9.3g}  "
            f"{x.asn_theory:>14.3g}  {x.asn_limit:>13.3g}  {x.fixed_bits:>12.3g}  "
            f"{x.max_bits:>9.3g}  {_duration(p.seconds(capped0)):>14}  "
            f"{_duration(p.seconds(capped1)):>13}")
        if x.warning:
            lines.append(f"    warning: {x.warning}")
    lines.append(f"  expected in all: about {_duration(p.seconds(total) + guard_s)} (the larger "
                 f"average "
                 f"of each point, in whole blocks, capped at max_bits; a device between theory "
                 f"and the limit takes longer)")
    if p.workers > 1:
        lines.append(f"  the time assumes the blocks spread evenly over {p.workers} workers")
    return "\n".join(lines)
