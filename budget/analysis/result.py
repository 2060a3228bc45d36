"""The result of an error-budget analysis and its JSON form (schema version 2, docs/json-schema.md).

One name per quantity in every view: the *fidelity product (naive)*, the *actual* infidelity
(what the engine computes for the circuit as compiled), the *Pauli-twirled* variant.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from budget.analysis.ratios import safe_ratio
from budget.engines.details import Details
from budget.analysis.verdict import Verdict, classify

SCHEMA_VERSION = 2


def naive_words(metric: str) -> str:
    """What the fidelity product multiplies under ``metric`` (every view says the same): gate and
    idle fidelities for the gate metrics; also (1 - readout error) per recorded bit and
    (1 - reset error) per reset for the detector and record metrics (docs/methods.md)."""
    if metric in ("process", "state"):
        return "1 − Π F_pro over operations and idle slots"
    return "1 − Π F over operations, idle slots, readouts and resets"


@dataclass(frozen=True)
class FamilyShare:
    """One gate family's part of the actual infidelity.

    Attributes:
        name: family name (a gate name, ``"idle"`` for idle relaxation, or gate + qubits).
        operations: executed operations (or idle slots) in the family, repeats included.
        share: the family's share of the actual infidelity; shares add up to it and can be negative
            when a family's coherent error cancels another's.
    """

    name: str
    operations: int
    share: float


@dataclass(frozen=True)
class ReadoutSummary:
    """Readout error, kept apart from gate errors.

    Attributes:
        per_qubit: qubit name -> assignment error probability.
        any_error: probability that at least one of those qubits is misread, 1 - Π(1 - p_q); None
            where readout is part of the metric itself (detector and record metrics).
        assumed: the circuit measures no qubit, and ``per_qubit`` lists every qubit on the
            assumption that each is read once at the end (the common use of an output state).
    """

    per_qubit: dict[str, float]
    any_error: float | None
    assumed: bool = False

    @classmethod
    def from_errors(cls, errors: dict[int, float], names: tuple[str, ...], *, assumed: bool = False) -> "ReadoutSummary":
        per = {names[q]: float(p) for q, p in sorted(errors.items())}
        keep = 1.0
        for p in per.values():
            keep *= 1.0 - p
        return cls(per, 1.0 - keep, assumed)

    @classmethod
    def in_metric(cls) -> "ReadoutSummary":
        """For metrics whose value already includes the readout errors."""
        return cls({}, None)

    def to_dict(self) -> dict:
        return {"per_qubit": self.per_qubit, "any_error": self.any_error, "assumed_read_at_end": self.assumed}


@dataclass(frozen=True)
class DetectorBudget:
    """One detector of the detector metric.

    Attributes:
        measurements: record indices it combines (0-based, program order).
        round: its check round.
        probability: the probability that it fires.
        families: family -> share of ``probability`` (the shares add up to it).
    """

    measurements: tuple[int, ...]
    round: int
    probability: float
    families: dict[str, float]


@dataclass(frozen=True)
class RecordBit:
    """A recorded bit that the ideal circuit fixes, and the probability it comes out different."""

    index: int
    qubit: str
    flip_probability: float


@dataclass(frozen=True)
class BudgetResult:
    """Naive product versus actual infidelity for one circuit, one model, one metric.

    ``actual_infidelity`` is the engine's value, in [0, 1]; when ``beyond_range`` is set the engine
    left the range of its approximation and the value is an order-of-magnitude estimate only:
    the JSON then gives null, and no verdict is drawn.
    """

    source: str
    qubits: int
    operations: int
    layers: int
    cycles: int
    metric: str
    engine: str
    naive_infidelity: float
    actual_infidelity: float
    first_order: float | None
    families: tuple[FamilyShare, ...]
    readout: ReadoutSummary
    warnings: tuple[str, ...] = ()
    observables: dict[str, float | None] = field(default_factory=dict)
    twirled_infidelity: float | None = None
    details: Details = field(default_factory=Details)
    beyond_range: str | None = None
    shares_known: bool = True
    detectors: tuple[DetectorBudget, ...] = ()
    logical: tuple[tuple[int, ...], ...] = ()
    record_bits: tuple[RecordBit, ...] = ()

    def __post_init__(self) -> None:
        if not isinstance(self.details, Details):  # a mapping in the JSON layout (measured metrics)
            object.__setattr__(self, "details", Details.from_mapping(self.details or {}))

    @property
    def in_range(self) -> bool:
        return self.beyond_range is None

    @property
    def shows_shares(self) -> bool:
        """Family shares mean something: the value is in range and an engine in range split it."""
        return self.in_range and self.shares_known

    @property
    def actual(self) -> float | None:
        """The actual infidelity, or None when it is beyond its engine's range."""
        return self.actual_infidelity if self.in_range else None
    truncation_bound: float = 0.0
    """Upper bound on |first_order - untruncated first order| (pauli engine; 0 otherwise)."""

    @property
    def coherent_amplification(self) -> float | None:
        """actual / naive: above 1 coherent build-up, below 1 cancellation (None when either
        is at rounding level or the actual value is beyond its engine's range)."""
        return safe_ratio(self.actual, self.naive_infidelity).value

    @property
    def verdict(self) -> Verdict:
        """The one classification every view shows (:mod:`budget.analysis.verdict`)."""
        return classify(self.naive_infidelity, self.actual_infidelity, twirled=self.twirled_infidelity,
                        beyond_range=self.beyond_range)

    def to_dict(self) -> dict[str, Any]:
        """The documented JSON object (docs/json-schema.md), schema version 2."""
        out: dict[str, Any] = {
            "schema_version": SCHEMA_VERSION,
            "source": self.source,
            "circuit": {
                "qubits": self.qubits,
                "operations": self.operations,
                "layers": self.layers,
                "cycles": self.cycles,
            },
            "metric": self.metric,
            "engine": self.engine,
            "naive": {"infidelity": self.naive_infidelity},
            "actual": {
                "infidelity": self.actual,
                "first_order": self.first_order,
                "in_range": self.in_range,
                "beyond_range": self.beyond_range,
                "estimate": self.actual_infidelity,
                "truncation_bound": self.truncation_bound,
            },
            "coherent_amplification": self.coherent_amplification,
            "verdict": self.verdict.to_dict(),
            "families": [
                {"name": f.name, "operations": f.operations, "share": f.share if self.shows_shares else None}
                for f in self.families
            ],
            "readout": self.readout.to_dict(),
            "observables": [{"observable": k, "error": v} for k, v in self.observables.items()],
            "warnings": list(self.warnings),
            "caution": CAUTION,
        }
        if self.twirled_infidelity is not None:
            out["twirled"] = {"infidelity": self.twirled_infidelity}
        if self.details:
            out["details"] = self.details.to_json()
        if self.metric == "detectors":
            out["detectors"] = [
                {"measurements": list(d.measurements), "round": d.round, "probability": d.probability,
                 "families": [{"name": k, "share": v} for k, v in sorted(d.families.items(), key=lambda kv: -kv[1])]}
                for d in self.detectors
            ]
            out["logical_observables"] = [{"measurements": list(o)} for o in self.logical]
        if self.metric == "record":
            out["record_bits"] = [
                {"index": b.index, "qubit": b.qubit, "flip_probability": b.flip_probability} for b in self.record_bits
            ]
        return out


def circuit_fields(structured: Any, cycles: int) -> dict[str, Any]:
    """The BudgetResult fields that describe the circuit: source, qubits, executed operations and
    layers (repeats and cycles included), cycles."""
    ops, layers = structured.executed_counts()
    return {"source": structured.source, "qubits": structured.num_qubits, "operations": ops, "layers": layers,
            "cycles": cycles}


CAUTION = (
    "These numbers are model predictions from the stated error model; confirm them on the device. "
    "Local lab practice decides calibration policy."
)
