"""The error model file: TOML in, a validated :class:`ErrorModel` out (docs/error-model.md).

Layout::

    [qubits]                 defaults for every qubit (t1_us, t2_us, readout_error, reset_error)
    [qubits."q[3]"]          one qubit, named as in the circuit; replaces what it names
    [gates.cz]               one gate (duration_ns, knobs, avg_infidelity, family)
    [gates.cz."q[0],q[1]"]   that gate on given qubits, in gate order; inherits gates.cz
    [couplings], [crosstalk], [bleed], [[context]]   context errors (budget/errors/context.py)
    [gates.measure]          measurement and reset (gates.reset): duration_ns and family only

Every rule violation raises one :class:`~budget.problems.ModelError` naming the full key path,
the value, the file and the rule, e.g.
``gates.sx.overrotaton = 0.002 in lab.toml: unknown key; did you mean 'overrotation'?``.
"""

from __future__ import annotations

import dataclasses
import difflib
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from budget.circuit.gates import ALIASES, GATES, exchange_symmetric
from budget.errors.context import SECTIONS, ContextModel, parse_context
from budget.errors.params import (
    LARGE_ANGLE_RAD, PROBES, FieldError, GateParams, QubitParams, key_path, mirrored, split_names,
)
from budget.errors.toml_keys import KeyPaths
from budget.errors.uncertain import central_values
from budget.problems import ModelError, place

__all__ = ["ErrorModel", "GateParams", "QubitParams", "key_path", "load_model"]

_QUBIT_KEYS = tuple(f.name for f in dataclasses.fields(QubitParams))
_GATE_KEYS = tuple(f.name for f in dataclasses.fields(GateParams))
_IDEAL = GateParams()


@dataclass(frozen=True)
class ErrorModel:
    """A validated error model. Build it with :func:`load_model` or :meth:`from_dict`.

    Attributes:
        qubit_defaults: parameters of every qubit not overridden.
        qubit_overrides: qubit name -> its parameters (defaults merged in).
        gates: canonical gate name -> parameters.
        gate_overrides: (gate name, qubit names in gate order) -> parameters (gate table merged in).
        mentions: qubit name -> the key path that names it (for messages when it is not in the circuit).
        source: file name, or ``"<dict>"``.
        calibration: the optional ``[calibration]`` table as parsed (validated by
            :func:`budget.analysis.calibration.read_calibration`), or None.
        context: spectator ZZ, drive crosstalk, pulse bleed and calibration in context
            (:mod:`budget.errors.context`; empty when the file has none of those sections).
    """

    qubit_defaults: QubitParams = QubitParams()
    qubit_overrides: Mapping[str, QubitParams] = field(default_factory=dict)
    gates: Mapping[str, GateParams] = field(default_factory=dict)
    gate_overrides: Mapping[tuple[str, tuple[str, ...]], GateParams] = field(default_factory=dict)
    mentions: Mapping[str, str] = field(default_factory=dict)
    source: str = "<dict>"
    calibration: Mapping[str, Any] | None = None
    context: ContextModel = ContextModel()
    uncertain: tuple = ()
    """:class:`~budget.errors.uncertain.Spread` of every value given with an uncertainty or drift
    (the model itself holds the central values)."""
    device_wide: bool = False
    """The file describes a whole device (top-level ``device_wide = true``): names of qubits of the
    circuit's registers that this circuit does not have are accepted (unused device qubits)."""

    @classmethod
    def from_dict(cls, data: Mapping[str, Any], source: str = "<dict>") -> "ErrorModel":
        """Build and validate a model from the same nested dict the TOML file parses into.

        >>> m = ErrorModel.from_dict({"gates": {"sx": {"duration_ns": 25, "overrotation": 0.002}}})
        >>> m.gate("sx", ("q[0]",)).overrotation
        0.002
        """
        return _Parser(source).model(data)

    def warnings(self) -> tuple[str, ...]:
        """Plain-word warnings about allowed but unusual values, each with its key path."""
        tables = [(f"gates.{name}", gp) for name, gp in sorted(self.gates.items())]
        tables += [(f'gates.{name}."{",".join(qs)}"', gp) for (name, qs), gp in sorted(self.gate_overrides.items())]
        out = []
        for path, gp in tables:
            for knob, value in gp.large_angles().items():
                out.append(f"{self.source}: {path}.{knob} = {value:g} rad is larger than {LARGE_ANGLE_RAD} rad, unusual "
                           "for a calibration error (check that it is in radians and is the error, not the angle)")
        return tuple(out)

    def qubit(self, name: str) -> QubitParams:
        """Parameters of the qubit with this display name."""
        return self.qubit_overrides.get(name, self.qubit_defaults)

    def gate(self, name: str, qubit_names: tuple[str, ...] | list[str] = ()) -> GateParams:
        """Parameters of gate ``name`` on these qubits (gate order). Gates absent from the model are
        ideal with zero duration; a qubit-specific table inherits the gate's and replaces what it names."""
        name = ALIASES.get(name, name)
        hit = self.gate_overrides.get((name, tuple(qubit_names)))
        return hit if hit is not None else self.gates.get(name, _IDEAL)


def load_model(path: str | Path) -> ErrorModel:
    """Read and validate an error-model TOML file.

    Raises:
        ModelError: unreadable file, TOML syntax error (message starts with ``file:line``), or any
            rule violation (message names the key path, value, file and rule).
    """
    source = str(path)
    try:
        text = Path(path).read_bytes().decode("utf-8")
    except OSError as e:
        raise ModelError(f"{source}: cannot read the error model ({e.strerror or e})") from None
    except UnicodeDecodeError as e:
        raise ModelError(f"{source}: the error model is not UTF-8 text ({e.reason} at byte {e.start})") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        m = re.search(r"at line (\d+)", str(e))
        raise ModelError(f"{place(source, int(m.group(1)) if m else None)}: not valid TOML: {e}") from None
    return ErrorModel.from_dict(data, source)


class _Parser(KeyPaths):
    """Walks the nested dict with the current key path so every error can name it (messages and
    plain value checks: :class:`~budget.errors.toml_keys.KeyPaths`)."""

    def __init__(self, source: str):
        super().__init__(source)
        self.mentions: dict[str, str] = {}

    def split(self, path: tuple[str, ...], table: Mapping[str, Any], keys: tuple[str, ...]) -> tuple[dict, dict]:
        """Own keys and named sub-tables (overrides); a scalar unknown key is an error."""
        own, subs = {}, {}
        for k, v in table.items():
            if k in keys:
                own[k] = v
            elif isinstance(v, Mapping) and not (difflib.get_close_matches(k, keys, n=1, cutoff=0.75)
                                                 and not set(k) & set("[](),")):
                subs[k] = v
            else:
                raise self.unknown(path + (k,), v, keys)
        return own, subs

    def build(self, cls: type, merged: dict, base: tuple[str, ...], over: tuple[str, ...] | None,
              own: Mapping[str, Any], gate: str | None = None) -> Any:
        """Construct ``cls(**merged)``; blame a FieldError on the override's key when it set one of
        the fields involved, else on the base table's key."""
        try:
            params = cls(**merged)
            if gate is not None:
                params.check_gate(gate)
            return params
        except FieldError as e:
            path = e.field
            blamed = base
            if over is not None and any(f in own for f in e.involved):
                blamed = over
                if path[0] not in own:
                    path = (next(f for f in e.involved if f in own),)
            value: Any = merged
            for part in path:
                value = value.get(part, e.value) if isinstance(value, Mapping) else e.value
            raise self.fail(blamed + path, value, e.rule) from None

    def model(self, data: Mapping[str, Any]) -> ErrorModel:
        data, spreads = central_values(self.table(("<top>",), data), self.source)
        top = ("qubits", "gates", "calibration", "device_wide") + SECTIONS
        for k, v in data.items():
            if k not in top:
                raise self.unknown((k,), v, top)
        device_wide = data.get("device_wide", False)
        if not isinstance(device_wide, bool):
            raise self.fail(("device_wide",), device_wide, "expected true or false (the file describes a whole device)")
        defaults, overrides = self.qubits(data.get("qubits", {}))
        gates, gate_overrides = self.gates(data.get("gates", {}))
        calibration = self.table(("calibration",), data["calibration"]) if "calibration" in data else None
        context = parse_context(self, data, gates, gate_overrides)
        return ErrorModel(defaults, overrides, gates, gate_overrides, dict(self.mentions), self.source, calibration,
                          context, spreads, device_wide)

    def qubits(self, raw: Any) -> tuple[QubitParams, dict[str, QubitParams]]:
        base = ("qubits",)
        own, subs = self.split(base, self.table(base, raw), _QUBIT_KEYS)
        defaults = self.build(QubitParams, dict(own), base, None, {})
        out = {}
        for name, table in subs.items():
            path = base + (name,)
            extra, nested = self.split(path, table, _QUBIT_KEYS)
            if nested:
                k = next(iter(nested))
                raise self.fail(path + (k,), nested[k], "qubit tables do not nest")
            out[name.strip()] = self.build(QubitParams, {**own, **extra}, base, path, extra)
            self.mentions.setdefault(name.strip(), key_path(path))
        return defaults, out

    def gates(self, raw: Any) -> tuple[dict[str, GateParams], dict]:
        gates: dict[str, GateParams] = {}
        overrides: dict[tuple[str, tuple[str, ...]], GateParams] = {}
        mirrors: dict[tuple[str, tuple[str, ...]], tuple] = {}  # symmetric gates, qubits exchanged
        seen: dict[str, str] = {}
        for raw_name, table in self.table(("gates",), raw).items():
            base = ("gates", raw_name)
            name = ALIASES.get(raw_name, raw_name)
            if name not in GATES and name not in PROBES:
                raise self.unknown(base, table, sorted(GATES) + sorted(PROBES), "not a gate in the gate table", "known gates")
            if name in seen:
                raise self.fail(base, table, f"gate {name} is already described by gates.{seen[name]}")
            seen[name] = raw_name
            own, subs = self.split(base, self.table(base, table), _GATE_KEYS)
            gates[name] = self.build(GateParams, dict(own), base, None, {}, name)
            n = GATES[name].num_qubits if name in GATES else 1
            for key, sub in subs.items():
                path = base + (key,)
                names = split_names(key)
                if len(names) != n or not all(names) or len(set(names)) != n:
                    raise self.fail(path, dict(sub), f"a table for {name} on given qubits is named by {n} distinct "
                                    f"qubit name(s) in gate order, separated by commas (e.g. \"q[0],q[1]\")")
                extra, nested = self.split(path, sub, _GATE_KEYS)
                if nested:
                    k = next(iter(nested))
                    raise self.fail(path + (k,), nested[k], "qubit-specific gate tables do not nest")
                overrides[(name, names)] = self.build(GateParams, {**own, **extra}, base, path, extra, name)
                for q in names:
                    self.mentions.setdefault(q, key_path(path))
                if name in GATES and exchange_symmetric(name):
                    mirrors[(name, names[::-1])] = (own, mirrored(extra), base, path, name)
        for key, (own, extra, base, path, name) in mirrors.items():
            if key not in overrides:  # a table written for the other order wins
                overrides[key] = self.build(GateParams, {**own, **extra}, base, path, extra, name)
        return gates, overrides
