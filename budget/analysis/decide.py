"""From budget to decisions in one call: sensitivity, tolerances for a target, calibration time.

    >>> from budget.analysis.decide import decide                     # doctest: +SKIP
    >>> d = decide("circuits/parity_cycle.qasm", "circuits/fen_q8.toml", target=1e-2, cycles=50)
    >>> d.tolerances.rows[0], d.plan.round_s

Steps: read the circuit (repeats kept) and repeat it ``cycles`` times, attach the error model,
build the quadratic form e ≈ δᵀAδ + s with a first-order engine
(:func:`budget.analysis.sensitivity.quadratic_form`), then :func:`~budget.analysis.tolerances.tolerances`
and :func:`~budget.analysis.calibration.calibration_plan` with the model's ``[calibration]`` table.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from budget.analysis.calibration import (
    CalibrationPlan, calibration_json, calibration_plan, model_knob_keys, read_calibration,
)
from budget.analysis.phase_estimation import find_probes
from budget.analysis.sensitivity import Sensitivity, per_operation, quadratic_form, sensitivity, sensitivity_json
from budget.analysis.tolerances import ToleranceReport, check_target, tolerances, tolerances_json
from budget.problems import InputError

GROUPINGS: tuple[str, ...] = ("gate", "pair", "operation")


@dataclass(frozen=True)
class Decisions:
    """Sensitivity, tolerances and the calibration plan of one circuit under one model."""

    source: str
    sensitivity: Sensitivity
    tolerances: ToleranceReport
    plan: CalibrationPlan


def decide(
    circuit: Any,
    errors: Any,
    *,
    target: float,
    cycles: int = 1,
    metric: str = "process",
    assume: str = "worst",
    allocation: str = "equal",
    family_by: str = "gate",
    engine: str = "auto",
    detector: int | None = None,
) -> Decisions:
    """Sensitivity, tolerances and calibration device time for a target infidelity.

    Args:
        circuit: a path (OpenQASM 2/3, cirq JSON), a ``cirq.Circuit`` or a StructuredCircuit.
        errors: a path to a TOML error model, an ErrorModel, or a dict in the TOML layout.
        target: E in (0, 1) on ``metric``.
        cycles: repeat the whole circuit this many times (kept folded), >= 1.
        metric: ``"process"`` or ``"state"``.
        assume: ``"worst"`` or ``"random"`` signs; allocation: ``"equal"`` or ``"common-factor"``.
        family_by: ``"gate"``, ``"pair"`` (gate per qubit tuple) or ``"operation"`` (each operation
            as written).
        engine: ``"auto"``, ``"clifford"`` or ``"generators"`` for the quadratic form.
        detector: with ``metric="detectors"``, the target is on this detector's firing probability
            (its number in the detector list) instead of P(some detector fires).
    """
    from budget.analysis.run import read_circuit, read_model
    from budget.errors.attach import attach

    check_target(target)
    if isinstance(cycles, bool) or not isinstance(cycles, int) or cycles < 1:
        raise InputError(f"cycles = {cycles!r}: expected a whole number >= 1")
    if family_by not in GROUPINGS:
        raise InputError(f"family_by = {family_by!r}: expected one of {', '.join(GROUPINGS)}")
    structured = read_circuit(circuit).with_cycles(cycles)
    model = read_model(errors)
    settings = read_calibration(model.calibration, source=model.source)  # bad tables fail before any work
    noisy = attach(structured, model, family_by="pair" if family_by == "pair" else "gate")
    if family_by == "operation":
        noisy = per_operation(noisy)
    qf = quadratic_form(noisy, metric, engine=engine, detector=detector)
    report = tolerances(qf, target, assume=assume, allocation=allocation, metric=metric, cycles=cycles)
    plan = calibration_plan(report, find_probes(noisy), settings, model_knobs=model_knob_keys(model))
    return Decisions(structured.source, sensitivity(qf), report, plan)


def decisions_json(d: Decisions) -> dict:
    """The tolerance report (docs/tolerances.md, schema version 1) with the sensitivity and the plan."""
    out = tolerances_json(d.tolerances)
    out["source"] = d.source
    out["sensitivity"] = sensitivity_json(d.sensitivity)
    out["calibration"] = calibration_json(d.plan)
    return out
