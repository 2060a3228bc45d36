"""Writing output files safely: complete or not at all, and never replacing what a path points to.

- a regular file (or a new name) is written atomically: a temporary file in the same folder, then
  a rename, so a file appears only when complete;
- a symbolic link is followed: its final target gets the content (by the same atomic rename in the
  target's folder) and the link stays a link;
- a FIFO, a character device (``/dev/stdout``, a terminal) or a socket is written to directly, as a
  stream; a block device or a folder is refused;
- ``-`` means standard output.
"""

from __future__ import annotations

import os
import stat
import sys
import tempfile
from pathlib import Path

from budget.problems import InputError

STDOUT = "-"


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def resolve_output(path: str | Path) -> tuple[Path, str]:
    """(where to write, how): ``"stdout"``, ``"stream"`` (FIFO, character device, socket) or
    ``"atomic"`` (regular file or new name; symbolic links resolved to their final target).

    Raises:
        InputError: a folder, a block device, or a folder that does not exist.
    """
    if str(path) == STDOUT:
        return Path(STDOUT), "stdout"
    path = Path(path)
    real = Path(os.path.realpath(path))  # follows every link; a dangling link gives its would-be target
    try:
        mode = real.stat().st_mode
    except FileNotFoundError:
        if not real.parent.is_dir():
            raise InputError(f"{path}: the folder {real.parent} does not exist") from None
        return real, "atomic"
    if stat.S_ISDIR(mode):
        raise InputError(f"{path}: is a folder; give a file name")
    if stat.S_ISFIFO(mode) or stat.S_ISCHR(mode) or stat.S_ISSOCK(mode):
        return real, "stream"
    if not stat.S_ISREG(mode):
        raise InputError(f"{path}: is a block device or another special file; give a regular file name")
    return real, "atomic"


def write_bytes(path: str | Path, data: bytes) -> None:
    """Write ``data`` to ``path`` by the rules of the module docstring.

    A new regular file gets the usual permissions (0666 less the umask), an existing one keeps its own.
    """
    target, how = resolve_output(path)
    if how == "stdout":
        sys.stdout.flush()
        sys.stdout.buffer.write(data)
        sys.stdout.buffer.flush()
        return
    if how == "stream":
        with open(target, "wb") as fh:
            fh.write(data)
        return
    mode = (target.stat().st_mode & 0o7777) if target.exists() else 0o666 & ~_umask()
    fd, tmp = tempfile.mkstemp(prefix=".budget-", suffix=target.suffix, dir=target.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.chmod(tmp, mode)
        os.replace(tmp, target)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_text(path: str | Path, text: str) -> None:
    """Write ``text`` (UTF-8) to ``path`` (see :func:`write_bytes`)."""
    write_bytes(path, text.encode("utf-8"))


def write_folder(folder: str | Path, files: dict[str, str]) -> list[Path]:
    """Write several files into ``folder`` (created if missing, its parent must exist).

    All contents are already computed when this is called, so a failure can only come from the
    file system; files are written one by one atomically, the main page last.
    """
    folder = Path(folder)
    folder.mkdir(exist_ok=True)
    written = []
    for name, text in files.items():
        target = folder / name
        write_text(target, text)
        written.append(target)
    return written
