"""The worst case over signs: the maximum of δᵀAδ on the box |δ_f| <= t_f.

Every knob sits somewhere in its tolerance with an unknown sign; the worst case is the largest
leading-order coherent infidelity any such setting can produce.

Why vertices suffice: with A_ff >= 0 the form is convex in each coordinate separately, so for any
point of the box moving one coordinate to the better of its two ends never lowers the value;
doing so coordinate by coordinate reaches a vertex δ = s ∘ t, s ∈ {±1}ⁿ, at least as high. The
maximum is therefore max_s sᵀ B s with B = diag(t) A diag(t), a Boolean quadratic problem (NP-hard
in general; it contains MAX-CUT).

Exact method: the knobs fall into groups that do not interfere (connected components of the
non-zero pattern of A, via scipy.sparse.csgraph); the maximum is the sum over groups, and every
group of up to ``exact_up_to`` knobs (20 by default, 2^19 sign patterns, a few milliseconds) is
enumerated. A larger group gets the spectral bound with an optimised diagonal shift
(:func:`spectral_bound`, the dual of the semidefinite relaxation, never above the triangle
bound Σ_fg |B_fg|), and 1-flip local searches from the leading eigenvectors' signs and from seeded
random patterns give a setting that reaches ``attained``, so the true maximum lies in
[attained, value]; for the positive semidefinite forms of this tool the two are typically within
a few per cent (tests/test_worstcase_bound.py measures it against brute force).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize
from scipy.sparse.csgraph import connected_components

EXACT_UP_TO = 20
"""Largest group of interfering knobs that is enumerated exactly."""

_CHUNK = 1 << 20
_NEGLIGIBLE = 1e-13
"""Couplings below this fraction of the largest |B| split groups; their |B| is added to the value."""


@dataclass(frozen=True)
class BoxMaximum:
    """The worst case of δᵀAδ on a box.

    Attributes:
        value: the maximum when ``exact``, else an upper bound (the number tolerances rely on).
        attained: δᵀAδ at the vertex ``signs`` ∘ t (a lower bound on the maximum).
        signs: ±1 per knob, the worst setting found.
        exact: True when every interfering group was enumerated.
    """

    value: float
    attained: float
    signs: np.ndarray
    exact: bool


def box_maximum(a: np.ndarray, t: np.ndarray, *, exact_up_to: int = EXACT_UP_TO) -> BoxMaximum:
    """max of δᵀAδ over |δ_f| <= t_f, exact for groups of up to ``exact_up_to`` interfering knobs.

    Args:
        a: real symmetric (n, n), diagonal >= 0, infidelity per rad².
        t: (n,) half-widths in rad, >= 0; ``inf`` only for knobs whose row of A is zero.

    >>> a = np.array([[1.0, -0.5], [-0.5, 1.0]])
    >>> m = box_maximum(a, np.array([1.0, 1.0]))
    >>> m.value, m.signs.tolist(), m.exact
    (3.0, [1.0, -1.0], True)
    """
    a = np.asarray(a, dtype=float)
    t = np.asarray(t, dtype=float)
    n = len(t)
    if a.shape != (n, n):
        raise ValueError(f"box maximum: matrix shape {a.shape} does not match {n} half-widths")
    if np.any(t < 0) or np.any(np.isnan(t)):
        raise ValueError("box maximum: half-widths must not be negative")
    if np.any(np.diag(a) < -1e-12 * max(float(np.max(np.abs(a), initial=0.0)), 1e-300)):
        raise ValueError("box maximum: a diagonal entry of A is negative (then the worst case is not at a vertex)")
    free = np.isinf(t)
    if np.any(free & np.any(a != 0, axis=1)):
        raise ValueError("box maximum: an unbounded knob has a non-zero row in A (the maximum is infinite)")
    ts = np.where(free, 0.0, t)
    b = a * np.outer(ts, ts)
    signs = np.ones(n)
    if n == 0 or not np.any(b):
        return BoxMaximum(0.0, 0.0, signs, True)
    strong = np.abs(b) > _NEGLIGIBLE * np.max(np.abs(b))
    slack = float(np.sum(np.abs(b[~strong])))
    count, group = connected_components(strong, directed=False)
    value = slack
    exact = True
    for g in range(count):
        idx = np.flatnonzero(group == g)
        sub = b[np.ix_(idx, idx)]
        if len(idx) <= exact_up_to:
            best, s = _enumerate(sub)
            value += best
        else:
            best, s = _local_search(sub)
            value += max(best, spectral_bound(sub))
            exact = False
        signs[idx] = s
    attained = float(signs @ b @ signs)
    return BoxMaximum(float(value), attained, signs, exact)


def worst_case_max(a: np.ndarray, t: np.ndarray, *, exact_up_to: int = EXACT_UP_TO) -> float:
    """The worst-case coherent infidelity max δᵀAδ over |δ_f| <= t_f (exact, or an upper bound
    beyond ``exact_up_to`` interfering knobs); see :func:`box_maximum`.

    >>> worst_case_max(np.array([[0.25]]), np.array([0.5]))
    0.0625
    """
    return box_maximum(a, t, exact_up_to=exact_up_to).value


def _enumerate(b: np.ndarray) -> tuple[float, np.ndarray]:
    """max_s sᵀBs over all sign patterns with s_0 = +1 (s and -s give the same value).

    Meet in the middle: split s = (s_L, s_H); sᵀBs = s_LᵀB_LL s_L + s_HᵀB_HH s_H + 2 s_LᵀB_LH s_H,
    so one matrix product gives every pattern's value at a cost of 2^(k-1)·k/2 operations.
    """
    k = len(b)
    low = (k + 1) // 2
    sl = _patterns(low, first_fixed=True)
    sh = _patterns(k - low, first_fixed=False)
    ql = np.einsum("ij,ij->i", sl @ b[:low, :low], sl)
    qh = np.einsum("ij,ij->i", sh @ b[low:, low:], sh)
    cross = sl @ b[:low, low:]
    best, best_s = -np.inf, np.ones(k)
    rows = max(1, _CHUNK // max(len(sh), 1))
    for r0 in range(0, len(sl), rows):
        vals = ql[r0 : r0 + rows, None] + qh[None, :] + 2 * cross[r0 : r0 + rows] @ sh.T
        i, j = np.unravel_index(int(np.argmax(vals)), vals.shape)
        if vals[i, j] > best:
            best, best_s = float(vals[i, j]), np.concatenate([sl[r0 + i], sh[j]])
    return best, best_s


def _patterns(k: int, *, first_fixed: bool) -> np.ndarray:
    """All ±1 rows of length k (with the first entry +1 when ``first_fixed``)."""
    free = k - 1 if first_fixed and k else k
    codes = np.arange(1 << free)
    s = 1.0 - 2 * ((codes[:, None] >> np.arange(free)) & 1)
    return np.hstack([np.ones((len(codes), 1)), s]) if first_fixed and k else s


def _local_search(b: np.ndarray, *, starts: int = 16, seed: int = 0) -> tuple[float, np.ndarray]:
    """A good vertex: 1-flip hill climbing from the signs of the leading eigenvectors and from
    ``starts`` seeded random sign patterns; the best local optimum."""
    k = len(b)
    _, vecs = np.linalg.eigh(b)
    firsts = [np.where(vecs[:, -j] >= 0, 1.0, -1.0) for j in range(1, min(k, 4) + 1)]
    firsts += list(np.random.default_rng(seed).choice((1.0, -1.0), size=(starts, k)))
    off = b - np.diag(np.diag(b))
    best, best_s = -np.inf, np.ones(k)
    for s in firsts:
        s = s.copy()
        while True:
            gain = -4 * s * (off @ s)  # change of sᵀBs when s_i flips
            i = int(np.argmax(gain))
            if gain[i] <= 1e-15 * np.max(np.abs(b)):
                break
            s[i] = -s[i]
        value = float(s @ b @ s)
        if value > best:
            best, best_s = value, s
    return best, best_s


def spectral_bound(b: np.ndarray) -> float:
    """An upper bound on max_s sᵀBs over s ∈ {±1}ⁿ without an SDP solver.

    For any diagonal D, sᵀBs = sᵀ(B - D)s + tr D <= n λ_max(B - D) + tr D, because sᵀs = n. The
    best D gives the bound of Delorme and Poljak (Math. Programming 62, 557 (1993)), the dual of
    the semidefinite relaxation of Goemans and Williamson (J. ACM 42, 1115 (1995)). The function
    is convex in D; L-BFGS-B (scipy.optimize.minimize) with the gradient 1 - n v_i² (v the leading
    eigenvector) gets close to its minimum, and every D tried gives a valid bound, so the smallest
    value seen is returned. Never above the triangle bound Σ|B_fg|.

    >>> round(spectral_bound(np.array([[1.0, 1.0], [1.0, 1.0]])), 9)
    4.0
    """
    n = len(b)
    best = [float(np.sum(np.abs(b)))]

    def f(d: np.ndarray) -> tuple[float, np.ndarray]:
        w, v = np.linalg.eigh(b - np.diag(d))
        value = n * float(w[-1]) + float(np.sum(d))
        best[0] = min(best[0], value)
        return value, 1.0 - n * v[:, -1] ** 2

    start = np.diag(b) - np.sum(np.abs(b - np.diag(np.diag(b))), axis=1) * 0.0
    minimize(f, start, jac=True, method="L-BFGS-B", options={"maxiter": 200, "maxfun": 400})
    return best[0]
