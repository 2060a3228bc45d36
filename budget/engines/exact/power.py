"""Powers of a repeated block's matrix, at a cost that does not grow with the repeat count N.

Unitary block (coherent errors only): complex Schur form B = Z T Z† (scipy.linalg.schur). A
unitary is normal, so T is diagonal up to rounding and Z is unitary even when eigenvalues are
degenerate (Clifford blocks, identity blocks): B^N = Z diag(e^{-iNε}) Z†, through
:func:`budget.engines.matrices.periodic.cycle_basis`.

Channel block (superoperator, not normal in general): eigendecomposition B = V diag(w) V⁻¹ and
B^N = V diag(w^N) V⁻¹ when V is well conditioned (κ₁(V) = ‖V‖₁‖V⁻¹‖₁ ≤ EIG_CONDITION_LIMIT);
otherwise (defective or nearly defective blocks, e.g. an identity block under relaxation has
many equal eigenvalues) binary exponentiation, numpy.linalg.matrix_power, ~2 log₂N products.

Precision (float64, eps ≈ 1.1e-16): an eigenvalue phase ε is known to about eps·‖B‖ and N·ε is
rounded to about eps·N·|ε|, so the phases of B^N carry an absolute error of order N·1e-16 rad
(Schur/eig backward error, Golub & Van Loan, "Matrix Computations", 4th ed. 2013, §7.2). The
infidelity is then off by about the same amount: ~1e-13 at N = 10^3, ~1e-10 at N = 10^6, ~1e-7
at N = 10^9 (tests check 1e-6 at N = 10^9). Nothing in double precision does better; unrolling
would accumulate comparable rounding and cost N times more. For channels, eig adds a factor
κ₁(V) ≤ EIG_CONDITION_LIMIT, and the fixed-point eigenvalue is pinned to 1 (see channel_power) so
that its ~1e-14 error does not grow with N; eigenvalues with |w| < 1 decay and their errors fade.
"""

from __future__ import annotations

import hashlib

import numpy as np

from budget.engines.matrices.periodic import cycle_basis

EIG_CONDITION_LIMIT = 1e4
"""Largest κ₁ of the eigenvector matrix for which a channel power goes through eig."""
FIXED_POINT_TOL = 1e-12
"""Channel eigenvalues within this distance of 1 are set to exactly 1 (see channel_power)."""


_DECOMPOSITIONS: dict[bytes, tuple[int, object]] = {}
"""Decompositions by block content (bytes held, decomposition): a depth curve asks for many powers
of one block, and each eig of a 256 x 256 block costs about as much as the rest of a point."""
KEPT_BYTES = 1 << 30
"""At most this much memory in remembered decompositions (oldest dropped first)."""


def _remember(block: np.ndarray, build):
    """``build(block)``, computed once per block content (a digest of shape, type and bytes)."""
    key = hashlib.blake2b(repr((block.shape, block.dtype.str)).encode() + block.tobytes(), digest_size=32).digest()
    hit = _DECOMPOSITIONS.get(key)
    if hit is not None:
        return hit[1]
    value = build(block)
    size = 3 * block.nbytes * (2 if block.dtype.kind == "f" else 1)  # up to three complex matrices
    if size <= KEPT_BYTES:
        _DECOMPOSITIONS[key] = (size, value)
        while sum(entry[0] for entry in _DECOMPOSITIONS.values()) > KEPT_BYTES:
            _DECOMPOSITIONS.pop(next(iter(_DECOMPOSITIONS)))
    return value


def unitary_power(block: np.ndarray, count: int) -> np.ndarray:
    """block^count for a unitary block, through its Schur form (any count >= 0, 10**9 included)."""
    return _remember(np.ascontiguousarray(block), cycle_basis).power(int(count))


def _eigen(block: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """(w, V, V⁻¹) of a channel block with the eigenvalues pinned (see channel_power); V⁻¹ is None
    when V is singular or κ₁(V) > EIG_CONDITION_LIMIT. Remembered by block content."""

    def build(b: np.ndarray):
        w, v = np.linalg.eig(b)
        try:
            v_inv = np.linalg.inv(v)
        except np.linalg.LinAlgError:
            return w, v, None
        if np.linalg.norm(v, 1) * np.linalg.norm(v_inv, 1) > EIG_CONDITION_LIMIT:
            return w, v, None
        w = np.where(np.abs(w - 1.0) < FIXED_POINT_TOL, 1.0, w / np.maximum(1.0, np.abs(w)))
        return w, v, v_inv

    return _remember(np.ascontiguousarray(block), build)


def channel_power(block: np.ndarray, count: int) -> tuple[np.ndarray, str]:
    """block^count for a superoperator (a CPTP map), and the method used (``"eig"`` or
    ``"squaring"``).

    Eigenvalues of a CPTP map lie in the closed unit disc (it is a contraction in trace norm) and a
    trace-preserving map always has the eigenvalue 1: its adjoint fixes the identity, so 1 is in
    the spectrum, and the matching eigenvector is a fixed point (Evans & Høegh-Krohn,
    J. London Math. Soc. 17, 345 (1978); reference recalled from memory). eig places that eigenvalue only to ~κ·eps (1 - 2e-14 is typical), which w^N would
    turn into a relative error N·2e-14 of the fixed point (2e-5 at N = 10^9). So eigenvalues within
    FIXED_POINT_TOL of 1 are set to 1 (a decay slower than 1e-12 per block counts as none), and
    moduli that rounding pushed above 1 are set back to 1 so that w^N cannot blow up.
    """
    count = int(count)
    w, v, v_inv = _eigen(block)
    if v_inv is not None:
        mod = np.abs(w)
        with np.errstate(divide="ignore"):
            log_mod = np.where(mod > 0, np.log(np.where(mod > 0, mod, 1.0)), -np.inf)
        wn = np.exp(count * log_mod) * np.exp(1j * ((count * np.angle(w)) % (2 * np.pi)))
        wn = np.where(mod > 0, wn, 1.0 if count == 0 else 0.0)
        return (v * wn) @ v_inv, "eig"
    return np.linalg.matrix_power(block, count), "squaring"
