"""Process metric from two half-depth sweeps that meet in the middle of the circuit.

The first-order process infidelity and its family shares are Hilbert-Schmidt inner products of the
summed coherent generator, e = ‖S‖² and share_k = <S_k, S> (:mod:`budget.engines.pauli._readout`),
and conjugation by a unitary preserves them. So S may be read in any frame: in the frame of the
meeting point m (after executed layer m),

    S_m = Σ_{t ≤ m} R_t H_t R_t†  +  Σ_{t > m} W_t† H_t W_t,

R_t the ideal layers t+1 … m, W_t the ideal layers m+1 … t: the errors before m pushed forward to m
(a ``push`` sweep over the first half) plus the errors after m pulled back to m (a ``pull`` sweep
over the second half). No term travels more than half the depth, and in sparse Pauli propagation
the number of strings a term spreads into grows exponentially with the depth it travels (Begušić,
Gray & Chan, Sci. Adv. 10, eadk4321 (2024)), so this is the cheap frame. The truncation bound is
unchanged: a piece dropped on either side keeps its norm on its way to m.

Frame-dependent is only the resummed coherent part 1 - Π_g cos²|A_g| (a Pauli decomposition);
between Clifford frames it is the same (Clifford maps permute Paulis), otherwise it differs at the
order the resummation already neglects.

:func:`split` cuts the item tree after a given number of executed layers, cutting a repeated block
into two repeated blocks (and one cycle cut in two) without unrolling it.
"""

from __future__ import annotations

from types import SimpleNamespace

from budget.engines.pauli._store import Store
from budget.memo import ObjectKey
from budget.errors.noisy import NoisyItem, NoisyLayer, NoisyRepeat


def executed(items: tuple[NoisyItem, ...], memo: dict | None = None) -> int:
    """Number of layers ``items`` executes (repeat counts multiplied in, Python ints)."""
    memo = {} if memo is None else memo
    total = 0
    for it in items:
        if isinstance(it, NoisyLayer):
            total += 1
        elif isinstance(it, NoisyRepeat):
            hit = memo.get(ObjectKey(it))
            if hit is None:
                hit = memo[ObjectKey(it)] = int(it.count) * executed(it.body, memo)
            total += hit
        else:
            raise TypeError(f"pauli engine: cannot split a circuit at a {type(it).__name__} (gate layers and repeats only)")
    return total


def split(items: tuple[NoisyItem, ...], at: int, memo: dict | None = None, origin: dict | None = None) -> tuple[tuple, tuple]:
    """(head, tail): head executes the first ``at`` layers of ``items``, tail the rest. ``origin``
    receives ObjectKey(piece) -> the repeat each new piece was cut from."""
    memo = {} if memo is None else memo
    origin = {} if origin is None else origin
    head: list[NoisyItem] = []
    tail: list[NoisyItem] = []
    for i, it in enumerate(items):
        if at <= 0:
            tail.extend(items[i:])
            break
        size = executed((it,), memo)
        if size <= at:
            head.append(it)
            at -= size
            continue
        per = executed(it.body, memo)  # a repeat straddling the cut
        whole = origin.get(ObjectKey(it), it)
        k, rem = divmod(at, per)
        if k:
            head.append(NoisyRepeat(it.body, k))
            origin[ObjectKey(head[-1])] = whole
        if rem:
            h, t = split(it.body, rem, memo, origin)
            head.extend(h)
            tail.extend(t)
        rest = int(it.count) - k - (1 if rem else 0)
        if rest:
            tail.append(NoisyRepeat(it.body, rest))
            origin[ObjectKey(tail[-1])] = whole
        tail.extend(items[i + 1:])
        break
    return tuple(head), tuple(tail)


def meet(items: tuple[NoisyItem, ...], make_sweep) -> SimpleNamespace:
    """Run ``make_sweep("push")`` over the first half and ``make_sweep("pull")`` over the second;
    return their coherent sums merged in the meeting frame with the added-up totals."""
    memo: dict = {}
    origin: dict = {}
    head, tail = split(items, executed(items, memo) // 2, memo, origin)
    first, second = make_sweep("push"), make_sweep("pull")
    first.origin = second.origin = origin
    first.run(head)
    second.run(tail)
    stochastic = dict(first.stochastic)
    for f, v in second.stochastic.items():
        stochastic[f] = stochastic.get(f, 0.0) + v
    return SimpleNamespace(
        coh=Store.concat([first.coh, second.coh]).merged(),
        stochastic=stochastic,
        bound_l2=first.bound_l2 + second.bound_l2,
        bound_l1=first.bound_l1 + second.bound_l1,
        head=head,
        tail=tail,
        terms_max=max(first.terms_max, len(first.coh) + second.terms_max),
        blocks=_joined(first, second),
    )


def _joined(first, second) -> list[dict]:
    """One report per repeated block: the two sides' pieces of a cut block added up (cycles
    walked), with both modes when they differ."""
    out: dict[ObjectKey, dict] = {}
    for sweep in (first, second):
        for key, b in zip(sweep.block_of, sweep.blocks):
            if key not in out:
                out[key] = dict(b)
                continue
            seen = out[key]
            seen["cycles_walked"] += b["cycles_walked"]
            if b["mode"] not in seen["mode"].split(" + "):
                seen["mode"] += " + " + b["mode"]
            seen["cut_at_meeting_point"] = True
    return list(out.values())
