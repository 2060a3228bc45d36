"""Context errors as error sites of the layer they act in.

A context error is an error-only site: a :class:`~budget.errors.noisy.NoisyOperation` whose ideal
gate is the identity on its support (any qubits, the operations' own included) and whose coherent
part is the error. Attach puts them in ``NoisyLayer.context`` of their circuit layer; every engine
reads them through the layer's normal form (:func:`budget.errors.normal_form.layer_errors`) like
any other error term, with their own family and knob (docs/error-model.md, "Context errors").
Around a circuit layer L (duration T, its longest operation) the order is::

    L: gates, their own errors, idle relaxation | crosstalk(L) | zz(L) | bleed(L -> L+1) | L+1 ...

- **Spectator ZZ** on an unordered pair with rate ζ (kHz), in every layer where the pair is not
  the target of a two-qubit gate: U = diag(1, 1, 1, e^{iφ}), φ = 2π·ζ·T (the ``cphase``
  convention), i.e. H = (φ/4)(ZI + IZ - ZZ). All ZZ terms are diagonal and commute, so their
  order (the sorted pairs) does not matter.
- **Drive crosstalk** source -> target: a driven single-qubit gate G on the source rotates the
  target by f·θ_G about G's own axis (or about x, y, z): the over-rotation unitary of G with
  δ = f·θ_G (:func:`budget.circuit.gates.overrotation_unitary`), after the target's own gate.
  Several sources onto one target: in the order of the source qubits.
- **Pulse bleed** A -> B on qubit q: A in layer L and B in layer L+1 on q; a rotation by f·θ_A
  about A's axis between the two layers (after L's crosstalk and ZZ, before B): the last error
  sites of layer L.

Knobs (for sensitivity and tolerances): ZZ error sites carry ``zz_rad_per_us`` = 2π·ζ·1 µs
with generator (T / 1 µs)·{ZI: 1/4, IZ: 1/4, ZZ: -1/4}, so one value serves every layer duration
and a tolerance converts to kHz as ζ = value / (2π·1 µs) (:func:`knob_in_lab_units`); crosstalk
and bleed carry ``rotation``, the spilled angle f·θ in radians.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Mapping

import numpy as np

from budget.circuit.gates import GATES, spec
from budget.circuit.ir import Operation
from budget.errors.context import ContextModel, Crosstalk
from budget.errors.knobs import coherent_error
from budget.errors.noisy import NoisyOperation
from budget.errors.params import GateParams

ZZ_KNOB = "zz_rad_per_us"
"""Knob of a spectator-ZZ family: the conditional phase per microsecond, 2π·ζ·1 µs, in radians."""
HARDWARE_KNOBS = frozenset({ZZ_KNOB})
"""Knobs the hardware sets: a calibration measures them but does not lower them (a static coupling
is lowered by a coupler or frequency change, or cancelled by an echo). ``budget plan`` and the
calibration cost of ``budget tolerances`` schedule no calibration for them."""
HARDWARE_REMEDY = ("set by the hardware, not lowered by calibration: lower the coupling (coupler or frequency "
                   "change) or cancel it with an echo")
SPILL_KNOB = "rotation"
"""Knob of a crosstalk or bleed family: the spilled rotation angle in radians."""
_CPHASE_GENERATOR = {"ZI": 0.25, "IZ": 0.25, "ZZ": -0.25}  # diag(1,1,1,e^{iφ}) = e^{iφ/4} exp(-iφ(ZI+IZ-ZZ)/4)
_EYE = {k: np.eye(2**k, dtype=complex) for k in (1, 2)}
for _m in _EYE.values():
    _m.setflags(write=False)


def knob_in_lab_units(knob: str, value_rad: float) -> tuple[float, str]:
    """A knob value in the unit a lab sets it in: ``zz_rad_per_us`` as the rate ζ in kHz
    (ζ = value / (2π·1 µs)), every other knob in radians.

    >>> round(knob_in_lab_units(ZZ_KNOB, 2 * math.pi * 0.15)[0], 9), knob_in_lab_units("cphase", 0.1)
    (150.0, (0.1, 'rad'))
    """
    if knob == ZZ_KNOB:
        return value_rad * 1000.0 / (2 * math.pi), "kHz"
    return value_rad, "rad"


def knob_text(value_rad: float, knob: str, fmt=str) -> str:
    """A knob value (today's, a tolerance, a precision) as people read it, the same in every view:
    a knob in radians as ``fmt(value)``; the spectator-ZZ knob with its unit and its rate,
    ``"1.26 rad/µs = 200 kHz"`` (ζ = value / (2π·1 µs), :func:`knob_in_lab_units`).

    >>> knob_text(2 * math.pi * 0.2, ZZ_KNOB, lambda x: f"{x:.3g}"), knob_text(0.01, "cphase")
    ('1.26 rad/µs = 200 kHz', '0.01')
    """
    value, unit = knob_in_lab_units(knob, value_rad)
    return fmt(value_rad) if unit == "rad" else f"{fmt(value_rad)} rad/µs = {fmt(value)} {unit}"


def knob_label(knob: str) -> str:
    """A knob's name in prose and tables: ``"ZZ rate"`` for the spectator-ZZ knob, else the key
    with spaces (``"z phase[0]"``)."""
    return "ZZ rate" if knob == ZZ_KNOB else knob.replace("_", " ")


def context_knob_keys(ctx: ContextModel, gates: Mapping[str, GateParams]) -> frozenset[str]:
    """Every ``"family.knob"`` the context sections define, before any circuit is seen: the base
    families ``zz.zz_rad_per_us``, ``crosstalk.rotation``, ``bleed.rotation`` (a drift key for
    them covers every pair or rule), the named ones the file spells out (``zz A,B`` in both
    orders, ``crosstalk G S->N`` for listed gates, ``bleed A->B Q``) and each ``[[context]]``
    table's knobs under its family (``cz [parallel cz].cphase``).

    >>> from budget.errors.context import ContextModel
    >>> sorted(context_knob_keys(ContextModel(zz_khz={frozenset(("q[0]", "q[1]")): 50.0}), {}))[-1]
    'zz.zz_rad_per_us'
    """
    out: set[str] = set()
    if ctx.zz_default_khz or any(ctx.zz_khz.values()):
        out.add(f"zz.{ZZ_KNOB}")
    for pair, rate in ctx.zz_khz.items():
        if rate:
            a, b = sorted(pair)
            out.update({f"zz {a},{b}.{ZZ_KNOB}", f"zz {b},{a}.{ZZ_KNOB}"})
    for rule in ctx.crosstalk:
        out.add(f"crosstalk.{SPILL_KNOB}")
        out.update(f"crosstalk {g} {rule.source}->{rule.target}.{SPILL_KNOB}" for g in rule.gates or ())
    if ctx.bleed or ctx.bleed_qubit:
        out.add(f"bleed.{SPILL_KNOB}")
    out.update(f"bleed {a}->{b} {q}.{SPILL_KNOB}" for a, b, q in ctx.bleed_qubit)
    for table in ctx.tables:
        base = gates.get(table.gate, GateParams()).family or table.gate
        family = table.fields.get("family") or f"{base} [{table.name}]"
        own = dataclasses.replace(GateParams(), **{k: v for k, v in table.fields.items() if k != "family"})
        out.update(f"{family}.{k}" for k in own.knob_values())
    return frozenset(out)


def zz_phase_rad(zz_khz: float, duration_ns: float) -> float:
    """φ = 2π·ζ·T, ζ in kHz and T in ns (ζ = 100 kHz for 1 µs: 0.6283 rad)."""
    return 2 * math.pi * zz_khz * duration_ns * 1e-6


def rotation_angle(gate: str, params: tuple[float, ...]) -> float:
    """θ of a driven single-qubit gate: its first angle (u2: the hidden π/2), or for a fixed gate
    the θ with gate = exp(-i θ K) up to global phase, K its rotation generator (x: π, sx: π/2, h: π).

    >>> round(rotation_angle("sx", ()), 12), round(rotation_angle("rx", (0.3,)), 12)
    (1.570796326795, 0.3)
    """
    s = spec(gate)
    if gate == "u2":
        return math.pi / 2
    if s.num_params:
        return float(params[0])
    u, k2 = np.asarray(s.matrix(), complex), 2 * np.asarray(s.rotation_generator, complex)
    # u = e^{iα}(cos(θ/2) I - i sin(θ/2) 2K): tr u = 2e^{iα}cos(θ/2), i·tr(u 2K) = 2e^{iα}sin(θ/2)
    a, b = np.trace(u), 1j * np.trace(u @ k2)
    phase = (a if abs(a) > abs(b) else b) / max(abs(a), abs(b))
    return float(2 * math.atan2((b / phase).real, (a / phase).real)) % (2 * math.pi)


def error_site(qubits: tuple[int, ...], kind: str, family: str, unitary: np.ndarray,
               hamiltonian: dict[str, float], knob: str, value: float, generator: dict[str, float],
               duration_ns: float) -> NoisyOperation:
    """An error-only site: ideal gate the identity, coherent part ``unitary``, one knob. Its
    ``duration_ns`` is the time over which the error builds up (the layer for ZZ, the spilling
    pulse for crosstalk and bleed), so that measuring it is priced right; it adds no time to its layer."""
    return NoisyOperation(
        op=Operation("unitary", qubits, label=kind, matrix=_EYE[len(qubits)]),
        family=family,
        coherent=unitary,
        hamiltonian=hamiltonian,
        knob_generators={knob: generator},
        knob_values={knob: value},
        duration_ns=duration_ns,
    )


def zz_operation(pair: tuple[int, int], names: tuple[str, ...], zz_khz: float, duration_ns: float) -> NoisyOperation:
    """The spectator-ZZ error site of one pair for one layer duration."""
    phi = zz_phase_rad(zz_khz, duration_ns)
    scale = duration_ns / 1000.0
    return error_site(
        pair, "zz", f"zz {names[pair[0]]},{names[pair[1]]}",
        np.diag([1, 1, 1, np.exp(1j * phi)]).astype(complex),
        {p: c * phi for p, c in _CPHASE_GENERATOR.items()},
        ZZ_KNOB, zz_phase_rad(zz_khz, 1000.0), {p: c * scale for p, c in _CPHASE_GENERATOR.items()}, duration_ns,
    )


def spill_operation(qubit: int, family: str, kind: str, gate: str, params: tuple[float, ...], fraction: float,
                    axis: str | None = None, duration_ns: float = 0.0) -> NoisyOperation:
    """A rotation by ``fraction`` of the gate's rotation θ, about its own axis (the over-rotation of
    the gate by δ = f·θ) or about ``axis`` (an rx/ry/rz over-rotation of f·θ), on ``qubit``."""
    angle = fraction * rotation_angle(gate, params)
    gate_, params_ = (gate, params) if axis is None else ("r" + axis, (0.0,))
    ce = coherent_error(gate_, params_, GateParams(overrotation=angle), 1)
    return error_site((qubit,), kind, family, ce.unitary, dict(ce.hamiltonian), SPILL_KNOB, angle,
                            dict(ce.generators["overrotation"]), duration_ns)


def crosstalk_terms(noisy_ops, rules: dict[str, list[Crosstalk]], names: tuple[str, ...], index: dict[str, int]) -> list[NoisyOperation]:
    """Drive-crosstalk error sites of one layer, in channel order: ``noisy_ops`` its noisy
    operations, ``rules`` source name -> rules. Each target gets one site per driving neighbour,
    in the order of the source qubits (the k-th spill of every target before the (k+1)-th)."""
    per_target: dict[int, list[NoisyOperation]] = {}
    for nop in sorted(noisy_ops, key=lambda o: o.qubits):
        op = nop.op
        s = GATES.get(op.gate)
        if s is None or s.num_qubits != 1 or s.virtual or (not s.num_params and s.rotation_generator is None):
            continue
        for rule in rules.get(names[op.qubits[0]], ()):
            target = index.get(rule.target)
            if target is None or not rule.applies_to(op.gate):
                continue
            family = f"crosstalk {op.gate} {rule.source}->{rule.target}"
            per_target.setdefault(target, []).append(
                spill_operation(target, family, "crosstalk", op.gate, op.params, rule.fraction, rule.axis, nop.duration_ns))
    depth = max((len(v) for v in per_target.values()), default=0)
    return [v[k] for k in range(depth) for _, v in sorted(per_target.items()) if k < len(v)]
