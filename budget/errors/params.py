"""Per-qubit and per-gate error parameters: small frozen dataclasses that check their own values.

A bad value raises :class:`FieldError` (a ValueError) naming the field, the value and the rule;
the TOML loader (:mod:`budget.errors.model`) turns it into a ModelError with the full key path and
the file name. Gate-dependent rules (which knobs apply to which gate) live in
:meth:`GateParams.check_gate`, since a parameter set does not know its gate by itself.
"""

from __future__ import annotations

import json
import math
import numbers
import re
from dataclasses import dataclass
from typing import Any, Mapping

from budget.circuit.gates import GATES, spec
from budget.errors.noisy import Relaxation


class FieldError(ValueError):
    """A bad value of one field. ``field`` is the key path inside the table, e.g. ("pauli", "XQ");
    ``involved`` lists every field the rule depends on (for T2 > 2 T1: both)."""

    def __init__(self, field: tuple[str, ...], value: Any, rule: str, involved: tuple[str, ...] = ()):
        super().__init__(f"{'.'.join(field)} = {show(value)}: {rule}")
        self.field, self.value, self.rule = field, value, rule
        self.involved = involved or (field[0],)


def show(value: Any) -> str:
    """A short repr of a user value for messages."""
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def number(field: str, value: Any, unit: str, *, low: float | None = None, high: float | None = None,
           positive: bool = False) -> float:
    """A finite real number (bool refused), optionally within [low, high] or > 0."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise FieldError((field,), value, f"expected a number ({unit})")
    v = float(value)
    if not math.isfinite(v):
        raise FieldError((field,), value, f"must be a finite number ({unit})")
    if positive and v <= 0:
        raise FieldError((field,), value, f"must be positive ({unit})")
    if low is not None and v < low or high is not None and v > high:
        raise FieldError((field,), value, f"must lie in [{low}, {high}] ({unit})" if high is not None
                         else f"must not be negative ({unit})")
    return v


MAX_ANGLE_RAD = math.pi
"""A coherent error angle beyond ±π is a different gate, not a miscalibration: refused."""
LARGE_ANGLE_RAD = 0.5
"""Calibration errors are usually a few tens of milliradians; above this a warning asks to check the
units (radians, not degrees) and the value (common practice, no source)."""


def angle(field: str, value: Any) -> float:
    """A coherent error angle in radians: a finite number with |value| <= π."""
    v = number(field, value, "radians")
    if abs(v) > MAX_ANGLE_RAD:
        raise FieldError((field,), value, f"is not a small calibration error: a coherent error angle must lie in "
                         f"[-π, π] rad (|{v:g}| > {MAX_ANGLE_RAD:.4g}); give the error in radians, not the gate's angle")
    return v


def split_names(key: str, sep: str = ",") -> tuple[str, ...]:
    """Qubit names separated by ``sep``; a separator inside parentheses belongs to the name (cirq's
    grid qubits are named ``q(1, 2)``).

    >>> split_names("q(0, 1),q(0, 2)"), split_names("q[0] -> q[1]", "->")
    (('q(0, 1)', 'q(0, 2)'), ('q[0]', 'q[1]'))
    """
    return tuple(n.strip() for n in re.split(re.escape(sep) + r"(?![^()]*\))", key))


@dataclass(frozen=True)
class QubitParams:
    """Error parameters of one qubit.

    Attributes:
        t1_us: energy relaxation time T1 in µs, > 0; None = no amplitude damping.
        t2_us: coherence time T2 (Ramsey/echo, as the lab reports it) in µs, > 0 and <= 2 T1;
            None = no pure dephasing beyond what T1 implies (T2 = 2 T1).
        readout_error: probability of reading the wrong outcome, in [0, 1].
        reset_error: probability that the qubit is left in |1> after a reset, in [0, 1].
    """

    t1_us: float | None = None
    t2_us: float | None = None
    readout_error: float = 0.0
    reset_error: float = 0.0

    def __post_init__(self) -> None:
        for name in ("t1_us", "t2_us"):
            if getattr(self, name) is not None:
                object.__setattr__(self, name, number(name, getattr(self, name), "microseconds", positive=True))
        for name in ("readout_error", "reset_error"):
            object.__setattr__(self, name, number(name, getattr(self, name), "a probability", low=0.0, high=1.0))
        if self.t1_us is not None and self.t2_us is not None and self.t2_us > 2 * self.t1_us:
            raise FieldError(("t2_us",), self.t2_us, f"needs T2 <= 2·T1, but T2 = {self.t2_us:g} µs and "
                             f"2·T1 = {2 * self.t1_us:g} µs (T2 > 2 T1 is unphysical)", ("t2_us", "t1_us"))

    def relaxation(self, qubit: int, duration_ns: float) -> Relaxation:
        """T1/T2 relaxation for ``duration_ns`` nanoseconds.

        γ = 1 - exp(-t/T1) (0 without T1); dephasing factor exp(-t/Tφ), 1/Tφ = 1/T2 - 1/(2 T1)
        (with T2 absent, T2 = 2 T1 and there is no pure dephasing; with T1 absent, 1/Tφ = 1/T2).
        The coherence then decays as exp(-t/T2) overall.
        """
        t_us = duration_ns / 1000.0
        gamma = -math.expm1(-t_us / self.t1_us) if self.t1_us is not None else 0.0
        rate = 0.0
        if self.t2_us is not None:
            rate = 1.0 / self.t2_us - (0.5 / self.t1_us if self.t1_us is not None else 0.0)
        return Relaxation(qubit, float(duration_ns), gamma, math.exp(-t_us * max(rate, 0.0)))


def key_path(parts: tuple[str, ...] | list[str]) -> str:
    """TOML key path, quoting parts that are not bare keys: ``gates.cz."q[0],q[1]".cphase``."""
    return ".".join(p if re.fullmatch(r"[A-Za-z0-9_-]+", p) else json.dumps(p) for p in parts)


def mirrored(extra: Mapping[str, Any]) -> dict[str, Any]:
    """A qubit-specific gate table for the exchanged qubit order of a symmetric gate: per-qubit
    values (``z_phase`` lists, ``pauli`` labels) reversed; everything else is symmetric. Only the
    table's own keys are reversed: values inherited from the gate's table already follow gate order."""
    out = dict(extra)
    if isinstance(out.get("z_phase"), (list, tuple)):
        out["z_phase"] = list(out["z_phase"])[::-1]
    if isinstance(out.get("pauli"), Mapping):
        out["pauli"] = {str(label)[::-1]: h for label, h in out["pauli"].items()}
    return out


PROBES = {"measure": "readout_error", "reset": "reset_error"}
"""Non-unitary instructions with a [gates.NAME] table (duration and family only) and the qubit key
that holds their error."""

_XY = ", ".join(g for g, s in GATES.items() if s.xy_plane)


@dataclass(frozen=True)
class GateParams:
    """Error parameters of one gate (or one gate on given qubits). Angles in radians.

    A coherent knob left as None (``pauli`` empty) is absent: it is no error and no calibration
    knob. Present knobs, zero included, appear in the sensitivity analysis.

    Attributes:
        duration_ns: gate duration in ns, >= 0 (relaxation acts for this long).
        overrotation: extra rotation angle about the gate's own axis.
        axis_error: azimuth by which the rotation axis of an XY-plane rotation is turned.
        z_phase: extra exp(-i φ Z/2) after the gate, one φ per qubit in gate order.
        cphase: extra conditional phase diag(1, 1, 1, e^{iφ}) (two-qubit gates).
        swap_angle: extra exchange exp(-i θ (XX+YY)/2) (two-qubit gates, fSim θ convention).
        pauli: (label, h) pairs: extra exp(-i Σ h_P P), labels in gate order.
        avg_infidelity: incoherent average gate infidelity r (as randomized benchmarking reports).
        family: gate family name for budgets; None = the gate name.
    """

    duration_ns: float = 0.0
    overrotation: float | None = None
    axis_error: float | None = None
    z_phase: tuple[float, ...] | None = None
    cphase: float | None = None
    swap_angle: float | None = None
    pauli: tuple[tuple[str, float], ...] = ()
    avg_infidelity: float = 0.0
    family: str | None = None

    def __post_init__(self) -> None:
        put = lambda name, v: object.__setattr__(self, name, v)  # noqa: E731 (frozen dataclass)
        put("duration_ns", number("duration_ns", self.duration_ns, "nanoseconds", low=0.0))
        put("avg_infidelity", number("avg_infidelity", self.avg_infidelity, "a probability", low=0.0, high=1.0))
        for name in ("overrotation", "axis_error", "cphase", "swap_angle"):
            if getattr(self, name) is not None:
                put(name, angle(name, getattr(self, name)))
        if self.z_phase is not None:
            z = self.z_phase
            if isinstance(z, (list, tuple)):
                put("z_phase", tuple(angle("z_phase", v) for v in z))
            else:
                number("z_phase", z, "radians (a number, or a list with one per qubit)")
                put("z_phase", (angle("z_phase", z),))
        pairs = tuple(self.pauli.items()) if isinstance(self.pauli, dict) else self.pauli
        if not isinstance(pairs, (tuple, list)) or not all(isinstance(p, tuple) and len(p) == 2 for p in pairs):
            raise FieldError(("pauli",), self.pauli, "expected a table of Pauli label = coefficient in radians")
        clean = []
        for label, h in pairs:
            if not isinstance(label, str) or not label or set(label) - set("IXYZ"):
                raise FieldError(("pauli", str(label)), h, "a Pauli label is a string of the letters I, X, Y, Z")
            if set(label) == {"I"}:
                raise FieldError(("pauli", label), h, "the identity label only changes the global phase; remove it")
            try:
                clean.append((label, angle("pauli", h)))
            except FieldError as e:
                raise FieldError(("pauli", label), h, e.rule) from None
        put("pauli", tuple(clean))
        if self.family is not None and (not isinstance(self.family, str) or not self.family.strip()):
            raise FieldError(("family",), self.family, "expected a non-empty string")

    def check_gate(self, name: str) -> None:
        """Check the rules that depend on the gate (knobs that apply, lengths, r <= (d-1)/d);
        ``measure`` and ``reset`` take only ``duration_ns`` and ``family``."""
        if name in PROBES:
            extra = [k for k in ("overrotation", "axis_error", "z_phase", "cphase", "swap_angle")
                     if getattr(self, k) is not None] + (["pauli"] if self.pauli else [])
            extra += ["avg_infidelity"] if self.avg_infidelity else []
            if extra:
                raise FieldError((extra[0],), getattr(self, extra[0]), f"does not apply to {name}: only duration_ns "
                                 f"and family do (its errors are [qubits] {PROBES[name]})")
            return
        s = spec(name)
        n, d = s.num_qubits, 2**s.num_qubits
        if self.overrotation is not None and not s.num_params and s.rotation_generator is None:
            raise FieldError(("overrotation",), self.overrotation, f"does not apply to gate {name}: it has no rotation angle")
        if self.axis_error is not None and not s.xy_plane:
            raise FieldError(("axis_error",), self.axis_error,
                             f"applies only to rotations about an axis in the XY plane ({_XY}), not to {name}")
        for knob in ("cphase", "swap_angle"):
            if getattr(self, knob) is not None and n != 2:
                raise FieldError((knob,), getattr(self, knob), f"applies only to two-qubit gates; {name} acts on one qubit")
        if self.z_phase is not None and len(self.z_phase) != n:
            raise FieldError(("z_phase",), list(self.z_phase), f"needs one value per qubit of {name} ({n}), in gate order")
        for label, h in self.pauli:
            if len(label) != n:
                raise FieldError(("pauli", label), h, f"the label has {len(label)} letter(s) but {name} acts on {n} qubit(s)")
        if self.avg_infidelity > (d - 1) / d:
            raise FieldError(("avg_infidelity",), self.avg_infidelity,
                             f"must lie in [0, (d-1)/d] = [0, {(d - 1) / d:g}] for a {n}-qubit gate (d = {d})")

    def knob_values(self) -> dict[str, float]:
        """Present coherent knobs by name (``z_phase[i]`` for two-qubit gates, ``pauli:XI``)."""
        out: dict[str, float] = {}
        for name in ("overrotation", "axis_error"):
            if getattr(self, name) is not None:
                out[name] = getattr(self, name)
        if self.z_phase is not None:
            if len(self.z_phase) == 1:
                out["z_phase"] = self.z_phase[0]
            else:
                out.update({f"z_phase[{i}]": v for i, v in enumerate(self.z_phase)})
        for name in ("cphase", "swap_angle"):
            if getattr(self, name) is not None:
                out[name] = getattr(self, name)
        out.update({f"pauli:{label}": h for label, h in self.pauli})
        return out

    def large_angles(self) -> dict[str, float]:
        """Present knobs with |angle| above :data:`LARGE_ANGLE_RAD` (allowed, but worth a warning)."""
        return {k: v for k, v in self.knob_values().items() if abs(v) > LARGE_ANGLE_RAD}

    @property
    def is_ideal(self) -> bool:
        """No duration, no incoherent error and no coherent knob (family aside)."""
        return self.duration_ns == 0 and self.avg_infidelity == 0 and not self.knob_values()
