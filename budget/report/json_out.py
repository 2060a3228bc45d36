"""Writing JSON results atomically: a file appears only when the whole analysis succeeded."""

from __future__ import annotations

import json
import os
import tempfile
from pathlib import Path
from typing import Any


def write_json(path: str | Path, data: dict[str, Any]) -> None:
    """Write ``data`` to ``path`` via a temporary file and a rename (no partial files)."""
    path = Path(path)
    text = json.dumps(data, indent=2, allow_nan=False)
    fd, tmp = tempfile.mkstemp(prefix=".budget-", suffix=".json", dir=path.parent if str(path.parent) else ".")
    try:
        with os.fdopen(fd, "w") as fh:
            fh.write(text + "\n")
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
