"""Text that can reach a terminal, an XML file and an HTML page: one cleaning rule.

Anything a device supplies (an exception message, a name built from a file name that is not
UTF-8, bytes it printed) may hold lone surrogates or control characters. XML 1.0 cannot carry
them, a UTF-8 terminal cannot print a lone surrogate, and a control character can rewrite what a
terminal shows. :func:`clean` replaces each with a visible escape (``\\x1b``, ``\\udcff``); the
Verdict and the run's subject clean their text when they are made, so every reporter writes
clean text.
"""

from __future__ import annotations

import re

__all__ = ["clean"]

# C0 controls but tab and newline, DEL and the C1 controls, lone surrogates, and the two
# non-characters XML 1.0 excludes
_UNSAFE = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\ud800-\udfff\ufffe\uffff]")


def _escape(m: re.Match) -> str:
    c = ord(m.group())
    return f"\\x{c:02x}" if c < 0x100 else f"\\u{c:04x}"


def clean(text) -> str:
    r"""``text`` as a str safe for a UTF-8 terminal, XML 1.0 and HTML (before escaping).

    >>> clean("bad\udcffname\x1b[2J")
    'bad\\udcffname\\x1b[2J'
    >>> clean("two\nlines\tand tabs")
    'two\nlines\tand tabs'
    """
    s = text if isinstance(text, str) else str(text)
    return _UNSAFE.sub(_escape, s) if _UNSAFE.search(s) else s
