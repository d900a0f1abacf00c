"""The Oracle contract: one property of a device, judged on a :class:`~modemverify.bench.Bench`.

An oracle is a pure function of (bench, options, rng) that returns Verdicts — as a list, or
yielded one by one as each exists, so that a long check's first verdicts are printed (and kept,
if the run is interrupted) before its last ones. It never imports a reporter, and never lets a
device's misbehaviour escape as an exception: the runner turns an
:class:`~modemverify.errors.AdapterError` into ``error`` verdicts, but an oracle that can say
more (which label, which length) catches it itself.

The names of an oracle's verdicts depend only on the device file (and this version), never on
how the device behaves: :meth:`Oracle.verdict_names` declares them, and the runner reports an
error or a skip under every one of them.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import ClassVar

import numpy as np

from ..bench import Bench
from ..options import Opt
from ..spec import DeviceSpec
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
    #: the check's work runs on the run's engine (workers, a cluster): blocks.Engine
    parallel: ClassVar[bool] = False

    def validate(self, opts: dict, spec: DeviceSpec, *, file: str | None) -> None:
        """Check options against the scheme when the device file is loaded (raise ConfigError
        naming ``checks.<name>.<option>``); the options' own kinds and ranges are already
        checked by their ``Opt``."""

    def verdict_names(self, spec: DeviceSpec) -> list[str]:
        """The names of the verdicts this check reports for ``spec``, in order.

        They depend only on the device file (``spec.checks[self.name]`` holds this check's
        options) and the modemverify version, so CI sees the same test cases whatever the
        device does. The default is the check's own name.
        """
        return [self.name]

    def applies(self, bench: Bench) -> str | None:
        """None when the property applies to this device, else why not (a skipped verdict)."""
        return None

    def blocked_by(self, bench: Bench) -> str | None:
        """None, or why an earlier verdict of this run (``bench.verdicts``) makes this check
        impossible to judge: the reason of the skipped verdicts, naming that verdict (e.g.
        ``evm`` when ``mapping`` found another table). Only a failure blocks: after an error
        or a skip the check runs and says what it finds."""
        return None

    def skip_reason(self, bench: Bench) -> str | None:
        """Why this check is skipped for this device, or None (the runner calls this)."""
        if self.fresh_vectors and bench.device.replays_only:
            return ("the device replays a recording and this check draws fresh vectors; "
                    "record a device's answers to them, or turn the check off")
        missing = [op for op in self.requires if not bench.device.has(op)]
        if missing:
            return f"the device has no {missing[0]}"
        return self.applies(bench) or self.blocked_by(bench)

    def run(self, bench: Bench, opts: dict, rng: np.random.Generator, seed: int
            ) -> Iterable[Verdict]:
        """The verdicts, named as :meth:`verdict_names` says: a list, or a generator that yields
        each one as soon as it exists."""
        raise NotImplementedError
