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
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any, ClassVar, Literal, Protocol, Sequence

import numpy as np

from budget.engines.details import Details, ErrorFree
from budget.errors.noisy import NoisyCircuit
from budget.problems import InputError

Metric = Literal["process", "state"]


class RepeatSweep(Protocol):
    """What ``Engine.repeat_sweep`` returns: the engine's value for N cycles, for many N at the cost
    of one propagation (e.g. :class:`budget.engines.generators.depth.RepeatSweep`)."""

    def values(self, counts: Sequence[int]) -> Any:
        """The values at every N of ``counts``."""

    def at(self, count: int) -> tuple[float, bool]:
        """The value at N = ``count`` and whether it is within the engine's range."""

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
        details: typed records of what the engine computed besides the number
            (:class:`budget.engines.details.Details`; a mapping in the JSON layout is read into them).
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
    details: Details = field(default_factory=Details)
    observable_errors: dict[str, float] = field(default_factory=dict)
    """Observable label (e.g. ``"Z0Z1"``) -> signed error <O>_actual - <O>_ideal."""
    beyond_range: str | None = None

    def __post_init__(self) -> None:
        if not isinstance(self.details, Details):
            object.__setattr__(self, "details", Details.from_mapping(self.details or {}))


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
        details=Details(error_free=ErrorFree(True)),
        observable_errors={label: 0.0 for label in observables},
    )


MULTIPLY_ADDS_PER_S = 3e8
"""Complex multiply-adds per second of the dense engines on the 2-core development machine with one
BLAS thread per process and other work running beside it (measured: a 6-qubit superoperator of
8e9 estimated multiply-adds took 33 s; docs/benchmarks.md). Engines' :meth:`Engine.estimate_seconds`
turn their work counts into seconds with it."""
DEFAULT_ESTIMATE_S = 1.0
"""Seconds assumed for an engine that gives no estimate of its own."""


CAPABILITIES: dict[str, str] = {
    "estimate_seconds": "estimates of run time",
    "observables": "Pauli observables",
    "quadratic_form": "quadratic forms",
    "repeat_sweep": "depth curves in closed form",
    "detector_probabilities": "detector probabilities",
}
"""The optional capabilities of an engine (method name -> what it gives, for refusals). Every
engine declares those it has in :attr:`Engine.capabilities`; the others answer
:class:`Unsupported`."""


class Unsupported(InputError):
    """An engine was asked for a capability it does not have; ``reason`` says why in words.

    A subclass of InputError: when it reaches the user it is one line, never a traceback.
    """

    def __init__(self, engine: str, capability: str, reason: str) -> None:
        self.engine, self.capability, self.reason = engine, capability, reason
        super().__init__(f"engine {engine}: no {CAPABILITIES.get(capability, capability)} ({reason})")


class Engine:
    """What every engine provides.

    Required: :attr:`name`, :meth:`fits`, :meth:`run` (with ``shares`` filled: the family shares
    add up to the infidelity). Optional capabilities (:data:`CAPABILITIES`) are listed in
    :attr:`capabilities`; the methods of the others raise :class:`Unsupported` with a reason, so
    callers never probe with ``hasattr``. ``folds_repeats`` says whether a repeat of N costs what
    N = 2 costs (false for an engine that may walk a repeat cycle by cycle; depth curves under
    ``auto`` try such an engine after every engine that folds repeats).
    """

    name: ClassVar[str] = "engine"
    capabilities: ClassVar[frozenset[str]] = frozenset()
    folds_repeats: ClassVar[bool] = True

    def fits(self, circuit: NoisyCircuit, metric: Metric) -> str | None:
        """None if the engine can run this circuit for this metric, else the reason in words."""
        raise NotImplementedError

    def run(
        self, circuit: NoisyCircuit, metric: Metric, *, observables: tuple[str, ...] = ()
    ) -> EngineResult:
        """Compute the metric, its family shares (and the errors of the named Pauli observables,
        when the engine supports them); raises TooLargeError if :meth:`fits` would refuse."""
        raise NotImplementedError

    def brief(self) -> "Engine":
        """The same engine without optional extras that cost time but do not change the total
        (the clifford engine's per-qubit map, the exact engine's family split: a brief run may
        leave ``shares`` empty), for callers that read only the total. Default: itself."""
        return self

    def configure(self, **options: Any) -> "Engine":
        """The engine with the settings it knows among ``options`` (e.g. ``truncate`` of the pauli
        engine); settings it does not have are ignored. Default: itself."""
        return self

    def supports(self, capability: str) -> bool:
        """Whether the engine has the optional ``capability`` (a key of :data:`CAPABILITIES`)."""
        if capability not in CAPABILITIES:
            raise ValueError(f"capability {capability!r}: expected one of {', '.join(CAPABILITIES)}")
        return capability in self.capabilities

    def unsupported(self, capability: str, reason: str | None = None) -> Unsupported:
        """The explicit answer for a capability this engine does not have."""
        return Unsupported(self.name, capability, reason or f"the {self.name} engine does not compute them")

    def estimate_seconds(self, circuit: NoisyCircuit, metric: Metric) -> float:
        """The estimated run time in seconds on this machine; must not allocate."""
        raise self.unsupported("estimate_seconds")

    def quadratic_form(self, circuit: NoisyCircuit, metric: Metric) -> "QuadraticForm":
        """e ≈ δᵀAδ + floor in the coherent knobs (design.md §5)."""
        raise self.unsupported("quadratic_form")

    def repeat_sweep(self, circuit: NoisyCircuit, metric: Metric) -> "RepeatSweep":
        """The circuit used as a cycle: an object giving the engine's value for N cycles, for many
        N at the cost of one propagation (:class:`budget.engines.generators.depth.RepeatSweep`)."""
        raise self.unsupported("repeat_sweep")

    def detector_probabilities(self, circuit: NoisyCircuit) -> Mapping[int, float]:
        """Detector index -> probability that it fires (circuits with mid-circuit measurement)."""
        raise self.unsupported(
            "detector_probabilities", "the detectors metric runs through budget.analysis.measured"
        )


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
