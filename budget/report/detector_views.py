"""Terminal views of the detector and record metrics: strongest detectors, a rounds-by-detector
heat map of firing probabilities, and the bits of the record that the ideal circuit fixes."""

from __future__ import annotations

from rich.table import Table
from rich.text import Text

from budget.analysis.result import BudgetResult

SHADES = " ░▒▓█"
"""Heat-map cells, from lowest to highest firing probability (linear in the probability)."""


def _fmt(x: float) -> str:
    return f"{x:.3g}" if 1e-3 <= abs(x) < 1e4 else f"{x:.2e}"


def heat_rows(result: BudgetResult) -> tuple[list[int], list[list[float | None]]]:
    """Rounds and, per round, the firing probability of its k-th detector (None where absent)."""
    by_round: dict[int, list[float]] = {}
    for d in result.detectors:
        by_round.setdefault(d.round, []).append(d.probability)
    rounds = sorted(by_round)
    width = max((len(v) for v in by_round.values()), default=0)
    return rounds, [by_round[r] + [None] * (width - len(by_round[r])) for r in rounds]


def detector_views(result: BudgetResult, *, rows: int = 8, max_rounds: int = 40) -> list:
    """Rich renderables for a detectors or record result (empty for other metrics)."""
    out: list = []
    if result.metric == "detectors" and result.detectors:
        ranked = sorted(result.detectors, key=lambda d: -d.probability)
        t = Table(title="detectors that fire most", title_justify="left")
        t.add_column("round", justify="right")
        t.add_column("measurements")
        t.add_column("P(fires)", justify="right")
        t.add_column("largest family share")
        for d in ranked[:rows]:
            top = max(d.families.items(), key=lambda kv: kv[1], default=("—", 0.0))
            share = f"{top[0]} {100 * top[1] / d.probability:.0f} %" if d.probability > 0 else "—"
            t.add_row(str(d.round), ",".join(map(str, d.measurements)), _fmt(d.probability), share)
        out.append(t)
        rounds, grid = heat_rows(result)
        peak = max((p for row in grid for p in row if p is not None), default=0.0) or 1.0
        lines = [Text(f"firing probability by round (rows) and detector (columns); █ = {_fmt(peak)}", style="bold")]
        shown = rounds if len(rounds) <= max_rounds else rounds[: max_rounds // 2] + rounds[-max_rounds // 2:]
        for r in shown:
            row = grid[rounds.index(r)]
            cells = "".join(" " if p is None else SHADES[min(4, int(round(4 * p / peak)))] for p in row)
            lines.append(Text(f"{r:>5} │{cells}│"))
            if len(shown) < len(rounds) and r == shown[max_rounds // 2 - 1]:
                lines.append(Text(f"  … {len(rounds) - len(shown)} rounds not shown", style="dim"))
        out.extend(lines)
        if result.logical:
            n = len(result.logical)
            out.append(Text(f"{n} logical observable{'s' if n != 1 else ''} (deterministic parities that are not "
                            "checks), by measurement index: "
                            + "; ".join("m" + "+m".join(map(str, o)) for o in result.logical), style="dim"))
    if result.metric == "record" and result.record_bits:
        t = Table(title="recorded bits the ideal circuit fixes", title_justify="left")
        t.add_column("bit", justify="right")
        t.add_column("qubit")
        t.add_column("P(differs)", justify="right")
        for b in sorted(result.record_bits, key=lambda b: -b.flip_probability)[:rows]:
            t.add_row(str(b.index), b.qubit, _fmt(b.flip_probability))
        out.append(t)
    return out
