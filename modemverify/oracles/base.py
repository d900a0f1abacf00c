"""What every oracle shares: the bench it judges a device on, and the Oracle contract.

An oracle is a pure function of (bench, options, rng) that returns Verdicts. It never imports a
reporter, and never lets a device's misbehaviour escape as an exception: the runner turns an
:class:`~modemverify.errors.AdapterError` into an ``error`` verdict, but an oracle that can say
more (which label, which length) catches it itself.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Callable, ClassVar

import numpy as np

from ..adapters.base import GuardedDevice
from ..options import Opt
from ..schemes.conventions import Convention
from ..schemes.reference import ReferenceModem
from ..verdict import Verdict

if TYPE_CHECKING:
    from ..config import DeviceSpec


@dataclass
class Bench:
    """A device under test with its claimed scheme and the reference to judge it by."""

    spec: "DeviceSpec"
    device: GuardedDevice
    convention: Convention
    reference: ReferenceModem
    cache: dict = field(default_factory=dict)
    #: ``progress(name, fraction, text)``: set by the command line for long runs; a no-op here
    progress: Callable[[str, float, str], None] = field(default=lambda name, fraction, text: None)

    @property
    def k(self) -> int:
        return self.convention.bits_per_symbol

    @property
    def sps(self) -> int:
        return self.spec.scheme.samples_per_symbol

    def transmit(self, bits: np.ndarray) -> np.ndarray:
        """The device's modulator, or the reference's when the device has none."""
        if self.device.has("modulate"):
            return self.device.modulate(bits)
        return self.reference.modulate(bits)

    def receive(self, samples: np.ndarray) -> np.ndarray:
        """The device's hard demodulator, or the reference's when the device has none."""
        if self.device.has("demodulate"):
            return self.device.demodulate(samples)
        return self.reference.demodulate(samples)

    def sides(self) -> str:
        tx = "device" if self.device.has("modulate") else "reference"
        rx = "device" if self.device.has("demodulate") else "reference"
        return f"{tx} modulate -> {rx} demodulate"


class Oracle:
    """One property. Subclasses set the class attributes and implement :meth:`run`."""

    #: key under ``checks:`` in the device file, and the first part of verdict names
    name: ClassVar[str]
    #: one line for ``--help`` and the README
    summary: ClassVar[str]
    #: options the device file may set under ``checks.<name>``
    options: ClassVar[dict[str, Opt]] = {}

    #: True when the check draws fresh random vectors (a replay-only device cannot answer)
    fresh_vectors: ClassVar[bool] = False

    def applies(self, bench: Bench) -> str | None:
        """None when the property applies to this device, else why not (a skipped verdict)."""
        return None

    def skip_reason(self, bench: Bench) -> str | None:
        """Why this check is skipped for this device, or None (the runner calls this)."""
        if self.fresh_vectors and bench.device.replays_only:
            return ("the device replays a recording and this check draws fresh vectors; "
                    "record a device's answers to them, or turn the check off")
        return self.applies(bench)

    def run(self, bench: Bench, opts: dict, rng: np.random.Generator, seed: int) -> list[Verdict]:
        raise NotImplementedError
