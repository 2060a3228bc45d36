"""Terminal views (rich) for the comparison, the randomised-compiling ensemble and the depth curves."""

from __future__ import annotations

from rich.console import Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from budget.analysis.compare import Comparison
from budget.analysis.depth import DepthCurve
from budget.analysis.randomized import EnsembleResult
from budget.report.terminal import fmt


def _value(x) -> str:
    if isinstance(x, int) and not isinstance(x, bool):
        return f"{x:,}"
    if isinstance(x, float):
        return fmt(x)
    return "—" if x is None else str(x)


def render_comparison(c: Comparison) -> Panel:
    """Both circuits side by side, same model and metric."""
    t = Table(expand=False)
    t.add_column("")
    t.add_column(c.first.source, justify="right", overflow="fold")
    t.add_column(c.second.source, justify="right", overflow="fold")
    for label, a, b in c.rows():
        t.add_row(label, _value(a), _value(b))
    ratio = c.ratio
    line = Text(
        "accumulated infidelity ratio (first ÷ second): " + ("—" if ratio is None else f"{ratio:.3g}"), style="bold"
    )
    return Panel(Group(t, line), title="side by side, same error model", title_align="left", border_style="blue")


def render_ensemble(e: EnsembleResult) -> Panel:
    """Mean and spread over the randomly compiled copies, beside the twirled prediction."""
    t = Table.grid(padding=(0, 2))
    t.add_column(style="bold")
    t.add_column(justify="right")
    t.add_column(style="dim")
    t.add_row("copies", f"{e.count:,}", f"seed {e.seed}, engine {e.engine}")
    t.add_row("mean infidelity", fmt(e.mean), f"± {fmt(e.standard_error)} (standard error of the mean)")
    t.add_row("spread across copies", fmt(e.spread), f"from {fmt(min(e.values))} to {fmt(max(e.values))}")
    t.add_row("Pauli-twirled prediction", fmt(e.twirled_infidelity), "the ensemble mean tends to this")
    parts: list = [t]
    parts += [Text(f"! {n}", style="yellow") for n in e.notes]
    return Panel(Group(*parts), title="randomly compiled copies", title_align="left", border_style="blue")


def render_depth(c: DepthCurve) -> Panel:
    """The curves at the grid points, the crossover, the deepest counts and the components."""
    t = Table(expand=False)
    for name in ("repetitions N", "naive", "accumulated", "Pauli-twirled"):
        t.add_column(name, justify="right")
    for n, a, b, w in zip(c.repetitions, c.naive, c.structured, c.twirled):
        t.add_row(f"{n:,}", fmt(a), fmt(b), fmt(w))
    parts: list = [t]
    cross = c.crossover_repetitions
    parts.append(Text(
        f"crossover: accumulated > 2 × naive from N = {cross:,}" if cross is not None
        else f"no crossover up to N = {c.max_cycles:,}", style="bold"))
    for key, words in (("naive", "naive"), ("structured", "accumulated"), ("twirled", "Pauli-twirled")):
        if key in c.deepest:
            n = c.deepest[key]
            shown = "none" if n is None else (f"≥ {n:,}" if n == c.max_cycles else f"{n:,}")
            parts.append(Text(f"deepest N within target {c.target:g} ({words}): {shown}"))
    if c.components:
        ct = Table(title="coherent errors under repetition", title_justify="left")
        ct.add_column("knob")
        ct.add_column("grows per cycle (rad)", justify="right")
        ct.add_column("bounded part (rad)", justify="right")
        ct.add_column("behaviour")
        for k in c.components:
            ct.add_row(k.name, fmt(k.growing_rad), fmt(k.bounded_rad), k.behaviour)
        parts.append(ct)
    parts += [Text(f"! {w}", style="yellow") for w in c.warnings]
    title = f"depth curves · {c.source} · {c.metric} · engine {c.engine}"
    return Panel(Group(*parts), title=title, title_align="left", border_style="blue")
