"""Reading the YAML files a user gives (device files, vector-set headers) as plain data.

``yaml.safe_load`` constructs no objects, but it still accepts things a device file should
never hold: a key given twice (the last silently wins), nesting deep enough to exhaust the
parser's recursion, and anchors with aliases, which let a few lines stand for an exponentially
large structure ("billion laughs") once the harness serialises it for a device process. This
loader refuses all three with a ConfigError naming the file and the line.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import yaml

from .errors import ConfigError

__all__ = ["MAX_DEPTH", "MAX_BYTES", "load_yaml", "read_yaml"]

#: deepest nesting of mappings and lists accepted (a device file needs about 4)
MAX_DEPTH = 32
#: largest YAML file accepted
MAX_BYTES = 1 << 20


class _StrictLoader(yaml.SafeLoader):
    """SafeLoader that refuses duplicate keys, aliases and deep nesting."""

    def __init__(self, stream):
        super().__init__(stream)
        self._depth = 0

    def compose_node(self, parent, index):
        if self.check_event(yaml.AliasEvent):
            event = self.peek_event()
            raise yaml.constructor.ConstructorError(
                None, None, f"alias *{event.anchor}: anchors and aliases are not accepted "
                            f"(write the value out)", event.start_mark)
        self._depth += 1
        try:
            if self._depth > MAX_DEPTH:
                raise yaml.constructor.ConstructorError(
                    None, None, f"nested more than {MAX_DEPTH} levels deep",
                    self.peek_event().start_mark)
            return super().compose_node(parent, index)
        finally:
            self._depth -= 1

    def construct_mapping(self, node, deep=False):
        seen = {}
        for key_node, _ in node.value:
            key = self.construct_object(key_node, deep=True)
            try:
                hash(key)
            except TypeError:
                raise yaml.constructor.ConstructorError(
                    None, None, f"a key must be text or a number, not {type(key).__name__}",
                    key_node.start_mark) from None
            if key in seen:
                raise yaml.constructor.ConstructorError(
                    None, None, f"key {key!r} is given twice (first on line {seen[key] + 1})",
                    key_node.start_mark)
            seen[key] = key_node.start_mark.line
        return super().construct_mapping(node, deep=deep)


def load_yaml(text: str, *, file: str | None = None) -> Any:
    """Parse YAML text as plain data, or raise ConfigError naming ``file`` and the line."""
    try:
        return yaml.load(text, Loader=_StrictLoader)  # noqa: S506 - a SafeLoader subclass
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f"line {mark.line + 1}, column {mark.column + 1}: " if mark else ""
        problem = getattr(exc, "problem", None) or str(exc)
        raise ConfigError(f"not valid YAML: {where}{problem}", file=file) from None
    except RecursionError:  # pragma: no cover - the depth limit comes first
        raise ConfigError("not valid YAML: nested too deep", file=file) from None


def read_yaml(path: str | Path, *, what: str = "file") -> Any:
    """Read and parse a YAML file (at most :data:`MAX_BYTES`); errors name the file."""
    path = Path(path)
    file = str(path)
    try:
        with open(path, "rb") as f:
            raw = f.read(MAX_BYTES + 1)
    except FileNotFoundError:
        raise ConfigError(f"no such {what}", file=file) from None
    except IsADirectoryError:
        raise ConfigError(f"expected a {what}, found a folder", file=file) from None
    except OSError as exc:
        raise ConfigError(f"cannot read the {what} ({exc.strerror or exc})", file=file) from None
    if len(raw) > MAX_BYTES:
        raise ConfigError(f"the {what} is larger than {MAX_BYTES // 1024} KiB", file=file)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ConfigError(f"cannot read the {what} (not UTF-8: {exc.reason} at byte "
                          f"{exc.start})", file=file) from None
    return load_yaml(text, file=file)
