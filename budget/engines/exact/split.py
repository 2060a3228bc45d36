"""Family shares of an exact value: each family's errors alone, scaled to the joint value.

The exact engine's value e is not a sum over families, so it is split by isolation: e_f is the
exact infidelity of the same circuit with only family f's errors switched on (every other
operation ideal, idle relaxation only for the family ``"idle"``), and

    share_f = e_f · e / Σ_g e_g,

so the shares add up to e and each is at least 0. Σ_g e_g differs from e by the interference
between families: coherent errors of two families that land on the same operator add in amplitude
(e > Σ e_g) or cancel (e < Σ e_g); incoherent errors add to first order. The split keeps each
family's weight as it is alone and spreads the interference in proportion; the record
(:class:`budget.engines.details.FamilySplit`) keeps Σ e_g beside e. For a single family the share
is e itself and nothing runs again.

Cost: one exact run per family with errors, each in the form its own errors need (a family with
only coherent errors runs as a state vector or unitary); the engine's time estimate counts them.
The runs of one form go through the circuit together as one batch (:func:`family_groups`;
budget/engines/exact/runner.py), each member with one family's errors on (:func:`member_matrix`),
and all of them read their value against the joint run's ideal circuit, which they share.
This is the one-at-a-time attribution of sensitivity analysis (Saltelli et al., "Global
Sensitivity Analysis: The Primer", Wiley 2008, ch. 1; recalled from memory), with the parts
rescaled to the joint value as the first-order engines rescale theirs.
"""

from __future__ import annotations

import dataclasses
from typing import Callable

import numpy as np

from budget.circuit.ir import Operation
from budget.circuit.walk import unsupported_item
from budget.memo import ObjectKey
from budget.errors.normal_form import SiteErrors
from budget.errors.noisy import IDLE, NoisyCircuit, NoisyLayer, NoisyOperation, map_items

SHARE_METHOD = "isolation: each family's errors alone, scaled to the joint value"


def error_families(circuit: NoisyCircuit) -> tuple[str, ...]:
    """The families that carry an error (in order of first appearance); ``"idle"`` when an idle
    slot relaxes."""
    seen: dict[str, None] = {}
    for layer in circuit.distinct_layers():
        for nop in layer.sites:
            if nop.has_coherent or nop.has_incoherent:
                seen.setdefault(nop.family, None)
        if any(not r.is_trivial for r in layer.idle):
            seen.setdefault(IDLE, None)
    return tuple(seen)


def without_errors(nop: NoisyOperation) -> NoisyOperation:
    """The operation with every error removed and its ideal gate kept."""
    d = 2 ** len(nop.qubits)
    return dataclasses.replace(
        nop, coherent=np.eye(d, dtype=complex), hamiltonian={}, pauli_rates={}, depolarizing=0.0, relaxation=(),
        knob_generators={}, knob_values={},
    )


def only_family(circuit: NoisyCircuit, family: str) -> NoisyCircuit:
    """``circuit`` with the errors of every family but ``family`` removed (ideal gates kept, so
    the ideal circuit is unchanged); repeats stay folded."""
    cache: dict[ObjectKey, NoisyOperation] = {}

    def operation(nop: NoisyOperation) -> NoisyOperation:
        if nop.family == family:
            return nop
        out = cache.get(ObjectKey(nop))
        if out is None:
            out = cache[ObjectKey(nop)] = without_errors(nop)
        return out

    def layer(it: NoisyLayer) -> NoisyLayer:
        idle = it.idle if family == IDLE else ()
        return it.map_sites(operation, idle=idle)

    def probe(it):  # the exact engine refuses mid-circuit items before it splits
        raise unsupported_item(it, "only_family (gate layers and repeats only)")

    return NoisyCircuit(circuit.qubits, map_items(circuit.body, layer, probe), dict(circuit.readout_error), circuit.source)


def family_groups(circuit: NoisyCircuit, families: tuple[str, ...]) -> dict[bool, tuple[str, ...]]:
    """The families split by whether their errors alone are incoherent (``"idle"`` always is): the
    runs of one group share a register form, so they run as one batch."""
    incoherent = {IDLE}
    for layer in circuit.distinct_layers():
        incoherent.update(nop.family for nop in layer.sites if nop.has_incoherent)
    groups = {flag: tuple(f for f in families if (f in incoherent) == flag) for flag in (False, True)}
    return {flag: group for flag, group in groups.items() if group}


def member_matrix(errors: SiteErrors, gate: Operation | None, families: tuple[str, ...], site_dim: int,
                  matrix: Callable[[SiteErrors, Operation | None], np.ndarray | None]) -> np.ndarray | None:
    """The stack of one site's local matrices across a batch of family runs: ``matrix`` of the site
    for the member of its own family, of the site without its errors (its ideal gate only, as
    :func:`only_family` leaves it) for the others; a site that does nothing in a member (None)
    stands there as the identity. None when it does nothing in any member."""
    clean = matrix(errors._replace(hamiltonian=(), stochastic=(), relaxation=(), unitary=None, groups=()), gate)
    own = matrix(errors, gate) if errors.source.family in families else clean
    if own is None and clean is None:
        return None
    eye = np.eye(site_dim ** len(errors.qubits))
    own, clean = (eye if m is None else m for m in (own, clean))
    return np.stack([own if f == errors.source.family else clean for f in families])


def scaled_shares(isolated: dict[str, float], total: float) -> dict[str, float]:
    """share_f = e_f · total / Σ e_g (see the module docstring); equal parts when every e_f is 0
    at rounding level but the total is not."""
    s = sum(isolated.values())
    if total == 0.0:
        return {f: 0.0 for f in isolated}
    if s <= 0.0:
        return {f: total / len(isolated) for f in isolated}
    return {f: v * total / s for f, v in isolated.items()}

