"""Device-properties JSON as general-purpose SDKs write it (docs/import.md).

Two layouts are recognised by their top-level keys:

- **backend properties** (``qubits``, ``gates``, ``general``): ``qubits`` is a list, one per
  qubit index, of ``{"name", "value", "unit"}`` items (``T1``, ``T2`` in their time unit,
  ``readout_error``); ``gates`` a list of ``{"gate", "qubits": [i, ...], "parameters": [...]}``
  with ``gate_error`` (randomized-benchmarking error per gate, read as average gate infidelity)
  and ``gate_length`` in its time unit. Qubit i becomes ``<register>[i]``.
- **calibration metrics** (cirq's ``Calibration`` JSON: ``{"metrics": {"metrics": [{"name",
  "targets", "values": [{"doubleVal": x}]}]}}``): T1 from ``single_qubit_idle_t1_micros``;
  readout from ``single_qubit_p00_error`` and ``single_qubit_p11_error`` (their mean);
  single-qubit error from ``single_qubit_rb_average_error_per_gate`` or, converted,
  ``single_qubit_rb_pauli_error_per_gate``; two-qubit error from ``two_qubit_<gate>_xeb_*_error_per_cycle``
  (average or Pauli), which includes the cycle's single-qubit gates and so bounds the two-qubit
  gate's own error from above. Targets ``q1_2`` / ``1_2`` become ``q(1, 2)`` (cirq's GridQubit name).

Items that the model cannot hold (frequencies, reset, measure, gates outside the gate table,
unknown metrics) are listed as skipped, never silently dropped.
"""

from __future__ import annotations

import json
import re
from collections import defaultdict
from pathlib import Path
from typing import Any, Mapping

from budget.calibdata.records import Entry, check_entry
from budget.calibdata.units import TIME_NS, pauli_to_average
from budget.circuit.gates import ALIASES, GATES
from budget.problems import ModelError

_QUBIT_ITEMS = {"t1": ("t1_us", 1e-3), "t2": ("t2_us", 1e-3), "readout_error": ("readout_error", None)}


def read_json(path: str | Path, *, register: str = "q", one_qubit_gates: tuple[str, ...] = ("sx", "x"),
              two_qubit_gate: str | None = None) -> tuple[list[Entry], list[str]]:
    """Entries and skipped items of a backend-properties or calibration-metrics JSON file."""
    source = Path(path).name
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
    except OSError as e:
        raise ModelError(f"{path}: cannot read the file ({e.strerror or e})") from None
    except (UnicodeDecodeError, json.JSONDecodeError) as e:
        raise ModelError(f"{source}:{getattr(e, 'lineno', '?')}: not valid JSON ({e})") from None
    if isinstance(data, Mapping) and isinstance(data.get("qubits"), list) and isinstance(data.get("gates"), list):
        return _backend(data, source, register)
    if isinstance(data, Mapping) and isinstance(data.get("metrics"), Mapping) and "metrics" in data["metrics"]:
        return _metrics(data["metrics"]["metrics"], source, one_qubit_gates, two_qubit_gate)
    raise ModelError(f"{source}: not a known calibration layout (expected backend properties with 'qubits' and "
                     "'gates' lists, or calibration metrics {\"metrics\": {\"metrics\": [...]}})")


def _value(item: Any, where: str) -> tuple[str, Any, str]:
    if not isinstance(item, Mapping) or "name" not in item or "value" not in item:
        raise ModelError(f"{where} = {str(item)[:60]}: expected an object with 'name', 'value' and 'unit'")
    return str(item["name"]), item["value"], str(item.get("unit", "") or "")


def _time(value: Any, unit: str, to_ns: float, where: str) -> tuple[Any, str]:
    """A time converted to the model's unit (to_ns: ns per model unit), with the note."""
    factor = TIME_NS.get(unit.replace("μ", "µ"))
    if factor is None:
        raise ModelError(f"{where} = {value!r} {unit!r}: unknown time unit; expected one of {', '.join(TIME_NS)}")
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return value, ""  # the model's rule names it
    out = float(f"{value * factor / to_ns:.12g}")
    return out, f"{value:g} {unit}" + ("" if factor == to_ns else f" -> {out:g} {'ns' if to_ns == 1 else 'µs'}")


def _backend(data: Mapping, source: str, register: str) -> tuple[list[Entry], list[str]]:
    entries, skipped = [], []
    for i, items in enumerate(data["qubits"]):
        where = f"{source} qubits[{i}]"
        values, notes = {}, {}
        for j, item in enumerate(items if isinstance(items, list) else [items]):
            name, value, unit = _value(item, f"{where}[{j}]")
            if name.lower() not in _QUBIT_ITEMS:
                skipped.append(f"{where}: {name} not used by the model")
                continue
            key, _ = _QUBIT_ITEMS[name.lower()]
            note = where + f" {name}"
            if key != "readout_error":
                value, how = _time(value, unit, 1e3, f"{where} {name}")
                note += f" = {how}"
            values[key], notes[key] = value, note
        if values:
            entry = Entry(("qubits", f"{register}[{i}]"), values, notes, where)
            check_entry(entry)
            entries.append(entry)
    for k, g in enumerate(data["gates"]):
        where = f"{source} gates[{k}]"
        if not isinstance(g, Mapping) or "gate" not in g or not isinstance(g.get("qubits"), list):
            raise ModelError(f"{where} = {str(g)[:60]}: expected an object with 'gate', 'qubits' and 'parameters'")
        gate = ALIASES.get(str(g["gate"]).lower(), str(g["gate"]).lower())
        if gate not in GATES:
            skipped.append(f"{where}: gate {g['gate']} on {g['qubits']} is not in the gate table")
            continue
        qubits = ",".join(f"{register}[{int(q)}]" for q in g["qubits"])
        values, notes = {}, {}
        for j, item in enumerate(g.get("parameters", [])):
            name, value, unit = _value(item, f"{where}.parameters[{j}]")
            if name == "gate_error":
                values["avg_infidelity"], notes["avg_infidelity"] = value, f"{where} gate_error (average gate infidelity)"
            elif name == "gate_length":
                values["duration_ns"], how = _time(value, unit, 1.0, f"{where} gate_length")
                notes["duration_ns"] = f"{where} gate_length = {how}"
            else:
                skipped.append(f"{where}: {name} not used by the model")
        if values:
            entry = Entry(("gates", gate, qubits), values, notes, where)
            check_entry(entry)
            entries.append(entry)
    return entries, skipped


def _grid(target: str) -> str:
    m = re.fullmatch(r"q?(-?\d+)_(-?\d+)", target)
    return f"q({m.group(1)}, {m.group(2)})" if m else target


def _metrics(metrics: Any, source: str, one_qubit_gates: tuple[str, ...],
             two_qubit_gate: str | None) -> tuple[list[Entry], list[str]]:
    if not isinstance(metrics, list):
        raise ModelError(f"{source} metrics.metrics: expected a list of metrics")
    qubit: dict[str, dict] = defaultdict(dict)
    gate: dict[tuple[str, str], dict] = defaultdict(dict)
    skipped = []
    for k, m in enumerate(metrics):
        where = f"{source} metrics[{k}]"
        if not isinstance(m, Mapping) or "name" not in m:
            raise ModelError(f"{where} = {str(m)[:60]}: expected an object with 'name', 'targets' and 'values'")
        name, targets = str(m["name"]), [_grid(str(t)) for t in m.get("targets", [])]
        vals = [next(iter(v.values())) for v in m.get("values", []) if isinstance(v, Mapping) and v]
        if not vals:
            skipped.append(f"{where}: {name} has no value")
            continue
        value = vals[0]
        value = float(value) if isinstance(value, str) and re.fullmatch(r"[-+0-9.eE]+", value) else value
        if name == "single_qubit_idle_t1_micros" and len(targets) == 1:
            qubit[targets[0]]["t1_us"] = (value, f"{where} {name}")
        elif name in ("single_qubit_p00_error", "single_qubit_p11_error") and len(targets) == 1:
            qubit[targets[0]][name] = (value, where)
        elif name.startswith("single_qubit_rb_") and name.endswith("_error_per_gate") and len(targets) == 1 \
                and ("average" in name or "pauli" in name):
            r, how = (value, "average error") if "average" in name else \
                (float(f"{pauli_to_average(value, 1):.12g}") if isinstance(value, float) else value, f"Pauli error {value} × 2/3")
            for g in one_qubit_gates:
                gate[(g, targets[0])]["avg_infidelity"] = (r, f"{where} {name} ({how})")
        elif (m2 := re.fullmatch(r"two_qubit_(?:parallel_)?(\w+?)_gate_xeb_(average|pauli)_error_per_cycle", name)) \
                and len(targets) == 2:
            g = two_qubit_gate or ALIASES.get(m2.group(1), m2.group(1))
            if g not in GATES:
                skipped.append(f"{where}: {name}: gate {m2.group(1)} is not in the gate table (name one with "
                               "--two-qubit-gate)")
                continue
            r = value if m2.group(2) == "average" or not isinstance(value, float) else float(f"{pauli_to_average(value, 2):.12g}")
            how = "average error" if m2.group(2) == "average" else f"Pauli error {value} × 4/5"
            gate[(g, ",".join(targets))]["avg_infidelity"] = (r, f"{where} {name} ({how}; per cycle, an upper bound)")
        else:
            skipped.append(f"{where}: {name} not used by the model")
    entries = []
    for q, items in qubit.items():
        values = {k: v for k, (v, _) in items.items() if not k.startswith("single_qubit_p")}
        notes = {k: n for k, (_, n) in items.items() if not k.startswith("single_qubit_p")}
        given = [k for k in ("single_qubit_p00_error", "single_qubit_p11_error") if k in items]
        ro = [items[k][0] for k in given]
        if len(ro) == 2 and all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in ro):
            values["readout_error"] = (ro[0] + ro[1]) / 2
            notes["readout_error"] = f"{source}: mean of p00 and p11 errors of {q}"
        elif ro:  # one of the two, or a value the model's rules will refuse with its own message
            values["readout_error"] = ro[0]
            which = given[0].split("_")[2]
            notes["readout_error"] = f"{source}: {which} error of {q} only (the other one is not in the file)"
        place = next(n for _, n in items.values()).split(" ", 2)
        entries.append(Entry(("qubits", q), values, notes, " ".join(place[:2])))
    for (g, qs), items in gate.items():
        values = {k: v for k, (v, _) in items.items()}
        notes = {k: n for k, (_, n) in items.items()}
        entries.append(Entry(("gates", g, qs), values, notes, " ".join(next(iter(notes.values())).split(" ", 2)[:2])))
    for e in entries:
        check_entry(e)
    return entries, skipped
