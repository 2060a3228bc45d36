"""CSV calibration tables: a header row of model keys, one row per qubit or per gate (docs/import.md).

Per-qubit table: a ``qubit`` column (blank = the defaults for every qubit) and any of ``t1_us``,
``t2_us``, ``readout_error``. Per-gate table: a ``gate`` column, an optional ``qubits`` column
(``q[1] q[2]`` in gate order; blank = the gate on every qubit) and any gate key of the model.

Headers may carry a unit instead of the model's (``t1 [ms]``, ``duration (us)``, ``t1_ms``,
``cphase [deg]``, ``readout_error [%]``); values are converted and the TOML says so.
``pauli_error`` and ``error_per_clifford`` columns are converted to ``avg_infidelity``
(:mod:`budget.calibdata.units`). ``<key>_sigma`` gives a normal uncertainty and
``<key>_drift_per_hour`` a drift rate (docs/error-model.md, uncertainty). ``pauli:ZZ`` columns
fill the ``pauli`` table. Blank cells mean "not given". A comma used as decimal separator is
refused (the file is not guessed at); a column that is not a model key is listed as ignored,
unless it looks like a misspelt key, which is refused.
"""

from __future__ import annotations

import csv
import difflib
import io
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from budget.calibdata.records import Entry, check_entry
from budget.calibdata.units import KEY_QUANTITY, QUANTITY_UNITS, clifford_to_gate, pauli_to_average, unit_factor, units_of
from budget.circuit.gates import ALIASES, GATES
from budget.problems import ModelError

_QUBIT_KEYS = ("t1_us", "t2_us", "readout_error")
_GATE_KEYS = ("duration_ns", "overrotation", "axis_error", "z_phase", "cphase", "swap_angle", "avg_infidelity", "family")
_CONVERTED = ("pauli_error", "error_per_clifford")
_SPREADS = ("sigma", "drift_per_hour")


@dataclass(frozen=True)
class Column:
    """How one header maps onto the model: key, unit factor, conversion, spread part."""

    header: str
    key: str | None  # None: ignored column
    factor: float = 1.0
    convert: str | None = None  # "pauli_error" or "error_per_clifford"
    part: str = "value"  # "value", "sigma" or "drift_per_hour"
    pauli: str | None = None
    note: str = ""


def read_csv(path: str | Path, *, gates_per_clifford: float | None = None) -> tuple[list[Entry], list[str]]:
    """Entries (one per row) and the list of ignored columns of one CSV table.

    Raises:
        ModelError: unreadable file, unknown layout, misspelt or unit-less column, comma decimal,
            unknown gate, a value breaking a model rule (message names file and row).
    """
    source = Path(path).name
    try:
        text = Path(path).read_text(encoding="utf-8-sig")
    except OSError as e:
        raise ModelError(f"{path}: cannot read the table ({e.strerror or e})") from None
    except UnicodeDecodeError as e:
        raise ModelError(f"{path}: the table is not UTF-8 text ({e.reason} at byte {e.start})") from None
    first = text.split("\n", 1)[0]
    delimiter = ";" if first.count(";") > first.count(",") else "\t" if "\t" in first and "," not in first else ","
    reader = csv.reader(io.StringIO(text), delimiter=delimiter)
    header = next(reader, None)
    if not header or not any(h.strip() for h in header):
        raise ModelError(f"{source}:1: the table has no header row (column names are the model's keys)")
    names = [h.strip() for h in header]
    low = [n.lower() for n in names]
    if ("qubit" in low) == ("gate" in low):
        raise ModelError(f"{source}:1: a table needs a 'qubit' column (per-qubit table) or a 'gate' column "
                         f"(per-gate table), not {'both' if 'qubit' in low else 'neither'}")
    kind = "qubit" if "qubit" in low else "gate"
    keys = _QUBIT_KEYS if kind == "qubit" else _GATE_KEYS
    ident = {"qubit"} if kind == "qubit" else {"gate", "qubits"}
    columns = [None if n.lower() in ident else _column(n, keys, source, kind) for n in names]
    ignored = [f"{source}: column {c.header!r} ignored ({c.note})" for c in columns if c is not None and c.key is None]
    entries = []
    for row in reader:
        line = reader.line_num
        if not any(cell.strip() for cell in row):
            continue
        if len(row) > len(names):
            raise ModelError(f"{source} row {line}: {len(row)} cells but {len(names)} columns in the header"
                             + (" (a comma used as decimal separator splits a number in two; write 0.002)"
                                if delimiter == "," else ""))
        cells = {low[i]: row[i].strip() if i < len(row) else "" for i in range(len(names))}
        place = f"{source} row {line}"
        entries.append(_entry(kind, cells, columns, row, place, gates_per_clifford))
    return entries, ignored


def _column(name: str, keys: tuple[str, ...], source: str, kind: str) -> Column:
    text = name.strip()
    m = re.fullmatch(r"(.*?)\s*[\[(]\s*([^\])]*?)\s*[\])]", text)
    base, unit = (m.group(1), m.group(2)) if m else (text, None)
    base = base.lower().replace(" ", "_")
    if base.startswith("pauli:") and kind == "gate":
        return Column(name, "pauli", pauli=base.split(":", 1)[1].upper(), note="pauli")
    part = "value"
    for p in _SPREADS:
        if base.endswith("_" + p):
            base, part = base[: -len(p) - 1], p
    if unit is None and base not in keys:  # a unit as the key's suffix: t1_ms, duration_us
        stem, _, suffix = base.rpartition("_")
        for key in keys:
            if key in KEY_QUANTITY and key.rpartition("_")[0] == stem and suffix in QUANTITY_UNITS["time"]:
                base, unit = key, suffix
    if unit is not None and base not in keys:
        base = next((k for k in keys if k.rpartition("_")[0] == base and k in KEY_QUANTITY
                     and KEY_QUANTITY[k][0] == "time"), base)
    convert = None
    if base in _CONVERTED and kind == "gate":
        convert, base = base, "avg_infidelity"
    if base not in keys:
        close = difflib.get_close_matches(base, list(keys) + list(_CONVERTED), n=1, cutoff=0.8)
        if close:
            raise ModelError(f"{source}:1: column {name!r} is not a model key; did you mean {close[0]!r}? "
                             f"valid columns: {', '.join(('qubit',) if kind == 'qubit' else ('gate', 'qubits'))}, "
                             f"{', '.join(keys)}")
        return Column(name, None, note="not a model key")
    factor, note = 1.0, ""
    if unit is not None and base in KEY_QUANTITY:
        f = unit_factor(base, unit.replace("μ", "µ"))
        if f is None:
            raise ModelError(f"{source}:1: column {name!r}: unit {unit!r} does not fit {base} "
                             f"(units: {', '.join(units_of(base))})")
        factor = f
        if f != 1.0:
            note = f"{unit} × {f:g}"
    return Column(name, base, factor, convert, part, None, note)


_COMMA_DECIMAL = re.compile(r"[-+]?\d*,\d+([eE][-+]?\d+)?")


def _number(text: str, column: Column, place: str) -> Any:
    if _COMMA_DECIMAL.fullmatch(text):
        raise ModelError(f"{place}, column {column.header!r}: {text!r} uses a comma as decimal separator; "
                         f"write {text.replace(',', '.')} (numbers are read with a decimal point)")
    try:
        return float(text)
    except ValueError:
        return text  # the model's rule names it ("expected a number (...)")


def _entry(kind: str, cells: dict[str, str], columns: list, row: list[str], place: str,
           gates_per_clifford: float | None) -> Entry:
    if kind == "qubit":
        path: tuple[str, ...] = ("qubits",) + ((cells["qubit"],) if cells["qubit"] else ())
        gate, n = None, 1
    else:
        raw = cells["gate"].lower()
        gate = ALIASES.get(raw, raw)
        if gate not in GATES:
            close = difflib.get_close_matches(gate, sorted(GATES), n=1)
            hint = f"did you mean {close[0]!r}? " if close else ""
            raise ModelError(f"{place}: gate {cells['gate']!r} is not in the gate table; {hint}known gates: "
                             f"{', '.join(sorted(GATES))}")
        n = GATES[gate].num_qubits
        # spaces or commas separate names, except inside parentheses (cirq's grid qubits: "q(1, 2)")
        qs = re.split(r"[\s,]+(?![^()]*\))", cells.get("qubits", "").strip()) if cells.get("qubits", "").strip() else []
        path = ("gates", gate) + ((",".join(qs),) if qs else ())
    values: dict[str, Any] = {}
    spreads: dict[str, dict[str, Any]] = {}
    notes: dict[str, str] = {}
    for col, cell in zip(columns, row):
        if col is None or col.key is None or not cell.strip():
            continue
        cell = cell.strip()
        if col.key == "family":
            values["family"] = cell
            continue
        if col.key == "z_phase" and len(cell.split()) > 1:
            value: Any = [_scaled(_number(c, col, place), col.factor) for c in cell.split()]
        else:
            value = _scaled(_number(cell, col, place), col.factor)
        how = col.note
        if col.convert and isinstance(value, float):
            value, how = _convert(col, value, n, gates_per_clifford, place)
        if col.pauli is not None:
            values.setdefault("pauli", {})[col.pauli] = value
            notes["pauli"] = place
            continue
        if col.part == "value":
            values[col.key] = value
        else:
            spreads.setdefault(col.key, {})[col.part] = value
        notes[col.key] = notes.get(col.key, place) + (f", {col.header} ({how})" if how else "")
    for key, parts in spreads.items():
        if key not in values:
            raise ModelError(f"{place}: {key}_{next(iter(parts))} is given but {key} itself is blank")
        values[key] = {"value": values[key], **parts}
    entry = Entry(path, values, notes, place)
    check_entry(entry)
    return entry


def _scaled(value: Any, factor: float) -> Any:
    return value * factor if isinstance(value, float) and factor != 1.0 else value


def _convert(col: Column, value: float, n: int, gates_per_clifford: float | None, place: str) -> tuple[float, str]:
    if col.convert == "pauli_error":
        return pauli_to_average(value, n), f"Pauli error {value:g} × d/(d+1), d = {2**n}"
    if gates_per_clifford is None:
        raise ModelError(f"{place}, column {col.header!r}: an error per Clifford needs the number of physical gates "
                         "per Clifford (--gates-per-clifford, e.g. 1.875 for one qubit with the usual generators)")
    try:
        return (clifford_to_gate(value, n, gates_per_clifford),
                f"error per Clifford {value:g}, {gates_per_clifford:g} gates per Clifford, depolarizing composition")
    except ValueError as e:
        raise ModelError(f"{place}, column {col.header!r}: {e}") from None
