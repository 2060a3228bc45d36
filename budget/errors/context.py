"""Context errors in the model file: spectator ZZ, drive crosstalk, pulse bleed, calibration in context.

A gate's error depends on what happens around it. Four TOML sections describe that
(docs/error-model.md, "Context errors", has the picture of where each error sits in time):

    [couplings]                     zz_khz: default static ZZ rate ζ for every pair that some
                                    two-qubit gate of the circuit acts on
    [couplings."q[0],q[1]"]         zz_khz for one unordered pair (overrides the default)
    [crosstalk."q[2]->q[3]"]        fraction f in [-1, 1] of each drive on q[2] felt by q[3];
                                    optional axis ("x", "y", "z"; default the gate's own) and gates
    [bleed."x->sx"]                 fraction f in [-1, 1] of an x pulse spilling into the sx that
                                    follows it on the same qubit in the next layer
    [bleed."x->sx"."q[4]"]          the same for one qubit (overrides the bleed table)
    [[context]]                     a gate's knobs in a named context: gate, optional qubits,
                                    with (operations in the same layer), all_driven, gate keys

This module only reads and checks them (:func:`parse_context`, called by the model parser); the
error sites they become are built in :mod:`budget.errors.context_terms`.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any, Mapping

from budget.circuit.gates import ALIASES, GATES, exchange_symmetric
from budget.errors.params import FieldError, GateParams, key_path, mirrored, number, split_names

AXES = ("x", "y", "z")
_GATE_KEYS = tuple(f.name for f in dataclasses.fields(GateParams))
_CONTEXT_KEYS = ("name", "gate", "qubits", "with", "all_driven")
_CROSSTALK_KEYS = ("fraction", "axis", "gates")


@dataclass(frozen=True)
class Crosstalk:
    """A drive on ``source`` rotates ``target`` by ``fraction`` of the driving gate's rotation, about
    the gate's own axis (``axis`` None) or about x, y or z; only for ``gates`` (None: every driven
    single-qubit gate)."""

    source: str
    target: str
    fraction: float
    axis: str | None = None
    gates: tuple[str, ...] | None = None

    def applies_to(self, gate: str) -> bool:
        return self.gates is None or gate in self.gates


@dataclass(frozen=True)
class ContextTable:
    """Knobs of ``gate`` replaced while the layer matches: the gate on ``qubits`` (None: any),
    with every operation of ``with_ops`` (gate, qubit names) in the same layer, and, when
    ``all_driven``, every qubit of the circuit driven (a gate that is not virtual) in that layer.
    ``fields`` are GateParams fields, inherited otherwise from the table the operation would use."""

    name: str
    gate: str
    qubits: tuple[str, ...] | None
    with_ops: tuple[tuple[str, tuple[str, ...]], ...]
    all_driven: bool
    fields: Mapping[str, Any]
    path: str

    @property
    def specificity(self) -> int:
        """Number of conditions; the most specific matching table wins."""
        return (self.qubits is not None) + len(self.with_ops) + int(self.all_driven)


@dataclass(frozen=True)
class ContextModel:
    """The context sections of one model (empty by default: no context errors).

    Attributes:
        zz_default_khz: ``[couplings] zz_khz``, for every pair a two-qubit gate acts on; None = none.
        zz_khz: unordered pair of qubit names -> static ZZ rate ζ in kHz.
        crosstalk: drive crosstalk rules, in file order.
        bleed: (previous gate, next gate) -> fraction, for every qubit.
        bleed_qubit: (previous gate, next gate, qubit name) -> fraction (overrides ``bleed``).
        tables: calibration-in-context tables, in file order.
    """

    zz_default_khz: float | None = None
    zz_khz: Mapping[frozenset, float] = field(default_factory=dict)
    crosstalk: tuple[Crosstalk, ...] = ()
    bleed: Mapping[tuple[str, str], float] = field(default_factory=dict)
    bleed_qubit: Mapping[tuple[str, str, str], float] = field(default_factory=dict)
    tables: tuple[ContextTable, ...] = ()

    @property
    def is_empty(self) -> bool:
        return (not self.zz_default_khz and not any(self.zz_khz.values()) and not self.crosstalk
                and not self.bleed and not self.bleed_qubit and not self.tables)


SECTIONS = ("couplings", "crosstalk", "bleed", "context")
"""Top-level keys of the model file read by :func:`parse_context`."""


def parse_context(p, data: Mapping[str, Any], gates: Mapping[str, GateParams], overrides: Mapping) -> ContextModel:
    """Read the context sections of ``data`` with the model parser ``p`` (its ``fail``, ``table``,
    ``unknown``, ``mentions``); ``gates``/``overrides`` are the parsed gate tables (for inheritance)."""
    default, pairs = _couplings(p, data.get("couplings", {}))
    crosstalk = tuple(_crosstalk(p, data.get("crosstalk", {})))
    bleed, bleed_qubit = _bleed(p, data.get("bleed", {}))
    raw = data.get("context", [])
    if not isinstance(raw, list):
        raise p.fail(("context",), raw, "expected an array of tables, written [[context]]")
    tables = tuple(_context(p, ("context", f"{i}"), t, gates, overrides, i) for i, t in enumerate(raw))
    return ContextModel(default, pairs, crosstalk, bleed, bleed_qubit, tables)


def _rate(p, path: tuple[str, ...], value: Any) -> float:
    try:
        return number("zz_khz", value, "kHz", low=0.0)
    except FieldError as e:
        raise p.fail(path, value, e.rule + "; give the magnitude |ζ|, the sign of ζ only flips the phase") from None


def _fraction(p, path: tuple[str, ...], value: Any) -> float:
    try:
        return number("fraction", value, "a fraction of the driving rotation", low=-1.0, high=1.0)
    except FieldError as e:
        raise p.fail(path, value, e.rule) from None


def _names(p, path: tuple[str, ...], key: str, sep: str, count: int, value: Any) -> tuple[str, ...]:
    names = split_names(key, sep)
    if len(names) != count or not all(names) or len(set(names)) != count:
        example = {",": '"q[0],q[1]"', "->": '"q[2]->q[3]"'}[sep]
        raise p.fail(path, value, f"expected {count} distinct qubit names separated by {sep!r} (e.g. {example})")
    for n in names:
        p.mentions.setdefault(n, key_path(path))
    return names


def _couplings(p, raw: Any) -> tuple[float | None, dict[frozenset, float]]:
    base = ("couplings",)
    default, pairs = None, {}
    for k, v in p.table(base, raw).items():
        if k == "zz_khz":
            default = _rate(p, base + (k,), v)
            continue
        if not isinstance(v, Mapping):
            raise p.unknown(base + (k,), v, ("zz_khz",), listing="valid keys here (or a table named by a pair)")
        path = base + (k,)
        pair = frozenset(_names(p, path, k, ",", 2, dict(v)))
        if pair in pairs:
            raise p.fail(path, dict(v), "this pair is already described (pairs are unordered)")
        for kk, vv in v.items():
            if kk != "zz_khz":
                raise p.unknown(path + (kk,), vv, ("zz_khz",))
        if "zz_khz" not in v:
            raise p.fail(path, dict(v), "a coupling table needs zz_khz (kHz)")
        pairs[pair] = _rate(p, path + ("zz_khz",), v["zz_khz"])
    return default, pairs


def _driven_gate(p, path: tuple[str, ...], name: Any, what: str) -> str:
    gate = ALIASES.get(name, name) if isinstance(name, str) else name
    if gate not in GATES:
        raise p.unknown(path, name, sorted(GATES), "not a gate in the gate table", "known gates")
    s = GATES[gate]
    if s.num_qubits != 1 or s.virtual or (not s.num_params and s.rotation_generator is None):
        raise p.fail(path, name, f"{what} needs a driven single-qubit gate with a rotation angle "
                     "(not a virtual Z gate, an identity or a two-qubit gate)")
    return gate


def _crosstalk(p, raw: Any):
    for k, v in p.table(("crosstalk",), raw).items():
        path = ("crosstalk", k)
        table = p.table(path, v)
        source, target = _names(p, path, k, "->", 2, dict(table))
        for kk, vv in table.items():
            if kk not in _CROSSTALK_KEYS:
                raise p.unknown(path + (kk,), vv, _CROSSTALK_KEYS)
        if "fraction" not in table:
            raise p.fail(path, dict(table), "a crosstalk table needs fraction (of the driving rotation, in [-1, 1])")
        axis = table.get("axis")
        if axis is not None and axis not in AXES:
            raise p.fail(path + ("axis",), axis, "expected \"x\", \"y\" or \"z\" (leave it out for the driving gate's own axis)")
        gates = table.get("gates")
        if gates is not None:
            if not isinstance(gates, list) or not gates:
                raise p.fail(path + ("gates",), gates, "expected a non-empty list of gate names")
            gates = tuple(_driven_gate(p, path + ("gates",), g, "crosstalk") for g in gates)
        yield Crosstalk(source, target, _fraction(p, path + ("fraction",), table["fraction"]), axis, gates)


def _bleed_pair(p, path: tuple[str, ...], key: str, value: Any) -> tuple[str, str]:
    parts = key.split("->")
    if len(parts) != 2:
        raise p.fail(path, value, "a bleed table is named by two gates, \"PREVIOUS->NEXT\" (e.g. \"x->sx\")")
    before = _driven_gate(p, path, parts[0].strip(), "the previous gate of a bleed")
    after = ALIASES.get(parts[1].strip(), parts[1].strip())
    if after not in GATES:
        raise p.unknown(path, value, sorted(GATES), f"next gate {after!r} is not in the gate table", "known gates")
    if GATES[after].num_qubits != 1:
        raise p.fail(path, value, "the next gate of a bleed acts on one qubit")
    return before, after


def _bleed(p, raw: Any) -> tuple[dict, dict]:
    every, per_qubit = {}, {}
    for k, v in p.table(("bleed",), raw).items():
        path = ("bleed", k)
        pair = _bleed_pair(p, path, k, v)
        for kk, vv in p.table(path, v).items():
            if kk == "fraction":
                every[pair] = _fraction(p, path + (kk,), vv)
            elif isinstance(vv, Mapping):
                sub = path + (kk,)
                (qubit,) = _names(p, sub, kk, ",", 1, dict(vv))
                for key, val in vv.items():
                    if key != "fraction":
                        raise p.unknown(sub + (key,), val, ("fraction",))
                if "fraction" not in vv:
                    raise p.fail(sub, dict(vv), "a bleed table needs fraction (in [-1, 1])")
                per_qubit[pair + (qubit,)] = _fraction(p, sub + ("fraction",), vv["fraction"])
            else:
                raise p.unknown(path + (kk,), vv, ("fraction",), listing="valid keys here (or a table named by a qubit)")
    return every, per_qubit


def _operation(p, path: tuple[str, ...], text: Any) -> tuple[str, tuple[str, ...]]:
    """``"cz q[3],q[4]"`` -> ("cz", ("q[3]", "q[4]"))."""
    parts = text.split(None, 1) if isinstance(text, str) else []
    gate = ALIASES.get(parts[0], parts[0]) if parts else None
    if len(parts) != 2 or gate not in GATES:
        raise p.fail(path, text, "expected an operation written \"GATE Q1,Q2\" with a gate of the gate table (e.g. \"cz q[3],q[4]\")")
    return gate, _names(p, path, parts[1], ",", GATES[gate].num_qubits, text)


def _context(p, path, raw, gates, overrides, index: int) -> ContextTable:
    table = p.table(path, raw)
    for k, v in table.items():
        if k not in _CONTEXT_KEYS + _GATE_KEYS:
            raise p.unknown(path + (k,), v, _CONTEXT_KEYS + _GATE_KEYS)
    raw_gate = table.get("gate")
    gate = ALIASES.get(raw_gate, raw_gate) if isinstance(raw_gate, str) else raw_gate
    if gate not in GATES:
        raise p.unknown(path + ("gate",), raw_gate, sorted(GATES), "not a gate in the gate table", "known gates")
    qubits = None
    if "qubits" in table:
        if not isinstance(table["qubits"], str):
            raise p.fail(path + ("qubits",), table["qubits"], "expected qubit names in gate order, e.g. \"q[1],q[2]\"")
        qubits = _names(p, path + ("qubits",), table["qubits"], ",", GATES[gate].num_qubits, table["qubits"])
    with_raw = table.get("with", [])
    if not isinstance(with_raw, list):
        raise p.fail(path + ("with",), with_raw, "expected a list of operations, e.g. [\"cz q[3],q[4]\"]")
    with_ops = tuple(_operation(p, path + ("with",), w) for w in with_raw)
    all_driven = table.get("all_driven", False)
    if not isinstance(all_driven, bool):
        raise p.fail(path + ("all_driven",), all_driven, "expected true or false")
    own = {k: v for k, v in table.items() if k in _GATE_KEYS}
    if not own:
        raise p.fail(path, dict(table), f"names no key of gate {gate} to replace ({', '.join(_GATE_KEYS)})")
    if not with_ops and not all_driven:
        raise p.fail(path, dict(table), "a context needs a condition on the layer: with = [...] or all_driven = true "
                     "(for a gate on given qubits alone, use [gates.GATE.\"Q1,Q2\"])")
    base = overrides.get((gate, qubits)) if qubits else None
    try:
        params = dataclasses.replace(base or gates.get(gate, GateParams()), **own)
        params.check_gate(gate)
    except FieldError as e:
        raise p.fail(path + e.field, own.get(e.field[0], e.value), e.rule) from None
    name = table.get("name")
    if name is None:
        conditions = [f"with {w[0]} {','.join(w[1])}" for w in with_ops] + (["all driven"] if all_driven else [])
        name = "; ".join(conditions)
    elif not isinstance(name, str) or not name.strip():
        raise p.fail(path + ("name",), name, "expected a non-empty string")
    fields = {k: getattr(params, k) for k in own}
    return ContextTable(name.strip(), gate, qubits, with_ops, all_driven, fields, key_path(path))


def mirrored_fields(table: ContextTable) -> Mapping[str, Any]:
    """The table's fields for the exchanged qubit order of a symmetric two-qubit gate."""
    out = dict(table.fields)
    if isinstance(out.get("pauli"), tuple):
        out["pauli"] = dict(out["pauli"])
    return mirrored(out) if exchange_symmetric(table.gate) else out
