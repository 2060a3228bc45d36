"""Writing JSON results atomically: a file appears only when the whole analysis succeeded."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from budget.report.files import write_text


def write_json(path: str | Path, data: dict[str, Any]) -> None:
    """Write ``data`` to ``path`` via a temporary file and a rename (no partial files)."""
    write_text(path, json.dumps(data, indent=2, allow_nan=False) + "\n")
