"""``adapter: reference``: the built-in reference modem as a device.

Useful to check a set-up (every verdict must pass), as the baseline in benchmarks, and as one
side of ``compare``. ``params`` may set ``convention`` to model a device that follows another
convention than the one the device file claims.
"""

from __future__ import annotations

from ..errors import ConfigError
from ..schemes.conventions import get_convention
from ..schemes.reference import ReferenceModem
from .base import ModemAdapter

__all__ = ["ADAPTER", "ReferenceAdapter"]


class ReferenceAdapter(ModemAdapter):
    adapter_id = "reference"

    def __init__(self, modem: ReferenceModem):
        self.modem = modem

    @classmethod
    def validate_spec(cls, spec) -> None:
        unknown = set(spec.params) - {"convention"}
        if unknown:
            raise ConfigError(f"unknown parameter {sorted(unknown)[0]!r}; the reference adapter "
                              f"takes: convention", file=spec.file, key="params")

    @classmethod
    def from_spec(cls, spec) -> "ReferenceAdapter":
        conv = spec.params.get("convention", spec.scheme.convention)
        try:
            convention = get_convention(conv, spec.scheme.modulation, spec.scheme.ring_ratio)
        except ConfigError as exc:
            raise ConfigError(exc.raw_message, file=spec.file, key="params.convention") from None
        return cls(ReferenceModem(convention, spec.scheme.samples_per_symbol, spec.scheme.pulse))

    def modulate(self, bits):
        return self.modem.modulate(bits)

    def demodulate(self, samples):
        return self.modem.demodulate(samples)

    def demodulate_soft(self, samples, noise_var):
        return self.modem.demodulate_soft(samples, noise_var)


#: the adapter this module adds (found by adapters.registry)
ADAPTER = ReferenceAdapter
