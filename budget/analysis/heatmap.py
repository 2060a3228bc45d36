"""Where the error comes from, layer by layer and qubit by qubit (first order, no interference).

For every layer as written in the circuit (a layer inside a repeated block appears once, with the
number of times it runs) and every qubit, the map holds

    c(layer, q) = m_layer · [ Σ_{op in layer, q in op} e_op / k_op  +  e_idle(layer, q) ],

with e_op = 1 - F_pro of the operation's whole error channel (coherent, stochastic, depolarizing
and relaxation; :func:`budget.errors.fidelity.operation_process_fidelity`), split evenly over its
k_op qubits, e_idle the process infidelity of the qubit's idle relaxation in that layer, and m the
layer's execution count. Summed over the whole map this is the first-order (small-error) sum of the
naive estimate, Σ m_i e_i ≈ -log Π F_pro. It says where the local error sits; it does not show
coherent build-up or echo between operations (the family shares and depth curves do). A layer's
context errors (spectator ZZ, crosstalk, bleed) count like its operations, e_op split over their
qubits; a layer holding context errors only (a bleed across a seam) adds to the column before it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from budget.errors.fidelity import operation_process_fidelity, relaxation_process_fidelity
from budget.errors.noisy import NoisyCircuit
from budget.memo import ObjectKey

MAX_COLUMNS = 400
"""Layers beyond this many are summed into the last column (noted in ``note``)."""


@dataclass(frozen=True)
class ErrorMap:
    """Layer-by-qubit first-order local infidelity (see module docstring).

    Attributes:
        qubits: qubit names (rows).
        columns: one label per column, ``"L3"`` or ``"L3 ×100"`` for a layer that runs 100 times.
        values: array (qubits, columns) of c(layer, q), dimensionless infidelity.
        note: what was merged, if anything.
    """

    qubits: tuple[str, ...]
    columns: tuple[str, ...]
    values: np.ndarray
    note: str = ""

    @property
    def total(self) -> float:
        return float(self.values.sum())

    def hottest(self, count: int = 3) -> list[tuple[str, str, float]]:
        """The ``count`` largest cells as (qubit, column, value), largest first."""
        flat = np.argsort(self.values, axis=None)[::-1][:count]
        out = []
        for idx in flat:
            q, c = np.unravel_index(idx, self.values.shape)
            if self.values[q, c] > 0:
                out.append((self.qubits[q], self.columns[c], float(self.values[q, c])))
        return out


def error_map(circuit: NoisyCircuit, *, max_columns: int = MAX_COLUMNS) -> ErrorMap:
    """The layer-by-qubit map of first-order local infidelity (see module docstring)."""
    everything = circuit.multiplicities()
    layers = [x for x in everything if not x[0].errors_only]
    n = circuit.num_qubits
    width = min(len(layers), max_columns)
    values = np.zeros((n, max(width, 1)))
    labels: list[str] = []
    cache: dict[ObjectKey, float] = {}
    i = -1
    for layer, mult in everything:
        if not layer.errors_only or i < 0:
            i += 1
        col = min(i, width - 1)
        for nop in layer.sites:
            if ObjectKey(nop) not in cache:
                cache[ObjectKey(nop)] = 1.0 - operation_process_fidelity(nop)
            for q in nop.qubits:
                values[q, col] += mult * cache[ObjectKey(nop)] / len(nop.qubits)
        for r in layer.idle:
            values[r.qubit, col] += mult * (1.0 - relaxation_process_fidelity(r))
        if i < width and len(labels) == i:
            labels.append(f"L{i + 1}" + (f" ×{mult:,}" if mult != 1 else ""))
    note = ""
    if len(layers) > width:
        labels[-1] = f"L{width}–L{len(layers)}"
        note = f"layers {width} to {len(layers)} are summed into the last column"
    return ErrorMap(circuit.qubits, tuple(labels) or ("—",), values, note)
