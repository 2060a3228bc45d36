"""What a report holds, gathered once and rendered as HTML or Markdown (pure: no rich, no files).

:func:`gather` runs the analyses a group lead needs for one circuit, one error model and one target:
the budget (naive versus actual, family shares), the depth curves, the layer-by-qubit error
map, the tolerances and the calibration time (when the modules that compute them are installed),
and the error model itself. :func:`summary_words` writes the opening paragraph in plain words.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable

from budget.analysis.calibration import calibration_plan, model_knob_keys, read_calibration
from budget.analysis.decide import checked_tolerances
from budget.analysis.depth import DepthCurve, depth_curve
from budget.analysis.families import attach_grouped
from budget.analysis.heatmap import ErrorMap, error_map
from budget.analysis.phase_estimation import find_probes
from budget.analysis.ratios import safe_ratio
from budget.analysis.result import BudgetResult
from budget.analysis.run import analyze_noisy, read_circuit, read_model
from budget.analysis.sensitivity import quadratic_form
from budget.engines.base import MEASURED_METRICS
from budget.errors.context_attach import model_notes
from budget.errors.context_terms import knob_label
from budget.problems import InputError, TooLargeError
from budget.report.extras import gather_extras

ENGINE_WORDS = {
    "exact": "exact simulation (dense state vector or density matrix; repeated blocks by matrix powers). "
    "No approximation beyond the error model itself.",
    "generators": "first-order error generators pushed to the end of the circuit, summed Hamiltonian "
    "exponentiated (Blume-Kohout et al., PRX Quantum 3, 020335 (2022)). Reliable while the "
    "accumulated coherent error stays small; a warning below says when it does not.",
    "clifford": "Pauli generators propagated through the Clifford circuit as bit strings; leading order "
    "in the error strength, any number of qubits.",
}

CAUTION_WORDS = (
    "Every number here is a prediction of the stated error model, not a measurement. Confirm the "
    "key ones on the device (for example by running the circuit, or its cycle at a few depths, and "
    "comparing) before acting on them; local lab practice decides calibration policy."
)

Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class ModelRow:
    """One line of the error-model table: a gate (on given qubits) or a qubit."""

    kind: str  # "gate" or "qubit"
    name: str
    where: str
    values: dict[str, str]


@dataclass(frozen=True)
class ReportData:
    """Everything the HTML and Markdown renderers show.

    Attributes:
        result: the budget of the circuit as analysed (``cycles`` repetitions).
        target: E, the infidelity the user must stay below.
        curve: the depth curves (None when they could not be computed; see ``notes``).
        emap: the layer-by-qubit map of local first-order infidelity.
        tolerances: a ``budget.analysis.tolerances.ToleranceReport`` or None.
        plan: a ``budget.analysis.calibration.CalibrationPlan`` or None.
        model_source: the error-model file; model_rows: its content, one row per table.
        notes: sections left out and why, and other plain-word remarks.
    """

    result: BudgetResult
    target: float
    curve: DepthCurve | None
    emap: ErrorMap
    tolerances: Any = None
    plan: Any = None
    model_source: str = ""
    model_rows: tuple[ModelRow, ...] = ()
    notes: tuple[str, ...] = field(default=())
    extras: Any = None  # budget.report.extras.Extras: provenance, uncertainty band, compensation, schedule

    @property
    def title(self) -> str:
        return f"Error budget · {short_name(self.result.source)}"


def short_name(source: str) -> str:
    return source.replace("\\", "/").rsplit("/", 1)[-1]


def fixed(x: float, digits: int = 1, *, sign: bool = False) -> str:
    """``x`` with ``digits`` decimals, never "-0.0": a value that rounds to zero prints as 0.

    >>> fixed(-1e-5, 3, sign=True), fixed(-0.04), fixed(-0.06), fixed(2e-7, 6, sign=True)
    ('+0.000', '0.0', '-0.1', '+0.000000')
    """
    return f"{round(x, digits) + 0.0:{'+' if sign else ''}.{digits}f}"  # + 0.0 turns -0.0 into 0.0


def num(x: float | None, digits: int = 3) -> str:
    """A number for people: 0.0123, 1.23e-05, '—' for missing."""
    if x is None:
        return "—"
    if x == 0:
        return "0"
    if x != x or x in (float("inf"), float("-inf")):
        return "∞" if x > 0 else "—"
    if 1e-3 <= abs(x) < 1e4:
        return f"{x:.{digits}g}"
    return f"{x:.{digits - 1}e}"


def minutes(seconds: float) -> str:
    """A device time for people: 350 ms, 42 s, 3.5 min, 2.1 h."""
    if seconds < 1:
        return f"{1000 * seconds:.3g} ms"
    if seconds < 120:
        return f"{seconds:.3g} s"
    if seconds < 7200:
        return f"{seconds / 60:.1f} min"
    return f"{seconds / 3600:.1f} h"


def with_noun(n: int, word: str) -> str:
    """``n`` with ``word`` in the singular or plural: "1 layer", "1,000 layers"."""
    return f"{n:,} {word}" + ("" if n == 1 else "s")


def verdict(result: BudgetResult, target: float) -> tuple[bool | None, str]:
    """(meets target — None when the value is beyond its engine's range —, plain words)."""
    a = result.actual
    if a is None:
        return None, f"cannot be judged against the target of {num(target)}: its error is beyond the first-order range"
    if a <= target:
        margin = safe_ratio(target, a)
        if margin.value is None:
            return True, f"meets the target of {num(target)} (no error above rounding level predicted)"
        return True, f"meets the target of {num(target)} (predicted {num(a)}, margin {margin.value:.2g}×)"
    return False, f"misses the target of {num(target)}: the prediction {num(a)} is {a / target:.2g}× too large"


def summary_words(data: ReportData) -> str:
    """The opening paragraph: what was analysed, naive versus actual, the verdict, what to calibrate."""
    r = data.result
    shape = f"{with_noun(r.qubits, 'qubit')}, {with_noun(r.operations, 'operation')} in {with_noun(r.layers, 'layer')}"
    cyc = f", the whole circuit run {r.cycles:,} times" if r.cycles != 1 else ""
    parts = [
        f"We analysed {short_name(r.source)} ({shape}{cyc}) under the error model "
        f"{short_name(data.model_source) or 'given'}, with the {r.engine} engine."
    ]
    accumulated = "is beyond the range of the first-order model" if r.actual is None else f"gives {num(r.actual)}"
    parts.append(
        f"Multiplying the gate fidelities predicts an infidelity of {num(r.naive_infidelity)}; following how "
        f"the errors accumulate {accumulated}. "
        + (f"{r.verdict.words[0].upper()}{r.verdict.words[1:]}." if r.verdict.kind == "beyond-range"
           else f"Verdict: {r.verdict.words}.")
    )
    meets, words = verdict(r, data.target)
    parts.append(f"The circuit {words}.")
    parts += _calibration_words(data, meets)
    plan = data.plan
    if plan is not None and plan.knobs:
        every = f", about every {plan.interval_hours:.2g} h given the drift rates" if plan.interval_hours else ""
        n = len(plan.knobs)
        parts.append(f"Measuring the {n} knob{'' if n == 1 else 's'} that must tighten or drift to the needed precision "
                     f"takes about {minutes(plan.round_s)} of device time per round{every}.")
    if data.curve is not None and data.curve.crossover_repetitions is not None:
        n = data.curve.crossover_repetitions
        parts.append(
            "Even a single run's actual error exceeds twice the naive estimate." if n == 1 else
            f"Repeating the circuit, the actual error exceeds twice the naive estimate from {n:,} repetitions on."
        )
    return " ".join(parts)


def _calibration_words(data: ReportData, meets: bool | None) -> list[str]:
    """What the tolerances say, worded so it agrees with whether the target is met today."""
    tol = data.tolerances
    if tol is None:
        return []
    if not tol.feasible:
        sources = ("T1, T2, gate error rates, readout and reset errors" if data.result.metric in MEASURED_METRICS
                   else "T1, T2 and gate error rates")
        return [f"The incoherent floor ({num(tol.incoherent_floor)}, from {sources}) alone "
                "exceeds the target, so no amount of calibration of coherent knobs can meet it."]
    worst = [row for row in tol.rows if row.status == "tighten"][:3]
    names = ", ".join(f"{row.family} {knob_label(row.knob)} (by {row.tighten_by:.2g}×)" for row in worst)
    rule = "worst-case signs" if tol.assume == "worst" else "random signs"
    if meets and worst:
        return [f"It meets the target with today's values; to keep meeting it whatever the signs of the errors "
                f"({rule}, each knob held to its own tolerance), tighten the calibration of {names}."]
    if meets:
        return ["Every coherent knob is already within its tolerance for this target."]
    if worst:
        return [f"To meet it, tighten the calibration of {names}."]
    return [f"No coherent knob is outside its tolerance ({rule}), yet the prediction misses the target: the knobs "
            "interfere, so tighten them together (the tolerances section gives the common factor)."]


def model_rows(model: Any) -> tuple[ModelRow, ...]:
    """The error model as table rows (gates first, then qubits), values as display strings."""
    rows: list[ModelRow] = []

    def gate_values(gp: Any) -> dict[str, str]:
        vals = {"duration": f"{gp.duration_ns:g} ns"}
        knobs = gp.knob_values()
        vals["coherent knobs"] = ", ".join(f"{k.replace('_', ' ')} {v:+.3g} rad" for k, v in knobs.items()) or "none"
        vals["average gate infidelity"] = f"{gp.avg_infidelity:g}"
        return vals

    for name, gp in sorted(model.gates.items()):
        rows.append(ModelRow("gate", name, "all qubits", gate_values(gp)))
    for (name, qubits), gp in sorted(model.gate_overrides.items()):
        rows.append(ModelRow("gate", name, ",".join(qubits), gate_values(gp)))

    def qubit_values(qp: Any) -> dict[str, str]:
        return {
            "T1": f"{qp.t1_us:g} µs" if qp.t1_us is not None else "—",
            "T2": f"{qp.t2_us:g} µs" if qp.t2_us is not None else "—",
            "readout error": f"{qp.readout_error:g}",
        }

    rows.append(ModelRow("qubit", "every qubit", "default", qubit_values(model.qubit_defaults)))
    for name, qp in sorted(model.qubit_overrides.items()):
        rows.append(ModelRow("qubit", name, "override", qubit_values(qp)))
    return tuple(rows) + context_rows(model.context)


def context_rows(ctx: Any) -> tuple[ModelRow, ...]:
    """The model's context sections (docs/error-model.md, "Context errors") as rows of kind
    ``"context"``: spectator ZZ, drive crosstalk, pulse bleed, calibration in context."""
    rows: list[ModelRow] = []
    if ctx.zz_default_khz:
        rows.append(ModelRow("context", "spectator ZZ", "every pair a two-qubit gate acts on",
                             {"value": f"ζ = {ctx.zz_default_khz:g} kHz"}))
    for pair, khz in sorted(ctx.zz_khz.items(), key=lambda kv: sorted(kv[0])):
        rows.append(ModelRow("context", "spectator ZZ", ",".join(sorted(pair)), {"value": f"ζ = {khz:g} kHz"}))
    for rule in ctx.crosstalk:
        axis = f"about {rule.axis}" if rule.axis else "about the driving gate's axis"
        gates = ", ".join(rule.gates) if rule.gates else "every driven gate"
        rows.append(ModelRow("context", "drive crosstalk", f"{rule.source} -> {rule.target}",
                             {"value": f"{rule.fraction:+g} × the rotation of {gates} on {rule.source}, {axis}"}))
    for (a, b), f in sorted(ctx.bleed.items()):
        rows.append(ModelRow("context", "pulse bleed", f"{a} -> {b}, every qubit", {"value": f"{f:+g} × the {a} rotation"}))
    for (a, b, q), f in sorted(ctx.bleed_qubit.items()):
        rows.append(ModelRow("context", "pulse bleed", f"{a} -> {b} on {q}", {"value": f"{f:+g} × the {a} rotation"}))
    for t in ctx.tables:
        on = t.gate + (f" on {','.join(t.qubits)}" if t.qubits else "")
        keys = ", ".join(f"{k} = {v}" for k, v in t.fields.items())
        rows.append(ModelRow("context", f"calibration in context [{t.name}]", on, {"value": keys}))
    return tuple(rows)


MEASURED_DEPTH = 16
"""Deepest repetition count of the report's depth curves for the detector and record metrics."""


def gather(
    circuit: Any,
    errors: Any,
    *,
    target: float,
    cycles: int = 1,
    metric: str = "process",
    engine: str = "auto",
    max_cycles: int | None = None,
    points: int = 25,
    family_by: str = "gate",
    hours: float = 24.0,
    progress: Progress | None = None,
) -> ReportData:
    """Run every analysis the report shows.

    Args:
        circuit, errors: as for :func:`budget.analysis.run.analyze` (paths, objects or dicts).
        target: E in (0, 1), the infidelity the circuit must stay below.
        cycles: the circuit as analysed is run this many times.
        max_cycles: deepest repetition count of the depth curves (default max(1000, 100 × cycles)).
        points: grid points of the depth curves.
        hours: horizon of the calibration schedule.
        progress: progress(done, total) over the depth grid.
    """
    if isinstance(target, bool) or not isinstance(target, (int, float)) or not 0 < target < 1:
        raise InputError(f"target = {target!r}: expected an infidelity E with 0 < E < 1")
    structured = read_circuit(circuit)
    model = read_model(errors)
    block = attach_grouped(structured, model, family_by)
    whole = attach_grouped(structured.with_cycles(cycles), model, family_by)
    result = analyze_noisy(whole, structured.with_cycles(cycles), metric=metric, engine=engine,
                           compare_twirled=True, cycles=cycles, notes=model_notes(structured, model))
    notes: list[str] = []
    deepest = max_cycles if max_cycles is not None else min(max(1000, 100 * cycles), 10**18)
    if metric in MEASURED_METRICS and max_cycles is None:
        deepest, points = MEASURED_DEPTH, min(points, 6)  # every point unrolls the rounds
    try:
        curve = depth_curve(block, max_cycles=deepest, points=points, metric=metric, engine=engine,
                            target=target, progress=progress)
    except TooLargeError as exc:
        curve = None
        notes.append(f"depth curves left out: {exc}")
    tol, plan, why = _tolerances_and_plan(structured.with_cycles(cycles), whole, model, metric, target, cycles, family_by)
    if why:
        notes.append(why)
    extras = gather_extras(structured, errors, model, target=target, cycles=cycles, metric=metric, engine=engine,
                           max_cycles=deepest, hours=hours)
    return ReportData(
        result=result,
        target=float(target),
        curve=curve,
        emap=error_map(whole),
        tolerances=tol,
        plan=plan,
        model_source=model.source,
        model_rows=model_rows(model),
        notes=tuple(notes),
        extras=extras,
    )


def _tolerances_and_plan(structured: Any, noisy: Any, model: Any, metric: str, target: float, cycles: int,
                         family_by: str) -> tuple[Any, Any, str | None]:
    """The tolerance report and calibration plan (as ``budget tolerances`` and ``budget cost``
    compute them, closed loop included), or (None, None, why) when unavailable."""
    try:
        qf = quadratic_form(noisy, metric)
        report = checked_tolerances(structured, model, noisy, qf, target, metric=metric, cycles=cycles,
                                    family_by="pair" if family_by == "pair" else "gate")
    except TooLargeError as exc:
        return None, None, f"tolerances left out: {exc}"
    settings = read_calibration(getattr(model, "calibration", None), source=model.source)
    plan = calibration_plan(report, find_probes(noisy), settings, model_knobs=model_knob_keys(model))
    return report, plan, None
