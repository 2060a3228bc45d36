"""Sign patterns for the closed loop: which settings of ± each site's tolerance are evaluated.

``random`` tolerances are r.m.s. values with independent signs, so the infidelity at the
tolerances is the mean over sign patterns; ``worst`` tolerances must hold for every pattern, so it
is the largest. Every pattern is evaluated for up to :data:`ENUMERATE_UP_TO` sites; beyond,
``random`` uses :data:`SAMPLES` seeded patterns in antithetic pairs (s and -s, which cancel the
odd orders of the mean) and ``worst`` the leading-order worst pattern
(:func:`budget.analysis.worstcase.box_maximum`), its negative and their single flips.
"""

from __future__ import annotations

import itertools

import numpy as np

from budget.analysis.worstcase import box_maximum
from budget.engines.base import QuadraticForm

ENUMERATE_UP_TO = 6
"""Sites whose sign patterns are enumerated (2^6 = 64 engine runs per evaluation)."""
SAMPLES = 64
"""Seeded sign patterns (32 antithetic pairs) beyond that."""


def patterns_for(assume: str, qf: QuadraticForm, keys: list, seed: int, most: int):
    """A function t -> sign patterns (rows of ±1) to evaluate at tolerances t, at most about ``most``
    of them; ``.count`` patterns, ``.kind`` in ``"all"``, ``"sampled"``, ``"search"``."""
    n = len(keys)

    def fixed(signs: np.ndarray, kind: str):
        def patterns(t):
            return signs
        patterns.count, patterns.kind = len(signs), kind
        return patterns

    if n <= ENUMERATE_UP_TO and 2**n <= most:
        return fixed(np.array(list(itertools.product((1.0, -1.0), repeat=n))) if n else np.ones((1, 0)), "all")
    if assume == "random":
        half = np.random.default_rng(seed).choice((1.0, -1.0), size=(max(2, min(SAMPLES, most)) // 2, n))
        return fixed(np.vstack([half, -half]), "sampled")
    order = {label: i for i, label in enumerate(qf.labels)}
    idx = np.array([order[k] for k in keys])
    a = np.asarray(qf.matrix, dtype=float)[np.ix_(idx, idx)]
    flips = 2 * n + 2 <= most

    def search(t):
        s = box_maximum(a, np.where(np.isfinite(t), t, 0.0)).signs
        if not flips:
            return np.vstack([s, -s])
        one = s * (1 - 2 * np.eye(n))
        return np.vstack([s, -s, one, -one])
    search.count, search.kind = (2 * n + 2 if flips else 2), "search"
    return search


def describe(assume: str, n: int, patterns) -> str:
    if n == 0:
        return "no knob with an effect: today's values as they are"
    if patterns.kind == "all":
        return f"all {patterns.count} sign patterns of {n} sites" + (" (the largest)" if assume == "worst" else " (their mean)")
    if patterns.kind == "sampled":
        return f"mean over {patterns.count} seeded sign patterns of {n} sites (antithetic pairs); error = standard error"
    extra = ", its negative and their single flips" if patterns.count > 2 else " and its negative"
    return f"the leading-order worst pattern of {n} sites{extra} ({patterns.count} patterns)"


def joint_signs(n: int, seed: int) -> np.ndarray:
    """Sign patterns for a joint search over n sites: all of them up to :data:`ENUMERATE_UP_TO`,
    else 16 seeded patterns in antithetic pairs."""
    if n <= ENUMERATE_UP_TO:
        return np.array(list(itertools.product((1.0, -1.0), repeat=n)))
    half = np.random.default_rng(seed).choice((1.0, -1.0), size=(8, n))
    return np.vstack([half, -half])
