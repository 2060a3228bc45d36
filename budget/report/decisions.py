"""Terminal views of the decisions: sensitivity, tolerances, calibration device time (rich).

Each function takes the plain result of :mod:`budget.analysis.sensitivity`,
:mod:`budget.analysis.tolerances` or :mod:`budget.analysis.calibration` and returns one rich
renderable; the numbers are the same as in the JSON forms of those modules.
"""

from __future__ import annotations

import math

from rich import box
from rich.console import Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from budget.analysis.calibration import CalibrationPlan
from budget.analysis.sensitivity import Sensitivity
from budget.analysis.tolerance_output import floor_message
from budget.analysis.tolerances import NO_EFFECT, ToleranceReport
from budget.errors.context_terms import knob_text
from budget.report.fit import FitWidth
from budget.report.content import fixed
from budget.report.terminal import fmt

_STATUS = {"tighten": "bold red", "ok": "green", NO_EFFECT: "dim", "floor too high": "bold red"}


def _rad(x: float, knob: str = "") -> str:
    """A knob angle; a spectator-ZZ knob (rad per µs) also in kHz, the unit a lab sets it in."""
    if math.isinf(x):
        return "unbounded"
    return knob_text(x, knob, fmt)


def _times(x: float) -> str:
    return "—" if math.isinf(x) or x == 0 else f"{x:.3g}x"


def _duration(seconds: float) -> str:
    if seconds < 120:
        return f"{seconds:.3g} s"
    if seconds < 7200:
        return f"{seconds / 60:.3g} min"
    return f"{seconds / 3600:.3g} h"


def sensitivity_view(s: Sensitivity, *, top: int = 15) -> Group:
    """Per-knob sensitivity (infidelity per rad²) and share, interfering pairs, the floor."""
    t = Table(title="sensitivity: e ≈ δᵀAδ + s", title_justify="left", caption_justify="left",
              caption="today: a family's largest value over its sites; each site in the tolerance table and the JSON")
    for name, right in (("family", False), ("knob", False), ("today (rad)", True), ("A_ff (per rad²)", True),
                        ("share", True), ("of coherent", True)):
        t.add_column(name, justify="right" if right else "left")
    for k in s.knobs[:top]:
        frac = f"{fixed(100 * k.share / s.coherent)} %" if s.coherent > 0 else "—"
        t.add_row(k.family, k.knob, _rad(k.current_rad, k.knob), fmt(k.per_rad2), fmt(k.share), frac)
    parts: list = [FitWidth(t)] if s.knobs else [Text(
        "sensitivity: no coherent knob in this model (no over-rotation, phase or other angle key), so there "
        "is nothing per knob to show", style="bold")]
    if len(s.knobs) > top:
        parts.append(Text(f"… {len(s.knobs) - top} more knobs in the JSON output", style="dim"))
    if s.pairs:
        p = Table(title="interference between knobs", title_justify="left")
        for name, right in (("knobs", False), ("overlap", True), ("cross term today", True), ("", False)):
            p.add_column(name, justify="right" if right else "left")
        for pair in s.pairs:
            style = "red" if pair.effect == "add up" else "green" if pair.effect == "cancel" else "dim"
            p.add_row(f"{pair.first} × {pair.second}", fixed(pair.overlap, 3, sign=True), fmt(pair.cross_term),
                      Text(pair.effect, style=style))
        parts.append(FitWidth(p))
    sources = ", ".join(f"{n} {fmt(v)}" for n, v in sorted(s.floor_sources.items(), key=lambda kv: -kv[1])[:4] if v > 0)
    parts.append(Text.assemble(
        ("coherent δᵀAδ ", "bold"), fmt(s.coherent), ("   incoherent floor s ", "bold"), fmt(s.floor),
        (f"  ({sources})" if sources else "", "dim"), ("   leading-order total ", "bold"), fmt(s.total),
    ))
    return Group(*parts)


def tolerance_view(report: ToleranceReport) -> Group:
    """The ranked tolerance table with the target, the floor and the common factor."""
    how = ("worst signs, every knob at the edge of its tolerance" if report.assume == "worst"
           else "random signs, tolerances as r.m.s. values")
    split = "equal shares of the coherent budget" if report.allocation == "equal" else "today's values scaled by one factor"
    head = Table.grid(padding=(0, 2))
    head.add_column(style="bold")
    head.add_column(justify="right")
    head.add_column(style="dim")
    head.add_row("target", fmt(report.target), f"{report.metric} infidelity")
    floor_note = "not reachable by calibration"
    if report.incoherent_floor >= 1.0:  # a first-order sum, no longer a probability
        floor_note += ("; a first-order sum of incoherent rates, at or above 1: the incoherent errors alone "
                       "leave nothing of the ideal output")
    head.add_row("incoherent floor", fmt(report.incoherent_floor), floor_note)
    if report.feasible:
        head.add_row("coherent budget", fmt(report.coherent_budget), f"{how}; {split}")
    else:  # E - s < 0: no budget is left for coherent errors (never printed as a negative budget)
        head.add_row("coherent budget", "none", "the incoherent floor alone exceeds the target")
    head.add_row("prediction today", fmt(report.current_signed), f"leading order; {fmt(report.current_assumed)} under this assumption")
    loop = report.closed_loop
    if loop is not None:
        if loop.today is not None:
            head.add_row("today, checked", fmt(loop.today), f"{loop.engine} engine at today's sizes, signs as assumed")
        spread = f" ± {fmt(loop.std_error)}" if loop.std_error else ""
        head.add_row("at the tolerances", fmt(loop.achieved) + spread,
                     f"{loop.engine} engine with every knob at its tolerance ({100 * loop.achieved / loop.target:.1f} % of the "
                     f"target; {loop.method})")
    parts: list = [head, Text("")]
    message = floor_message(report)
    if message:
        if report.floor_remedy is not None:
            message += "; " + report.floor_remedy.message()
        parts.append(Panel(Text(message, style="bold"), border_style="red", title="floor above target", title_align="left"))
    elif loop is not None and loop.common_factor is None:
        verdict = "meet" if (loop.today or 0.0) <= report.target else "miss"
        parts.append(Text(f"scaling every knob together: today's values {verdict} the target ({loop.engine} engine: "
                          f"{fmt(loop.today or 0.0)}); no common factor reaches it exactly", style="bold"))
    elif report.common_factor > 1:
        parts.append(Text(f"scaling every knob together: calibration must get {report.common_factor:.3g}x better", style="bold"))
    else:
        margin = "any amount" if report.common_factor == 0 else f"{1 / report.common_factor:.3g}x"
        line = Text(f"scaling every knob together: today's values meet the target; they could all grow by {margin}",
                    style="bold green")
        if any(r.status == "tighten" for r in report.rows):
            line.append("; the equal shares below ask more of the knobs that take more than their share", style="green")
        parts.append(line)
    t = Table(title="tolerances, most urgent first", title_justify="left")
    many = any(len(r.sites) > 1 for r in report.rows)
    columns = [("family", False), ("knob", False), ("today (rad)", True), ("tolerance (rad)", True), ("tighten by", True)]
    columns += [("sites over", True), ("worst site", False)] if many else []
    for name, right in columns + [("status", False)]:
        t.add_column(name, justify="right" if right else "left")
    for r in report.rows:
        cells = [r.family, r.knob, _rad(r.current_rad, r.knob), _rad(r.tolerance_rad, r.knob) + ("*" if r.capped else ""),
                 _times(r.tighten_by) if r.status == "tighten" else "—"]  # as the report: a factor only to tighten
        if many:
            cells += [f"{r.sites_over} of {len(r.sites)}", _site_name(r) if r.sites_over else "—"]
        status = r.status + (" (2nd order)" if r.order == "second" else "")
        t.add_row(*cells, Text(status, style=_STATUS.get(r.status, "")))
    parts.append(FitWidth(t) if report.rows else Text("no coherent knob in this model: nothing to calibrate", style="dim"))
    if any(r.capped for r in report.rows):
        parts.append(Text("* capped at π: no tolerance below π reaches the target's share; this knob barely matters",
                          style="dim"))
    if loop is not None:
        parts += [Text(f"! {n}", style="yellow") for n in loop.notes]
    parts += [Text(f"! {w}", style="yellow") for w in report.warnings]
    return Group(*parts)


def _site_name(r) -> str:
    """The worst site without the family prefix (``q[0],q[1]``)."""
    site = r.worst_site or ""
    return site[len(r.family) + 1:] if site.startswith(r.family + " ") else site


def calibration_view(plan: CalibrationPlan, *, feasible: bool = True) -> Group:
    """Per-knob phase-estimation experiments and the totals line."""
    rows = []
    for p in plan.knobs:
        worst = max(p.sites, key=lambda s: s.gamma_per_rep)
        rows.append((f"{p.family}.{p.knob}", p.reason, knob_text(p.sigma_rad, p.knob, lambda x: fmt(x, 2)), str(len(p.sites)), fmt(worst.gamma_per_rep, 2),
                     f"{worst.depth:,}", f"{sum(s.shots_total for s in p.sites):,}", f"{sum(s.circuits for s in p.sites):,}",
                     _duration(p.device_s), "—" if p.hold_hours is None else f"{p.hold_hours:.3g} h"))
    t = Table(title="calibration experiments (amplified phase estimation)", title_justify="left", box=box.SIMPLE_HEAD)
    for i, name in enumerate(("knob", "why", "σ (rad)", "sites", "Γ per rep", "depth", "shots", "circuits",
                              "device time", "holds for")):
        t.add_column(name, justify="left" if i < 2 else "right", no_wrap=i == 0)
    for r in rows:
        t.add_row(*r)
    parts: list = [FitWidth(t)] if plan.knobs else [] if not feasible else [
        Text("no knob needs a calibration experiment for this target", style="green")]
    parts += [Text(f"not planned: {k}: {why}", style="yellow") for k, why in plan.unplanned.items()]
    parts.append(totals_line(plan, feasible=feasible))
    s = plan.settings
    parts.append(Text(
        f"assumed: {s.shot_overhead_us:g} µs reset+readout per shot, σ = tolerance/{s.sigma_factor:g}, "
        f"{s.ladder_shots} shots per ladder circuit, sites {'in parallel' if s.parallel_sites else 'one after another'} "
        f"(set in the model's [calibration] table)", style="dim"))
    return Group(*parts)


def totals_line(plan: CalibrationPlan, *, feasible: bool = True) -> Text:
    """One line a group lead can quote; ``feasible=False`` when the incoherent floor alone exceeds
    the target (then no calibration of coherent knobs is the answer)."""
    if not feasible:
        return Text("calibration: none of the coherent knobs can meet the target until the incoherent floor "
                    "is lowered (see above)", style="bold")
    if not plan.knobs:
        return Text("calibration: nothing to do", style="bold")
    line = Text.assemble(("calibration round: ", "bold"), f"{plan.round_s / 60:.3g} device minutes")
    if plan.rounds_per_day is None:
        line.append("; no drift rates given, so no schedule (add [calibration.drift_rad_per_hour])", style="dim")
        return line
    line.append(f"; drift sets {plan.rounds_per_day:.3g} rounds per day (every {plan.interval_hours:.3g} h)")
    share = plan.day_share or 0.0
    line.append(f"; {100 * share:.3g} % of the day", style="bold red" if share >= 1 else "bold")
    if share >= 1:
        line.append(" — calibration cannot keep up with the drift", style="bold red")
    return line
