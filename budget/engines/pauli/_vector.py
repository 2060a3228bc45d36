"""The state metric on small registers: read-offs from the ideal state vector (exact).

The state metric needs (a) the coherent generator's action on the input, H_in|0…0> = Σ_x A_x |x>,
and (b) for every jump site at layer t the expectations <P_v>_{ψ_t} of its local Paulis in the
ideal state ψ_t = U_t … U_1 |0…0> right after that layer (:func:`_readout.jump_costs`). On many
qubits the sweep pulls H and every P_v back to the input as sparse sums; on n ≤ VECTOR_QUBITS
qubits each tag can fill 4^n strings (ten qubits, ten Trotter steps: millions of rows), while the
state vector costs 2^n amplitudes per gate. So there:

- (b) ψ is walked forwards and <P_v> = Tr(ρ P_v) from each site's reduced density matrix ρ
  (Nielsen & Chuang, *Quantum Computation and Quantum Information*, 2000, §2.4.3): exact, no tags;
- (a) the coherent sum is carried in the middle frame as for the process metric
  (:mod:`budget.engines.pauli._meet`: each term travels half the depth), applied to the middle
  state ψ_m, and walked back to the input: H_in|0> = V_m† (S_m ψ_m). A Hermitian Pauli
  P = i^{|x∧z|} X^x Z^z acts as (Pψ)[i] = i^{|x∧z|} (-1)^{z·(i⊕x)} ψ[i⊕x]; the rows sharing an X part
  x form one diagonal D_x(j) = Σ_z c_z i^{|x∧z|} (-1)^{z·j}, a Walsh-Hadamard transform of their
  coefficients (n 2^n operations per X part).

Truncation of the middle-frame sum then enters through ‖E ψ_m‖ ≤ ‖E‖_op ≤ Σ|c| of the dropped rows
(the sweeps' l1 drift), as for the pulled sum. Used while 2^n times the executed gates stays below
VECTOR_WORK (repeats are walked cycle by cycle).
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from budget.circuit.walk import Kind, gate_kind
from budget.engines.pauli._local import local_basis
from budget.engines.pauli._plan import PlanBook
from budget.engines.pauli._store import Store, group_equal
from budget.errors.noisy import NoisyCircuit, NoisyItem, NoisyLayer
from budget.pauli_algebra import popcount

VECTOR_QUBITS = 16
"""Largest register read from the state vector."""
VECTOR_WORK = 2e8
"""Largest 2^n x (executed gates + sites) for the state-vector read-offs (a few CPU seconds)."""
VECTOR_LAYERS = 20_000
"""Most executed layers walked on the state vector (one Python step per gate)."""
BLOCK_ENTRIES = 1 << 22
"""X parts x amplitudes transformed at once (bounds the temporaries to about 64 MB)."""
_PHASE = np.array([1, 1j, -1, -1j])


def vector_work(circuit: NoisyCircuit) -> float:
    """2^n x (executed gates + executed operations and idle qubits that may carry jumps)."""
    per = sum(m * (len(layer.operations) + len(layer.sites) + len(layer.idle)) for layer, m in circuit.multiplicities())
    return float(2**circuit.num_qubits) * per


def fits_vector(circuit: NoisyCircuit, qubits: int = VECTOR_QUBITS) -> bool:
    """True when the state-vector read-offs apply (see module docstring)."""
    layers = sum(m for _, m in circuit.multiplicities())
    return circuit.num_qubits <= min(qubits, VECTOR_QUBITS) and layers <= VECTOR_LAYERS and vector_work(circuit) <= VECTOR_WORK


def _apply(psi: np.ndarray, u: np.ndarray, qubits: tuple[int, ...]) -> np.ndarray:
    """ψ (axis q = qubit q) with ``u`` (gate order: first qubit most significant) applied on ``qubits``."""
    k = len(qubits)
    t = np.tensordot(u.reshape((2,) * (2 * k)), psi, axes=(list(range(k, 2 * k)), list(qubits)))
    return np.moveaxis(t, list(range(k)), list(qubits))


def _expectations(psi: np.ndarray, qubits: tuple[int, ...], needed: np.ndarray) -> np.ndarray:
    """Tr(ρ P_v) for the local indices ``needed`` on ``qubits`` (ρ their reduced density matrix)."""
    k = len(qubits)
    m = np.moveaxis(psi, list(qubits), list(range(k))).reshape(2**k, -1)
    rho = m @ m.conj().T
    return np.einsum("vij,ji->v", local_basis(k)[needed], rho).real


def forward(items: tuple[NoisyItem, ...], psi: np.ndarray, visit: Callable | None = None) -> np.ndarray:
    """ψ after ``items`` (repeats cycle by cycle); ``visit(layer, ψ)`` after each layer."""
    for it in items:
        if gate_kind(it, "pauli engine") is Kind.LAYER:
            for nop in it.operations:
                psi = _apply(psi, np.asarray(nop.op.unitary(), complex), nop.qubits)
            if visit is not None:
                visit(it, psi)
        else:
            for _ in range(int(it.count)):
                psi = forward(it.body, psi, visit)
    return psi


def backward(items: tuple[NoisyItem, ...], psi: np.ndarray) -> np.ndarray:
    """V† ψ for V the ideal circuit of ``items``."""
    for it in reversed(items):
        if gate_kind(it, "pauli engine") is Kind.LAYER:
            for nop in reversed(it.operations):
                psi = _apply(psi, np.asarray(nop.op.unitary(), complex).conj().T, nop.qubits)
        else:
            for _ in range(int(it.count)):
                psi = backward(it.body, psi)
    return psi


def zero_state(n: int) -> np.ndarray:
    psi = np.zeros((2,) * n, complex)
    psi[(0,) * n] = 1.0
    return psi


class JumpValues:
    """Collects every jump site's expectations along a forward walk (``visit`` of :func:`forward`);
    ``occurrences`` and ``values`` have the layout of the sweep's jump tags."""

    def __init__(self, book: PlanBook):
        self.book = book
        self.occurrences: list[tuple] = []
        self._values: list[np.ndarray] = []
        self.count = 0

    def __call__(self, layer: NoisyLayer, psi: np.ndarray) -> None:
        for site in self.book(layer).jump_sites:
            qubits = (site.qa,) if site.qb < 0 else (site.qa, site.qb)
            self._values.append(_expectations(psi, qubits, site.needed))
            self.occurrences.append((site, self.count, 1))
            self.count += len(site.needed)

    @property
    def values(self) -> np.ndarray:
        return np.concatenate(self._values) if self._values else np.zeros(0)


def _flat(psi: np.ndarray) -> np.ndarray:
    """Amplitudes indexed by i = Σ_q b_q 2^q (bit q = qubit q, as in the packed Pauli rows)."""
    return psi.transpose(tuple(reversed(range(psi.ndim)))).reshape(-1)


def _tensor(flat: np.ndarray, n: int) -> np.ndarray:
    return flat.reshape((2,) * n).transpose(tuple(reversed(range(n))))


def _walsh(f: np.ndarray, n: int) -> np.ndarray:
    """Walsh-Hadamard transform along the last axis: out[..., j] = Σ_z f[..., z] (-1)^{popcount(z & j)}."""
    g = f.reshape(f.shape[:-1] + (2,) * n)
    for ax in range(f.ndim - 1, g.ndim):
        a, b = np.split(g, 2, axis=ax)
        g = np.concatenate([a + b, a - b], axis=ax)
    return g.reshape(f.shape)


def apply_sum(s: Store, psi: np.ndarray, n: int) -> np.ndarray:
    """(K, 2^n) flat vectors S_k ψ for each column k of the Pauli sum ``s`` (n ≤ 32: one word)."""
    flat = _flat(psi)
    size = 2**n
    out = np.zeros((s.columns, size), complex)
    if len(s) == 0:
        return out
    x, z = s.x[:, 0].astype(np.int64), s.z[:, 0].astype(np.int64)
    coef = s.coef * _PHASE[popcount(s.x & s.z) & 3][:, None]
    inv, first = group_equal(s.x[:, :1])
    xs = x[first]
    idx = np.arange(size)
    per = max(1, BLOCK_ENTRIES // size)
    for lo in range(0, len(first), per):
        hi = min(len(first), lo + per)
        sel = (inv >= lo) & (inv < hi)
        for k in range(s.columns):
            f = np.zeros((hi - lo, size), complex)
            np.add.at(f, (inv[sel] - lo, z[sel]), coef[sel, k])
            u = _walsh(f, n) * flat[None, :]  # D_x ψ, one row per X part
            out[k] += u[np.arange(hi - lo)[:, None], idx[None, :] ^ xs[lo:hi, None]].sum(axis=0)
    return out


def input_amplitudes(s: Store, head: tuple[NoisyItem, ...], psi_mid: np.ndarray, n: int) -> np.ndarray:
    """(2^n - 1, K) amplitudes <x|V_m† S_m,k|ψ_m> for x ≠ 0 (V_m the ideal ``head``)."""
    vecs = apply_sum(s, psi_mid, n)
    cols = [_flat(backward(head, _tensor(v, n))) for v in vecs]
    a = np.stack(cols, axis=1) if cols else np.zeros((2**n, 0), complex)
    return a[1:]
