"""The coherent error of a Clifford circuit to all orders, where its terms touch few qubits.

The walk maps every coherent term of layer t to a common frame (the output frame for ``"push"``,
the input frame for ``"pull"``, budget/engines/frame/walk.py). In that frame the circuit's whole
coherent error is the time-ordered product

    E = Π_t e^{-i H_t}  (later layers to the left),   H_t = Σ_{terms of layer t} c P

(the terms of one stage of a layer commute: disjoint operations, one operation's single exponential,
or context errors that commute, :func:`budget.errors.normal_form.site_stages`; each stage is a factor).
The Magnus series of E (Blanes, Casas, Oteo & Ros, Phys. Rep. 470, 151 (2009)) is summed here
without truncation by multiplying the factors as dense matrices on their supports:

- Factors on disjoint qubits commute, so E splits into independent *components*, one per
  connected set of supports; each is a 2^k x 2^k unitary on its k qubits.
- A repeated block of period r (its Clifford frame comes back after r repetitions, signs
  included) repeated N = q r + s times: the factors of repetition k + j r equal those of
  repetition k, so the block's error is P^q followed by R, with P the product of one walked
  period and R that of its first s repetitions; P^q comes from the Schur form of P
  (:class:`budget.engines.matrices.periodic.CycleBasis`), so the cost does not grow with N (the
  per-cycle effective generator i log P to all orders, repeated; average Hamiltonian theory:
  Haeberlen & Waugh, Phys. Rev. 175, 453 (1968)).
- Infidelity: process metric 1 - Π_c |Tr E_c / d_c|², each factor from the eigenphases φ_j of E_c
  as (2/d²) Σ_{j,l} sin²((φ_j - φ_l)/2) (no cancellation of nearly equal numbers); state metric
  1 - Π_c |<0|E_c|0>|², each factor as Σ_{x≠0} |<x|E_c|0>|².

Reach and cost. A component may hold at most MAX_SUPPORT_QUBITS qubits and the work (factor
applications, d² 2^k each, and d³ per power) at most WORK_BUDGET multiply-adds; the pass stops
as soon as either is exceeded (a union-find of the supports is kept while walking, so a
scrambling circuit stops within its first layers) or when a block is folded without a period,
and the engine keeps its second-order result. Echoes on few qubits (x/y/x/y, CPMG pairs, a gate
and its inverse, on any number of independent qubits) are within reach.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from budget.engines.clifford.settings import Settings
from budget.engines.details import QubitMap, Validity
from budget.engines.frame.groups import Budget
from budget.engines.frame.pauli_frame import Frame, unpack_bits
from budget.engines.frame.sinks import GroupSink
from budget.engines.frame.terms import Sources, TermBuilder
from budget.engines.frame.walk import Walker
from budget.engines.matrices.periodic import cycle_basis
from budget.engines.orders import SECOND_ORDER_SHARE, cancellation_note, second_order_share
from budget.errors.noisy import NoisyCircuit, NoisyLayer

MAX_SUPPORT_QUBITS = 8
"""Largest number of qubits of one component (dense 256 x 256 matrices)."""
WORK_BUDGET = 3e8
"""Largest number of multiply-adds spent on one pass (about a second)."""
MAX_FACTORS = 20_000
"""Largest number of factors (layer components) held at once (Python work per factor)."""


class OutOfReach(Exception):
    """The pass left its reach (support, work or factors) or met a block without a period."""


Factor = tuple[tuple[int, ...], np.ndarray]
"""(sorted qubits, unitary on them, first listed qubit most significant)."""


def pauli_matrix(x: np.ndarray, z: np.ndarray, e: int, qubits: tuple[int, ...]) -> np.ndarray:
    """i^e X^x Z^z restricted to ``qubits`` (x, z: bits per listed qubit, 0/1 arrays).

    Element (b ^ x, b) is i^e (-1)^{|z ∧ b|} (Z acts first, then X)."""
    k = len(qubits)
    weights = 1 << np.arange(k - 1, -1, -1)
    xm, zm = int(x @ weights), int(z @ weights)
    b = np.arange(2**k)
    signs = 1 - 2 * (np.bitwise_count(b & zm).astype(np.int64) & 1)
    m = np.zeros((2**k, 2**k), complex)
    m[b ^ xm, b] = (1j**e) * signs
    return m


class _Qubits:
    """Union-find over qubits: the components of the supports seen so far."""

    def __init__(self) -> None:
        self.parent: dict[int, int] = {}
        self.size: dict[int, int] = {}

    def find(self, q: int) -> int:
        p = self.parent.setdefault(q, q)
        if p != q:
            p = self.parent[q] = self.find(p)
        return p

    def join(self, qubits: tuple[int, ...]) -> int:
        roots = {self.find(q) for q in qubits}
        root = min(roots)
        total = sum(self.size.get(r, 1) for r in roots)
        for r in roots:
            self.parent[r] = root
        self.size[root] = total
        return total


def apply_local(acc: np.ndarray, m: np.ndarray, pos: tuple[int, ...], k: int, *, left: bool) -> np.ndarray:
    """m (on positions ``pos`` of k qubits) times acc (left) or acc times m (right); d² 2^|pos|."""
    if not left:
        return apply_local(acc.T, m.T, pos, k, left=True).T
    d, kf = acc.shape[0], len(pos)
    t = acc.reshape((2,) * k + (d,))
    out = np.tensordot(m.reshape((2,) * (2 * kf)), t, axes=(list(range(kf, 2 * kf)), list(pos)))
    out = np.moveaxis(out, list(range(kf)), list(pos))
    return out.reshape(d, d)


class AllOrdersSink:
    """A walker sink (``mark``/``scale``/``emit`` and the ``fold``/``approximate`` hooks) that
    keeps each emitted layer's coherent error as factors and multiplies them (module docstring).

    Args:
        sink: the GroupSink of this circuit (its ``explicit_terms`` maps a layer's terms).
        direction: the walker's direction (``"pull"`` walks forwards in time).
    """

    def __init__(self, sink: GroupSink, direction: str):
        self.sink = sink
        self.left = direction == "pull"  # a new item joins on the left (later in time)
        self.count = 0
        self.items: list[tuple[int, list[Factor]]] = []
        self.qubits = _Qubits()
        self.work = 0.0
        self.largest = 0
        self.losses: list[tuple[tuple[int, ...], float]] = []  # (qubits, infidelity) per component, after infidelity()

    # -- the sink protocol ----------------------------------------------------------------------
    def mark(self) -> int:
        return self.count

    def scale(self, start: int, stop: int, amplitude: float, probability: float) -> None:
        """Fold weights are not needed: :meth:`fold` repeats the factors exactly."""

    def emit(self, layer: NoisyLayer, frame: Frame) -> None:
        b = self.count
        self.count += 1
        stages = self.sink.explicit_stages(layer, frame)  # one exponential per stage, in time order
        for got in (stages if self.left else stages[::-1]):  # walk order (pull: forwards in time)
            factors = self._layer_factors(*got)
            if factors:
                self.items.append((b, factors))
                if sum(len(f) for _, f in self.items) > MAX_FACTORS:
                    raise OutOfReach("too many factors")

    def fold(self, marks: list[int], count: int) -> None:
        """Repetitions k = 0..r-1 (batches marks[k]..marks[k+1]) stand for ``count`` repetitions:
        the block becomes P^q then R (module docstring), one item."""
        period = len(marks) - 1
        q, s = divmod(count, period)
        start = next((i for i, it in enumerate(self.items) if it[0] >= marks[0]), len(self.items))
        block = self.items[start:]
        del self.items[start:]
        if not block:
            return
        reps = np.searchsorted(marks, [b for b, _ in block], side="right") - 1
        period_factors = [f for (_, fs) in block for f in fs]
        rest = [f for (_, fs), k in zip(block, reps) if k < s for f in fs]
        powered = []
        for qubits, m in self.product(period_factors):
            self.work += 40.0 * m.shape[0] ** 3
            powered.append((qubits, cycle_basis(m).power(q)))
        self._check()
        self.items.append((marks[0], self.product(powered + rest)))

    def approximate(self) -> None:
        raise OutOfReach("a block without a period")

    # -- products ---------------------------------------------------------------------------------
    def _layer_factors(self, x, z, e, coef, tag) -> list[Factor]:
        """e^{-i H_layer} split by connected supports of the layer's terms."""
        keep = coef != 0
        if not np.any(keep):
            return []
        n = x.shape[1] * 64
        xb, zb = unpack_bits(x[keep], n), unpack_bits(z[keep], n)
        e, coef = e[keep], coef[keep]
        supports = [tuple(int(q) for q in np.flatnonzero(xr | zr)) for xr, zr in zip(xb, zb)]
        local = _Qubits()
        for qs in supports:
            local.join(qs)
            if self.qubits.join(qs) > MAX_SUPPORT_QUBITS:
                raise OutOfReach("support")
        groups: dict[int, list[int]] = {}
        for t, qs in enumerate(supports):
            groups.setdefault(local.find(qs[0]), []).append(t)
        out = []
        for members in groups.values():
            qubits = tuple(sorted({q for t in members for q in supports[t]}))
            cols = list(qubits)
            h = sum(coef[t] * pauli_matrix(xb[t, cols], zb[t, cols], int(e[t]), qubits) for t in members)
            w, v = np.linalg.eigh((h + h.conj().T) / 2)
            out.append((qubits, (v * np.exp(-1j * w)) @ v.conj().T))
        return out

    def product(self, factors: list[Factor]) -> list[Factor]:
        """The factors (walk order) multiplied within connected supports: one unitary each."""
        local = _Qubits()
        for qs, _ in factors:
            local.join(qs)
        members: dict[int, list[Factor]] = {}
        for f in factors:
            members.setdefault(local.find(f[0][0]), []).append(f)
        out = []
        for fs in members.values():
            qubits = tuple(sorted({q for qs, _ in fs for q in qs}))
            k = len(qubits)
            self.largest = max(self.largest, k)
            where = {q: i for i, q in enumerate(qubits)}
            acc = np.eye(2**k, dtype=complex)
            for qs, m in fs:
                self.work += 4.0**k * 2 ** len(qs)
                acc = apply_local(acc, m, tuple(where[q] for q in qs), k, left=self.left)
            out.append((qubits, acc))
        self._check()
        return out

    def _check(self) -> None:
        if self.work > WORK_BUDGET:
            raise OutOfReach("work")

    def components(self) -> list[Factor]:
        """The whole circuit's coherent error as unitaries on disjoint sets of qubits."""
        return self.product([f for _, fs in self.items for f in fs])

    def observables(self, rows: tuple[np.ndarray, np.ndarray, np.ndarray], num_qubits: int) -> np.ndarray:
        """Coherent change <0|E† O E|0> - <0|O|0> of each Pauli O = i^e X^x Z^z given in the input
        frame (``"pull"`` walk) as rows: :func:`pauli_changes` of :meth:`components`."""
        return pauli_changes(self.components(), rows, num_qubits)

    def infidelity(self, metric: str) -> float:
        """1 - Π_c F_c over the components of the whole circuit's coherent error."""
        total, losses = component_infidelity(self.components(), metric)
        self.losses.extend(losses)
        return total


def pauli_changes(comps: list[Factor], rows: tuple[np.ndarray, np.ndarray, np.ndarray], num_qubits: int) -> np.ndarray:
    """Change <0|E† O E|0> - <0|O|0> of each Pauli O = i^e X^x Z^z (rows x (K, W), z (K, W), e (K,),
    input frame) under the coherent error E = ⊗_c E_c given by its components. The expectation
    factorises over the components; a qubit outside every component contributes
    <0|X^x Z^z|0> = [x = 0]."""
    covered = np.zeros(num_qubits, bool)
    for qubits, _ in comps:
        covered[list(qubits)] = True
    xs, zs = unpack_bits(rows[0], num_qubits), unpack_bits(rows[1], num_qubits)
    out = np.zeros(len(rows[2]))
    for k in range(len(out)):
        phase = 1j ** int(rows[2][k])
        ideal = phase * float(not np.any(xs[k]))
        value = phase * float(not np.any(xs[k][~covered]))
        for qubits, m in comps:
            if value == 0:
                break
            cols = list(qubits)
            v = m[:, 0]
            value *= np.vdot(v, pauli_matrix(xs[k, cols], zs[k, cols], 0, qubits) @ v)
        out[k] = (value - ideal).real
    return out


def component_infidelity(comps: list[Factor], metric: str) -> tuple[float, list[tuple[tuple[int, ...], float]]]:
    """(1 - Π_c F_c, [(qubits, 1 - F_c)]) of a coherent error given by its components (module
    docstring: eigenphases for the process metric, Σ_{x≠0} |<x|E_c|0>|² for the state metric)."""
    log_f = 0.0
    losses = []
    for qubits, m in comps:
        d = m.shape[0]
        if metric == "state":
            loss = float(np.sum(np.abs(m[1:, 0]) ** 2))
        else:
            phases = np.angle(np.linalg.eigvals(m))
            loss = float(2 * np.sum(np.sin((phases[:, None] - phases[None, :]) / 2) ** 2) / d**2)
        losses.append((qubits, loss))
        log_f += np.log1p(-min(loss, 1.0)) if loss < 1.0 else -np.inf
    return float(-np.expm1(log_f)) + 0.0, losses


# --- The engine's all-orders path (budget/engines/clifford/engine.py) ---


def all_orders(engine: Settings, circuit: NoisyCircuit, metric: str, plans: dict, budget: Budget, first_sink: GroupSink,
               validity: Validity, warnings: list) -> tuple[Budget, list, Validity]:
    """The coherent part to all orders where every component of the error touches at most
    MAX_SUPPORT_QUBITS qubits (budget/engines/clifford/allorders.py), with the (qubits,
    infidelity) of each component; otherwise ``budget`` as it is and no components.

    The coherent shares keep the split of the leading-order terms when those give the size
    within a factor 2, else the split of the first-order term sizes Σ_t |a_t|² per source
    (the leading order then rests on a cancellation that the higher orders decide)."""
    direction = "pull" if metric == "state" else "push"
    sink = AllOrdersSink(GroupSink(first_sink.builder, key="x" if metric == "state" else "xz"), direction)  # cached layer tables
    walker = Walker(circuit.num_qubits, direction, sink, max_unrolled=engine.max_unrolled, plans=plans, orbit_baby=0)
    try:
        walker.run(circuit.body)
        exact = sink.infidelity(metric)
    except OutOfReach as why:
        return budget, [], replace(validity, coherent_order=f"second (all orders out of reach: {why})")
    how = f"components of at most {sink.largest} qubit{'s' if sink.largest != 1 else ''}"
    validity = replace(validity, coherent_order=f"all orders ({how})",
                       coherent_second_order_resummed=budget.coherent_resummed + 0.0)
    warnings[:] = [w for w in warnings if "third order" not in w and "commutator" not in w]
    if validity.second_order_share is not None:  # now the share of every order beyond the first
        share = second_order_share(exact, validity.coherent_without_second_order)
        validity = replace(validity, second_order_share=share, rests_on_cancellation=share > SECOND_ORDER_SHARE)
        if note := cancellation_note(share, validity.cancellation, engine=engine.name, all_orders=how):
            warnings.append(note)
    lead = budget.coherent
    if 0.5 * exact <= lead <= 2.0 * exact:
        shares = budget.coherent_shares
    else:
        _, amps, tags = first_sink.coherent_terms()
        sizes = np.bincount(tags, weights=np.abs(amps) ** 2, minlength=len(budget.coherent_shares))
        shares = sizes * (lead / sizes.sum()) if sizes.sum() > 0 else np.zeros_like(sizes)
        if lead <= 0:
            shares, lead = sizes, float(sizes.sum())
    return replace(budget, coherent=lead, coherent_shares=shares, coherent_resummed=exact), sink.losses, validity


def all_orders_observables(engine: Settings, circuit: NoisyCircuit, obs: tuple, plans: dict) -> np.ndarray | None:
    """Coherent change of each observable to all orders where the error's components touch
    at most MAX_SUPPORT_QUBITS qubits (:meth:`AllOrdersSink.observables`), else None."""
    m = circuit.num_qubits
    sink = AllOrdersSink(GroupSink(TermBuilder(m, circuit.qubits, Sources()), key="x"), "pull")
    try:
        Walker(m, "pull", sink, max_unrolled=engine.max_unrolled, plans=plans, orbit_baby=0).run(circuit.body)
        return sink.observables(obs, m)
    except OutOfReach:
        return None


def loss_map(circuit: NoisyCircuit, losses: list) -> QubitMap:
    """The per-qubit map of the coherent process infidelity of each error component, all orders
    (the first-order map shows the cancelled order where the value rests on a cancellation)."""
    landed = {name: 0.0 for name in circuit.qubits}
    for qubits, loss in losses:
        for q in qubits:
            landed[circuit.qubits[q]] += loss / len(qubits)
    return QubitMap(
        qubit_map=landed,
        qubit_map_quantity=(
            "coherent process infidelity of the error component on each qubit, all orders "
            "(a component of k qubits split evenly)"
        ),
    )
