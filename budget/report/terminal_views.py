"""Terminal views (rich) for the comparison, the randomised-compiling ensemble and the depth curves."""

from __future__ import annotations

from rich.console import Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from budget.analysis.compare import Comparison
from budget.analysis.compose import Analysis, RandomEnsemble
from budget.analysis.depth import CURVE_WORDS, DepthCurve
from budget.analysis.randomized import EnsembleResult
from budget.report.terminal import fmt, render_budget


def _value(x) -> str:
    if isinstance(x, int) and not isinstance(x, bool):
        return f"{x:,}"
    if isinstance(x, float):
        return fmt(x)
    return "—" if x is None else str(x)


def render_analysis(a: Analysis) -> list:
    """Every view of an analysis, in reading order (budget, comparison, random counterparts, copies)."""
    views: list = [render_budget(a.result)]
    if a.comparison is not None:
        views.append(render_comparison(a.comparison))
    if a.random is not None:
        views.append(render_random(a.random))
    if a.ensemble is not None:
        views.append(render_ensemble(a.ensemble))
    return views


def render_comparison(c: Comparison) -> Panel:
    """Both circuits side by side, same model and metric."""
    t = Table(expand=False)
    t.add_column("")
    t.add_column(c.first.source, justify="right", overflow="fold")
    t.add_column(c.second.source, justify="right", overflow="fold")
    for label, a, b in c.rows():
        t.add_row(label, _value(a), _value(b))
    line = Text("actual infidelity ratio (first ÷ second): " + c.actual_ratio.shown(), style="bold")
    return Panel(Group(t, line), title="side by side, same error model", title_align="left", border_style="blue")


def render_random(r: RandomEnsemble) -> Panel:
    """The circuit against random counterparts with its layer structure: mean, spread, ratio."""
    t = Table.grid(padding=(0, 2))
    t.add_column(style="bold")
    t.add_column(justify="right")
    t.add_column(style="dim")
    t.add_row("this circuit, actual", _value(r.first.actual), f"engine {r.first.engine}")
    t.add_row("random counterparts, mean", _value(r.mean),
              f"{len(r.seeds)} draws (seeds {r.seeds[0]}–{r.seeds[-1]}), same layers and gates, engine {r.engine}")
    t.add_row("spread across draws", _value(r.spread), "sample standard deviation")
    low, high = r.ratio_range
    span = f"from {low.shown()} to {high.shown()} against single draws" if low.value is not None else ""
    t.add_row("this circuit ÷ random mean", r.ratio.shown(), span)
    return Panel(t, title="against random circuits with the same layers", title_align="left", border_style="blue")


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
    """The curves at the grid points, where each leaves its engine's range, the crossover, the
    deepest counts and the components."""
    t = Table(expand=False)
    for name in ("repetitions N", CURVE_WORDS["naive"], f"{CURVE_WORDS['structured']} ({c.engine})",
                 f"{CURVE_WORDS['twirled']} ({c.twirled_engine})"):
        t.add_column(name, justify="right")
    for n, a, b, w in zip(c.repetitions, c.naive, c.structured, c.twirled):
        t.add_row(f"{n:,}", fmt(a), _point(b), _point(w))
    parts: list = [t]
    parts += [Text(f"▸ {w}", style="yellow") for w in c.notes()]
    parts.append(Text(f"crossover: {c.crossover_words()}", style="bold"))
    for key in CURVE_WORDS:
        if key in c.deepest:
            parts.append(Text(f"deepest N within target {c.target:g} ({CURVE_WORDS[key]}): {c.deepest_words(key)}"))
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


def _point(x: float | None) -> str:
    return "beyond range" if x is None else fmt(x)
