"""``budget model import``: calibration tables in, one validated TOML error model out.

    >>> from budget.calibdata.importer import import_tables, to_toml        # doctest: +SKIP
    >>> imported = import_tables(["qubits.csv", "gates.csv"], circuit="cycle.qasm")
    >>> text = to_toml(imported)

Steps: read each file (:mod:`~budget.calibdata.csv_tables` by ``.csv``/``.tsv``,
:mod:`~budget.calibdata.sdk_json` by ``.json``), each row checked with the model's own rules;
merge (a value given twice is refused); check the merged model once more (rules that span files,
such as T2 <= 2 T1); list rows for qubits or pairs the circuit does not use. The TOML carries a
comment beside every value saying where it came from.
"""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any, Sequence

import tomlkit

from budget.analysis.run import read_circuit
from budget.calibdata.csv_tables import read_csv
from budget.calibdata.records import Entry, Imported, merge, off_circuit
from budget.calibdata.sdk_json import read_json
from budget.errors.model import ErrorModel
from budget.problems import ModelError


def import_tables(
    paths: Sequence[str | Path],
    *,
    circuit: Any = None,
    register: str = "q",
    one_qubit_gates: tuple[str, ...] = ("sx", "x"),
    two_qubit_gate: str | None = None,
    gates_per_clifford: float | None = None,
) -> Imported:
    """Read calibration files into one model.

    Args:
        paths: CSV/TSV tables and JSON files, in order.
        circuit: optional circuit (path or StructuredCircuit) to check the rows against.
        register: register name for the qubit indices of backend-properties JSON (``q`` -> ``q[3]``).
        one_qubit_gates: gates that receive single-qubit error metrics of calibration-metrics JSON.
        two_qubit_gate: the gate table entry for two-qubit metrics (default: named by the metric).
        gates_per_clifford: physical gates per Clifford, for ``error_per_clifford`` columns.

    Raises:
        ModelError: any bad file, cell or value (message names the file and row or position).
    """
    if not paths:
        raise ModelError("model import: give at least one table (CSV or JSON)")
    entries: list[Entry] = []
    skipped: list[str] = []
    for p in paths:
        suffix = Path(p).suffix.lower()
        if suffix in (".csv", ".tsv", ".txt"):
            got, skip = read_csv(p, gates_per_clifford=gates_per_clifford)
        elif suffix == ".json":
            got, skip = read_json(p, register=register, one_qubit_gates=one_qubit_gates, two_qubit_gate=two_qubit_gate)
        else:
            raise ModelError(f"{p}: unknown table type {suffix or '(none)'}; expected .csv, .tsv or .json")
        entries += got
        skipped += skip
    data, notes = merge(entries)
    names = tuple(Path(p).name for p in paths)
    if not notes:  # an empty model would pass for a perfect device
        why = f"; not imported: {'; '.join(skipped)}" if skipped else ""
        raise ModelError(f"model import: no model value in {', '.join(names)} (no qubit or gate row with a value){why}")
    ErrorModel.from_dict(data, source=" + ".join(names))
    off: tuple[str, ...] = ()
    if circuit is not None:
        off = off_circuit(entries, read_circuit(circuit))
    return Imported(data, notes, names, tuple(skipped), off)


def to_toml(imported: Imported) -> str:
    """The model as TOML text, a provenance comment beside every value (tomlkit keeps comments)."""
    doc = tomlkit.document()
    doc.add(tomlkit.comment(f"Error model imported by `budget model import` from {', '.join(imported.sources)}."))
    doc.add(tomlkit.comment("Units: t1_us, t2_us in µs; duration_ns in ns; angles in radians; probabilities plain."))
    doc.add(tomlkit.comment("Each value says where it came from; converted values say how."))
    for line in imported.skipped:
        doc.add(tomlkit.comment(f"not imported: {line}"))
    for line in imported.off_circuit:
        doc.add(tomlkit.comment(f"note: {line}"))
    flag = tomlkit.item(True)  # calibration tables describe the whole device
    flag.comment("the device's tables: circuits on fewer qubits leave some unused")
    doc.add("device_wide", flag)
    for section in ("qubits", "gates"):
        if section in imported.data:
            doc.add(section, _table(imported.data[section], (section,), imported.notes, super_table=section == "gates"))
    text = tomlkit.dumps(doc)
    ErrorModel.from_dict(tomllib.loads(text), source="the written model")  # reads back through the loader
    return text


def _table(data: dict, path: tuple[str, ...], notes: dict, *, super_table: bool = False) -> Any:
    table = tomlkit.table(is_super_table=super_table or None)
    for key in [k for k, v in data.items() if not _is_table(k, v, path)] + [k for k, v in data.items() if _is_table(k, v, path)]:
        value = data[key]
        if _is_table(key, value, path):
            table.add(key, _table(value, path + (key,), notes))
        else:
            item = tomlkit.inline_table() if isinstance(value, dict) else None
            if item is not None:
                item.update(value)
                table.add(key, item)
            else:
                table.add(key, value)
            if (note := notes.get(path + (key,))):
                table[key].comment(note)
    return table


def _is_table(key: str, value: Any, path: tuple[str, ...]) -> bool:
    """A nested table (a qubit or gate table), as opposed to a value that is a small table
    (``pauli``, an uncertainty ``{value, sigma}``), which is written inline."""
    return isinstance(value, dict) and key != "pauli" and not ({"value", "low", "high"} & set(value))
