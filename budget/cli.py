"""The `budget` command: thin typer glue that parses, calls the core, and renders.

Bad input (InputError and its kinds, unreadable files) becomes one red line on stderr and exit
code 2; nothing is written. Everything else is a bug and keeps its traceback.
"""

from __future__ import annotations

import functools
from enum import Enum
from pathlib import Path
from typing import Any, Callable, Iterable, List, Optional

import typer
from rich.markup import escape
from rich.text import Text

from budget import __version__
from budget.analysis.compose import analyze_all, compensate_all, depth_of
from budget.analysis.decide import decide, decisions_json
from budget.analysis.demo import demo_results
from budget.analysis.plan import plan as run_plan, schedule_json
from budget.analysis.sweep import sweep as run_sweep
from budget.calibdata.importer import import_tables, to_toml
from budget.engines.base import MEASURED_METRICS, METRICS
from budget.engines.door import ENGINE_NAMES
from budget.problems import InputError
from budget.report.calib_views import render_compensation, render_import, render_schedule, render_sweep
from budget.report.content import gather
from budget.report.decisions import calibration_view, sensitivity_view, tolerance_view, totals_line
from budget.report.files import resolve_output, write_bytes, write_folder, write_text
from budget.report.json_out import write_json
from budget.report.progress import progress_bar
from budget.report.terminal import make_console, render_budget
from budget.report.terminal_views import render_analysis, render_depth

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    help="Error budgets for structured quantum circuits: naive fidelity product versus actual "
    "infidelity of coherent and incoherent gate errors.",
)


MetricChoice = Enum("MetricChoice", {m: m for m in METRICS + MEASURED_METRICS}, type=str)
"""--metric: the gate metrics of the engines, then those of the measurement record."""
EngineChoice = Enum("EngineChoice", {e: e for e in ("auto", *ENGINE_NAMES)}, type=str)
"""--engine: auto, then every engine of the registry (budget/engines/door.py)."""


def user_errors(fn: Callable) -> Callable:
    """Turn bad input into one red line on stderr and exit code 2 (no traceback)."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except (InputError, OSError) as exc:
            err = make_console(stderr=True)
            text = str(exc) if isinstance(exc, InputError) else f"{getattr(exc, 'filename', '') or ''}: {exc.strerror or exc}"
            err.print(f"[bold red]error:[/] {escape(text)}", highlight=False, markup=True, emoji=False, soft_wrap=True)
            raise typer.Exit(code=2) from None

    return wrapper


def parse_logical(values: List[str]) -> Optional[tuple]:
    """``--logical 24,25,26`` -> ((24, 25, 26),); None when none is given."""
    if not values:
        return None
    out = []
    for v in values:
        try:
            out.append(tuple(int(x) for x in v.split(",") if x.strip()))
        except ValueError:
            raise InputError(f"--logical {v!r}: expected record indices joined by commas, e.g. 24,25,26") from None
    return tuple(out)


def check_output_path(path: Optional[Path], option: str) -> None:
    """Refuse early an output path that cannot be written (no folder, a folder, a block device),
    so nothing half-written appears; ``-`` is standard output."""
    if path is not None:
        try:
            resolve_output(path)
        except InputError as exc:
            raise InputError(f"{option} {exc}") from None


def to_stdout(*paths: Optional[Path]) -> bool:
    """True when an output goes to standard output (``-``): the terminal view then goes to stderr."""
    return any(p is not None and str(p) == "-" for p in paths)


def show(views: Iterable[Any], width: Optional[int], *outputs: Optional[Path]) -> None:
    """Print the terminal views, on stderr when one of ``outputs`` goes to standard output."""
    console = make_console(width=width, stderr=to_stdout(*outputs))
    for view in views:
        console.print(view)


def write_json_to(path: Optional[Path], data: Callable[[], dict]) -> None:
    """Write ``data()`` as JSON when ``--json`` was given (last, after everything succeeded)."""
    if path is not None:
        write_json(path, data())


def grouping(by_pair: bool, by_operation: bool) -> str:
    """The family grouping of --by-pair / --by-operation (one at most)."""
    if by_pair and by_operation:
        raise InputError("--by-pair and --by-operation: choose one grouping")
    return "operation" if by_operation else "pair" if by_pair else "gate"


def _version(value: bool) -> None:
    if value:
        typer.echo(f"budget {__version__}")
        raise typer.Exit()


@app.callback()
def main_options(
    version: bool = typer.Option(False, "--version", callback=_version, is_eager=True, help="Print the version and exit."),
) -> None:
    """Error budgets for structured quantum circuits: naive fidelity product versus actual
    infidelity of coherent and incoherent gate errors."""


CircuitArg = typer.Argument(..., help="OpenQASM 2/3 file or cirq JSON file.", show_default=False)
ErrorsOpt = typer.Option(..., "--errors", "-e", help="Error model (TOML, see docs/error-model.md).")
CyclesOpt = typer.Option(1, "--cycles", "-n", min=1, help="Repeat the whole circuit N times (kept folded).")
MetricOpt = typer.Option(MetricChoice.process, "--metric", "-m", help="process: 1 - F_pro; state: output state for |0…0>; "
                         "detectors: P(some detector fires), for circuits with mid-circuit measurement; record: "
                         "1 - classical fidelity of the measurement record.")
EngineOpt = typer.Option(EngineChoice.auto, "--engine", help="auto picks the most accurate engine that fits.")
QuietOpt = typer.Option(False, "--quiet", "-q", help="No progress bar on stderr.")
ByPairOpt = typer.Option(False, "--by-pair", help="One family per gate and qubit tuple instead of per gate.")
ByOperationOpt = typer.Option(False, "--by-operation", help="One family per operation as written (line numbers).")
WidthOpt = typer.Option(None, "--width", min=40, max=1000, help="Report width in characters, 40 to 1000 "
                        "(default: terminal).")


def json_option(what: str) -> Any:
    """The ``--json`` option of a command; ``what`` says what is written and where it is documented."""
    return typer.Option(None, "--json", help=what)


@app.command()
@user_errors
def analyze(
    circuit: Path = CircuitArg,
    errors: Path = ErrorsOpt,
    cycles: int = CyclesOpt,
    metric: MetricChoice = MetricOpt,
    engine: EngineChoice = EngineOpt,
    observable: List[str] = typer.Option([], "--observable", "-o", help="Pauli observable by qubit index (Z0Z1) or name (Z(q[0])Z(q[1])); repeatable."),
    logical: List[str] = typer.Option([], "--logical", help="Logical observable for --metric detectors: record "
                                      "indices joined by commas, e.g. 24,25,26 (repeatable; default: inferred)."),
    by_pair: bool = ByPairOpt,
    by_operation: bool = ByOperationOpt,
    compare_twirled: bool = typer.Option(False, "--compare-twirled", help="Also analyse the Pauli-twirled variant."),
    json_path: Optional[Path] = json_option("Write the result as JSON (schema in docs/json-schema.md); - for "
                                            "standard output."),
    width: Optional[int] = WidthOpt,
    against: Optional[str] = typer.Option(
        None, "--against", help="Second circuit file, or 'random' for random circuits with the same layers and "
        "gates in random order, analysed under the same error model and shown side by side."),
    draws: int = typer.Option(10, "--draws", min=2, max=1000, help="Random counterparts for --against random "
                              "(mean and spread)."),
    ensemble: int = typer.Option(0, "--ensemble", min=0, help="Also run N randomly compiled copies (random Pauli "
                                 "frames around each two-qubit layer): mean and spread of the infidelity; at "
                                 "most 1000 copies."),
    seed: int = typer.Option(1, "--seed", min=0, help="First seed for --ensemble and --against random."),
    truncate: Optional[float] = typer.Option(
        None, "--truncate", help="pauli engine: drop Pauli terms below EPS radians (0 keeps all; default: chosen "
        "so the truncation bound stays under 1 % of the result, tightened within 60 s)."),
    quiet: bool = QuietOpt,
) -> None:
    """Naive fidelity product versus actual infidelity, with each gate family's share."""
    check_output_path(json_path, "--json")
    family_by = grouping(by_pair, by_operation)
    extra = against == "random" or ensemble
    with progress_bar("random counterparts and compiled copies", quiet=quiet or not extra) as tick:
        done = analyze_all(str(circuit), str(errors), cycles=cycles, metric=metric.value, engine=engine.value,
                           observables=tuple(observable), family_by=family_by, compare_twirled=compare_twirled,
                           against=against, draws=draws, ensemble=ensemble, seed=seed, progress=tick,
                           logical=parse_logical(logical), truncate=truncate)
    show(render_analysis(done), width, json_path)
    write_json_to(json_path, done.to_dict)


@app.command()
@user_errors
def depth(
    circuit: Path = CircuitArg,
    errors: Path = ErrorsOpt,
    max_cycles: int = typer.Option(..., "--max-cycles", min=1, help="Deepest repetition count N of the whole circuit."),
    points: int = typer.Option(25, "--points", min=2, max=200, help="Log-spaced repetition counts from 1 to N."),
    target: Optional[float] = typer.Option(None, "--target", help="Infidelity E: deepest N meeting it, per curve."),
    metric: MetricChoice = MetricOpt,
    engine: EngineChoice = EngineOpt,
    by_pair: bool = ByPairOpt,
    by_operation: bool = ByOperationOpt,
    json_path: Optional[Path] = json_option("Write the curves as JSON (docs/report.md); - for standard output."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Write the curves as a picture; the format comes from "
                                        "the extension (.svg, .png, .pdf); - for SVG on standard output."),
    quiet: bool = QuietOpt,
    width: Optional[int] = WidthOpt,
) -> None:
    """Infidelity against repetitions: naive, actual and Pauli-twirled, with the crossover."""
    check_output_path(json_path, "--json")
    check_output_path(plot, "--plot")
    if to_stdout(json_path) and to_stdout(plot):
        raise InputError("--json - and --plot -: only one output can go to standard output")
    fmt = None
    if plot is not None:
        from budget.report.plots import depth_picture, plot_format  # slow optional import: matplotlib, for --plot

        fmt = plot_format(str(plot))
    with progress_bar("depth curve", quiet=quiet) as tick:
        curve = depth_of(str(circuit), str(errors), max_cycles=max_cycles, points=points, metric=metric.value,
                         engine=engine.value, target=target, family_by=grouping(by_pair, by_operation), progress=tick)
    picture = None if plot is None else depth_picture(curve, fmt)
    show([render_depth(curve)], width, json_path, plot)
    write_json_to(json_path, curve.to_dict)
    if picture is not None:
        write_bytes(plot, picture)


@app.command()
@user_errors
def report(
    circuit: Path = CircuitArg,
    errors: Path = ErrorsOpt,
    target: float = typer.Option(..., "--target", "-t", help="Infidelity E the circuit must stay below."),
    out: Path = typer.Option(..., "--out", help="Folder for report.html, report.md and the SVG pictures."),
    cycles: int = CyclesOpt,
    metric: MetricChoice = MetricOpt,
    engine: EngineChoice = EngineOpt,
    max_cycles: Optional[int] = typer.Option(None, "--max-cycles", min=1, help="Deepest N of the depth curves "
                                             "(default: max(1000, 100 × cycles))."),
    points: int = typer.Option(25, "--points", min=2, max=200, help="Points of the depth curves."),
    by_pair: bool = ByPairOpt,
    by_operation: bool = ByOperationOpt,
    hours: float = typer.Option(24.0, "--hours", min=0.001, help="Horizon of the calibration schedule section."),
    quiet: bool = QuietOpt,
    width: Optional[int] = WidthOpt,
) -> None:
    """A report a group lead can read: HTML page (self-contained) and Markdown, with pictures."""
    from budget.report.render import report_files  # slow optional import: matplotlib draws the pictures

    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out}: exists and is not a folder")
    if not out.resolve().parent.is_dir():
        raise InputError(f"--out {out}: the folder {out.resolve().parent} does not exist")
    with progress_bar("report", quiet=quiet) as tick:
        data = gather(str(circuit), str(errors), target=target, cycles=cycles, metric=metric.value,
                      engine=engine.value, max_cycles=max_cycles, points=points,
                      family_by=grouping(by_pair, by_operation), hours=hours, progress=tick)
    written = write_folder(out, report_files(data))
    console = make_console(width=width)
    console.print(f"[bold]report written:[/] {escape(', '.join(str(p) for p in written))}", highlight=False, markup=True)


class AssumeChoice(str, Enum):
    worst = "worst"
    random = "random"


class AllocationChoice(str, Enum):
    equal = "equal"
    common_factor = "common-factor"


TargetOpt = typer.Option(..., "--target", "-t", help="Infidelity E the circuit must stay below (0 < E < 1).")
AssumeOpt = typer.Option(AssumeChoice.worst, "--assume", help="worst: every knob at the edge of its tolerance with "
                         "the worst signs; random: random signs, tolerances as r.m.s. values.")
AllocationOpt = typer.Option(AllocationChoice.equal, "--allocation", help="equal: each knob an equal share of the "
                             "coherent budget; common-factor: today's values scaled down together.")
OpenLoopOpt = typer.Option(False, "--open-loop", help="Leading-order tolerances only: skip the check that runs the "
                           "most accurate engine with every knob at its tolerance and corrects them.")


def _decision_command(name: str, summary: str, views: Callable) -> None:
    """Register one of the decision commands (`tolerances`, `cost`): same options, other views."""

    @app.command(name, help=summary)
    @user_errors
    def command(
        circuit: Path = CircuitArg,
        errors: Path = ErrorsOpt,
        target: float = TargetOpt,
        cycles: int = CyclesOpt,
        metric: MetricChoice = MetricOpt,
        assume: AssumeChoice = AssumeOpt,
        allocation: AllocationChoice = AllocationOpt,
        engine: EngineChoice = EngineOpt,
        by_pair: bool = ByPairOpt,
        by_operation: bool = ByOperationOpt,
        open_loop: bool = OpenLoopOpt,
        json_path: Optional[Path] = json_option("Write tolerances, sensitivity and calibration plan as JSON "
                                                "(docs/tolerances.md)."),
        detector: Optional[int] = typer.Option(None, "--detector", min=0, help="With --metric detectors: the target "
                                               "is on this detector's firing probability (its number in the list of "
                                               "analyze --json) instead of P(some detector fires)."),
        width: Optional[int] = WidthOpt,
    ) -> None:
        check_output_path(json_path, "--json")
        d = decide(str(circuit), str(errors), target=target, cycles=cycles, metric=metric.value, assume=assume.value,
                   allocation=allocation.value, engine=engine.value, family_by=grouping(by_pair, by_operation),
                   closed_loop=not open_loop, detector=detector)
        show(views(d), width, json_path)
        write_json_to(json_path, lambda: decisions_json(d))


def _tolerance_views(d) -> list:
    return [sensitivity_view(d.sensitivity), tolerance_view(d.tolerances), totals_line(d.plan, feasible=d.tolerances.feasible)]


def _cost_views(d) -> list:
    return [tolerance_view(d.tolerances), calibration_view(d.plan, feasible=d.tolerances.feasible)]


_decision_command("tolerances", "Largest tolerance per calibration knob for a target infidelity, ranked by how much "
                  "each must tighten.", _tolerance_views)
_decision_command("cost", "Device time to measure the knobs that must tighten (amplified phase estimation) and, "
                  "with drift, how often.", _cost_views)


@app.command()
@user_errors
def demo(
    width: Optional[int] = WidthOpt,
) -> None:
    """Run the main job on the built-in examples of the invented North Fen lab."""
    console = make_console(width=width)
    console.rule(Text("budget demo · North Fen Cryogenics Lab, device fen-q8 (invented)", style="bold"))
    for title, result in demo_results():
        console.print(Text(f"\n{title}", style="bold"))
        console.print(render_budget(result))


def main() -> None:  # pragma: no cover - console entry point alias
    app()


if __name__ == "__main__":  # pragma: no cover
    app()


# ---- measured calibration data: import, uncertainty sweeps, free compensation, schedules (issue 15) ----

model_app = typer.Typer(no_args_is_help=True, help="Error-model files: build one from measured calibration tables.")
app.add_typer(model_app, name="model")


@model_app.command("import")
@user_errors
def model_import(
    files: List[Path] = typer.Argument(..., help="CSV/TSV tables (header = model keys) and device-properties or "
                                       "calibration-metrics JSON files (docs/import.md).", show_default=False),
    out: Path = typer.Option(..., "--out", help="The TOML error model to write."),
    circuit: Optional[Path] = typer.Option(None, "--circuit", help="Report rows for qubits or pairs this circuit "
                                           "does not use (they are kept)."),
    register: str = typer.Option("q", "--register", help="Register name for qubit indices in backend JSON (q -> q[3])."),
    one_qubit_gates: str = typer.Option("sx,x", "--one-qubit-gates", help="Gates (comma-separated) that receive "
                                        "single-qubit error metrics of calibration-metrics JSON."),
    two_qubit_gate: Optional[str] = typer.Option(None, "--two-qubit-gate", help="Gate that receives two-qubit "
                                                 "metrics (default: the gate the metric names)."),
    gates_per_clifford: Optional[float] = typer.Option(None, "--gates-per-clifford", min=1.0, help="Physical gates "
                                                       "per Clifford, for error_per_clifford columns."),
    width: Optional[int] = WidthOpt,
) -> None:
    """Write a TOML error model from measured calibration tables, with each value's source as a comment."""
    check_output_path(out, "--out")
    imported = import_tables(files, circuit=circuit, register=register, two_qubit_gate=two_qubit_gate,
                             one_qubit_gates=tuple(g.strip() for g in one_qubit_gates.split(",") if g.strip()),
                             gates_per_clifford=gates_per_clifford)
    write_text(out, to_toml(imported))
    show([render_import(imported, out)], width, out)


@app.command()
@user_errors
def sweep(
    circuit: Path = CircuitArg,
    errors: Path = typer.Option(..., "--errors", "-e", help="Error model with uncertainties ({ value, sigma } or "
                                "{ low, high }) and/or drift rates (docs/error-model.md)."),
    samples: int = typer.Option(2000, "--samples", min=2, help="Monte Carlo samples (each a seeded draw of the model)."),
    hours: float = typer.Option(0.0, "--hours", min=0.0, help="Also follow the distribution over H hours of drift."),
    hour_points: int = typer.Option(5, "--hour-points", min=2, help="Times from 0 to H for --hours."),
    target: Optional[float] = typer.Option(None, "--target", "-t", help="Infidelity E: probability of meeting it."),
    sobol_base: int = typer.Option(64, "--sobol-base", min=0, help="Saltelli base size n (power of 2) for the Sobol "
                                   "indices: n·(d+2) more runs for d uncertain values; 0 = none."),
    seed: int = typer.Option(1, "--seed", min=0, help="Seed of the draws (sample k uses rng([seed, k]))."),
    cycles: int = CyclesOpt,
    metric: MetricChoice = MetricOpt,
    engine: EngineChoice = EngineOpt,
    workers: Optional[int] = typer.Option(None, "--workers", min=1, help="Local processes (default: all cores)."),
    scheduler: Optional[str] = typer.Option(None, "--scheduler", help="Run on a Dask cluster: 'local' (a local "
                                            "cluster) or a scheduler address such as tcp://host:8786."),
    out: Optional[Path] = typer.Option(None, "--out", help="Stream results to this JSON-lines file; an interrupted "
                                       "sweep given the same file resumes."),
    json_path: Optional[Path] = json_option("Write the summary as JSON (docs/json-schema.md)."),
    quiet: bool = QuietOpt,
    width: Optional[int] = WidthOpt,
) -> None:
    """Distribution of the infidelity under the model's uncertainties and drift, and which value matters most."""
    check_output_path(json_path, "--json")
    check_output_path(out, "--out")
    with progress_bar("sweep", quiet=quiet) as tick:
        result = run_sweep(str(circuit), str(errors), samples=samples, hours=hours, hour_points=hour_points,
                           target=target, seed=seed, cycles=cycles, metric=metric.value, engine=engine.value,
                           sobol_base=sobol_base, out=out, workers=workers, scheduler=scheduler, progress=tick)
    show([render_sweep(result)], width, json_path)
    write_json_to(json_path, result.to_dict)


class PointsChoice(str, Enum):
    all = "all"
    blocks = "blocks"
    end = "end"


@app.command()
@user_errors
def compensate(
    circuit: Path = CircuitArg,
    errors: Path = ErrorsOpt,
    cycles: int = CyclesOpt,
    metric: MetricChoice = MetricOpt,
    engine: EngineChoice = EngineOpt,
    points: PointsChoice = typer.Option(PointsChoice.all, "--points", help="Where corrections go: the end of each "
                                        "repeated block (after every repetition), the end of the circuit, or both."),
    echoes: bool = typer.Option(False, "--echoes", help="Also try an x pulse pair on each waiting qubit of each "
                                "repeated block (one engine run per candidate) and suggest those that help."),
    json_path: Optional[Path] = json_option("Write before/after and the corrections as JSON."),
    out_circuit: Optional[Path] = typer.Option(None, "--out-circuit", help="Write the corrected circuit (OpenQASM 3 "
                                               "with the added rz gates)."),
    out_model: Optional[Path] = typer.Option(None, "--out-model", help="Write the model with the corrections folded "
                                             "into gates' z_phase (when each folds into one gate)."),
    width: Optional[int] = WidthOpt,
) -> None:
    """Virtual-Z corrections (free frame changes) that minimise the actual infidelity, verified."""
    for path, option in ((json_path, "--json"), (out_circuit, "--out-circuit"), (out_model, "--out-model")):
        check_output_path(path, option)
    done = compensate_all(str(circuit), str(errors), cycles=cycles, metric=metric.value, engine=engine.value,
                          points=points.value, echoes=echoes, circuit_text=out_circuit is not None,
                          model_text=out_model is not None)
    show([render_compensation(done.result)], width, json_path, out_circuit, out_model)
    for path, text in ((out_circuit, done.circuit_text), (out_model, done.model_text)):
        if path is not None:
            write_text(path, text)
    write_json_to(json_path, done.result.to_dict)


@app.command()
@user_errors
def plan(
    circuit: Path = CircuitArg,
    errors: Path = ErrorsOpt,
    target: float = TargetOpt,
    hours: float = typer.Option(..., "--hours", help="Horizon H: the schedule keeps the prediction below the target "
                                "for this long."),
    cycles: int = CyclesOpt,
    metric: MetricChoice = MetricOpt,
    json_path: Optional[Path] = json_option("Write the schedule as JSON (docs/json-schema.md)."),
    width: Optional[int] = WidthOpt,
) -> None:
    """The cheapest calibration schedule (which knobs, how precisely, how often) for a target over H hours."""
    check_output_path(json_path, "--json")
    schedule = run_plan(str(circuit), str(errors), target=target, hours=hours, cycles=cycles, metric=metric.value)
    show([render_schedule(schedule)], width, json_path)
    write_json_to(json_path, lambda: schedule_json(schedule))
