"""The validated device file as data: :class:`DeviceSpec` and its :class:`SchemeSpec`.

``config.py`` builds these from a device file; adapters, the bench and the oracles read them.
They hold only validated values, so nothing below ``config`` ever re-checks a key.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .dsp.pulses import PulseShape
from .schemes.conventions import MODULATIONS, Convention, get_convention

__all__ = ["DEFAULT_TIMEOUT_S", "SchemeSpec", "DeviceSpec"]

#: default of ``timeout_s``
DEFAULT_TIMEOUT_S = 10.0


@dataclass
class SchemeSpec:
    modulation: str
    convention: str
    #: APSK: each ring's radius over the inner ring's (None: the convention's default)
    ring_ratio: tuple[float, ...] | None = None
    samples_per_symbol: int = 1
    llr_positive_bit: int = 0
    #: the declared pulse (rectangular by default)
    pulse: PulseShape | None = None
    #: samples beyond n x sps in the device's modulate output; None = any constant
    tail_samples: int | None = 0
    #: corrections the harness may apply: {"delay": bool, "phase": bool, "frequency": bool}
    alignment: dict = field(default_factory=lambda: {"delay": False, "phase": False,
                                                     "frequency": False})
    #: the device keeps state between calls (filter memory, a differential reference, a
    #: position counter): every call of the checks is a burst from ``reset()``, and the
    #: ``streaming`` check judges calls in chunks
    streaming: bool = False

    def __post_init__(self):
        if self.pulse is None:
            self.pulse = PulseShape("rectangular", self.samples_per_symbol)

    @property
    def shaped(self) -> bool:
        """True when the device's output is a waveform (a pulse, or several samples/symbol)."""
        return self.samples_per_symbol > 1 or not self.pulse.is_rectangular

    @property
    def bits_per_symbol(self) -> int:
        return MODULATIONS[self.modulation]

    @property
    def reference(self) -> Convention:
        return get_convention(self.convention, self.modulation, self.ring_ratio)

    def describe(self) -> str:
        pulse = f", {self.pulse.describe()}" if not self.pulse.is_rectangular else ""
        return (f"{self.modulation} ({self.convention}), {self.samples_per_symbol} "
                f"sample{'s' if self.samples_per_symbol > 1 else ''}/symbol{pulse}")


@dataclass
class DeviceSpec:
    """A validated device file."""

    name: str
    adapter: str
    scheme: SchemeSpec
    target: str | None = None
    params: dict[str, Any] = field(default_factory=dict)
    checks: dict[str, Any] = field(default_factory=dict)
    fail_on_inconclusive: bool = False
    isolate: bool = False
    timeout_s: float = DEFAULT_TIMEOUT_S
    description: str = ""
    file: str | None = None
    #: sha256 of the device file's bytes when it was loaded (None for a spec built in Python)
    sha256: str | None = None
    base_dir: Path = field(default_factory=Path.cwd)
    extra: dict[str, Any] = field(default_factory=dict)
    #: ``execution:``: where the BER check's blocks run (config.EXECUTION_OPTIONS)
    execution: dict[str, Any] = field(default_factory=lambda: {
        "workers": 1, "cluster": None, "upload": False, "time_budget_s": None})

    def resolve(self, path: str) -> Path:
        """A path from the device file, relative to the file's folder."""
        p = Path(path).expanduser()
        return p if p.is_absolute() else (self.base_dir / p)
