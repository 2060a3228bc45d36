"""From the carried sums to numbers: first-order totals, family shares, jump costs, bounds.

Process metric (output frame, rows merged): e_coh = Σ_Q A_Q² over the non-identity Paulis Q,
A_Q = Σ_k c_{Q,k} (Tr(H²)/d with Tr H = 0; Blume-Kohout et al., PRX Quantum 3, 020335 (2022)).

State metric (input frame): a Hermitian Pauli with bits (x, z) maps |0…0> to i^{|x∧z|} |x>, so
H_in|0…0> = Σ_x A_x |x>, A_x = Σ_{Q: x_Q = x} A_Q i^{|x_Q ∧ z_Q|}, and the first-order state
infidelity is Var(H_in) = Σ_{x≠0} |A_x|².

Column k's share is Σ_g Re(conj(A_{g,k}) A_g) (they add up to e_coh); the resummed coherent part
1 - Π_g cos²|A_g| and the scaling of shares follow :class:`budget.engines.frame.groups.Budget`, as in the
clifford engine, so both engines give the same numbers on Clifford circuits.

Jump operator L = Σ_v l_v P_v at probability p with L†L = Σ_v m_v P_v costs, at the ideal state
of its time (expectations e_v = <P_v>, e_0 = 1), p (Σ_v m_v e_v - (Σ_v Re l_v e_v)² - (Σ_v Im l_v
e_v)²) = p (<L†L> - |<L>|²), the generators engine's formula.
"""

from __future__ import annotations

import numpy as np

from budget.engines.frame.groups import Budget
from budget.engines.pauli._store import Store, group_equal
from budget.memo import ObjectKey
from budget.pauli_algebra import popcount

PHASE = np.array([1, 1j, -1, -1j])


def _resummed(mag: np.ndarray) -> float:
    cos2 = np.cos(np.minimum(mag, np.pi / 2)) ** 2
    if np.any(cos2 <= 0):
        return 1.0
    return float(-np.expm1(np.sum(np.log(cos2))))


def group_amplitudes(coh: Store, *, state: bool, scale: np.ndarray | None = None) -> np.ndarray:
    """(G, K) amplitudes per group and column: process, one group per row (identity dropped);
    state, rows grouped by X part with phases i^{|x∧z|}, the x = 0 group dropped."""
    c = coh.coef if scale is None else coh.coef * scale
    if not len(coh):
        return np.zeros((0, coh.columns))
    if not state:
        keep = np.any(coh.x != 0, axis=1) | np.any(coh.z != 0, axis=1)
        return c[keep]
    amps = c * PHASE[popcount(coh.x & coh.z) & 3][:, None]
    inv, first = group_equal(coh.x)
    out = np.zeros((len(first), coh.columns), complex)
    for k in range(coh.columns):
        out[:, k] = np.bincount(inv, amps[:, k].real, len(first)) + 1j * np.bincount(inv, amps[:, k].imag, len(first))
    nonzero_x = np.any(coh.x[first] != 0, axis=1)
    return out[nonzero_x]


def coherent_budget(coh: Store, stochastic: np.ndarray, *, state: bool, amplitudes: np.ndarray | None = None) -> Budget:
    """:class:`Budget` of the coherent sum (columns = sources) and the stochastic part per source;
    ``amplitudes``: the (G, K) group amplitudes when already known (:mod:`._vector`)."""
    a = group_amplitudes(coh, state=state) if amplitudes is None else amplitudes
    tot = a.sum(axis=1)
    mag = np.abs(tot)
    shares = (np.conj(a) * tot[:, None]).real.sum(axis=0) if len(a) else np.zeros(coh.columns)
    return Budget(
        coherent=float(np.sum(mag**2)),
        stochastic=float(np.sum(stochastic)),
        coherent_resummed=_resummed(mag),
        coherent_shares=shares,
        stochastic_shares=stochastic,
        groups=int(np.count_nonzero(mag)),
        max_amplitude=float(mag.max()) if len(mag) else 0.0,
    )


def zero_readout(s: Store, num_keys: int) -> np.ndarray:
    """<0…0|·|0…0> of each keyed sum: Σ of coefficients of rows with no X bits (Z strings)."""
    on_zero = ~np.any(s.x != 0, axis=1)
    return np.bincount(s.key[on_zero], weights=s.coef[on_zero, 0], minlength=num_keys)


def jump_costs(occurrences: list[tuple], values: np.ndarray, dropped: np.ndarray) -> tuple[dict[str, float], float]:
    """(family -> first-order cost of every jump, bound on the cost's error from dropped tag rows).

    ``occurrences``: (JumpSite, first tag, multiplicity) per executed site (multiplicity > 1 for
    sites of folded blocks); ``values``/``dropped``: per tag, the read-off <P_v> and the l1 norm d_v
    of its dropped rows (|<P_v> - read-off| ≤ d_v: ‖Pauli‖_op = 1).

    Bound per jump, the smaller of two rigorous ones: (i) first-order propagation with
    δ_v = min(d_v, 1 + |v_v|) (a Pauli expectation lies in [-1, 1]): |Δm·e| ≤ Σ|m_v| δ_v and
    |s² - s'²| ≤ D (2|s'| + D) with D = Σ|l_v| δ_v for s = Re or Im <L>; (ii) the exact cost
    p (<L†L> - |<L>|²) is a variance, in [0, p λ_max(L†L)], so it differs from the reported c' by
    at most max(|c'|, |p λ_max - c'|). Tags whose pulled sums were cut hard (d_v ≥ 1) cost at
    most (ii)."""
    by_site: dict[ObjectKey, tuple] = {}
    for site, base, mult in occurrences:
        hit = by_site.setdefault(ObjectKey(site), (site, [], []))
        hit[1].append(base)
        hit[2].append(mult)
    costs: dict[str, float] = {}
    bound = 0.0
    for site, bases, mults in by_site.values():
        weight = np.asarray(mults, float)[:, None]
        m = len(site.needed)
        tags = np.asarray(bases)[:, None] + np.arange(m)[None, :]  # (O, m)
        size = site.decay.shape[1]
        e = np.zeros((len(bases), size))
        e[:, 0] = 1.0
        e[:, site.needed] = values[tags]
        d = np.zeros((len(bases), size))
        if len(dropped):
            d[:, site.needed] = dropped[np.minimum(tags, len(dropped) - 1)] * (tags < len(dropped))
        s_re, s_im = e @ site.amp_re.T, e @ site.amp_im.T  # (O, J)
        per_jump = site.rates * (e @ site.decay.T - s_re**2 - s_im**2)
        costs[site.family] = costs.get(site.family, 0.0) + float((weight * per_jump).sum())
        if d.any():
            d = np.minimum(d, 1.0 + np.abs(e))
            d_re, d_im = d @ np.abs(site.amp_re).T, d @ np.abs(site.amp_im).T
            err = site.rates * (d @ np.abs(site.decay).T + d_re * (2 * np.abs(s_re) + d_re) + d_im * (2 * np.abs(s_im) + d_im))
            cap = np.maximum(np.abs(per_jump), np.abs(site.rates * site.top - per_jump))
            bound += float((weight * np.minimum(err, cap)).sum())
    return costs, bound


def first_order_bound(value: float, drift: float) -> float:
    """|v - v'| for v = ‖a‖², v' = ‖a'‖², ‖a - a'‖ ≤ drift, given v' = ``value``: 2 drift sqrt(v') + drift²."""
    return 2 * drift * np.sqrt(max(value, 0.0)) + drift**2
