"""The one Pauli algebra module against stim and cirq (references outside the project).

Products with their phases and commutation are checked against ``stim.PauliString`` and cirq's
``DensePauliString``; matrices and expansions against cirq's Pauli matrices and
``cirq.pauli_expansion``; the Clifford tableau read from a matrix against stim's own tableaus and
cirq's gate unitaries. Random cases are seeded.
"""

from __future__ import annotations

import cirq
import numpy as np
import pytest
import stim

from budget.circuit.clifford_check import clifford_tableau, conjugated_label, local_clifford
from budget.pauli_algebra import (
    channel_twirl,
    commutes,
    hermitian_sign,
    label_bits,
    multiply,
    pauli_coefficients,
    pauli_decompose,
    pauli_labels,
    pauli_matrix,
    pauli_sum,
    pauli_unitary,
    row_product,
    transfer_matrix,
    twirl_probabilities,
)

RNG_SEED = 20261202


def _random_labels(rng: np.random.Generator, n: int, count: int) -> list[str]:
    return ["".join(rng.choice(list("IXYZ"), size=n)) for _ in range(count)]


def _cirq_matrix(label: str) -> np.ndarray:
    """cirq's matrix of a Pauli label (DensePauliString, first letter most significant)."""
    return cirq.unitary(cirq.DensePauliString(label))


@pytest.mark.parametrize("n", [1, 2, 3, 5])
def test_products_and_phases_match_stim_and_cirq(n):
    rng = np.random.default_rng(RNG_SEED + n)
    for a, b in zip(_random_labels(rng, n, 40), _random_labels(rng, n, 40)):
        phase, label = multiply(a, b)
        theirs = stim.PauliString(a) * stim.PauliString(b)  # reference: stim's product, sign in {±1, ±i}
        assert phase == complex(theirs.sign)
        assert label == "".join("IXYZ"[theirs[q]] for q in range(n))
        dense = cirq.DensePauliString(a) * cirq.DensePauliString(b)  # reference: cirq's product
        assert phase == pytest.approx(complex(dense.coefficient), abs=1e-15)
        assert np.allclose(phase * pauli_matrix(label), _cirq_matrix(a) @ _cirq_matrix(b), atol=1e-15)


@pytest.mark.parametrize("n", [1, 2, 4])
def test_commutation_matches_stim_and_cirq(n):
    rng = np.random.default_rng(RNG_SEED + 10 * n)
    seen = set()
    for a, b in zip(_random_labels(rng, n, 60), _random_labels(rng, n, 60)):
        ours = commutes(a, b)
        assert ours == stim.PauliString(a).commutes(stim.PauliString(b))
        assert ours == cirq.commutes(cirq.DensePauliString(a), cirq.DensePauliString(b))
        seen.add(ours)
    assert seen == {True, False}  # both outcomes were exercised


def test_packed_rows_beyond_one_word_match_stim():
    """row_product on 130 qubits (three 64-bit words) gives stim's product and sign."""
    rng = np.random.default_rng(RNG_SEED)
    n, w = 130, 3

    def pack(label):
        x, z, e = label_bits(label)
        bits = lambda b: np.packbits(np.array(b + (0,) * (w * 64 - n), np.uint8), bitorder="little").view(np.uint64)  # noqa: E731
        return bits(x)[None], bits(z)[None], np.array([e], np.uint8)

    for a, b in zip(_random_labels(rng, n, 10), _random_labels(rng, n, 10)):
        x, z, e = row_product(pack(a), pack(b))
        theirs = stim.PauliString(a) * stim.PauliString(b)
        xs, zs = theirs.to_numpy()
        assert np.array_equal(np.unpackbits(x.view(np.uint8), bitorder="little")[:n].astype(bool), xs)
        assert np.array_equal(np.unpackbits(z.view(np.uint8), bitorder="little")[:n].astype(bool), zs)
        # i^e X^x Z^z = i^(e - |x∧z|) · (Hermitian Pauli); stim keeps the same split as its sign
        ys = int(np.sum(xs & zs))
        assert 1j ** ((int(e[0]) - ys) % 4) == pytest.approx(complex(theirs.sign))
        if theirs.sign.imag == 0:
            assert hermitian_sign(x, z, e)[0] == int(theirs.sign.real)


def test_matrices_match_cirq():
    for n in (1, 2, 3):
        for label in pauli_labels(n):
            assert np.array_equal(pauli_matrix(label), _cirq_matrix(label))
    with pytest.raises(ValueError, match="letters I, X, Y, Z"):
        pauli_matrix("XQ")


@pytest.mark.parametrize("n", [1, 2, 3])
def test_expansion_of_random_matrices_matches_cirq(n):
    rng = np.random.default_rng(RNG_SEED + 100 * n)
    d = 2**n
    # a random unitary: cirq.pauli_expansion of the gate is the reference
    u = cirq.testing.random_unitary(d, random_state=RNG_SEED + n)
    ours = pauli_decompose(u)
    theirs = cirq.pauli_expansion(cirq.MatrixGate(u))
    for label, c in ours.items():
        assert c == pytest.approx(complex(theirs.get(label, 0)), abs=1e-12)
    # a random complex matrix: Tr(P M)/d with cirq's Pauli matrices, and the sum rebuilds M
    m = rng.normal(size=(d, d)) + 1j * rng.normal(size=(d, d))
    coeffs = pauli_decompose(m)
    for label, c in coeffs.items():
        assert c == pytest.approx(np.trace(_cirq_matrix(label) @ m) / d, abs=1e-12)
    assert np.allclose(sum(c * _cirq_matrix(label) for label, c in coeffs.items()), m, atol=1e-12)
    # batched form: one row per matrix, same numbers
    stack = pauli_coefficients(np.array([m, u]))
    assert np.allclose(stack[0], list(coeffs.values())) and np.allclose(stack[1], list(ours.values()))
    # the Hermitian part of m round-trips through pauli_sum and pauli_unitary = expm(-i H)
    h = (m + m.conj().T) / 2
    terms = {label: c.real for label, c in pauli_decompose(h).items()}
    assert np.allclose(pauli_sum(terms), h, atol=1e-12)
    assert np.allclose(pauli_unitary(terms), cirq.unitary(cirq.MatrixGate(_expm_ih(h))), atol=1e-10)


def _expm_ih(h: np.ndarray) -> np.ndarray:
    import scipy.linalg  # reference only

    return scipy.linalg.expm(-1j * h)


def test_twirls_match_closed_forms_and_cirq():
    # amplitude damping γ twirls to p_x = p_y = γ/4, p_z = (1 - sqrt(1-γ))/2 - γ/4
    # (Tomita & Svore, PRA 90, 062320 (2014)); Kraus operators from cirq.
    g = 0.03
    p = channel_twirl(cirq.kraus(cirq.amplitude_damp(g)))
    assert p["X"] == pytest.approx(g / 4, rel=1e-12) and p["Y"] == pytest.approx(g / 4, rel=1e-12)
    assert p["Z"] == pytest.approx((1 - np.sqrt(1 - g)) / 2 - g / 4, rel=1e-12)
    # cirq's depolarize(p) on two qubits puts p/15 on every non-identity Pauli
    p2 = channel_twirl(cirq.kraus(cirq.depolarize(0.015, n_qubits=2)))
    assert list(p2) == list(pauli_labels(2)[1:])
    assert all(v == pytest.approx(0.001, rel=1e-12) for v in p2.values())
    # a unitary: |c_P|² with c_P from cirq.pauli_expansion
    u = cirq.testing.random_unitary(4, random_state=RNG_SEED)
    theirs = cirq.pauli_expansion(cirq.MatrixGate(u))
    for label, prob in twirl_probabilities(u).items():
        assert prob == pytest.approx(abs(theirs.get(label, 0)) ** 2, abs=1e-14)


_GATES = [("H", cirq.H), ("S", cirq.S), ("CX", cirq.CNOT)]


def _random_clifford(rng: np.random.Generator, k: int) -> tuple[stim.Tableau, np.ndarray]:
    """A seeded random Clifford: 12 gates drawn from H, S, CX, as stim's tableau and as cirq's
    unitary in double precision (stim's ``to_unitary_matrix`` is complex64, too coarse here)."""
    qs = cirq.LineQubit.range(k)
    text, ops = [], []
    for _ in range(12):
        name, gate = _GATES[rng.integers(0, 3 if k > 1 else 2)]
        targets = [int(t) for t in rng.permutation(k)[: cirq.num_qubits(gate)]]
        text.append(f"{name} {' '.join(map(str, targets))}")
        ops.append(gate.on(*(qs[t] for t in targets)))
    return stim.Circuit("\n".join(text)).to_tableau(), cirq.Circuit(ops).unitary(qubit_order=qs)


@pytest.mark.parametrize("k", [1, 2])
def test_clifford_tableau_from_matrix_matches_stim(k):
    """Random Cliffords, as matrices with a random global phase, give stim's tableau back."""
    rng = np.random.default_rng(RNG_SEED + k)
    for seed in range(12):
        tab, u = _random_clifford(rng, k)
        u = np.exp(0.37j * seed) * u
        assert clifford_tableau(u) == tab
        for label in pauli_labels(k):
            sign, image = conjugated_label(tab, label)
            assert np.allclose(u @ pauli_matrix(label) @ u.conj().T, sign * pauli_matrix(image), atol=1e-12)


@pytest.mark.parametrize("gate", [cirq.H, cirq.S, cirq.CNOT, cirq.CZ, cirq.ISWAP, cirq.SWAP, cirq.Y**0.5])
def test_clifford_images_match_cirq_conjugation(gate):
    u = cirq.unitary(gate)
    k = cirq.num_qubits(gate)
    cl = local_clifford(u)
    gens = ["".join(c if i == j else "I" for i in range(k)) for c in "XZ" for j in range(k)]
    for g, (fx, fz, fe), (bx, bz, be) in zip(gens, cl.forward, cl.backward):
        for (x, z, e), image in (((fx, fz, fe), u @ _cirq_matrix(g) @ u.conj().T),
                                 ((bx, bz, be), u.conj().T @ _cirq_matrix(g) @ u)):
            label = "".join("IXZY"[a + 2 * b] for a, b in zip(x, z))
            assert np.allclose(image, 1j ** ((e - label.count("Y")) % 4) * _cirq_matrix(label), atol=1e-12)


def test_clifford_tolerance_holds_the_gate_not_stims_snap():
    """stim snaps rx(π/2 + 1e-6) to a Clifford; the project's tolerance (1e-9 per coefficient) does
    not, while an offset of 1e-10 still passes."""
    assert clifford_tableau(cirq.unitary(cirq.rx(np.pi / 2 + 1e-6))) is None
    assert clifford_tableau(cirq.unitary(cirq.rx(np.pi / 2 + 1e-10))) is not None
    assert clifford_tableau(cirq.unitary(cirq.T)) is None


def test_transfer_matrix_of_a_clifford_is_stims_signed_permutation():
    tab, u = _random_clifford(np.random.default_rng(RNG_SEED), 2)
    labels = pauli_labels(2)
    m = transfer_matrix(lambda p: u @ p @ u.conj().T, np.array([pauli_matrix(lab) for lab in labels]))
    want = np.zeros((16, 16))
    for v, label in enumerate(labels):
        out = tab(stim.PauliString(label))
        want[labels.index("".join("IXYZ"[out[q]] for q in range(2))), v] = out.sign.real
    assert np.allclose(m, want, atol=1e-12)
