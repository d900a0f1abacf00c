"""The ``modemverify`` console script: catch a stop signal from the first instant.

Importing the command line (numpy, scipy, matplotlib, every check) takes about a second. A
SIGTERM or Ctrl-C in that second would kill Python with no JUnit file, so this module, which
imports nothing of the package, records such a signal first, then loads the command line and
hands it the signal: the run then stops at once and still writes its record.
"""

from __future__ import annotations

import importlib
import signal
import sys

__all__ = ["main"]


def main(argv: list[str] | None = None) -> int:
    seen: list[int] = []

    def record(signum, frame):
        if not seen:
            seen.append(signum)

    previous = {s: signal.signal(s, record) for s in (signal.SIGTERM, signal.SIGINT)}
    try:
        cli = importlib.import_module("modemverify.cli")  # the slow part
    finally:
        for s, handler in previous.items():
            signal.signal(s, handler)
    return cli.main(argv, signal_before=seen[0] if seen else None)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
