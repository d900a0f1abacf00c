"""The one hypothesis search of the checks that look for a concrete counterexample.

:func:`smallest_failure` runs hypothesis's ``find`` (generate, then shrink) over a strategy
with a ``problem(example) -> str | None`` condition, seeded from the check's seed (the database
is off, so a run depends on its seed alone). A device that misbehaves on a call (an
AdapterError) stops the search at once as :class:`DeviceFailed`: it is not shrunk, because
shrinking would call a crashing or hanging device hundreds of times, and a failure that does
not recur would turn into a "fail". A failure that does not recur when hypothesis replays it
(``Flaky``) is reported as the last example that failed.

Used by ``roundtrip`` (bit sequences) and ``streaming`` (a split into chunks and its bits).
"""

from __future__ import annotations

import random

import numpy as np
from hypothesis import HealthCheck, Phase, find, settings
from hypothesis.errors import Flaky, NoSuchExample

from ..errors import AdapterError

__all__ = ["DeviceFailed", "smallest_failure", "replay_kept", "kept_text", "bits_text"]


class DeviceFailed(BaseException):
    """Raised from hypothesis's condition to stop the search (hypothesis lets a BaseException
    through at once, where it would shrink an Exception)."""

    def __init__(self, error: AdapterError, example):
        super().__init__(str(error))
        self.error, self.example = error, example


def smallest_failure(strategy, problem, *, max_examples: int, seed: int):
    """The smallest example of ``strategy`` for which ``problem`` returns a reason, or None.

    Raises :class:`DeviceFailed` when ``problem`` raises an AdapterError.
    """
    failed: list = []  # the examples that failed, for a failure that does not recur

    def fails(example) -> bool:
        try:
            bad = problem(example) is not None
        except AdapterError as exc:
            raise DeviceFailed(exc, example) from None
        if bad:
            failed.append(example)
        return bad

    hyp_settings = settings(max_examples=max_examples, database=None, deadline=None,
                            derandomize=False, suppress_health_check=list(HealthCheck),
                            phases=[Phase.generate, Phase.shrink])
    try:
        return find(strategy, fails, settings=hyp_settings, random=random.Random(seed))
    except NoSuchExample:
        return None
    except Flaky:
        return failed[-1] if failed else None


def replay_kept(records, example_of, problem) -> tuple[list, list[int]]:
    """Try the counterexamples an earlier run kept (``Bench.kept``) before any search: the
    examples (``example_of(record)``) and the positions of those for which ``problem`` still
    gives a reason. Raises :class:`DeviceFailed` when the device misbehaves on one."""
    examples = [example_of(rec) for rec in records]
    failing = []
    for i, example in enumerate(examples):
        try:
            if problem(example) is not None:
                failing.append(i)
        except AdapterError as exc:
            raise DeviceFailed(exc, example) from None
    return examples, failing


def kept_text(tried: int, failing: list[int]) -> str:
    """How the kept counterexamples fared, for a verdict's reason ("" when none were kept).

    >>> kept_text(2, [0, 1])
    '; tried the 2 kept counterexamples first: still failing'
    >>> kept_text(1, [])
    '; tried the 1 kept counterexample first: now passes'
    >>> kept_text(3, [2])
    '; tried the 3 kept counterexamples first: 1 still failing, 2 now pass'
    """
    if not tried:
        return ""
    head = f"; tried the {tried} kept counterexample{'s' if tried > 1 else ''} first: "
    if len(failing) == tried:
        return head + "still failing"
    if not failing:
        return head + ("now pass" if tried > 1 else "now passes")
    passing = tried - len(failing)
    return head + f"{len(failing)} still failing, {passing} now pass{'es' if passing == 1 else ''}"


def bits_text(bits: np.ndarray, k: int) -> str:
    """Bits grouped by label: ``[00 01 10]``.

    >>> bits_text(np.array([0, 0, 0, 1, 1, 0]), 2)
    '[00 01 10]'
    """
    s = "".join(map(str, np.asarray(bits).tolist()))
    groups = " ".join(s[i:i + k] for i in range(0, len(s), k))
    return f"[{groups}]"
