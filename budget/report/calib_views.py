"""Terminal views of the calibration-data commands: import summary, sweep, compensation, schedule."""

from __future__ import annotations

from pathlib import Path

from rich.console import Group
from rich.text import Text

CAUTION = "Numbers are model predictions, to be confirmed on the device; local lab practice decides."


def render_import(imported, out: Path) -> Group:
    """What was written, what was left out, and rows the circuit does not use."""
    lines = [Text.assemble(("model written: ", "bold"), f"{out} ({len(imported.notes)} values from "
                           f"{', '.join(imported.sources)})")]
    for s in imported.skipped:
        lines.append(Text(f"not imported: {s}", style="yellow"))
    for s in imported.off_circuit:
        lines.append(Text(f"note: {s}", style="yellow"))
    return Group(*lines)
