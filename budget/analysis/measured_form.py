"""The quadratic form of the detector metric in the coherent knobs, for tolerances and cost.

P(some detector fires) ≈ δᵀ A δ + s over the (family, knob) labels of
:func:`budget.errors.knobs.knob_grouping` (each operation's Hamiltonian is Σ_knob δ_knob K_knob to
first order; Blume-Kohout et al., PRX Quantum 3, 020335 (2022)). Here A is read by central second
differences of the metric itself, with every coherent error rebuilt as exp(-i Σ δ K) at the probe
values: s = f(0), A_ii = (f(h e_i) - s)/h², A_ij = (f(h e_i + h e_j) - f(h e_i) - f(h e_j) + s)/(2h²)
(exact for a quadratic f; the step h = 1e-3 rad keeps the quartic terms far below the quadratic
ones; the matrix is then projected on the positive semidefinite cone to remove rounding noise).
f is the exact engine when it fits, else the Pauli-frame engine with coherent amplitude classes
(:mod:`budget.engines.clifford.coherent`: coherent terms that act alike add, first order). Cost: 1 + L + L(L-1)/2 runs for L knobs.
"""

from __future__ import annotations

import dataclasses

import numpy as np
from scipy.linalg import expm

from budget.analysis.detectors import infer_checks
from budget.analysis.folding import scaled
from budget.analysis.measured import detector_values
from budget.engines.clifford.frames import frames
from budget.engines.base import QuadraticForm
from budget.errors.knobs import knob_grouping, knob_terms
from budget.errors.noisy import NoisyCircuit, map_items
from budget.memo import ObjectKey
from budget.pauli_algebra import pauli_sum
from budget.problems import InputError, TooLargeError

STEP_RAD = 1e-3
MAX_KNOBS = 24
"""Largest number of (family, knob) labels (the runs grow as L²/2)."""


def with_knobs(noisy: NoisyCircuit, values: dict[tuple[str, str], float], scale: dict[tuple[str, str], float]) -> NoisyCircuit:
    """The circuit with every coherent error rebuilt from the knob values (per label)."""
    memo: dict[ObjectKey, object] = {}

    def op(nop):
        terms = knob_terms(nop)
        if not terms:
            return nop
        ham: dict[str, float] = {}
        for knob, gen, v in terms:
            key = (nop.family, knob)
            ratio = v / scale[key] if scale[key] else 1.0
            for p, c in gen.items():
                ham[p] = ham.get(p, 0.0) + values.get(key, 0.0) * ratio * c
        h = pauli_sum(ham, len(nop.qubits))
        return dataclasses.replace(nop, coherent=expm(-1j * h), hamiltonian={p: c for p, c in ham.items() if c})

    def layer(it):
        return it.map_sites(op)

    return dataclasses.replace(noisy, body=map_items(noisy.body, layer, memo=memo))


def detector_quadratic_form(noisy: NoisyCircuit, *, engine: str = "auto", detector: int | None = None) -> QuadraticForm:
    """e ≈ δᵀ A δ + s for e = P(some detector fires), or for the firing probability of detector
    number ``detector`` (its place in the list the detector metric reports) (see the module docstring).

    Raises:
        InputError: ``detector`` is not the number of a detector of the circuit.
    """
    _, scale = knob_grouping(noisy)
    labels = tuple(scale)
    if len(labels) > MAX_KNOBS:
        raise TooLargeError(f"{noisy.source}: {len(labels)} coherent knobs: the detector metric's quadratic form "
                            f"takes up to {MAX_KNOBS} (one family per gate: drop --by-pair or --by-operation)")

    def f(vec: dict) -> float:
        anyone, _, each, _ = detector_values(with_knobs(noisy, vec, scale), engine)
        return anyone if detector is None else each[detector]

    if detector is not None:
        count = len(infer_checks(noisy).detectors)
        if isinstance(detector, bool) or not isinstance(detector, int) or not 0 <= detector < count:
            raise InputError(f"detector = {detector!r}: the circuit has detectors 0 to {count - 1}")
    h = STEP_RAD
    floor = f({})
    single = [f({lab: h}) for lab in labels]
    a = np.zeros((len(labels), len(labels)))
    for i in range(len(labels)):
        a[i, i] = (single[i] - floor) / h**2
        for j in range(i):
            a[i, j] = a[j, i] = (f({labels[i]: h, labels[j]: h}) - single[i] - single[j] + floor) / (2 * h**2)
    # rounding noise of the differences (about 1e-16 / h² per rad²) can leave tiny negative
    # eigenvalues where a knob does not act: keep the nearest positive semidefinite matrix
    w, v = np.linalg.eigh(a)
    a = (v * np.clip(w, 0.0, None)) @ v.T
    a = np.where(np.abs(a) < 1e-9 * max(1.0, float(np.abs(a).max(initial=0.0))), 0.0, a)
    return QuadraticForm(labels, a, np.array([scale[lab] for lab in labels], dtype=float), float(floor),
                         _floor_sources(noisy, floor, detector))


def _floor_sources(noisy: NoisyCircuit, floor: float, detector: int | None) -> dict[str, float]:
    zero = with_knobs(noisy, {}, knob_grouping(noisy)[1])
    checks = infer_checks(zero)
    fr = frames(zero, tuple(d.measurements for d in checks.detectors))
    return scaled(fr.any_families if detector is None else fr.detector_families[detector], floor)
