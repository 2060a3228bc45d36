"""e^{-iH} v for a Hermitian H known only through H·v: a small Lanczos iteration.

The Krylov space of v under H is built with full reorthogonalisation; with T_k the tridiagonal
Lanczos matrix, e^{-iH} v ≈ ||v|| V_k e^{-i T_k} e_1, and the iteration stops when the a-posteriori
estimate β_k |[e^{-iT_k} e_1]_k| drops below ``tol`` (Saad, SIAM J. Numer. Anal. 29, 209 (1992);
Hochbruck & Lubich, SIAM J. Numer. Anal. 34, 1911 (1997)). For the small generators of this
engine (||H|| well below 1 rad) a handful of products suffices.
"""

from __future__ import annotations

from typing import Callable, NamedTuple

import numpy as np
import scipy.linalg


class KrylovResult(NamedTuple):
    """e^{-iH} v, the Ritz values of H seen from v with their weights |<v|ritz>|², and H·v."""

    vector: np.ndarray
    ritz_values: np.ndarray
    ritz_weights: np.ndarray
    steps: int


def expm_apply(
    matvec: Callable[[np.ndarray], np.ndarray], v: np.ndarray, *, tol: float = 1e-13, max_steps: int = 60
) -> KrylovResult:
    """e^{-iH} v by Lanczos (see module docstring); ``v`` need not be normalised."""
    norm = np.linalg.norm(v)
    if norm == 0:
        return KrylovResult(v.copy(), np.zeros(1), np.ones(1), 0)
    basis = [v / norm]
    alphas: list[float] = []
    betas: list[float] = []
    y = np.ones(1, dtype=complex)
    for j in range(max_steps):
        w = matvec(basis[j])
        alphas.append(float(np.vdot(basis[j], w).real))
        for _ in range(2):  # twice is enough (Giraud et al., Numer. Math. 101, 87 (2005))
            for b in basis:
                w = w - np.vdot(b, w) * b
        beta = float(np.linalg.norm(w))
        t = np.diag(alphas) + np.diag(betas, 1) + np.diag(betas, -1)
        y = scipy.linalg.expm(-1j * t)[:, 0]
        if beta * abs(y[-1]) < tol or beta < 1e-14 * max(1.0, abs(alphas[-1])):
            break
        betas.append(beta)
        basis.append(w / beta)
    k = len(alphas)
    ritz, vecs = np.linalg.eigh(np.diag(alphas) + np.diag(betas[: k - 1], 1) + np.diag(betas[: k - 1], -1))
    vector = norm * (np.array(basis[:k]).T @ y)
    return KrylovResult(vector, ritz, np.abs(vecs[0]) ** 2, k)
