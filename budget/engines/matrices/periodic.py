"""Periodic closed form: a block repeated N times without unrolling it (design.md §4).

For a cycle unitary U_c repeated N times, an error generator H that acts after each cycle, pushed
to the end of the N cycles, sums to

    S_N(H) = Σ_{k<N} U_c^k H U_c^{-k}.

In an orthonormal eigenbasis of U_c (U_c |e_j> = e^{-iε_j} |e_j>, quasi-energies ε_j), element
(i, j) of H is multiplied by the geometric sum

    G_N(ε_i - ε_j) = Σ_{k<N} e^{-ik(ε_i-ε_j)} = e^{-i(N-1)x/2} sin(Nx/2) / sin(x/2),  x = ε_i - ε_j,

which is N where the quasi-energies coincide (the part of H that commutes with the cycle builds
up coherently, ∝ N) and is bounded by 1/|sin(x/2)| elsewhere (echoed away). The eigenbasis comes
from the complex Schur form (scipy.linalg.schur): for a unitary (a normal matrix) the Schur form
is diagonal and the Schur vectors are orthonormal even for degenerate quasi-energies, which
Clifford cycles always have. Quasi-energies closer than DEGENERACY_TOL_RAD count as equal.

Cost: one Schur decomposition, O(d³), then O(d²) per N: the whole infidelity-versus-N curve
comes at once. Physics background: the first-order (Magnus) picture of repeated gate sequences,
e.g. Blume-Kohout et al., "A taxonomy of small Markovian errors", PRX Quantum 3, 020335 (2022).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple, Sequence

import numpy as np
import scipy.linalg

from budget.engines.matrices.apply import as_rows

DEGENERACY_TOL_RAD = 1e-9
"""Quasi-energies (and frequency differences) closer than this are treated as equal."""


def wrap(x: np.ndarray) -> np.ndarray:
    """Angles wrapped to [-π, π)."""
    return (np.asarray(x) + np.pi) % (2 * np.pi) - np.pi


@dataclass(frozen=True)
class CycleBasis:
    """Orthonormal eigenbasis of a cycle unitary: U_c = Z diag(e^{-iε}) Z†.

    Attributes:
        vectors: Z, columns are the eigenvectors (unitary matrix).
        quasi_energies_rad: ε_j in [-π, π).
    """

    vectors: np.ndarray
    quasi_energies_rad: np.ndarray

    @property
    def dim(self) -> int:
        return self.vectors.shape[0]

    def power(self, count: int) -> np.ndarray:
        """U_c^count (any count >= 0, 10**9 included) as a dense matrix."""
        z = self.vectors
        return (z * np.exp(-1j * wrap(count * self.quasi_energies_rad))) @ z.conj().T

    def apply_power(self, count: int, vectors: np.ndarray) -> np.ndarray:
        """U_c^count applied to each row of ``vectors`` (shape (..., d))."""
        z = self.vectors
        coeffs = vectors @ z.conj()  # row r: (Z† v_r)^T
        return (coeffs * np.exp(-1j * wrap(count * self.quasi_energies_rad))) @ z.T

    def clusters(self, tol: float = DEGENERACY_TOL_RAD) -> tuple[np.ndarray, np.ndarray]:
        """(label of each eigenvector, representative quasi-energy of each label): quasi-energies
        within ``tol`` of a neighbour (around the circle) share a label."""
        return group_angles(self.quasi_energies_rad, tol)


def group_angles(angles: np.ndarray, tol: float = DEGENERACY_TOL_RAD) -> tuple[np.ndarray, np.ndarray]:
    """Group angles that lie within ``tol`` of a neighbour on the circle.

    Returns (label per angle, 0..m-1; representative angle per label, the circular mean).

    >>> group_angles(np.array([0.1, -np.pi, 0.1 + 1e-12, np.pi - 1e-12]))[0].tolist()
    [1, 0, 1, 0]
    """
    eps = wrap(np.asarray(angles, dtype=float))
    order = np.argsort(eps)
    s = eps[order]
    labels_sorted = np.cumsum(np.concatenate([[True], np.diff(s) > tol])) - 1
    if len(s) > 1 and labels_sorted[-1] > 0 and (s[0] + 2 * np.pi - s[-1]) <= tol:
        labels_sorted[labels_sorted == labels_sorted[-1]] = 0  # the group straddles ±π
    labels = np.empty_like(labels_sorted)
    labels[order] = labels_sorted
    _, labels = np.unique(labels, return_inverse=True)
    phasors = np.zeros(labels.max() + 1, dtype=complex)
    np.add.at(phasors, labels, np.exp(1j * eps))
    return labels, np.angle(phasors)


def cycle_basis(unitary: np.ndarray) -> CycleBasis:
    """The Schur eigenbasis of a unitary cycle (see module docstring)."""
    t, z = scipy.linalg.schur(np.asarray(unitary, dtype=complex), output="complex")
    return CycleBasis(z, wrap(-np.angle(np.diagonal(t))))


def geometric_sum(x: np.ndarray, count: int, tol: float = DEGENERACY_TOL_RAD) -> np.ndarray:
    """G_N(x) = Σ_{k<N} e^{-ikx}, stable for N up to 10**9 and exactly N where |x| <= tol (mod 2π).

    >>> complex(geometric_sum(np.array(np.pi), 3)).real
    1.0
    """
    x = wrap(np.asarray(x, dtype=float))
    small = np.abs(x) <= tol
    xs = np.where(small, 1.0, x)
    out = np.exp(-0.5j * (count - 1) * xs) * np.sin(count * xs / 2) / np.sin(xs / 2)
    return np.where(small, float(count), out)


def _as_basis(cycle: np.ndarray | CycleBasis) -> CycleBasis:
    return cycle if isinstance(cycle, CycleBasis) else cycle_basis(cycle)


def periodic_sum(cycle: np.ndarray | CycleBasis, h: np.ndarray, count: int) -> np.ndarray:
    """S_N(H) = Σ_{k<N} U_c^k H U_c^{-k} in closed form (``h`` may be stacked, shape (..., d, d)).

    >>> x = np.array([[0, 1], [1, 0]], dtype=complex)
    >>> np.allclose(periodic_sum(x, 0.01 * x, 100), x)   # commutes with the cycle: N·H
    True
    """
    b = _as_basis(cycle)
    z = b.vectors
    eps = b.quasi_energies_rad
    kernel = geometric_sum(eps[:, None] - eps[None, :], count)
    return z @ ((z.conj().T @ h @ z) * kernel) @ z.conj().T


def ramp_sum(x: np.ndarray, count: int, tol: float = DEGENERACY_TOL_RAD) -> np.ndarray:
    """L_N(x) = Σ_{l<N} l e^{-ilx}: N(N-1)/2 where |x| <= tol (mod 2π), else, with z = e^{-ix},
    z (1 - N z^{N-1} + (N-1) z^N) / (1 - z)² (the derivative of the geometric sum).

    >>> complex(ramp_sum(np.array(np.pi), 4)).real   # 0 - 1 + 2 - 3
    -2.0
    """
    x = wrap(np.asarray(x, dtype=float))
    small = np.abs(x) <= tol
    xs = np.where(small, 1.0, x)
    z = np.exp(-1j * xs)
    zn1 = np.exp(-1j * wrap((count - 1) * xs))
    zn = np.exp(-1j * wrap(count * xs))
    out = z * (1 - count * zn1 + (count - 1) * zn) / (1 - z) ** 2
    return np.where(small, count * (count - 1) / 2, out)


def cross_cycle_sum(cycle: np.ndarray | CycleBasis, left: np.ndarray, right: np.ndarray, count: int) -> np.ndarray:
    """The second-order Magnus term between the cycles of N repetitions, in closed form:

        C_N(L, R) = -(i/2) Σ_{0<=k<l<N} [U_c^k L U_c^{-k}, U_c^l R U_c^{-l}],

    k counting the cycles that follow (so cycle k acts after cycle l). C_N(H, H) is what the
    per-cycle errors H of N repetitions add to S_N(H) at second order (Magnus expansion: Blanes,
    Casas, Oteo & Ros, Phys. Rep. 470, 151 (2009); average Hamiltonian theory: Haeberlen & Waugh,
    Phys. Rev. 175, 453 (1968)). In the Schur basis (L̃ = Z†LZ, x_ab = ε_a - ε_b) element (a, b)
    is Σ_c [L̃_ac R̃_cb K(x_ac, x_cb) - R̃_ac L̃_cb K(x_cb, x_ac)] with
    K(x, y) = Σ_{k<l} e^{-ikx - ily} = (G_N(y) - G_N(x + y)) / (1 - e^{-ix}) for x ≠ 0 and
    L_N(y) (:func:`ramp_sum`) for x = 0, so C_N is a few d x d matrix products: O(d³) for any N.

    >>> x = np.array([[0, 1], [1, 0]], dtype=complex); z = np.diag([1.0 + 0j, -1.0])
    >>> np.allclose(cross_cycle_sum(np.eye(2), x, z, 5), -0.5j * 10 * (x @ z - z @ x))
    True
    """
    b = _as_basis(cycle)
    zv = b.vectors
    eps = b.quasi_energies_rad
    x = wrap(eps[:, None] - eps[None, :])
    deg = np.abs(x) <= DEGENERACY_TOL_RAD
    inv = np.where(deg, 0.0, 1.0 / np.where(deg, 1.0, 1 - np.exp(-1j * x)))
    g = geometric_sum(x, count)
    ramp = ramp_sum(x, count)
    lt = zv.conj().T @ np.asarray(left, dtype=complex) @ zv
    rt = zv.conj().T @ np.asarray(right, dtype=complex) @ zv
    la, ld = lt * inv, lt * deg
    t1 = la @ (rt * g) - g * (la @ rt) + ld @ (rt * ramp)
    t2 = (rt * g) @ la - g * (rt @ la) + (rt * ramp) @ ld
    return zv @ (-0.5j * (t1 - t2)) @ zv.conj().T


def principal_generator(error: np.ndarray) -> np.ndarray | None:
    """H = i log E for a unitary error E near the identity (principal branch, traceless: the
    global phase removed), or None when an eigenphase lies beyond π/2 from their mean (then the
    branch may be the wrong one and callers keep their expansion)."""
    t, z = scipy.linalg.schur(np.asarray(error, dtype=complex), output="complex")
    phases = -np.angle(np.diagonal(t))
    mean = np.angle(np.mean(np.exp(1j * phases)))
    phases = wrap(phases - mean)
    if np.max(np.abs(phases)) > np.pi / 2:
        return None
    return (z * phases) @ z.conj().T


def exact_coherent_curve(
    ideal: CycleBasis, noisy: CycleBasis, counts: Sequence[int], *, state: np.ndarray | None = None
) -> list[float | None]:
    """Coherent infidelity of N repetitions from the ideal and noisy cycle unitaries (their Schur
    bases; powers for any N), exponentiated from :func:`principal_generator` of E_N = Ũ^N U^{-N}
    (None where that is not safe), for each N in ``counts``."""
    out: list[float | None] = []
    for n in counts:
        u, v = ideal.power(int(n)), noisy.power(int(n))
        h = principal_generator(v @ u.conj().T)
        if h is None:
            out.append(None)
            continue
        psi = None if state is None else u @ state
        out.append(coherent_infidelity(h, psi)[0])
    return out


class AccumulationSplit(NamedTuple):
    """How much of a per-cycle generator builds up over repetitions and how much is echoed away.

    Both in radians, normalised like a Pauli amplitude (||·||_F/sqrt(d)), so that the first-order
    process infidelity after N cycles is exactly e(N) = (N · growing_rad)² + b(N)² with
    0 <= b(N) <= bounded_rad for every N.

    Attributes:
        growing_rad: the part of H that commutes with the cycle (its time average).
        bounded_rad: the largest size the rest can ever reach, sqrt(Σ |H̃_ij|² / sin²(x_ij/2)/d)
            over non-degenerate pairs.
    """

    growing_rad: float
    bounded_rad: float


def accumulation_split(cycle: np.ndarray | CycleBasis, h: np.ndarray) -> AccumulationSplit:
    """Split a per-cycle Hamiltonian error ``h`` into its growing and bounded parts.

    >>> z = np.diag([1.0 + 0j, -1.0]); x = np.array([[0, 1], [1, 0]], dtype=complex)
    >>> g, b = accumulation_split(x, 0.01 * z)   # Z error after an X cycle: echoed away
    >>> round(g, 12), round(b, 6)
    (0.0, 0.01)
    """
    b = _as_basis(cycle)
    z = b.vectors
    ht = z.conj().T @ np.asarray(h, dtype=complex) @ z
    x = wrap(b.quasi_energies_rad[:, None] - b.quasi_energies_rad[None, :])
    deg = np.abs(x) <= DEGENERACY_TOL_RAD
    d = b.dim
    growing = np.sqrt(np.sum(np.abs(ht[deg]) ** 2) / d)
    s = np.sin(x[~deg] / 2)
    bounded = np.sqrt(np.sum(np.abs(ht[~deg]) ** 2 / s**2) / d)
    return AccumulationSplit(float(growing), float(bounded))


class CoherentCurve(NamedTuple):
    """Coherent infidelity after N cycles, for each requested N.

    Attributes:
        counts: the N values.
        infidelity: exponentiated value, process 1 - |Tr e^{-iS_N}/d|², state 1 - |<ψ|e^{-iS_N}|ψ>|².
        first_order: the quadratic estimate (process ||S_N||_F²/d - |Tr S_N/d|², state Var_ψ S_N).
    """

    counts: tuple[int, ...]
    infidelity: np.ndarray
    first_order: np.ndarray


def coherent_infidelity(h_total: np.ndarray, state: np.ndarray | None = None) -> tuple[float, float]:
    """(exponentiated, first-order) coherent infidelity of e^{-i H} for a dense Hermitian H.

    Process metric when ``state`` is None: 1 - |Tr e^{-iH}/d|² and Tr(H²)/d - (Tr H/d)².
    State metric: 1 - |<ψ|e^{-iH}|ψ>|² and <H²> - <H>².
    """
    h = (h_total + h_total.conj().T) / 2
    w, v = np.linalg.eigh(h)
    if state is None:
        d = h.shape[0]
        exact = 1 - abs(np.mean(np.exp(-1j * w))) ** 2
        first = np.sum(w**2) / d - (np.sum(w) / d) ** 2
    else:
        weights = np.abs(v.conj().T @ state) ** 2
        exact = 1 - abs(np.sum(weights * np.exp(-1j * w))) ** 2
        first = np.sum(weights * w**2) - np.sum(weights * w) ** 2
    return float(np.clip(exact, 0.0, 1.0)), float(max(first, 0.0))


def coherent_curve(
    cycle: np.ndarray | CycleBasis,
    h: np.ndarray,
    counts: Sequence[int],
    *,
    state: np.ndarray | None = None,
    second_order: bool = False,
) -> CoherentCurve:
    """Coherent infidelity of N repetitions of (cycle, error ``h``) for every N in ``counts``.

    The Schur basis is computed once; each N costs one Hermitian eigendecomposition (O(d³)) and
    no re-simulation. ``state`` is the input state of the first cycle for the state metric (the
    ideal output is U_c^N ψ, and S_N is pushed to the end, so <·> is taken in U_c^N ψ).
    ``second_order`` adds the commutators between cycles, C_N(H, H) (:func:`cross_cycle_sum`).

    >>> x = np.array([[0, 1], [1, 0]], dtype=complex)
    >>> c = coherent_curve(x, 0.005 * x, [100])     # RX(0.01) errors after X: sin²(Nδ/2)
    >>> round(float(c.infidelity[0]), 10)
    0.2298488471
    """
    b = _as_basis(cycle)
    ex, fo = [], []
    for n in counts:
        s = periodic_sum(b, h, int(n))
        if second_order:
            s = s + cross_cycle_sum(b, h, h, int(n))
        psi = None if state is None else b.apply_power(int(n), state)
        e, f = coherent_infidelity(s, psi)
        ex.append(e)
        fo.append(f)
    return CoherentCurve(tuple(int(n) for n in counts), np.array(ex), np.array(fo))


def state_components(basis: CycleBasis, state: np.ndarray, *, weight_tol: float = 1e-15) -> tuple[np.ndarray, np.ndarray]:
    """The input state split over the cycle's eigenspaces: ψ_k = U_c^k ψ = Σ_c e^{-ikε_c} v_c.

    Returns (v, ε): v of shape (m, d), one row per eigenspace the state touches (squared weight
    above ``weight_tol``), and its quasi-energy. Degenerate eigenvectors are merged, so m is the
    number of distinct quasi-energies the state sees (small for Clifford cycles).
    """
    labels, reps = basis.clusters()
    coeffs = basis.vectors.conj().T @ state
    rows, energies = [], []
    for c in range(len(reps)):
        sel = labels == c
        v = basis.vectors[:, sel] @ coeffs[sel]
        if np.vdot(v, v).real > weight_tol:
            rows.append(v)
            energies.append(reps[c])
    return np.array(rows), np.array(energies)


def _pair_frequencies(energies: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Frequencies x_cc' = ε_c' - ε_c of every pair, grouped: (label per pair, frequency per label)."""
    x = energies[None, :] - energies[:, None]
    return group_angles(x.reshape(-1))


def frequency_count(energies: np.ndarray) -> int:
    """Number of distinct pair frequencies, the size of :func:`repeated_squares`' kernel."""
    return int(_pair_frequencies(energies)[0].max()) + 1


def repeated_means(a: np.ndarray, energies: np.ndarray, counts: Sequence[int]) -> np.ndarray:
    """Σ_{k<N} <A>_k for each N, with <A>_k = Σ_cc' e^{-ik(ε_c'-ε_c)} a[c, c'].

    ``a`` has shape (J, m, m): a[j, c, c'] = <v_c|A_j|v_c'> for the components of
    :func:`state_components` carried to the place of A_j in the cycle. Returns shape (J, len(counts)).
    """
    x = energies[None, :] - energies[:, None]
    return np.stack([np.einsum("jcd,cd->j", a, geometric_sum(x, int(n))) for n in counts], axis=1)


def repeated_squares(a: np.ndarray, energies: np.ndarray, counts: Sequence[int]) -> np.ndarray:
    """Σ_{k<N} |<A>_k|² for each N (same conventions as :func:`repeated_means`).

    <A>_k = Σ_p c_p e^{-ik x_p} over distinct pair frequencies x_p, so
    Σ_k |<A>_k|² = Σ_pq c_p conj(c_q) G_N(x_p - x_q): cost J·F² with F distinct frequencies,
    independent of N.
    """
    labels, freqs = _pair_frequencies(energies)
    f = len(freqs)
    c = np.zeros((a.shape[0], f), dtype=complex)
    np.add.at(c.T, labels, as_rows(a).T)
    out = []
    for n in counts:
        kernel = geometric_sum(freqs[:, None] - freqs[None, :], int(n))
        out.append(np.einsum("jp,pq,jq->j", c, kernel, c.conj()).real)
    return np.stack(out, axis=1)
