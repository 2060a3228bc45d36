"""Writing text files atomically: a file (or a report folder's files) appears only when complete."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_text(path: str | Path, text: str) -> None:
    """Write ``text`` (UTF-8) to ``path`` via a temporary file in the same folder and a rename.

    The file gets the usual permissions (0666 less the umask), not the temporary file's 0600.
    """
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=".budget-", suffix=path.suffix, dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


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
