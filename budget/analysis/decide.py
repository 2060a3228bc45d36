"""From budget to decisions in one call: sensitivity, tolerances for a target, calibration time.

    >>> from budget.analysis.decide import decide                     # doctest: +SKIP
    >>> d = decide("circuits/parity_cycle.qasm", "circuits/fen_q8.toml", target=1e-2, cycles=50)
    >>> d.tolerances.rows[0], d.plan.round_s

Steps: read the circuit (repeats kept) and repeat it ``cycles`` times, attach the error model,
build the quadratic form e ≈ δᵀAδ + s with a first-order engine
(:func:`budget.analysis.sensitivity.quadratic_form`), then :func:`~budget.analysis.tolerances.tolerances`
per site, checked in closed loop (:func:`~budget.analysis.closed_loop.close_loop`), and :func:`~budget.analysis.calibration.calibration_plan` with the model's ``[calibration]`` table.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any

from budget.analysis.calibration import (
    CalibrationPlan, calibration_json, calibration_plan, model_knob_keys, read_calibration,
)
from budget.analysis.closed_loop import close_loop
from budget.analysis.floor import accurate_floor, floor_remedy
from budget.analysis.families import per_operation
from budget.analysis.phase_estimation import find_probes
from budget.analysis.run import read_circuit, read_model
from budget.analysis.sensitivity import Sensitivity, quadratic_form, sensitivity, sensitivity_json
from budget.analysis.tolerance_output import tolerances_json
from budget.analysis.tolerances import ToleranceReport, check_target, hardware_notes, tolerances
from budget.circuit.walk import Kind, branches, kind_of
from budget.engines.base import MEASURED_METRICS
from budget.errors.attach import attach
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
    closed_loop: bool = True,
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
        closed_loop: check and correct the tolerances with an engine run at the tolerances (the
            detector metric: the exact engine with branches where it fits, else the Pauli frames
            with coherent classes).
        detector: with ``metric="detectors"``, the target is on this detector's firing probability
            (its number in the detector list) instead of P(some detector fires).
    """
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
    report = checked_tolerances(structured, model, noisy, qf, target, metric=metric, cycles=cycles, assume=assume,
                                allocation=allocation, family_by=family_by, engine=engine, closed_loop=closed_loop,
                                detector=detector)
    plan = calibration_plan(report, find_probes(noisy), settings, model_knobs=model_knob_keys(model))
    return Decisions(structured.source, sensitivity(qf), report, plan)


def checked_tolerances(
    structured: Any, model: Any, noisy: Any, qf: Any, target: float, *, metric: str, cycles: int,
    assume: str = "worst", allocation: str = "equal", family_by: str = "gate", engine: str = "auto",
    closed_loop: bool = True,
    detector: int | None = None,
) -> ToleranceReport:
    """Tolerances per family row over its sites, checked in closed loop, with the floor's remedy.

    With ``family_by="gate"`` the tolerances are solved on the per-site form (one row per gate,
    qubit tuple and knob; sites keep their own values and signs) with one tolerance per family
    and knob; otherwise on ``qf`` itself. Then :func:`~budget.analysis.closed_loop.close_loop`
    checks them with the most accurate engine that fits (``closed_loop=False`` skips it), and when
    the incoherent floor exceeds the target :func:`~budget.analysis.floor.floor_remedy` says what
    incoherent numbers would meet it.
    """
    qf, floor_note = accurate_floor(qf, noisy, metric, target, engine=engine)
    notes = (floor_note,) if floor_note else ()
    if metric in MEASURED_METRICS:  # family rows (the detector form is read by finite differences, per knob row)
        report = tolerances(qf, target, assume=assume, allocation=allocation, metric=metric, cycles=cycles)
        report = dataclasses.replace(report, warnings=notes + report.warnings)
        report = close_loop(report, noisy, qf, detector=detector) if closed_loop else report
        return dataclasses.replace(report, warnings=report.warnings + hardware_notes(report))
    if family_by == "gate":
        site_noisy = attach(structured, model, family_by="pair")
        site_qf = dataclasses.replace(quadratic_form(site_noisy, metric, engine=engine), floor=qf.floor,
                                      floor_sources=dict(qf.floor_sources))
        family_of = site_families(noisy, site_noisy)
        groups = [(family_of.get(f, site_family(f)), k) for f, k in site_qf.labels]
    else:
        site_noisy, site_qf, groups = noisy, qf, None
    report = tolerances(site_qf, target, assume=assume, allocation=allocation, metric=metric, cycles=cycles, groups=groups)
    report = dataclasses.replace(report, warnings=notes + report.warnings)
    if closed_loop:
        report = close_loop(report, site_noisy, site_qf)
    if not report.feasible:
        report = dataclasses.replace(report, floor_remedy=floor_remedy(report, model, noisy, metric))
    return dataclasses.replace(report, warnings=report.warnings + hardware_notes(report))


def site_families(by_gate: Any, by_site: Any) -> dict[str, str]:
    """Per-site family name -> gate family name, read off the same circuit attached both ways
    (their items correspond one to one; context errors keep their own names)."""
    out: dict[str, str] = {}

    def walk(a: tuple, b: tuple) -> None:
        for x, y in zip(a, b):
            kind = kind_of(x, "site_families")
            if kind is not kind_of(y, "site_families"):
                raise TypeError(f"site_families: items {type(x).__name__} and {type(y).__name__} do not match")
            if kind is Kind.LAYER:
                out.update((q.family, p.family) for p, q in zip(x.sites, y.sites))
            elif kind in (Kind.MEASURE, Kind.RESET):
                out[y.family] = x.family
            else:
                for inner_x, inner_y in zip(branches(x), branches(y)):
                    walk(inner_x, inner_y)

    walk(by_gate.body, by_site.body)
    return out


def site_family(name: str) -> str:
    """The gate family of a per-site family name: ``"cz q[0],q[1]"`` -> ``"cz"``."""
    return name.rsplit(" ", 1)[0]


def decisions_json(d: Decisions) -> dict:
    """The tolerance report (docs/tolerances.md, schema version 1) with the sensitivity and the plan."""
    out = tolerances_json(d.tolerances)
    out["source"] = d.source
    out["sensitivity"] = sensitivity_json(d.sensitivity)
    out["calibration"] = calibration_json(d.plan)
    return out
