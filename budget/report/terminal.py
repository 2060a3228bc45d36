"""Terminal rendering of a budget result with rich (the computing core never imports this)."""

from __future__ import annotations

from rich.console import Console, Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from budget.analysis.ratios import at_rounding_level
from budget.analysis.result import CAUTION, BudgetResult, naive_words
from budget.report.content import fixed, num, with_noun
from budget.report.detector_views import detector_views

_METRIC_WORDS = {
    "process": "process infidelity (1 - F_pro)",
    "state": "state infidelity for input |0…0>",
    "detectors": "probability that some detector fires",
    "record": "1 - classical fidelity of the measurement record",
}


def fmt(x: float | None, digits: int = 3) -> str:
    """A number in engineering-friendly form: 1.23e-04, 0.0123, or '—' for missing (one digit more
    than the markdown and HTML views' :func:`budget.report.content.num` between 1e-3 and 1e4, where
    a terminal reader compares values side by side; NaN and infinities as there)."""
    if x is None or x == 0 or x != x or x in (float("inf"), float("-inf")):
        return num(x, digits)
    if 1e-3 <= abs(x) < 1e4:
        return f"{x:.{digits + 1}g}"
    return f"{x:.{digits - 1}e}"


_TONES = {"bad": "bold red", "good": "bold green", "": "bold"}


def verdict_text(result: BudgetResult) -> Text:
    """The verdict of :mod:`budget.analysis.verdict`, coloured by its tone."""
    v = result.verdict
    if result.metric == "detectors" and result.coherent_amplification is not None:
        return Text(f"detectors fire with {result.coherent_amplification:.2f}x the loss the fidelity product counts "
                    "(errors the checks cannot see do not fire them; coherent ones may add up within a round)",
                    style="bold")
    return Text(v.words, style="dim" if v.kind == "no-error" else _TONES[v.tone])


def summary_table(result: BudgetResult) -> Table:
    t = Table.grid(padding=(0, 2))
    t.add_column(style="bold")
    t.add_column(justify="right")
    t.add_column(style="dim")
    t.add_row("fidelity product (naive)", fmt(result.naive_infidelity), naive_words(result.metric).replace("−", "-"))
    if result.in_range:
        t.add_row(f"actual ({result.engine})", fmt(result.actual_infidelity), _METRIC_WORDS[result.metric])
        if result.first_order is not None and result.first_order <= 1:
            t.add_row("  leading order", fmt(result.first_order), "quadratic (first-order generator) estimate")
        elif result.first_order is not None:
            t.add_row("  leading order", "above 1", "the quadratic formula no longer holds; the value above resums it")
    else:
        t.add_row(f"actual ({result.engine})", "beyond range", "no value: the first-order model does not hold")
    if result.twirled_infidelity is not None:
        what = ("every channel Pauli-twirled, Pauli frames (first order)" if result.metric == "detectors"
                else "same errors, coherent parts randomised")
        t.add_row("Pauli-twirled", fmt(result.twirled_infidelity), what)
    t.add_row("actual ÷ naive", result.verdict.amplification.shown(), "the verdict below reads this ratio")
    return t


def families_table(result: BudgetResult, *, width: int = 24) -> Table:
    t = Table(title="where the infidelity comes from", title_justify="left", expand=False)
    t.add_column("family")
    t.add_column("executed", justify="right")
    t.add_column("share", justify="right")
    t.add_column("of total", justify="right")
    t.add_column("")
    total = result.actual_infidelity
    peak = max((abs(f.share) for f in result.families), default=0.0) or 1.0
    for f in result.families:
        if not result.shows_shares:
            t.add_row(f.name, f"{f.operations:,}", "—", "—", "")
            continue
        pct = f"{fixed(100 * f.share / total)} %" if total > 0 and not at_rounding_level(total) else "—"
        n = int(round(width * abs(f.share) / peak))
        bar = Text("█" * n, style="cyan" if f.share >= 0 else "magenta")
        t.add_row(f.name, f"{f.operations:,}", fmt(f.share), pct, bar)
    return t


def drilldown_table(result: BudgetResult, *, rows: int = 8) -> Table | None:
    """The operations that contribute most (when the result carries a drill-down record)."""
    drill = result.details.drilldown
    top = drill.top_operations if drill is not None else None
    if not top:
        return None
    t = Table(title="top operations", caption="first-order share of each operation", title_justify="left", caption_justify="left")
    t.add_column("gate")
    t.add_column("qubits")
    t.add_column("line", justify="right")
    t.add_column("share", justify="right")
    for row in top[:rows]:
        t.add_row(
            row.gate or row.family,
            ",".join(row.qubits),
            "" if row.line is None else str(row.line),
            fmt(row.first_order_share),
        )
    return t


def qubit_map_table(result: BudgetResult, *, rows: int = 12) -> Table | Text | None:
    """Where the error lands, per qubit (when the engine reports it)."""
    landing = result.details.landing
    if landing is None:
        return None
    qmap = landing.qubit_map
    if not qmap:
        skipped = landing.qubit_map_skipped
        return Text(f"per-qubit map skipped: {skipped}", style="dim") if skipped else None
    what = landing.qubit_map_quantity or "error per qubit"
    ranked = sorted(qmap.items(), key=lambda kv: -kv[1])
    peak = ranked[0][1] or 1.0
    t = Table(title="where the error lands", caption=what, title_justify="left", caption_justify="left")
    t.add_column("qubit")
    t.add_column("value", justify="right")
    t.add_column("")
    for name, value in ranked[:rows]:
        t.add_row(name, fmt(value), Text("█" * int(round(20 * value / peak)), style="cyan"))
    if len(ranked) > rows:
        t.add_row(f"… {len(ranked) - rows} more", "", "")
    return t


def render_budget(result: BudgetResult) -> Group:
    """The whole report as one rich renderable."""
    head = Text.assemble(
        (f"{result.source}", "bold"),
        f"  ·  {with_noun(result.qubits, 'qubit')}, {with_noun(result.operations, 'operation')} in {with_noun(result.layers, 'layer')}",
        f"  ·  {result.cycles:,} cycle(s)" if result.cycles != 1 else "",
    )
    parts: list = [head, Text(""), summary_table(result), verdict_text(result)]
    choice = result.details.choice
    if choice is not None and choice.engine_choice:
        parts.append(Text(f"engine: {choice.engine_choice}", style="dim"))
    if result.metric == "state":
        parts.append(Text(
            "note: the fidelity product uses process fidelities, as a spreadsheet would; for the "
            "state metric part of the gap comes from errors that leave this input state alone "
            "(amplitude damping and dephasing of |0>), not from the circuit's structure",
            style="dim",
        ))
    parts.append(Text(""))
    if result.families:
        parts.append(families_table(result))
    extras = [e for e in (drilldown_table(result), qubit_map_table(result)) if e is not None]
    if extras and not result.shows_shares:  # first-order numbers the family table withholds too
        why = ("the error is beyond the first-order range" if result.actual is None
               else "no engine within its range could split the total")
        parts.append(Text(f"per-operation shares and the per-qubit map are left out: {why}", style="dim"))
    else:
        parts.extend(extras)
    parts.extend(detector_views(result))
    if result.observables:
        ot = Table(title="observables (error of the expectation value)", title_justify="left")
        ot.add_column("observable")
        ot.add_column("<O> actual - ideal", justify="right")
        for k, v in result.observables.items():
            ot.add_row(k, "beyond range" if v is None else f"{v:+.3e}")
        parts.append(ot)
    if result.readout.per_qubit and result.readout.any_error:  # no line for a model without readout error
        worst = max(result.readout.per_qubit.items(), key=lambda kv: kv[1])
        count = len(result.readout.per_qubit)
        which = (f"the circuit measures no qubit; if all {count} are read at the end" if result.readout.assumed
                 else f"{count} measured qubit(s)")
        parts.append(
            Text(
                f"readout (kept apart from gate errors): {which}, "
                f"P(any misread) = {fmt(result.readout.any_error)}, worst {worst[0]} at {fmt(worst[1])}"
            )
        )
    for w in result.warnings:
        parts.append(Text(f"! {w}", style="yellow"))
    parts.append(Text(CAUTION, style="dim italic"))
    return Group(Panel(Group(*parts), title="error budget", title_align="left", border_style="blue"))


def make_console(*, stderr: bool = False, width: int | None = None, color: bool | None = None) -> Console:
    """A console whose width and colours tests can fix. Strings are shown as written (no rich
    markup): family names such as ``cz [busy]`` and key paths such as ``"x [idle].overrotation"``
    contain square brackets that markup would swallow."""
    return Console(stderr=stderr, width=width, no_color=(color is False), force_terminal=color, markup=False)
