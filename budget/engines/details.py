"""What an engine says beside its number: small typed records, one per kind of fact.

Every engine fills the records that describe what it computed; the views and the JSON read the
records, never an engine's name. Each record's field names are the keys of ``details`` in the
JSON output (docs/json-schema.md, schema version 2), so :class:`Details` also reads as a flat,
read-only mapping of those keys (``result.details["truncation_bound"]``), with a field left at
None absent from it. A mapping in that layout (the JSON ``details`` object) is read back into the
records by :meth:`Details.from_mapping`; a key no record declares is refused.

Records:
    :class:`Parts`       the parts of a first-order value (coherent and stochastic sums);
    :class:`Validity`    how far a first-order value can be believed (budget/engines/orders.py);
    :class:`Truncation`  the pauli engine's dropped terms and their bound;
    :class:`Folding`     how repeated blocks were folded (:class:`RepeatedBlock` per pauli block);
    :class:`Drilldown`   per-family and per-operation first-order shares;
    :class:`QubitMap`    where the error lands, per qubit;
    :class:`DenseRun`    which dense form the exact engine held;
    :class:`FamilySplit` how the exact engine split its value into family shares;
    :class:`RecordSize`  the size of a measurement record (measured metrics);
    :class:`Choice`      which engine ran and why (added by the front door);
    :class:`ErrorFree`   the circuit carries no error at all.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Iterator


@dataclass(frozen=True)
class Parts:
    """The parts of a first-order value (infidelities unless the name says radians)."""

    coherent_first_order: float | None = None
    coherent_exponentiated: float | None = None
    coherent_leading_order: float | None = None
    stochastic_first_order: float | None = None
    hamiltonian_norm_rad: float | None = None
    coherent_groups: int | None = None
    max_group_amplitude_rad: float | None = None


@dataclass(frozen=True)
class Validity:
    """Cancellation c and second-order share s (budget/engines/orders.py), the norms of the first-
    and second-order generators in radians, and ``second_order``: why it was not formed."""

    cancellation: float | None = None
    second_order_share: float | None = None
    first_order_norm_rad: float | None = None
    second_order_norm_rad: float | None = None
    rests_on_cancellation: bool | None = None
    coherent_without_second_order: float | None = None
    second_order: str | None = None
    coherent_order: str | None = None
    coherent_second_order_resummed: float | None = None


@dataclass(frozen=True)
class Truncation:
    """The pauli engine's truncation: bound on the dropped part, its jump-operator part, the
    threshold in radians, the most terms held, per-observable bounds."""

    truncation_bound: float | None = None
    truncation_bound_jumps: float | None = None
    truncate: float | None = None
    pauli_terms_max: int | None = None
    observable_truncation_bounds: dict[str, float] | None = None


@dataclass(frozen=True)
class FoldedBlock:
    """A repeated block of ``count`` folded by its ``period`` (None: not periodic) in ``walks`` walks."""

    count: int
    period: int | None
    walks: int


@dataclass(frozen=True)
class RepeatedBlock:
    """How the pauli engine took one repeated block of ``count`` cycles, walking ``cycles_walked``:
    ``mode`` "period" (Clifford, folded by its ``period``), "cycles" (walked cycle by cycle),
    "fixed point" (a cycle left every carried sum unchanged: the rest counted without walking) or
    "converged" (two cycles in a row dropped the same terms and added the same sum, so the block's
    contribution grows linearly from there: the rest extrapolated, budget/engines/pauli/_converge.py);
    ``cut_at_meeting_point``: the process metric cut the block in two (modes joined with " + ")."""

    count: int
    mode: str
    cycles_walked: int
    period: int | None = None
    cut_at_meeting_point: bool | None = None

    omit_none = True  # JSON: fields left at None are absent (docs/json-schema.md)


@dataclass(frozen=True)
class Folding:
    """How repeated blocks were folded: by period (``folded_blocks``), by orbits of error terms
    (``orbit_folds``, budget/engines/frame/orbits.py), per block of the pauli engine
    (``repeated_blocks``), and the layers walked in all."""

    folded_blocks: tuple[FoldedBlock, ...] | None = None
    layers_walked: int | None = None
    orbit_folds: tuple[dict, ...] | None = None
    repeated_blocks: tuple[RepeatedBlock, ...] | None = None


@dataclass(frozen=True)
class OperationShare:
    """One operation's first-order share (drill-down): its family, gate, qubit names and line."""

    family: str
    gate: str
    qubits: tuple[str, ...]
    line: int | None
    first_order_share: float


@dataclass(frozen=True)
class Drilldown:
    """First-order shares per family and the operations that contribute most."""

    first_order_family_shares: dict[str, float] | None = None
    top_operations: tuple[OperationShare, ...] | None = None


@dataclass(frozen=True)
class QubitMap:
    """Qubit name -> value (what the value is in ``qubit_map_quantity``), or why it was skipped."""

    qubit_map: dict[str, float] | None = None
    qubit_map_quantity: str | None = None
    qubit_map_skipped: str | None = None


@dataclass(frozen=True)
class DenseRun:
    """The exact engine's dense form (vector, unitary, density, superop), how repeated blocks
    were taken (schur, eig, squaring, none) and the value before clipping to [0, 1]."""

    form: str | None = None
    repeat_methods: str | None = None
    raw_infidelity: float | None = None


@dataclass(frozen=True)
class FamilySplit:
    """How the exact engine split its value: ``share_method``, the number of runs with one
    family's errors on (``family_runs``), and the sum of those isolated infidelities
    (``isolated_sum``; it differs from the total by the interference between families)."""

    share_method: str | None = None
    family_runs: int | None = None
    isolated_sum: float | None = None


@dataclass(frozen=True)
class RecordSize:
    """Measured metrics: detectors, recorded bits, and random (ideal coin-flip) record bits."""

    detectors: int | None = None
    record_length: int | None = None
    random_bits: int | None = None


@dataclass(frozen=True)
class Choice:
    """Which engine ran and why, in one line (budget/engines/door.py)."""

    engine_choice: str | None = None


@dataclass(frozen=True)
class ErrorFree:
    """True when the circuit carries no error: every number is exactly 0."""

    error_free: bool | None = None


RECORDS = {
    "parts": Parts, "validity": Validity, "truncation": Truncation, "folding": Folding, "drilldown": Drilldown,
    "landing": QubitMap, "dense": DenseRun, "split": FamilySplit, "record": RecordSize, "choice": Choice,
    "error_free": ErrorFree,
}
"""Attribute of :class:`Details` -> its record type."""
_KEY_TO_SLOT = {f.name: slot for slot, cls in RECORDS.items() for f in dataclasses.fields(cls)}
_NESTED = {"folded_blocks": FoldedBlock, "top_operations": OperationShare, "repeated_blocks": RepeatedBlock}


@dataclass(frozen=True)
class Details(Mapping):
    """The records of one result; also a read-only mapping of their non-None fields by JSON key."""

    parts: Parts | None = None
    validity: Validity | None = None
    truncation: Truncation | None = None
    folding: Folding | None = None
    drilldown: Drilldown | None = None
    landing: QubitMap | None = None
    dense: DenseRun | None = None
    split: FamilySplit | None = None
    record: RecordSize | None = None
    choice: Choice | None = None
    error_free: ErrorFree | None = None

    @classmethod
    def from_mapping(cls, mapping: Mapping[str, Any]) -> "Details":
        """The records of a mapping in the JSON layout; ValueError on a key no record declares."""
        if isinstance(mapping, Details):
            return mapping
        grouped: dict[str, dict[str, Any]] = {}
        for key, value in mapping.items():
            if key not in _KEY_TO_SLOT:
                raise ValueError(f"details key {key!r}: no details record declares it (budget/engines/details.py)")
            grouped.setdefault(_KEY_TO_SLOT[key], {})[key] = _typed(key, value)
        return cls(**{slot: RECORDS[slot](**fields) for slot, fields in grouped.items()})

    def with_records(self, *records: Any) -> "Details":
        """These details with the given records added or replaced."""
        by_type = {cls: slot for slot, cls in RECORDS.items()}
        return dataclasses.replace(self, **{by_type[type(r)]: r for r in records})

    @property
    def rests_on_cancellation(self) -> bool:
        """Whether a first-order result rests on a cancellation of its first-order terms."""
        return bool(self.validity is not None and self.validity.rests_on_cancellation)

    def to_json(self) -> dict[str, Any]:
        """The flat JSON object of docs/json-schema.md (``details``)."""
        out: dict[str, Any] = {}
        for slot in RECORDS:
            record = getattr(self, slot)
            if record is None:
                continue
            for f in dataclasses.fields(record):
                value = getattr(record, f.name)
                if value is not None:
                    out[f.name] = _json(value)
        return out

    def __getitem__(self, key: str) -> Any:
        slot = _KEY_TO_SLOT.get(key)
        record = getattr(self, slot) if slot is not None else None
        value = getattr(record, key) if record is not None else None
        if value is None:
            raise KeyError(key)
        return _json(value)

    def __iter__(self) -> Iterator[str]:
        return iter(self.to_json())

    def __len__(self) -> int:
        return len(self.to_json())

    __hash__ = None  # type: ignore[assignment]  # records hold dicts


def _typed(key: str, value: Any) -> Any:
    """A JSON-layout value as the record's field holds it (nested records, tuples for lists)."""
    if key in _NESTED and value is not None:
        cls = _NESTED[key]
        return tuple(v if isinstance(v, cls) else cls(**{k: tuple(x) if isinstance(x, list) else x
                                                          for k, x in v.items()}) for v in value)
    if isinstance(value, list):
        return tuple(value)
    return value


def _json(value: Any) -> Any:
    """A record value in its JSON form: records as objects, tuples as lists, NaN and inf as null."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        omit = getattr(value, "omit_none", False)
        return {f.name: _json(getattr(value, f.name)) for f in dataclasses.fields(value)
                if not (omit and getattr(value, f.name) is None)}
    if isinstance(value, dict):
        return {str(k): _json(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json(v) for v in value]
    if hasattr(value, "tolist"):
        return value.tolist()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value
