"""Whether processes a test started are still running (Linux /proc; no third-party tools)."""

from __future__ import annotations

import time
from pathlib import Path


def alive(pid: int) -> bool:
    """True while ``pid`` runs (a zombie has ended; the container's init may never reap it)."""
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except (FileNotFoundError, ProcessLookupError):
        return False
    return state not in ("Z", "X")


def all_gone(pids, wait_s: float = 30.0) -> list[int]:
    """The pids still running after waiting up to ``wait_s`` for SIGKILLs to land."""
    deadline = time.monotonic() + wait_s
    while (left := [p for p in pids if alive(p)]) and time.monotonic() < deadline:
        time.sleep(0.05)
    return left
