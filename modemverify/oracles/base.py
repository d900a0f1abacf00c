"""The Oracle contract: one property of a device, judged on a :class:`~modemverify.bench.Bench`.

An oracle is a pure function of (bench, options, rng) that returns Verdicts. It never imports a
reporter, and never lets a device's misbehaviour escape as an exception: the runner turns an
:class:`~modemverify.errors.AdapterError` into an ``error`` verdict, but an oracle that can say
more (which label, which length) catches it itself.
"""

from __future__ import annotations

from typing import ClassVar

import numpy as np

from ..bench import Bench
from ..options import Opt
from ..verdict import Verdict

__all__ = ["Oracle"]


class Oracle:
    """One property. Subclasses set the class attributes and implement :meth:`run`."""

    #: key under ``checks:`` in the device file, and the first part of verdict names
    name: ClassVar[str]
    #: where the check runs among the others (ascending); leave gaps of 10 for new checks
    order: ClassVar[int]
    #: one line for ``--help`` and the README
    summary: ClassVar[str]
    #: options the device file may set under ``checks.<name>``
    options: ClassVar[dict[str, Opt]] = {}

    #: True when the check draws fresh random vectors (a replay-only device cannot answer)
    fresh_vectors: ClassVar[bool] = False
    #: device operations the check needs (``modulate``, ``demodulate``, ``demodulate_soft``);
    #: a device without one of them gets a skipped verdict that names it
    requires: ClassVar[tuple[str, ...]] = ()

    def applies(self, bench: Bench) -> str | None:
        """None when the property applies to this device, else why not (a skipped verdict)."""
        return None

    def skip_reason(self, bench: Bench) -> str | None:
        """Why this check is skipped for this device, or None (the runner calls this)."""
        if self.fresh_vectors and bench.device.replays_only:
            return ("the device replays a recording and this check draws fresh vectors; "
                    "record a device's answers to them, or turn the check off")
        missing = [op for op in self.requires if not bench.device.has(op)]
        if missing:
            return f"the device has no {missing[0]}"
        return self.applies(bench)

    def run(self, bench: Bench, opts: dict, rng: np.random.Generator, seed: int) -> list[Verdict]:
        raise NotImplementedError
