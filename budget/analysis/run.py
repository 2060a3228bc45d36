"""The main job in one call: circuit + error model in, naive versus actual accumulation out.

    >>> from budget import analyze                                   # doctest: +SKIP
    >>> result = analyze("circuits/hopping_trotter.qasm", "circuits/fen_q8.toml", cycles=10)  # doctest: +SKIP
    >>> result.to_dict()["coherent_amplification"]                   # doctest: +SKIP

Steps: read the circuit (repeats kept), repeat it ``cycles`` times, attach the error model, compute
the naive estimate (1 - Π F_pro over operations and idle slots), run the chosen engine, and split
the actual value into per-family shares.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path
from typing import TYPE_CHECKING, Any

from budget.analysis.calibration import read_calibration
from budget.analysis.families import attach_grouped, family_counts, family_table
from budget.analysis.measured import analyze_measured
from budget.analysis.result import BudgetResult, FamilyShare, ReadoutSummary, circuit_fields
from budget.analysis.twirl import twirled_circuit
from budget.engines.details import Choice
from budget.engines.door import choose_engine
from budget.engines.escalation import run_in_range, run_one
from budget.circuit.ir import StructuredCircuit
from budget.circuit.load import load_circuit
from budget.engines.base import MEASURED_METRICS, METRICS, parse_observable
from budget.errors.context_attach import model_notes
from budget.errors.fidelity import naive_infidelity
from budget.errors.model import ErrorModel, load_model
from budget.errors.noisy import NoisyCircuit
from budget.problems import InputError

if TYPE_CHECKING:
    import cirq

MAX_CYCLES = 10**18
OBSERVABLE_RANGE = 2.0
"""A Pauli expectation value lies in [-1, 1], so its error cannot exceed 2 in size."""


def analyze(
    circuit: "str | Path | cirq.Circuit | StructuredCircuit",
    errors: Any,
    *,
    cycles: int = 1,
    metric: str = "process",
    engine: str = "auto",
    observables: tuple[str, ...] = (),
    family_by: str = "gate",
    compare_twirled: bool = False,
    logical: tuple[tuple[int, ...], ...] | None = None,
    truncate: float | None = None,
) -> BudgetResult:
    """Error budget of a structured circuit under an error model.

    Args:
        circuit: a path (OpenQASM 2 or 3, cirq JSON), a ``cirq.Circuit`` or a StructuredCircuit.
        errors: a path to a TOML error model, an ``ErrorModel``, or a dict in the TOML layout.
        cycles: repeat the whole circuit this many times (kept as a repeat, 1 <= N <= 10**18).
        metric: ``"process"`` (1 - process fidelity), ``"state"`` (1 - fidelity of the output
            for input |0…0>), ``"detectors"`` (probability that some detector fires) or ``"record"``
            (1 - classical fidelity of the measurement record); the last two for circuits with
            mid-circuit measurement (:mod:`budget.analysis.measured`).
        engine: ``"auto"``, ``"exact"``, ``"generators"``, ``"clifford"`` or ``"pauli"``.
        observables: Pauli observables such as ``"Z0Z1"``, whose expectation-value errors to report.
        family_by: ``"gate"`` (one family per gate name), ``"pair"`` (gate name per qubit tuple) or
            ``"operation"`` (each operation as written).
        compare_twirled: also compute the Pauli-twirled variant of the circuit.
        logical: record index lists naming the logical observables (detectors metric); None infers them.
        truncate: coefficient threshold of the pauli engine (0 keeps every term; None: chosen
            so that the truncation bound is small against the result).

    Returns:
        A frozen :class:`BudgetResult`; ``to_dict()`` gives the documented JSON (schema version 1).
    """
    if metric not in METRICS + MEASURED_METRICS:
        raise InputError(f"metric = {metric!r}: expected one of {', '.join(METRICS + MEASURED_METRICS)}")
    if isinstance(cycles, bool) or not isinstance(cycles, int) or not 1 <= cycles <= MAX_CYCLES:
        raise InputError(f"cycles = {cycles!r}: expected a whole number from 1 to 10**18")
    if truncate is not None and not (isinstance(truncate, (int, float)) and 0 <= truncate < float("inf")):
        raise InputError(f"truncate = {truncate!r}: expected a number of radians >= 0 (0 keeps every Pauli term)")
    structured = read_circuit(circuit).with_cycles(cycles)
    model = read_model(errors)
    noisy = attach_grouped(structured, model, family_by)
    return analyze_noisy(
        noisy,
        structured,
        metric=metric,
        engine=engine,
        observables=observables,
        compare_twirled=compare_twirled,
        cycles=cycles,
        notes=model_notes(structured, model),
        logical=logical,
        truncate=truncate,
    )


def analyze_noisy(
    noisy: NoisyCircuit,
    structured: StructuredCircuit,
    *,
    metric: str,
    engine: str = "auto",
    observables: tuple[str, ...] = (),
    compare_twirled: bool = False,
    cycles: int = 1,
    notes: tuple[str, ...] = (),
    logical: tuple[tuple[int, ...], ...] | None = None,
    truncate: float | None = None,
) -> BudgetResult:
    """The analysis once the model is attached (shared by :func:`analyze` and other commands);
    ``notes``: warnings to show with the result (the error model's, for instance)."""
    if logical is not None and metric != "detectors":
        raise InputError(f"--logical: logical observables (parities of recorded bits) belong to the detectors metric; the {metric} "
                         "metric does not use them")
    for label in observables:  # bad labels are refused before any engine runs
        parse_observable(label, noisy.qubits)
    if metric in MEASURED_METRICS:
        if observables:
            raise InputError(f"--observable {observables[0]}: Pauli observables are read from the output state of a "
                             f"gate circuit; the {metric} metric has none (name logical observables of the "
                             "detectors metric with --logical)")
        result = analyze_measured(noisy, structured, metric=metric, engine=engine,
                                  compare_twirled=compare_twirled, cycles=cycles, logical=logical)
        return dataclasses.replace(result, warnings=tuple(notes) + result.warnings)

    options = {"truncate": truncate} if truncate is not None else None
    ran = run_one(noisy, metric, engine, observables=tuple(observables), options=options)
    outcome = ran.result
    warnings = list(notes) + list(ran.notes) + list(outcome.warnings)
    shares = dict(outcome.shares)
    shares_known = bool(shares) or not outcome.infidelity > 0
    if not shares_known:
        warnings.append(f"family shares unavailable: the {outcome.engine} engine gave none for this circuit")
    naive = naive_infidelity(noisy)
    twirled = None
    if compare_twirled:
        tw = twirled_circuit(noisy)
        tw_result, _ = run_in_range(tw, metric, choose_engine(tw, metric, engine, brief=True, options=options), engine,
                                    brief=True)
        if tw_result.beyond_range is None:
            twirled = tw_result.infidelity
        else:
            warnings.append(f"Pauli-twirled variant left out: the {tw_result.engine} engine is beyond its range "
                            f"there ({tw_result.beyond_range})")
    observed = {}
    for label, err in outcome.observable_errors.items():  # <O> of a Pauli lies in [-1, 1]
        if abs(err) > OBSERVABLE_RANGE:
            warnings.append(f"observable {label}: the {outcome.engine} engine gives a change of {err:+.3g}, beyond "
                            f"the largest possible {OBSERVABLE_RANGE:g} of a Pauli expectation value; no value shown")
            observed[label] = None
        else:
            observed[label] = float(err)
    families = family_table(family_counts(noisy), shares)
    return BudgetResult(
        **circuit_fields(structured, cycles),
        metric=metric,
        engine=outcome.engine,
        naive_infidelity=float(naive),
        actual_infidelity=float(outcome.infidelity),
        first_order=outcome.first_order,
        truncation_bound=float(truncation.truncation_bound or 0.0) if (truncation := outcome.details.truncation) else 0.0,
        families=families,
        readout=ReadoutSummary.from_errors(noisy.readout_error, noisy.qubits, assumed=not structured.measured),
        warnings=tuple(dict.fromkeys(warnings)),
        observables=observed,
        twirled_infidelity=twirled,
        details=outcome.details.with_records(Choice(ran.reason)),
        beyond_range=outcome.beyond_range,
        shares_known=shares_known,
    )


def read_circuit(circuit: Any) -> StructuredCircuit:
    """A StructuredCircuit from a path (OpenQASM 2/3, cirq JSON), a cirq.Circuit or itself."""
    if isinstance(circuit, StructuredCircuit):
        return circuit
    return load_circuit(circuit)


def read_model(errors: Any):
    """An ErrorModel from a TOML path, a dict in the TOML layout, or itself. A ``[calibration]``
    table is checked here too, so every command refuses the same bad file the same way (not only
    the commands that plan calibration)."""
    if isinstance(errors, ErrorModel):
        model = errors
    elif isinstance(errors, dict):
        model = ErrorModel.from_dict(errors)
    elif isinstance(errors, (str, Path)):
        model = load_model(errors)
    else:
        raise TypeError(f"errors: expected a path, an ErrorModel or a dict, got {type(errors).__name__}")
    if model.calibration is not None:
        read_calibration(model.calibration, source=model.source)
    return model
