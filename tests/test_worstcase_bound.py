"""The worst case over signs beyond exact enumeration: bound and search against brute force.

max_s sᵀBs over s ∈ {±1}ⁿ is checked by enumerating every sign pattern (itertools, independent
of the meet-in-the-middle code under test) for n <= 16. The spectral bound is the dual of the
Goemans-Williamson semidefinite relaxation (Delorme & Poljak, Math. Programming 62, 557 (1993));
for positive semidefinite B its ratio to the true maximum is at most π/2 (Nesterov, Optim.
Methods Softw. 9, 141 (1998)), a property the checks below rely on as an outer limit.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from budget.analysis.tolerances import tolerances
from budget.analysis.worstcase import box_maximum, spectral_bound
from budget.engines.base import QuadraticForm


def _brute(b: np.ndarray) -> float:
    n = len(b)
    return max(float(np.array(s) @ b @ np.array(s)) for s in itertools.product((1.0, -1.0), repeat=n))


def _psd(rng: np.random.Generator, n: int, rank: int) -> np.ndarray:
    g = rng.normal(size=(n, rank)) * rng.uniform(0.1, 1.0, size=(n, 1))
    return g @ g.T


@pytest.mark.parametrize("n", [6, 10, 13, 16])
@pytest.mark.parametrize("rank", [1, 3, None])
def test_bound_and_search_bracket_the_brute_force_maximum(n, rank):
    rng = np.random.default_rng(100 * n + (rank or 0))
    for _ in range(3):
        b = _psd(rng, n, rank or n)
        m = box_maximum(b, np.ones(n), exact_up_to=2)  # forced past exact enumeration
        truth = _brute(b)
        assert not m.exact
        assert m.attained <= truth * (1 + 1e-12) and truth <= m.value * (1 + 1e-12)
        assert m.attained == pytest.approx(truth, rel=1e-9)  # the searches find the maximum here
        assert m.value <= 1.1 * truth  # the bound stays close (measured: within 6.1 % on these cases)
        assert m.value <= np.sum(np.abs(b)) * (1 + 1e-12)


def test_indefinite_forms_keep_a_valid_bound():
    rng = np.random.default_rng(7)
    for n in (8, 12):
        g = rng.normal(size=(n, n))
        b = (g + g.T) / 2
        b[np.diag_indices(n)] = np.abs(np.diag(b))  # the worst case sits at a vertex when A_ff >= 0
        truth = _brute(b)
        assert spectral_bound(b) >= truth * (1 - 1e-12)
        m = box_maximum(b, np.ones(n), exact_up_to=2)
        assert m.attained <= truth * (1 + 1e-12) <= m.value * (1 + 2e-12)


def test_fifty_knobs_get_a_close_bound_not_the_triangle_one():
    """Item 12 of issue 9: 50 interfering knobs (an ordinary --by-pair size) must not fall back to
    the triangle bound; the bound and the best setting found stay within 20 % (and far inside
    Nesterov's π/2), while the triangle bound is more than 10 % looser still."""
    rng = np.random.default_rng(50)
    for rank in (2, 5, 50):
        b = _psd(rng, 50, rank)
        m = box_maximum(b, np.ones(50))
        assert not m.exact and m.attained > 0
        assert m.value / m.attained <= 1.2 < math.pi / 2
        assert np.sum(np.abs(b)) > m.value * 1.1


def test_tolerances_with_fifty_knobs_warn_with_the_gap():
    rng = np.random.default_rng(3)
    a = _psd(rng, 50, 4) * 10
    labels = tuple((f"cz q[{i}],q[{i + 1}]", "cphase") for i in range(50))
    qf = QuadraticForm(labels, a, np.full(50, 0.01), 0.0, {})
    rep = tolerances(qf, 0.01)
    assert not rep.exact
    note = next(w for w in rep.warnings if "interfering knobs" in w)
    assert "% above the worst setting found" in note
    t = np.array([rep.rows[[r.family for r in rep.rows].index(f)].tolerance_rad for f, _ in labels])
    m = box_maximum(a, t)
    assert m.attained <= 0.01 * (1 + 1e-9)  # safe: the worst setting found meets the target
    assert m.attained >= 0.01 / 1.2  # and not far from using all of it
