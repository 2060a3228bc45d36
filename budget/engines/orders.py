"""How far a first-order result can be believed: cancellation and the size of the second order.

Two measures, shared by the first-order engines (design.md §8, "Orders"):

- cancellation c = ||H_1|| / Σ_t ||G_t||: the size of the summed first-order generator against
  the summed sizes of its terms (every operation's error, counted as often as it runs). Sizes are
  normalised Hilbert-Schmidt norms, ||Σ h_P P|| = sqrt(Σ h_P²) in radians. c = 1 when every term
  lands on the same operator with the same sign (coherent build-up), c near 0 when the terms cancel
  (echoes, a gate followed by its inverse).
- second-order share s = |e(H_1 + H_2) - e(H_1)| / e(H_1 + H_2): how much of the coherent
  infidelity comes from the second-order (commutator) term H_2 of the Magnus expansion (Blanes,
  Casas, Oteo & Ros, Phys. Rep. 470, 151 (2009)). A result with s above SECOND_ORDER_SHARE rests on
  a cancellation of the first order: the second order is included, the third is not.

>>> round(second_order_share(1e-6, 0.0), 3)
1.0
"""

from __future__ import annotations

import math

from budget.engines.details import Validity
from budget.errors.noisy import NoisyCircuit
from budget.errors.normal_form import layer_errors

SECOND_ORDER_SHARE = 0.1
"""Share of the coherent infidelity from the second-order term above which the result is said to
rest on a cancellation (a judgement of this tool, no source)."""


def term_norm_sum(circuit: NoisyCircuit) -> float:
    """Σ_t ||G_t|| over every executed error site (repeat counts included), in radians."""
    total = 0.0
    for layer, mult in circuit.multiplicities():
        s = sum(math.sqrt(sum(h * h for _, h in e.hamiltonian)) for e in layer_errors(layer))
        total += mult * s
    return total


def term_square_sum(circuit: NoisyCircuit) -> float:
    """Σ_t ||G_t||² over every executed operation: the first-order coherent process infidelity the
    terms would give if each landed on its own Pauli (no build-up, no cancellation)."""
    return sum(mult * sum(h * h for e in layer_errors(layer) for _, h in e.hamiltonian) for layer, mult in circuit.multiplicities())


def term_square_by_family(circuit: NoisyCircuit) -> dict[str, float]:
    """Σ_t ||G_t||² per family (repeat counts included): the first-order sizes by which an
    all-orders coherent value is split when its leading order rests on a cancellation."""
    out: dict[str, float] = {}
    for layer, mult in circuit.multiplicities():
        for e in layer_errors(layer):
            if e.hamiltonian:
                out[e.source.family] = out.get(e.source.family, 0.0) + mult * sum(h * h for _, h in e.hamiltonian)
    return out


def split_by_sizes(sizes: dict[str, float], total: float) -> dict[str, float]:
    """``total`` split in proportion to ``sizes`` (shares that add up to it)."""
    whole = sum(sizes.values())
    return {f: total * v / whole for f, v in sizes.items()} if whole > 0 else {}


def second_order_share(with_second: float, first_only: float) -> float:
    """s = |e(H_1 + H_2) - e(H_1)| / e(H_1 + H_2), 0 when both vanish."""
    if with_second <= 0.0:
        return 0.0 if first_only <= 0.0 else 1.0
    return min(1.0, abs(with_second - first_only) / with_second)


def cancellation_note(share: float, cancellation: float, *, engine: str, all_orders: str | None = None) -> str | None:
    """The plain-words warning for a result that rests on a cancellation, or None.

    ``all_orders``: where the engine summed every order of the coherent part (how, in a few
    words); the note then says the value holds instead of pointing at the exact engine."""
    if share <= SECOND_ORDER_SHARE:
        return None
    head = (
        f"the first-order error terms cancel (their sum is {100 * cancellation:.2g} % of the sum of their "
        f"sizes), so {100 * share:.0f} % of the coherent infidelity comes from the higher-order "
        "(commutator) terms; "
    )
    if all_orders:
        return head + f"the {engine} engine sums every order of the coherent part ({all_orders}), so the value holds"
    return head + f"the {engine} engine includes the second order but not the third: trust the exact engine where it fits"


def validity_details(share: float, cancellation: float, norm_first_rad: float, norm_second_rad: float | None) -> Validity:
    """The validity record of ``EngineResult.details`` (None: the second-order norm is not known)."""
    return Validity(
        cancellation=cancellation,
        second_order_share=share,
        first_order_norm_rad=norm_first_rad,
        second_order_norm_rad=norm_second_rad,
        rests_on_cancellation=share > SECOND_ORDER_SHARE,
    )
