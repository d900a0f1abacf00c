"""Where reports go: regular files written atomically, never over anything else, one run at a time.

- :func:`write_atomic` writes a temporary file beside the target and renames it into place, so
  CI never reads a half-written file. It refuses to replace anything that is not a regular file
  (a folder, a symbolic link, a FIFO, a device node such as ``/dev/full``).
- :func:`check_output_file` and :func:`check_output_folder` say, before a run starts, when
  ``--junit`` or ``--report`` cannot be written, naming the option.
- :class:`OutputLock` keeps two runs from writing the same JUnit file or report folder at once:
  the second is refused, naming the process that holds it.
"""

from __future__ import annotations

import fcntl
import os
import stat
import tempfile
from pathlib import Path

from ..errors import ConfigError

__all__ = ["write_atomic", "check_output_file", "check_output_folder", "OutputLock"]


def _kind(mode: int) -> str:
    for test, name in ((stat.S_ISDIR, "a folder"), (stat.S_ISLNK, "a symbolic link"),
                       (stat.S_ISFIFO, "a FIFO"), (stat.S_ISCHR, "a device node"),
                       (stat.S_ISBLK, "a device node"), (stat.S_ISSOCK, "a socket")):
        if test(mode):
            return name
    return "not a regular file"


def _existing_kind(path: Path) -> str | None:
    """None when ``path`` does not exist or is a regular file; else what it is."""
    try:
        mode = os.lstat(path).st_mode
    except FileNotFoundError:
        return None
    return None if stat.S_ISREG(mode) else _kind(mode)


def check_output_file(path: str | Path, option: str) -> Path:
    """``path`` if a file can be written there (new, or a regular file), else ConfigError."""
    path = Path(path)
    kind = _existing_kind(path)
    if kind is not None:
        raise ConfigError(f"{option} {path}: is {kind}; expected a file to write (or a new name)")
    parent = path.parent if str(path.parent) else Path(".")
    pkind = _existing_kind(parent)
    if parent.exists() and not parent.is_dir():
        raise ConfigError(f"{option} {path}: {parent} is {pkind or 'a file'}, not a folder")
    return path


def check_output_folder(path: str | Path, option: str) -> Path:
    """``path`` if a report folder can be written there (new, or a folder), else ConfigError."""
    path = Path(path)
    if path.exists() or path.is_symlink():
        if path.is_symlink() or not path.is_dir():
            kind = _existing_kind(path) or "a file"
            raise ConfigError(f"{option} {path}: is {kind}; expected a folder for the report "
                              f"(or a new name)")
    return path


def write_atomic(path: str | Path, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file renamed into place."""
    path = Path(path)
    kind = _existing_kind(path)
    if kind is not None:
        raise ConfigError(f"{path}: is {kind}; a report is written only as a regular file")
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)  # mkstemp makes 0600; a report is for everyone to read
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as f:
            f.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


class OutputLock:
    """An exclusive lock on an output (a JUnit file or a report folder) for one run.

    The lock is ``flock`` on a small file beside the output (``.NAME.lock``), released when the
    run ends (or the process dies); a second run that wants the same output is refused at once.
    """

    def __init__(self, output: str | Path):
        output = Path(output)
        self.path = output.parent / f".{output.name}.lock"
        self._fd: int | None = None

    def __enter__(self) -> "OutputLock":
        self.path.parent.mkdir(parents=True, exist_ok=True)
        fd = os.open(self.path, os.O_RDWR | os.O_CREAT | os.O_NOFOLLOW | os.O_CLOEXEC, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            holder = os.pread(fd, 32, 0).decode(errors="replace").strip() or "another process"
            os.close(fd)
            raise ConfigError(f"{self.path.with_name(self.path.name[1:-5])}: another modemverify "
                              f"run (pid {holder}) is writing it; wait for it or choose another "
                              f"output") from None
        os.ftruncate(fd, 0)
        os.pwrite(fd, str(os.getpid()).encode(), 0)
        self._fd = fd
        return self

    def __exit__(self, *exc) -> None:
        if self._fd is not None:
            try:
                self.path.unlink(missing_ok=True)
            finally:
                os.close(self._fd)
                self._fd = None
