"""Terminal views of the calibration-data commands: import summary, sweep, compensation, schedule."""

from __future__ import annotations

import math
from pathlib import Path

from rich import box
from rich.console import Group
from rich.table import Table
from rich.text import Text

from budget.analysis.compensate import engine_value, first_order_value
from budget.errors.context_terms import knob_text
from budget.report.content import fixed

CAUTION = "Numbers are model predictions, to be confirmed on the device; local lab practice decides."


def render_import(imported, out: Path) -> Group:
    """What was written, what was left out, and rows the circuit does not use."""
    lines = [Text.assemble(("model written: ", "bold"), f"{out} ({len(imported.notes)} value{'' if len(imported.notes) == 1 else 's'} from "
                           f"{', '.join(imported.sources)})")]
    for s in imported.skipped:
        lines.append(Text(f"not imported: {s}", style="yellow"))
    for s in imported.off_circuit:
        lines.append(Text(f"note: {s}", style="yellow"))
    return Group(*lines)


def _e(x: float | None) -> str:
    """Four significant digits; an exact zero prints as 0, as in ``analyze`` (:func:`budget.report.content.num`)."""
    if x is None:
        return "—"
    return "0" if x == 0 else f"{x:.3e}"


METRIC_WORDS = {"detectors": "P(some detector fires)", "record": "record infidelity"}


def render_sweep(result) -> Group:
    """Distribution now, over the drift hours, and the Sobol indices."""
    d = result.now
    varied = ", ".join(f"{v.knob}@{v.site}" for v in result.varied) or "none (the model gives no uncertainty)"
    head = [
        Text.assemble(("uncertainty sweep: ", "bold"), f"{result.source}, {result.samples} samples; varied: {varied}"),
        Text(f"{METRIC_WORDS.get(result.metric, 'infidelity')}: mean {_e(d.mean)} ± {_e(d.mean_stderr)} (Monte Carlo error), "
             f"std {_e(d.std)}, median {_e(d.median)}, 5-95 % [{_e(d.q05)}, {_e(d.q95)}]") if d.q05 != d.q95 else
        Text(f"{METRIC_WORDS.get(result.metric, 'infidelity')}: {_e(d.mean)} in every sample (nothing varies, so no spread)"),
    ]
    if result.unused:
        head.append(Text(f"not drawn (the circuit does not use them): {', '.join(result.unused)}", style="dim"))
    if d.p_meet_target is not None:
        head.append(Text(f"P(infidelity <= {result.target:g}) = {d.p_meet_target:.3f}"))
    parts: list = list(head)
    if result.hours:
        t = Table(title="over the drift hours", title_justify="left")
        for col in ("hour", "mean", "median", "5 %", "95 %") + (("P(meet)",) if result.target is not None else ()):
            t.add_column(col, justify="right")
        for h, x in result.hours:
            t.add_row(f"{h:g}", _e(x.mean), _e(x.median), _e(x.q05), _e(x.q95),
                      *((f"{x.p_meet_target:.3f}",) if result.target is not None else ()))
        parts.append(t)
    if result.contributions:
        t = Table(title=f"share of the spread (Sobol indices, Saltelli design, base {result.sobol_base})",
                  title_justify="left")
        for col in ("value", "site", "total index", "90 % interval", "first order"):
            t.add_column(col, justify="left" if col in ("value", "site") else "right")
        for c in result.contributions:
            ci = "—" if c.index_low is None else f"[{c.index_low:.3f}, {c.index_high:.3f}]"
            t.add_row(c.knob, c.site, f"{c.index:.3f}", ci, f"{c.first_order:.3f}")
        parts.append(t)
        if any(c.index_low is not None and c.index_high - c.index_low > 0.2 for c in result.contributions):
            parts.append(Text("wide intervals: the design is small for these values; raise --sobol-base", style="yellow"))
    parts.append(Text(CAUTION, style="dim"))
    return Group(*parts)


def render_compensation(result) -> Group:
    """Corrections, and the infidelity before and after (engine and first-order prediction)."""
    parts: list = [Text.assemble(("free compensation (virtual Z): ", "bold"), f"{result.source}, {result.metric} "
                                 f"metric, verified with the {result.engine} engine")]
    t = Table(title_justify="left")
    for col in ("", "infidelity", "first-order prediction"):
        t.add_column(col, justify="right" if col else "left")
    t.add_row("before", engine_value(result.before, _e), first_order_value(result.before_first_order, _e))
    t.add_row("after", engine_value(result.after, _e), first_order_value(result.after_first_order, _e))
    parts.append(t)
    if result.corrections:
        c = Table(title="corrections (add rz(angle) on the qubit at that point)", title_justify="left")
        for col in ("qubit", "where", "angle (rad)"):
            c.add_column(col, justify="right" if col.startswith("angle") else "left")
        for k in result.corrections:
            c.add_row(k.qubit, k.where, fixed(k.angle_rad, 6, sign=True))
        parts.append(c)
    else:
        parts.append(Text("no virtual-Z correction lowers the leading-order infidelity"))
    if result.echoes:
        e = Table(title="echo suggestions (x on the qubit in both layers of the block; the ideal circuit is unchanged); "
                        f"each evaluated alone, on the circuit as given (before: {engine_value(result.before, _e)}), without the "
                        "virtual-Z corrections above",
                  title_justify="left")
        for col in ("qubit", "block", "layers (lines)", "infidelity with it"):
            e.add_column(col, justify="right" if col.startswith("infidelity") else "left")
        for k in result.echoes:
            lines = ", ".join("?" if x is None else str(x) for x in k.lines)
            block = k.where.split(",")[0].removeprefix("end of ")
            e.add_row(k.qubit, block, f"{k.layers[0]} and {k.layers[1]} ({lines})", _e(k.infidelity))
        parts.append(e)
    elif result.echoes is not None:
        parts.append(Text("no x-pair echo on a waiting qubit lowers the infidelity"))
    parts.append(Text(CAUTION, style="dim"))
    return Group(*parts)


def render_schedule(s) -> Group:
    """The schedule: per knob what, how precisely, how often, shots and depth, device time."""
    parts: list = [
        Text.assemble(("calibration schedule: ", "bold"), f"{s.source}, target {s.target:g} for {s.hours:g} h "
                      f"(incoherent floor {_e(s.floor)}, predicted at the worst time {_e(s.predicted)})"),
    ]
    t = Table(title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False, padding=(0, 1), collapse_padding=True)
    for col in ("knob", "action", "σ (rad)", "every h", "depth", "shots", "sites", "min"):
        t.add_column(col, justify="left" if col in ("knob", "action") else "right",  # full knob names, never "cz.cph…"
                     overflow="fold", no_wrap=col not in ("knob", "σ (rad)"), min_width=14 if col == "knob" else None,
                     max_width=12 if col == "σ (rad)" else None)
    for k in s.knobs:
        cal = k.action == "calibrate"
        t.add_row(f"{k.family}.{k.knob}", k.action, knob_text(k.sigma_rad, k.knob, lambda x: f"{x:.3g}") if cal else "—",
                  f"{k.every_hours:.3g}" if cal else "—",
                  str(max(r.depth for r in k.sites)) if cal else "—",
                  str(sum(r.shots_total for r in k.sites)) if cal else "—", str(len(k.sites)) if cal else "—",
                  f"{k.device_s / 60:.3g}" if cal else "0")
    parts.append(t)
    parts.append(Text(f"device time: {s.device_s / 60:.3g} min over {s.hours:g} h = {s.minutes_per_day:.3g} min per day"))
    if s.baseline_device_s is not None:
        ratio = s.baseline_device_s / s.device_s if s.device_s > 0 else math.inf
        parts.append(Text(f"everything at the tightest tolerance (σ = {s.baseline_sigma_rad:.3g} rad, "
                          f"{s.baseline_rounds} round(s)): {s.baseline_device_s / 60:.3g} min"
                          + (f", {ratio:.3g}× this schedule" if math.isfinite(ratio) else "")))
    elif s.baseline_sigma_rad is not None:
        parts.append(Text("everything at the tightest tolerance: no common schedule meets the target"))
    for note in s.notes:
        parts.append(Text(f"note: {note}", style="yellow"))
    parts.append(Text(CAUTION, style="dim"))
    return Group(*parts)
