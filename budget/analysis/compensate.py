"""Free compensation: virtual-Z frame changes that cancel accumulated coherent error.

A virtual Z (a frame change, rz) costs no device time on superconducting hardware (common practice,
no source). ``budget compensate`` adds, at chosen points — the end of every repeated block (applied
after each repetition) and the end of the circuit — a phase φ per qubit, and chooses the phases that
minimise the leading-order infidelity.

To leading order (design.md §5) e ≈ xᵀ A x + s over all coherent knobs x. Each correction is a
``z_phase`` knob of an rz(0) inserted at its point, so with x = (δ, φ), δ today's knob values,

    e(φ) = δᵀ A_δδ δ + 2 φᵀ A_φδ δ + φᵀ A_φφ φ + s,

a linear least-squares problem: A = Gᵀ G for the linear map G from knobs to the propagated error
generator, and minimising ‖G_δ δ + G_φ φ‖² gives the normal equations A_φφ φ = -A_φδ δ, solved with
``scipy.linalg.lstsq`` (minimum-norm φ when corrections are redundant). The predicted gain is
-φᵀ A_φδ δ. The corrected circuit (the ideal circuit unchanged, the rz(φ) acting as error
cancellation) is then run with the most accurate engine that fits.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np
import scipy.linalg

from budget.analysis.run import read_circuit, read_model
from budget.circuit.walk import Kind, kind_of, layers
from budget.engines.door import choose_engine
from budget.analysis.sensitivity import quadratic_form
from budget.circuit.ir import Layer, Operation, StructuredCircuit
from budget.errors.attach import attach
from budget.errors.knobs import coherent_error
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyOperation
from budget.errors.params import GateParams
from budget.problems import InputError

_FAMILY = "virtual-Z"


@dataclass(frozen=True)
class Point:
    """A place where corrections go: ``block`` = pre-order index of a repeated block, or None for the
    end of the circuit; ``qubits`` the qubit indices it corrects; ``where`` its name in reports."""

    block: int | None
    qubits: tuple[int, ...]
    where: str


@dataclass(frozen=True)
class Correction:
    """One virtual-Z correction: rz(angle_rad) on ``qubit`` at ``where``."""

    qubit: str
    where: str
    angle_rad: float
    block: int | None
    qubit_index: int


@dataclass(frozen=True)
class Compensation:
    """Before and after, first-order and engine values, and the corrections. ``before``/``after``
    are None when the circuit is beyond the engine's first-order range (no value there)."""

    source: str
    metric: str
    engine: str
    before: float | None
    after: float | None
    before_first_order: float
    after_first_order: float
    corrections: tuple[Correction, ...]
    echoes: tuple | None = None  # budget.analysis.echo.Echo suggestions, when asked for

    def to_dict(self) -> dict:
        """The documented JSON (docs/json-schema.md, ``budget compensate``)."""
        out = {
            "before": {"infidelity": self.before, "first_order": self.before_first_order},
            "after": {"infidelity": self.after, "first_order": self.after_first_order},
            "corrections": [{"qubit": c.qubit, "where": c.where, "angle_rad": c.angle_rad} for c in self.corrections],
        }
        if self.echoes is not None:
            out["echoes"] = [{"qubit": e.qubit, "where": e.where, "layers": list(e.layers), "lines": list(e.lines),
                              "infidelity": e.infidelity} for e in self.echoes]
        return out


POINTS = ("all", "blocks", "end")


def correction_points(circuit: StructuredCircuit, which: str = "all") -> tuple[Point, ...]:
    """The end of each repeated block (pre-order) and the end of the circuit, every qubit at each (a
    qubit idle in a block still collects errors there: relaxation, and spectator couplings).

    ``which``: ``"all"``, ``"blocks"`` (block ends only) or ``"end"`` (end of circuit only); a
    block left out keeps its index, with no qubits."""
    points: list[Point] = []

    def walk(items: tuple) -> None:
        for it in items:
            if kind_of(it, "correction_points") is Kind.REPEAT:
                ops = _ops(it.body)
                line = next((o.line for o in ops if o.line is not None), None)
                index = len(points)
                qubits = tuple(range(circuit.num_qubits)) if which != "end" else ()
                points.append(Point(index, qubits,
                                    f"end of block {index + 1}" + (f" (line {line})" if line else "")
                                    + f", after each of its {it.count} repetitions"))
                walk(it.body)

    walk(circuit.body)
    points.append(Point(None, tuple(range(circuit.num_qubits)) if which != "blocks" else (), "end of circuit"))
    return tuple(points)


def _ops(items: tuple) -> list[Operation]:
    return [op for it, _ in layers(items, where="correction_points") for op in it.operations]


def _rz_op(qubit: int, name: str, where: str, angle: float) -> NoisyOperation:
    """rz(0) on ``qubit`` whose z_phase error is the correction ``angle`` (family names the point)."""
    coh = coherent_error("rz", (0.0,), GateParams(z_phase=(angle,)), 1)
    return NoisyOperation(Operation("rz", (qubit,), (0.0,)), f"{_FAMILY} {name} @{where}", coh.unitary,
                          dict(coh.hamiltonian), knob_generators={k: dict(g) for k, g in coh.generators.items()},
                          knob_values=dict(coh.values))


def map_blocks(items: tuple, fn: Callable[[int, tuple], tuple]) -> tuple:
    """The same items with the body of the k-th repeated block (pre-order, as
    :func:`correction_points` numbers them) replaced by ``fn(k, body)``, inner blocks first;
    works on circuits and noisy circuits alike."""
    counter = [0]

    def walk(items: tuple) -> tuple:
        out: list = []
        for it in items:
            if kind_of(it, "map_blocks") is Kind.REPEAT:
                index = counter[0]
                counter[0] += 1
                out.append(type(it)(fn(index, walk(it.body)), it.count))
            else:
                out.append(it)  # layers, and measurement items (circuits with them are refused upstream)
        return tuple(out)

    return walk(items)


def _extend_blocks(items: tuple, extra: Callable[[int], tuple]) -> tuple:
    """The same items with ``extra(k)`` appended to the body of the k-th repeated block."""
    return map_blocks(items, lambda k, body: body + extra(k))


def with_corrections(noisy: NoisyCircuit, points: tuple[Point, ...], angles: dict[tuple, float]) -> NoisyCircuit:
    """The noisy circuit with a layer of correction rz at each point; ``angles[(block, qubit)]``
    gives each correction (0 where absent: a knob at zero, for the quadratic form)."""
    def layer(point: Point) -> NoisyLayer:
        ops = tuple(_rz_op(q, noisy.qubits[q], point.where, angles.get((point.block, q), 0.0)) for q in point.qubits)
        return NoisyLayer(ops, (), 0.0)

    by_block = {p.block: p for p in points}

    def extra(index: int) -> tuple:
        point = by_block.get(index)
        return (layer(point),) if point and point.qubits else ()

    body = _extend_blocks(noisy.body, extra)
    end = by_block.get(None)
    if end is not None and end.qubits:
        body += (layer(end),)
    return dataclasses.replace(noisy, body=body)


def compensate(circuit: Any, errors: Any, *, cycles: int = 1, metric: str = "process", engine: str = "auto",
               form_engine: str = "auto", points: str = "all") -> Compensation:
    """Virtual-Z corrections minimising the leading-order infidelity, verified with ``engine``.

    Args:
        circuit, errors, cycles, metric: as for :func:`budget.analysis.run.analyze`.
        engine: the engine that verifies (``"auto"``: the most accurate that fits).
        form_engine: the engine that builds the quadratic form (``"auto"``, ``"clifford"``, ``"generators"``).
        points: ``"all"``, ``"blocks"`` (end of each repeated block) or ``"end"`` (end of circuit).
    """
    if points not in POINTS:
        raise InputError(f"points = {points!r}: expected one of {', '.join(POINTS)}")
    structured = read_circuit(circuit).with_cycles(cycles)
    if structured.has_mid_circuit:
        raise InputError(f"{structured.source}: free compensation is computed for gate-only circuits "
                         f"({structured.mid_circuit_reason()})")
    noisy = attach(structured, read_model(errors))
    where = correction_points(structured, points)
    if not any(p.qubits for p in where):
        raise InputError(f"{structured.source}: no correction point ({points}): the circuit has no repeated "
                         "block (use --cycles or --points all)")
    probe = with_corrections(noisy, where, {})
    qf = quadratic_form(probe, metric, engine=form_engine)
    a, x = np.asarray(qf.matrix, float), np.asarray(qf.values_rad, float)
    slots = {f"{_FAMILY} {noisy.qubits[q]} @{p.where}": (p, q) for p in where for q in p.qubits}
    c = [i for i, (fam, knob) in enumerate(qf.labels) if fam in slots]
    r = [i for i in range(len(qf.labels)) if i not in c]
    phi = np.zeros(len(c))
    if c and r:
        rhs = -a[np.ix_(c, r)] @ x[r]
        phi = scipy.linalg.lstsq(a[np.ix_(c, c)], rhs, cond=1e-12)[0] if np.any(rhs) else phi
    x_after = x.copy()
    x_after[c] = phi
    fo_before = float(x @ a @ x + qf.floor)
    fo_after = float(x_after @ a @ x_after + qf.floor)
    corrections = []
    for i, value in zip(c, phi):
        point, q = slots[qf.labels[i][0]]
        angle = float(math.remainder(value, 2 * math.pi))
        if abs(angle) > 1e-15:
            corrections.append(Correction(noisy.qubits[q], point.where, angle, point.block, q))
    runner = choose_engine(noisy, metric, engine)
    before = runner.run(noisy, metric)
    fixed = with_corrections(noisy, where, {(k.block, k.qubit_index): k.angle_rad for k in corrections})
    after = choose_engine(fixed, metric, engine).run(fixed, metric)
    return Compensation(structured.source, metric, after.engine, _value(before), _value(after),
                        fo_before, fo_after, tuple(corrections))


def engine_value(x: float | None, fmt) -> str:
    """An engine's infidelity for people: ``fmt(x)``, or "beyond range" when it has no value."""
    return "beyond range" if x is None else fmt(x)


def first_order_value(x: float, fmt) -> str:
    """A first-order (quadratic-form) prediction for people: above 1 it is no infidelity any more."""
    return "above 1 (first order fails)" if x > 1 else fmt(x)


def _value(result) -> float | None:
    """The engine's infidelity, or None beyond its range (no value there, as in ``budget analyze``)."""
    return None if result.beyond_range else float(result.infidelity)


def corrected_circuit(circuit: StructuredCircuit, corrections: tuple[Correction, ...]) -> StructuredCircuit:
    """The circuit with the corrections as real rz gates (what the device runs), for writing out.
    ``circuit`` must be the one :func:`compensate` used (cycles included)."""
    by_block: dict[int | None, list[Operation]] = {}
    for k in corrections:
        by_block.setdefault(k.block, []).append(Operation("rz", (k.qubit_index,), (k.angle_rad,)))
    def extra(index: int) -> tuple:
        return (Layer(tuple(by_block[index])),) if index in by_block else ()

    body = _extend_blocks(circuit.body, extra) + ((Layer(tuple(by_block[None])),) if None in by_block else ())
    return dataclasses.replace(circuit, body=body)
