"""Schemes: conventions as data, labels, geometry, transform naming, the reference modem and
theory BER/SER over AWGN (numpy and scipy, and the dsp pulses)."""

from __future__ import annotations

from . import conventions, geometry, labels, reference, theory, transforms

#: the submodules whose ``__all__`` this door re-exports
_SUBMODULES = (conventions, labels, geometry, transforms, reference, theory,)
_NAMES = {m.__name__.rsplit(".", 1)[1] for m in _SUBMODULES}
#: every public name of those submodules, except one that would hide a submodule of the same
#: name (``vectors.prbs`` is the submodule; its generator is ``vectors.prbs.prbs``)
__all__ = [n for m in _SUBMODULES for n in m.__all__ if n not in _NAMES]
globals().update({n: getattr(m, n) for m in _SUBMODULES for n in m.__all__ if n not in _NAMES})
