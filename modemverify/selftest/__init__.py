"""The self-test certificate: mutation operators around the reference modem, run through the
normal checks, and what the gates caught (``modemverify selftest``)."""

from __future__ import annotations

from . import certificate, operators

#: the submodules whose ``__all__`` this door re-exports
_SUBMODULES = (certificate, operators,)
_NAMES = {m.__name__.rsplit(".", 1)[1] for m in _SUBMODULES}
__all__ = [n for m in _SUBMODULES for n in m.__all__ if n not in _NAMES]
globals().update({n: getattr(m, n) for m in _SUBMODULES for n in m.__all__ if n not in _NAMES})
