"""What a command computes from several core steps, composed in the analysis layer (not in the CLI).

:func:`analyze_all` runs :func:`budget.analysis.run.analyze` and, when asked, the comparison with a
second circuit (``against`` a path), the comparison with an ensemble of random counterparts
(``against="random"``, :class:`RandomEnsemble`) and the randomly compiled copies (``ensemble``).
:func:`depth_of` reads a circuit and a model and sweeps the repetitions;
:func:`compensate_all` adds echo suggestions and the texts of the corrected circuit and model to
the virtual-Z compensation.

A single random counterpart is one sample (seed 1 and seed 7 can differ by 7 %); the circuit is
therefore set against ``draws`` counterparts drawn with seeds ``seed``, ``seed + 1``, … and compared
with their mean, with the spread (sample standard deviation) beside it. Counterparts keep the layer
structure (:func:`budget.analysis.compare.random_counterpart`), so idle error is not confounded.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

import dataclasses

import numpy as np

from budget.analysis.compare import Comparison, random_counterpart
from budget.analysis.compensate import Compensation, compensate, corrected_circuit
from budget.analysis.compensate_model import updated_model_text, z_phase_updates
from budget.analysis.depth import DepthCurve, depth_curve
from budget.analysis.echo import echo_suggestions
from budget.analysis.randomized import EnsembleResult
from budget.analysis.randomized import ensemble as run_ensemble
from budget.analysis.ratios import Ratio, safe_ratio
from budget.analysis.result import BudgetResult
from budget.analysis.families import attach_grouped
from budget.analysis.run import analyze, analyze_noisy, read_circuit, read_model
from budget.circuit.qasm_write import to_qasm3
from budget.problems import InputError

Progress = Callable[[int, int], None]
MAX_DRAWS = 1000


@dataclass(frozen=True)
class RandomEnsemble:
    """The circuit against random counterparts with the same layer structure.

    Attributes:
        first: the circuit asked about.
        seeds: one seed per counterpart.
        naive, actual: each counterpart's values (None: beyond its engine's range).
        engine: the engine that ran the counterparts.
    """

    first: BudgetResult
    seeds: tuple[int, ...]
    naive: tuple[float, ...]
    actual: tuple[float | None, ...]
    engine: str

    @property
    def valid(self) -> np.ndarray:
        return np.array([a for a in self.actual if a is not None], dtype=float)

    @property
    def mean(self) -> float | None:
        return float(np.mean(self.valid)) if len(self.valid) else None

    @property
    def spread(self) -> float | None:
        """Sample standard deviation across counterparts (None with fewer than two)."""
        return float(np.std(self.valid, ddof=1)) if len(self.valid) > 1 else None

    @property
    def ratio(self) -> Ratio:
        """The circuit's actual infidelity ÷ the counterparts' mean."""
        return safe_ratio(self.first.actual, self.mean)

    @property
    def ratio_range(self) -> tuple[Ratio, Ratio]:
        """The circuit ÷ the largest and ÷ the smallest counterpart."""
        if not len(self.valid):
            return Ratio(None), Ratio(None)
        return (safe_ratio(self.first.actual, float(self.valid.max())),
                safe_ratio(self.first.actual, float(self.valid.min())))

    def to_dict(self) -> dict[str, Any]:
        low, high = self.ratio_range
        return {
            "draws": len(self.seeds),
            "seeds": list(self.seeds),
            "engine": self.engine,
            "naive": list(self.naive),
            "actual": list(self.actual),
            "mean": self.mean,
            "spread": self.spread,
            "actual_ratio": self.ratio.value,
            "ratio_note": self.ratio.why,
            "actual_ratio_range": [low.value, high.value],
        }


@dataclass(frozen=True)
class Analysis:
    """A budget and its optional companions (each None when not asked for)."""

    result: BudgetResult
    comparison: Comparison | None = None
    random: RandomEnsemble | None = None
    ensemble: EnsembleResult | None = None

    def to_dict(self) -> dict[str, Any]:
        """The budget's JSON (docs/json-schema.md) with ``against`` and ``ensemble`` when present."""
        out = self.result.to_dict()
        if self.comparison is not None:
            out["against"] = self.comparison.to_dict()
        if self.random is not None:
            out["against_random"] = self.random.to_dict()
        if self.ensemble is not None:
            out["ensemble"] = self.ensemble.to_dict()
        return out


def analyze_all(circuit: Any, errors: Any, *, cycles: int = 1, metric: str = "process", engine: str = "auto",
                observables: tuple[str, ...] = (), family_by: str = "gate", compare_twirled: bool = False,
                against: str | None = None, draws: int = 10, ensemble: int = 0, seed: int = 1,
                progress: Progress | None = None, logical: tuple[tuple[int, ...], ...] | None = None,
                truncate: float | None = None) -> Analysis:
    """The budget of ``circuit`` and the companions asked for (arguments as for
    :func:`budget.analysis.run.analyze`; ``against``: a circuit path or ``"random"``; ``draws``:
    random counterparts; ``ensemble``: randomly compiled copies; ``seed``: first seed of both;
    ``logical``: named logical observables of the detector metric; ``truncate``: the pauli
    engine's threshold for the main budget)."""
    if isinstance(draws, bool) or not isinstance(draws, int) or not 2 <= draws <= MAX_DRAWS:
        raise InputError(f"draws = {draws!r}: expected a whole number from 2 to {MAX_DRAWS}")
    model = read_model(errors)
    structured = read_circuit(circuit)
    if structured.has_mid_circuit and (ensemble or against == "random"):
        raise InputError(f"{structured.source}: --ensemble and --against random randomise gate layers and are "
                         f"computed for gate-only circuits ({structured.mid_circuit_reason()})")
    result = analyze(structured, model, cycles=cycles, metric=metric, engine=engine, observables=observables,
                     family_by=family_by, compare_twirled=compare_twirled, logical=logical,
                     truncate=truncate)
    comparison = random = copies = None
    whole = structured.with_cycles(cycles)
    if against == "random":
        naive, acc, name = [], [], ""
        seeds = tuple(range(seed, seed + draws))
        for i, s in enumerate(seeds):
            other = random_counterpart(whole, seed=s)
            r = analyze_noisy(attach_grouped(other, model, family_by), other, metric=metric, engine=engine)
            naive.append(r.naive_infidelity)
            acc.append(r.actual)
            name = r.engine
            if progress is not None:
                progress(i + 1, draws + ensemble)
        random = RandomEnsemble(result, seeds, tuple(naive), tuple(acc), name)
    elif against is not None:
        other = read_circuit(against).with_cycles(cycles)
        second = analyze(other, model, metric=metric, engine=engine, family_by=family_by,
                         compare_twirled=result.twirled_infidelity is not None)
        comparison = Comparison(result, second)
    if ensemble:
        done = draws if against == "random" else 0
        tick = None if progress is None else (lambda k, n: progress(done + k, done + n))
        copies = run_ensemble(attach_grouped(whole, model, family_by), count=ensemble, seed=seed, metric=metric,
                              engine=engine, progress=tick)
    return Analysis(result, comparison, random, copies)


def depth_of(circuit: Any, errors: Any, *, max_cycles: int, points: int = 25, metric: str = "process",
             engine: str = "auto", target: float | None = None, family_by: str = "gate",
             progress: Progress | None = None) -> DepthCurve:
    """The depth curves of ``circuit`` (a path or an object, as for
    :func:`budget.analysis.run.analyze`) under ``errors``: the model attached with families per
    ``family_by``, then :func:`budget.analysis.depth.depth_curve` (other arguments as there)."""
    block = attach_grouped(read_circuit(circuit), read_model(errors), family_by)
    return depth_curve(block, max_cycles=max_cycles, points=points, metric=metric, engine=engine, target=target,
                       progress=progress)


@dataclass(frozen=True)
class CompensationFiles:
    """A verified compensation with what it asked to be written (None: not asked for).

    Attributes:
        result: the compensation (with its echo suggestions when asked for).
        circuit_text: the corrected circuit as OpenQASM 3 (the added rz gates).
        model_text: the model file with the corrections folded into gates' z_phase.
    """

    result: Compensation
    circuit_text: str | None = None
    model_text: str | None = None


def compensate_all(circuit: Any, errors: Any, *, cycles: int = 1, metric: str = "process", engine: str = "auto",
                   points: str = "all", echoes: bool = False, circuit_text: bool = False,
                   model_text: bool = False) -> CompensationFiles:
    """:func:`budget.analysis.compensate.compensate` and, when asked, echo suggestions
    (:func:`budget.analysis.echo.echo_suggestions`, one engine run per candidate), the corrected
    circuit's text and the model text with the corrections folded in (``errors`` a TOML path).

    Raises:
        InputError: as :func:`compensate`; a correction that cannot go into one gate's z_phase
            when ``model_text`` is asked for.
    """
    result = compensate(circuit, errors, cycles=cycles, metric=metric, engine=engine, points=points)
    structured = read_circuit(circuit).with_cycles(cycles)
    if echoes:
        result = dataclasses.replace(result, echoes=echo_suggestions(
            structured, read_model(errors), metric=metric, engine=engine, before=result.before))
    qasm = folded = None
    if circuit_text:
        qasm = to_qasm3(corrected_circuit(structured, result.corrections),
                        header=f"{structured.source} with virtual-Z corrections from budget compensate"
                        f"\n(--cycles {cycles} included; model {errors})")
    if model_text:
        folded = updated_model_text(errors, z_phase_updates(structured, read_model(errors), result.corrections))
    return CompensationFiles(result, qasm, folded)
