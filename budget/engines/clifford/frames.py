"""Detector firing probabilities of a Clifford circuit by Pauli frames, at scale (first order).

Every error channel is replaced by its Pauli twirl, p_P = Σ_K |Tr(P K)/d|² over its Kraus
operators K (exact per channel; Wallman & Emerson, PRA 94, 052325 (2016)); idle relaxation by
(γ/4, γ/4, p_z) (Tomita & Svore, PRA 90, 062320 (2014)); readout error flips the recorded bit;
reset error leaves |1>. A Pauli error is pushed through the rest of the circuit as a frame: it
flips a measured bit when its frame anticommutes with the measured Z, a reset clears the frame
on that qubit, and a detector fires when an odd number of its bits flip. stim's detector error
model (Gidney, Quantum 5, 497 (2021)) does this propagation for every error location at once and
lists the mechanisms: probability p_m and the set of detectors it flips.

With independent mechanisms, detector D fires with probability (1 - Π_{m∋D} (1 - 2 p_m)) / 2,
exact for independent mechanisms and equal to Σ_{m∋D} p_m to first order; some detector fires with
probability 1 - Π_{m≠∅} (1 - p_m) (mechanisms that flip disjoint or overlapping sets; cancellation
between two mechanisms is second order). A family's share is the sum of its mechanisms' p_m,
scaled to the total. Coherent errors enter through their twirl here: their build-up within a round
needs the exact engine.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
import stim

from budget.circuit.walk import Kind, counted, kind_of
from budget.engines.clifford.coherent import coherent_classes
from budget.engines.clifford.stim_circuit import Conditioned, to_stim
from budget.errors.fidelity import error_channel_kraus
from budget.errors.noisy import IDLE, NoisyCircuit
from budget.memo import ObjectKey
from budget.pauli_algebra import channel_twirl, pauli_labels

@dataclass(frozen=True)
class FrameResult:
    """Per-detector probabilities and family parts, and P(some detector fires)."""

    detector_probability: tuple[float, ...]
    detector_families: tuple[dict[str, float], ...]
    any_fires: float
    any_families: dict[str, float]
    any_family_rates: dict[str, float]
    """Σ p_m over each family's mechanisms that flip some detector (first order, unscaled)."""
    log_none_fires: float
    """Σ log(1 - p_m) over mechanisms that flip some detector: log P(no detector fires), kept
    apart so that it stays finite when P(some detector fires) rounds to 1."""
    coherent_twirled: bool = False
    """Coherent errors were asked for as amplitudes but twirled: the deferred register was too large."""


class _Noise:
    """Writes the twirled noise of the chosen families into the stim circuit. With ``amplitudes``
    the coherent parts and the relaxation jumps (amplitude damping) are left to
    :func:`coherent_classes`: the rest of each channel is twirled, relaxation keeps only its Z part."""

    def __init__(self, families: set[str] | None, cache: dict[tuple[ObjectKey, bool], dict[str, float]],
                 amplitudes: bool = False):
        self.families = families
        self.cache = cache
        self.amplitudes = amplitudes

    def wants(self, family: str) -> bool:
        return self.families is None or family in self.families

    def relax(self, out, r) -> None:
        if r.is_trivial:
            return
        px, py, pz = r.pauli_twirl()
        out.append("PAULI_CHANNEL_1", [r.qubit], [0.0, 0.0, pz] if self.amplitudes else [px, py, pz])

    def __call__(self, out, item) -> None:
        if isinstance(item, Conditioned):  # stim has no noise conditioned on a recorded bit
            return
        kind = kind_of(item, "measured frames (noise)")
        if kind is Kind.LAYER:
            for nop in item.sites:  # operations, then context errors (error-only sites)
                if not self.wants(nop.family):
                    continue
                rest = _rest(nop) if self.amplitudes else nop
                if rest.has_incoherent or (not self.amplitudes and nop.has_coherent):
                    key = (ObjectKey(nop), self.amplitudes)
                    if key not in self.cache:
                        self.cache[key] = channel_twirl(error_channel_kraus(rest))
                    probs = self.cache[key]
                    name = "PAULI_CHANNEL_1" if len(nop.qubits) == 1 else "PAULI_CHANNEL_2"
                    out.append(name, list(nop.qubits), [probs[lab] for lab in pauli_labels(len(nop.qubits))[1:]])
                if self.amplitudes:
                    for r in nop.relaxation:
                        self.relax(out, r)
        if kind in (Kind.LAYER, Kind.MEASURE, Kind.RESET) and self.wants(IDLE):
            for r in item.idle:
                self.relax(out, r)
        if kind is Kind.RESET and self.wants(item.family):
            for q, e in zip(item.item.qubits, item.reset_error):
                if e:
                    out.append("X_ERROR", [q], [e])


def _rest(nop):
    """The operation's channel without its coherent part and its relaxation (depolarizing and
    stochastic Pauli rates only)."""
    return dataclasses.replace(nop, coherent=np.eye(2 ** len(nop.qubits), dtype=complex), hamiltonian={},
                               relaxation=())


def families_of(circuit: NoisyCircuit) -> list[str]:
    out: list[str] = []

    for it, _ in counted(circuit.body, where="families_of"):
        if it.kind is Kind.LAYER:
            out.extend(n.family for n in it.sites if n.has_coherent or n.has_incoherent)
            if any(not r.is_trivial for r in it.idle):
                out.append(IDLE)
        elif it.kind in (Kind.MEASURE, Kind.RESET):
            errs = it.readout_error if it.kind is Kind.MEASURE else it.reset_error
            if any(errs):
                out.append(it.family)
            if any(not r.is_trivial for r in it.idle):
                out.append(IDLE)
    return list(dict.fromkeys(out))


def _mechanisms(circuit: NoisyCircuit, detectors, families: set[str] | None,
                cache: dict, amplitudes: bool = False) -> list[tuple[float, tuple[int, ...]]]:
    noise = _Noise(families, cache, amplitudes)
    sc = to_stim(circuit, noise, readout=lambda item: noise.wants(item.family))
    m = sc.num_measurements
    sc += stim.Circuit("\n".join(f"DETECTOR {' '.join(f'rec[{i - m}]' for i in ms)}" for ms in detectors))
    dem = sc.detector_error_model(approximate_disjoint_errors=True, flatten_loops=True, allow_gauge_detectors=False)
    out = []
    for inst in dem.flattened():
        if inst.type == "error":
            dets = tuple(t.val for t in inst.targets_copy() if t.is_relative_detector_id())
            out.append((float(inst.args_copy()[0]), dets))
    return out


def frames(circuit: NoisyCircuit, detectors: tuple[tuple[int, ...], ...], *, coherent: bool = False,
           shares: bool = True) -> FrameResult:
    """Firing probability of each detector (record index lists) and family parts (see module);
    ``coherent``: coherent errors by amplitude classes instead of their twirl; ``shares=False``
    leaves the family parts empty (one stim pass instead of one per family)."""
    n = len(detectors)
    cache: dict = {}
    classes = coherent_classes(circuit, detectors) if coherent else []
    too_large = classes is None
    amplitudes = coherent and not too_large
    classes = classes or []
    log_keep = np.zeros(n)
    any_keep = 0.0
    mechanisms = _mechanisms(circuit, detectors, None, cache, amplitudes)
    mechanisms += [(c.probability, c.detectors) for c in classes]
    for p, dets in mechanisms:
        for d in dets:
            log_keep[d] += np.log1p(-2 * p) if p < 0.5 else -np.inf
        if dets:
            any_keep += np.log1p(-p)
    prob = (1 - np.exp(log_keep)) / 2
    any_fires = float(-np.expm1(any_keep))
    names = families_of(circuit) if shares else []
    per_family = np.zeros((len(names), n))
    any_parts: dict[str, float] = dict.fromkeys(names, 0.0)
    for i, fam in enumerate(names):
        for p, dets in _mechanisms(circuit, detectors, {fam}, cache, amplitudes):
            per_family[i, list(dets)] += p
            any_parts[fam] += p if dets else 0.0
    index = {f: i for i, f in enumerate(names)}
    for c in classes if shares else ():
        for fam, part in c.family_parts.items():
            per_family[index[fam], list(c.detectors)] += part
            any_parts[fam] += part if c.detectors else 0.0
    col = per_family.sum(axis=0) if len(names) else np.zeros(n)
    det_fam = tuple(
        {f: float(per_family[i, k] / col[k] * prob[k]) for i, f in enumerate(names) if per_family[i, k] != 0}
        if col[k] > 0 else {}
        for k in range(n)
    )
    any_parts = {f: v for f, v in any_parts.items() if v != 0}
    s = sum(any_parts.values())
    any_families = {f: v / s * any_fires for f, v in any_parts.items()} if s > 0 else {}
    return FrameResult(tuple(float(x) for x in prob), det_fam, any_fires, any_families, dict(any_parts),
                       float(any_keep), too_large)


def has_coherent(circuit: NoisyCircuit) -> bool:
    """Whether some operation (if blocks included) carries a coherent error."""
    return any(nop.has_coherent for layer in circuit.distinct_layers() for nop in layer.operations)
