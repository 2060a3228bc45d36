"""The `budget` command: thin typer glue that parses, calls the core, and renders.

Bad input (InputError and its kinds, unreadable files) becomes one red line on stderr and exit
code 2; nothing is written. Everything else is a bug and keeps its traceback.
"""

from __future__ import annotations

import functools
from enum import Enum
from pathlib import Path
from typing import Callable, List, Optional

import typer

from budget.problems import InputError
from budget.report.terminal import make_console

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    help="Error budgets for structured quantum circuits: naive fidelity product versus actual "
    "accumulation of coherent and incoherent gate errors.",
)

EXAMPLES = Path(__file__).resolve().parent.parent / "circuits"


class MetricChoice(str, Enum):
    process = "process"
    state = "state"


class EngineChoice(str, Enum):
    auto = "auto"
    exact = "exact"
    generators = "generators"
    clifford = "clifford"


def user_errors(fn: Callable) -> Callable:
    """Turn bad input into one red line on stderr and exit code 2 (no traceback)."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except (InputError, OSError) as exc:
            err = make_console(stderr=True)
            text = str(exc) if isinstance(exc, InputError) else f"{getattr(exc, 'filename', '') or ''}: {exc.strerror or exc}"
            err.print(f"[bold red]error:[/] {text}", highlight=False, markup=True, soft_wrap=True)
            raise typer.Exit(code=2) from None

    return wrapper


def check_output_path(path: Optional[Path], option: str) -> None:
    """Refuse early an output path whose folder does not exist (so nothing half-written appears)."""
    if path is not None and not path.resolve().parent.is_dir():
        raise InputError(f"{option} {path}: the folder {path.resolve().parent} does not exist")


CircuitArg = typer.Argument(..., help="OpenQASM 2/3 file or cirq JSON file.", show_default=False)
ErrorsOpt = typer.Option(..., "--errors", "-e", help="Error model (TOML, see docs/error-model.md).")
CyclesOpt = typer.Option(1, "--cycles", "-n", min=1, help="Repeat the whole circuit N times (kept folded).")
MetricOpt = typer.Option(MetricChoice.process, "--metric", "-m", help="process: 1 - F_pro; state: output state for |0…0>.")
EngineOpt = typer.Option(EngineChoice.auto, "--engine", help="auto picks the most accurate engine that fits.")


@app.command()
@user_errors
def analyze(
    circuit: Path = CircuitArg,
    errors: Path = ErrorsOpt,
    cycles: int = CyclesOpt,
    metric: MetricChoice = MetricOpt,
    engine: EngineChoice = EngineOpt,
    observable: List[str] = typer.Option([], "--observable", "-o", help="Pauli observable such as Z0Z1 (repeatable)."),
    by_pair: bool = typer.Option(False, "--by-pair", help="One family per gate and qubit tuple instead of per gate."),
    compare_twirled: bool = typer.Option(False, "--compare-twirled", help="Also analyse the Pauli-twirled variant."),
    json_path: Optional[Path] = typer.Option(None, "--json", help="Write the result as JSON (schema in docs/json-schema.md)."),
    width: Optional[int] = typer.Option(None, "--width", help="Report width in characters (default: terminal)."),
) -> None:
    """Naive fidelity product versus actual accumulation, with each gate family's share."""
    from budget.analysis.run import analyze as run_analysis
    from budget.report.json_out import write_json
    from budget.report.terminal import render_budget

    check_output_path(json_path, "--json")
    result = run_analysis(
        str(circuit),
        str(errors),
        cycles=cycles,
        metric=metric.value,
        engine=engine.value,
        observables=tuple(observable),
        family_by="pair" if by_pair else "gate",
        compare_twirled=compare_twirled,
    )
    make_console(width=width).print(render_budget(result))
    if json_path is not None:
        write_json(json_path, result.to_dict())


@app.command()
@user_errors
def demo(
    width: Optional[int] = typer.Option(None, "--width", help="Report width in characters."),
) -> None:
    """Run the main job on the built-in examples of the invented North Fen lab."""
    from budget.analysis.run import analyze as run_analysis
    from budget.report.terminal import render_budget

    console = make_console(width=width)
    model = EXAMPLES / "fen_q8.toml"
    cases = [
        ("Trotter steps of a 4-site hopping chain, 20 steps", "hopping_trotter.qasm", 1),
        ("Parity-check cycle on a 5-qubit patch, repeated 50 times", "parity_cycle.qasm", 50),
        ("XY4 echo on one qubit, 200 repetitions (errors partly cancel)", "echo_xy4.qasm", 200),
    ]
    console.rule("[bold]budget demo · North Fen Cryogenics Lab, device fen-q8 (invented)")
    for title, name, cycles in cases:
        console.print(f"\n[bold]{title}[/]")
        result = run_analysis(str(EXAMPLES / name), str(model), cycles=cycles, metric="process")
        console.print(render_budget(result))


def main() -> None:  # pragma: no cover - console entry point alias
    app()


if __name__ == "__main__":  # pragma: no cover
    app()
