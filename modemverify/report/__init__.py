"""Reports for people and CI: console lines, JUnit XML, the HTML report with its figures, and the
progress line. Reporters read Verdicts and RunResults; they never change them."""

from __future__ import annotations

from . import console, html, junit, outputs, plots, progress

#: the submodules whose ``__all__`` this door re-exports
_SUBMODULES = (console, html, junit, outputs, plots, progress,)
_NAMES = {m.__name__.rsplit(".", 1)[1] for m in _SUBMODULES}
#: every public name of those submodules, except one that would hide a submodule of the same
#: name (``vectors.prbs`` is the submodule; its generator is ``vectors.prbs.prbs``)
__all__ = [n for m in _SUBMODULES for n in m.__all__ if n not in _NAMES]
globals().update({n: getattr(m, n) for m in _SUBMODULES for n in m.__all__ if n not in _NAMES})
