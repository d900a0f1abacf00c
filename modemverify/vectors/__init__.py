"""Vector sources and channels: what goes into a device under test, and what happens on the way.

- :mod:`~modemverify.vectors.prbs`: ITU-T O.150 PRBS patterns (and the common PRBS7);
- :mod:`~modemverify.vectors.coverage`: every label, and de Bruijn sequences (every transition);
- :mod:`~modemverify.vectors.strategies`: hypothesis strategies for bit and label sequences;
- :mod:`~modemverify.vectors.channels`: calibrated AWGN and deterministic impairments;
- :mod:`~modemverify.vectors.biasing`: biased noise and its weights for importance sampling;
- :mod:`~modemverify.vectors.recording`: vector sets on disk (imported from the module itself, so
  that reading vectors does not load the file-format code).

The package re-exports the public names of its submodules but ``recording``, except the PRBS
generator function :func:`modemverify.vectors.prbs.prbs`: bound here it would hide the submodule of
the same name, so ``modemverify.vectors.prbs`` always names the submodule. Import the function with
``from modemverify.vectors.prbs import prbs``. """

from __future__ import annotations

from . import biasing, bits, channels, coverage, prbs, strategies

#: the submodules whose ``__all__`` this door re-exports
_SUBMODULES = (channels, biasing, coverage, strategies, bits, prbs,)
_NAMES = {m.__name__.rsplit(".", 1)[1] for m in _SUBMODULES}
#: every public name of those submodules, except one that would hide a submodule of the same
#: name (``vectors.prbs`` is the submodule; its generator is ``vectors.prbs.prbs``)
__all__ = [n for m in _SUBMODULES for n in m.__all__ if n not in _NAMES]
globals().update({n: getattr(m, n) for m in _SUBMODULES for n in m.__all__ if n not in _NAMES})
