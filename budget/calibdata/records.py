"""Imported values before they become a model: one :class:`Entry` per table row or JSON object.

Each entry is checked on its own with the model's own rules (:meth:`ErrorModel.from_dict` with the
entry's place as the source), so a bad cell gets the same message as a hand-written model, with
the file and row: ``qubits."q[1]".t1_us = -3.0 in lab.csv row 4: must be positive (microseconds)``.
Entries are then merged; a value given twice is refused, naming both places.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Iterable, Mapping

from budget.circuit.gates import ALIASES, GATES, exchange_symmetric
from budget.circuit.ir import StructuredCircuit
from budget.errors.model import ErrorModel, key_path
from budget.errors.params import split_names
from budget.problems import ModelError


@dataclass(frozen=True)
class Entry:
    """Values for one model table, from one place of one file.

    Attributes:
        path: the model table: ``("qubits",)``, ``("qubits", "q[1]")``, ``("gates", "cz")`` or
            ``("gates", "cz", "q[1],q[2]")``.
        values: model key -> value in the model's units (converted already).
        notes: model key -> where the value came from and how it was converted.
        place: file and row or JSON position, for messages (``"lab.csv row 4"``).
    """

    path: tuple[str, ...]
    values: Mapping[str, Any]
    notes: Mapping[str, str]
    place: str

    def nested(self) -> dict:
        """The entry as the nested dict a TOML file parses into."""
        out: dict = dict(self.values)
        for part in reversed(self.path):
            out = {part: out}
        return out


@dataclass(frozen=True)
class Imported:
    """The merged import: model data, provenance per key, and what was reported.

    Attributes:
        data: the nested model dict (TOML layout).
        notes: (table path..., key) -> provenance text.
        sources: the files read, in order.
        skipped: things read but not put in the model (extra columns, gates not in the table), in words.
        off_circuit: entries naming a qubit or pair the circuit does not use (kept in the model).
    """

    data: dict
    notes: dict[tuple[str, ...], str]
    sources: tuple[str, ...]
    skipped: tuple[str, ...] = ()
    off_circuit: tuple[str, ...] = field(default=())


def check_entry(entry: Entry) -> None:
    """Validate one entry with the model's rules; the message names the key path, value and place."""
    ErrorModel.from_dict(entry.nested(), source=entry.place)


def merge(entries: Iterable[Entry]) -> tuple[dict, dict[tuple[str, ...], str]]:
    """Merge entries into one nested dict. Two entries for the same table and key are refused
    (``... given twice: a.csv row 3 and b.json qubits[1]``); two rows of one file for the same table
    are refused as duplicate rows."""
    data: dict = {}
    notes: dict[tuple[str, ...], str] = {}
    where: dict[tuple[str, ...], str] = {}
    rows: dict[tuple[str, tuple[str, ...]], str] = {}
    for e in entries:
        file = e.place.split(" ", 1)[0]
        if (file, e.path) in rows:
            raise ModelError(f"{e.place}: repeats the {_what(e.path)} of {rows[(file, e.path)]} (duplicate rows); "
                             "keep one row per qubit or gate")
        rows[(file, e.path)] = e.place.split(" ", 1)[-1]
        table = data
        for part in e.path:
            table = table.setdefault(part, {})
        for key, value in e.values.items():
            full = e.path + (key,)
            if full in where:
                raise ModelError(f"{key_path(full)} = {value!r} in {e.place}: given twice, also in {where[full]}; "
                                 "keep one source for each value")
            where[full] = e.place
            table[key] = value
            notes[full] = e.notes.get(key, e.place)
    return data, notes


def _what(path: tuple[str, ...]) -> str:
    if path == ("qubits",):
        return "qubit defaults"
    if path[0] == "qubits":
        return f"qubit {path[1]}"
    return f"gate {path[1]}" + (f" on {path[2]}" if len(path) > 2 else "")


def off_circuit(entries: Iterable[Entry], circuit: StructuredCircuit) -> tuple[str, ...]:
    """Entries that name a qubit the circuit does not have, or a gate on qubits where the circuit
    never applies it (either order for symmetric gates). They stay in the model; this says so."""
    names = set(circuit.qubits)
    used: set[tuple[str, tuple[str, ...]]] = set()
    for op in circuit.distinct_operations():
        qs = tuple(circuit.qubits[q] for q in op.qubits)
        used.add((op.gate, qs))
        if exchange_symmetric(op.gate):
            used.add((op.gate, qs[::-1]))
    out = []
    for e in entries:
        if len(e.path) < 2 or e.path == ("gates",):
            continue
        if e.path[0] == "qubits":
            if e.path[1] not in names:
                out.append(f"{e.place}: qubit {e.path[1]} is not on the circuit {circuit.source} (kept in the model)")
            continue
        gate = ALIASES.get(e.path[1], e.path[1])
        if len(e.path) == 3:
            qs = split_names(e.path[2])
            missing = [q for q in qs if q not in names]
            if missing:
                out.append(f"{e.place}: qubit {missing[0]} is not on the circuit {circuit.source} (kept in the model)")
            elif gate in GATES and (gate, qs) not in used:
                out.append(f"{e.place}: the circuit {circuit.source} never applies {gate} to {','.join(qs)} "
                           "(kept in the model)")
    return tuple(out)
