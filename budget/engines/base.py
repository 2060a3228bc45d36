"""One engine interface, one result type (style.md §6).

Every engine answers: for this noisy circuit and this metric, what is the infidelity, and how
much of it comes from each gate family? The report never knows which engine ran except through
:attr:`EngineResult.engine`.

Metrics (design.md §3):
    ``"process"``: e_F = 1 - F_pro of the whole circuit's channel against the ideal unitary,
        F_pro = (1/d²) Σ_k |Tr(U_ideal† K_k)|².
    ``"state"``: 1 - <ψ|ρ|ψ> for input |0…0>, ψ the ideal output, ρ the actual one.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Literal, Protocol, Sequence

import numpy as np

from budget.errors.noisy import NoisyCircuit
from budget.problems import InputError

Metric = Literal["process", "state"]
METRICS: tuple[str, ...] = ("process", "state")
MEASURED_METRICS: tuple[str, ...] = ("detectors", "record")
"""Metrics of circuits with mid-circuit measurement (:mod:`budget.analysis.measured`)."""


@dataclass(frozen=True)
class EngineResult:
    """What an engine returns.

    Attributes:
        engine: the engine's name (``"exact"``, ``"generators"``, ...).
        metric: ``"process"`` or ``"state"``.
        infidelity: the engine's best value for the metric, in [0, 1].
        shares: family name -> share of ``infidelity``; the shares add up to it (interference
            between families included, so a share can be negative when a family cancels another).
        first_order: the leading-order (quadratic) estimate, when the engine has it.
        warnings: validity warnings in plain words.
        details: engine-specific extra numbers (JSON-serialisable), e.g. ``{"hamiltonian_norm": x}``.
        beyond_range: None while the engine's approximation holds; otherwise the reason in plain
            words, with the size reached and the limit (an approximate engine's ``infidelity`` is
            then only an estimate of the order of magnitude, and no verdict is drawn from it).
    """

    engine: str
    metric: str
    infidelity: float
    shares: dict[str, float]
    first_order: float | None = None
    warnings: tuple[str, ...] = ()
    details: dict[str, float] = field(default_factory=dict)
    observable_errors: dict[str, float] = field(default_factory=dict)
    """Observable label (e.g. ``"Z0Z1"``) -> signed error <O>_actual - <O>_ideal."""
    beyond_range: str | None = None


@dataclass(frozen=True)
class QuadraticForm:
    """Leading-order infidelity as a quadratic form in the coherent knobs (design.md §5).

    e ≈ δᵀ A δ + floor, δ the knob values in radians, one entry per ``labels`` item.

    Attributes:
        labels: (family, knob) per row/column of ``matrix``.
        matrix: A, real symmetric, infidelity per radian squared.
        values_rad: the current knob values δ (same order).
        floor: s, the first-order incoherent infidelity.
        floor_sources: family -> its part of ``floor``.
    """

    labels: tuple[tuple[str, str], ...]
    matrix: np.ndarray
    values_rad: np.ndarray
    floor: float
    floor_sources: dict[str, float]


def zero_result(engine: str, metric: str, observables: tuple[str, ...] = (), *, first_order: float | None = 0.0) -> EngineResult:
    """The result for a circuit without any error: exactly 0 everywhere (no rounding residue such
    as 2.2e-16 or -0.0 from products of ideal matrices)."""
    return EngineResult(
        engine=engine,
        metric=metric,
        infidelity=0.0,
        shares={},
        first_order=first_order,
        details={"error_free": True},
        observable_errors={label: 0.0 for label in observables},
    )


MULTIPLY_ADDS_PER_S = 3e8
"""Complex multiply-adds per second of the dense engines on the 2-core development machine with one
BLAS thread per process and other work running beside it (measured: a 6-qubit superoperator of
8e9 estimated multiply-adds took 33 s; docs/benchmarks.md). Engines' :meth:`Engine.estimate_seconds`
turn their work counts into seconds with it."""
DEFAULT_ESTIMATE_S = 1.0
"""Seconds assumed for an engine that gives no estimate of its own."""


class Engine(Protocol):
    """What every engine provides."""

    name: str

    def fits(self, circuit: NoisyCircuit, metric: Metric) -> str | None:
        """None if the engine can run this circuit for this metric, else the reason in words."""

    def run(
        self, circuit: NoisyCircuit, metric: Metric, *, observables: tuple[str, ...] = ()
    ) -> EngineResult:
        """Compute the metric (and the errors of the named Pauli observables, when the engine
        supports them); raises TooLargeError if :meth:`fits` would refuse."""

    def estimate_seconds(self, circuit: NoisyCircuit, metric: Metric) -> float:
        """Optional: the estimated run time in seconds on this machine (``auto`` compares them;
        an engine without it counts as :data:`DEFAULT_ESTIMATE_S`). Must not allocate."""

    def brief(self) -> "Engine":
        """The same engine without optional extras that cost time but do not change the totals
        and shares (the clifford engine's per-qubit map), for callers that read only those."""


def parse_observable(label: str, qubits: int | Sequence[str]) -> dict[int, str]:
    """A Pauli observable: letters with qubit indices (``"Z0Z1"``, ``"X3 Y4"``) or with the
    circuit's qubit names in parentheses (``"Z(q[0])Z(q[1])"``, ``"X(anc[2])"``).

    ``qubits`` is the number of qubits or the circuit's qubit names (index = position); names
    need the latter. Returns qubit index -> Pauli letter. Raises InputError naming the label and
    the rule.

    >>> parse_observable("Z0Z1", 2)
    {0: 'Z', 1: 'Z'}
    >>> parse_observable("Z(q[1]) X(q[0])", ("q[0]", "q[1]"))
    {1: 'Z', 0: 'X'}
    """
    names = tuple(qubits) if not isinstance(qubits, int) else ()
    count = qubits if isinstance(qubits, int) else len(names)
    text = label.replace(" ", "").replace("*", "")
    parts = re.findall(r"([XYZ])(?:(\d+)|\(([^()]+)\))", text)
    if not parts or "".join(a + (f"({c})" if c else b) for a, b, c in parts) != text:
        raise InputError(
            f"observable {label!r}: expected Pauli letters X, Y, Z with qubit indices or qubit names, "
            "such as 'Z0Z1' or 'Z(q[0])Z(q[1])'"
        )
    out: dict[int, str] = {}
    for letter, idx, name in parts:
        if name:
            if name not in names:
                shown = ", ".join(names[:4]) + (", ..." if len(names) > 4 else "")
                raise InputError(f"observable {label!r}: no qubit named {name!r} in the circuit ({shown})")
            q = names.index(name)
        else:
            q = int(idx)
        if q >= count:
            raise InputError(f"observable {label!r}: qubit {q} is not in the circuit (qubits 0 to {count - 1})")
        if q in out:
            raise InputError(f"observable {label!r}: qubit {q} appears twice")
        out[q] = letter
    return out
