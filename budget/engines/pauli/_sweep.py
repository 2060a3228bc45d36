"""One pass over the circuit carrying sparse Pauli sums, with coefficient truncation and its bound.

Direction ``"push"`` (process metric) walks forwards: S <- U_t S U_t† then S += H_t, so that at the
end S = Σ_t R_t H_t R_t† is the summed coherent generator in the output frame (R_t the ideal
circuit after layer t). Direction ``"pull"`` (state metric, observables) walks backwards: S += H_t
then S <- U_t† S U_t, giving Σ_t V_t† H_t V_t in the input frame (V_t the circuit up to layer t),
whose action on |0…0> is read off by X part. This is sparse Pauli propagation (Begušić & Chan,
arXiv:2306.16372 (2023); Begušić, Gray & Chan, Sci. Adv. 10, eadk4321 (2024)) applied to error
generators instead of observables.

Stores carried (all :class:`~budget.engines.pauli._store.Store`):

- ``coh``: the coherent generator, one column per group (family or knob);
- ``tags`` (pull, state metric): each local Pauli P_v of each jump site and time, key = its tag,
  pulled back to the input so that <P_v>_{ψ_t} = <0|V_t† P_v V_t|0> is read off at the end;
- ``obs``, ``err`` (pull, observables): O pulled back exactly (O_t) and the first-order change
  E = Σ_t V_t† G_t(O_t) V_t, G_t the layer's local Heisenberg generators, so δ<O> = <0|E|0>.

Truncation. After each layer, rows whose coefficient is below the threshold are dropped and
accounted: a dropped piece D keeps its Hilbert-Schmidt norm and its operator norm under every later
conjugation, so the final sums differ from the untruncated ones by at most the sum of the dropped
pieces' norms (triangle inequality): ‖D‖_HS = sqrt(Σ c²) for the process metric, ‖D‖_op ≤ Σ |c|
for the read-off on |0…0> (state metric, tags, observables). A piece dropped from O_t also misses
its later generator terms: at most Σ|c| times Σ of ‖G_t'‖ (≤ 2Σ|h| + 2Σp per site) over the layers
still ahead. :mod:`budget.engines.pauli.engine` turns these into the bound on the result.

Repeated blocks: a Clifford block is folded by its period (:mod:`budget.engines.pauli._fold`);
any other block runs cycle by cycle (cost linear in N). A cycle that leaves every carried sum
unchanged and adds no jump tags is a fixed point: the remaining cycles are skipped (their
stochastic part and truncation bound are still counted).
"""

from __future__ import annotations

import time
from types import SimpleNamespace

import numpy as np

from budget.circuit.walk import Kind, gate_kind
from budget.engines.pauli._converge import DropLog, Step, difference, same_rows, same_step
from budget.engines.pauli._fold import fold
from budget.engines.pauli._bits import conjugate_clifford
from budget.engines.pauli._plan import LayerPlan, PlanBook
from budget.engines.pauli._rotate import rotate
from budget.engines.pauli._second import SecondOrder
from budget.engines.pauli._store import Store, conjugate, from_local, generate
from budget.memo import ObjectKey
from budget.errors.noisy import NoisyItem, NoisyLayer, NoisyRepeat
from budget.problems import TooLargeError


TRUNCATE_EVERY = 4
"""Truncate after every this many merges (fewer drop events give a smaller triangle-inequality
sum, at the price of carrying small rows a little longer)."""


MAX_TERMS = 6_000_000
"""Rows held at most (all carried sums): about 2-3.5 GB with the temporaries of a layer (1.3 GB
measured at 4.0 M rows on the 100-qubit Ising loop, state metric; 2.5 GB once at 4.3 M)."""


MAX_WALKED_LAYERS = 10**6
"""Layers one sweep walks at most (repeats run cycle by cycle unless folded or stopped early)."""


PATIENCE_CYCLES = 32
"""Cycles of a repeated block walked before the sweep judges that it will not converge: past them,
a block whose remaining cycles would take the sweep beyond MAX_WALKED_LAYERS is refused at once
rather than after 10^6 walked layers."""


class TooManyLayers(TooLargeError):
    """A sweep would walk more than MAX_WALKED_LAYERS layers (a refusal the user reads)."""


class OutOfTime(RuntimeError):
    """The sweep passed its deadline (the engine then stops tightening the threshold)."""


class TooManyTerms(RuntimeError):
    """The carried sums passed MAX_TERMS rows."""


def _scaled(s: Store, factor: float) -> Store:
    return Store(s.x, s.z, s.key, s.coef * factor)


def _equal(a: Store, b: Store) -> bool:
    return (
        len(a) == len(b)
        and np.array_equal(a.key, b.key)
        and np.array_equal(a.x, b.x)
        and np.array_equal(a.z, b.z)
        and np.allclose(a.coef, b.coef, rtol=1e-13, atol=0.0)
    )


def apply_class(cls, st: Store, n: int) -> Store:
    """``st`` conjugated by one gate class of a layer plan (rotation, Clifford or general map)."""
    if cls.axis is not None:
        return rotate(st, cls.lmap.matrix, cls.axis, cls.mask)
    if cls.lmap.clifford:
        return conjugate_clifford(st, cls.lmap, cls.qa, cls.qb, n)
    return conjugate(st, cls.lmap, cls.qa, cls.qb)


class Sweep:
    """One pass (see module docstring).

    Args:
        n: qubits.
        book: layer plans (direction, grouping, jumps, generators).
        eps: coefficient threshold (0 keeps everything); rows with max(|Σ_k s_k c_k|, max_k |s_k c_k|)
            < eps are dropped from ``coh`` (s the column scales), tag rows with weight·|c| <
            eps·tag_scale, observable rows with |c| < eps.
        scale: (K,) column scales (1 for families; knob values for the quadratic form).
        observables: letters (qubit -> 'X'/'Y'/'Z') of each observable (pull only).
        kappa_total: Σ over executed layers of the generator norms (observable bound).
        tag_scale: infidelity per radian of a dropped coherent coefficient (≈ 2 sqrt(e)), so that a
            dropped tag row and a dropped coherent row cost the bound about the same.
        deadline: time.monotonic() value after which :class:`OutOfTime` is raised.
    """

    def __init__(
        self,
        n: int,
        book: PlanBook,
        eps: float,
        *,
        scale: np.ndarray,
        observables: tuple[dict[int, str], ...] = (),
        kappa_total: float = 0.0,
        tag_scale: float = 1.0,
        deadline: float | None = None,
        second: bool = False,
        carry_tags: bool = True,
    ):
        self.n, self.book, self.eps, self.scale = n, book, eps, scale
        self.tag_eps = eps * tag_scale
        self.pull = book.direction == "pull"
        self.carry_tags = carry_tags  # False: jump expectations come from elsewhere (_vector)
        self.coh = Store.empty(n, len(scale))
        self.second = SecondOrder(n, len(scale), later_first=not self.pull) if second else None
        self.tags = Store.empty(n, 1)
        self.tag_weight: list[np.ndarray] = []
        self.tag_count = 0
        self.occurrences: list[tuple] = []  # (JumpSite, first tag, multiplicity)
        self.obs = self._observable_rows(observables)
        self.err = Store.empty(n, 1)
        self.num_obs = len(observables)
        self.kappa_left = kappa_total
        self.deadline = deadline
        self.bound_l2 = 0.0
        self.bound_l1 = 0.0
        self.tag_dropped = np.zeros(0)
        self.obs_bound = np.zeros(len(observables))
        self.terms_max = 0
        self.stochastic: dict[str, float] = {}
        self.blocks: list[dict] = []
        self.block_of: list[ObjectKey] = []  # the repeat each report is about (its origin if cut)
        self.origin: dict[ObjectKey, NoisyRepeat] = {}  # piece -> the repeat a cut piece came from
        self.layers_walked = 0
        self.every = TRUNCATE_EVERY
        self._since = 0
        self.log: DropLog | None = None  # drops of the cycle being walked (_converge)

    def _observable_rows(self, observables) -> Store:
        if not observables:
            return Store.empty(self.n, 1)
        qa, v, key = [], [], []
        for i, letters in enumerate(observables):
            for q, letter in letters.items():
                qa.append(q)
                v.append("IXZY".index(letter))
                key.append(i)
        rows = from_local(self.n, np.array(qa), np.full(len(qa), -1), np.array(v), np.array(key), np.ones(len(qa)))
        # one row per observable: multiply the single-qubit rows of each observable (disjoint qubits)
        x = np.zeros((len(observables), rows.x.shape[1]), np.uint64)
        z = np.zeros_like(x)
        np.bitwise_or.at(x, rows.key, rows.x)
        np.bitwise_or.at(z, rows.key, rows.z)
        return Store(x, z, np.arange(len(observables), dtype=np.int64), np.ones((len(observables), 1)))

    # -- walking ------------------------------------------------------------------------------

    def run(self, items: tuple[NoisyItem, ...]) -> None:
        self._items(items)

    def run_items(self, items: tuple[NoisyItem, ...]) -> None:
        """Walk items in this sweep's direction (for :mod:`budget.engines.pauli._fold`)."""
        self._items(items)

    def _items(self, items: tuple[NoisyItem, ...]) -> None:
        for it in reversed(items) if self.pull else items:
            if gate_kind(it, "pauli engine") is Kind.LAYER:
                self._layer(it)
            else:
                self._repeat(it)

    def _layer(self, layer: NoisyLayer, mult: int = 1) -> None:
        if self.deadline is not None and time.monotonic() > self.deadline:
            raise OutOfTime
        self.layers_walked += 1
        if self.layers_walked > MAX_WALKED_LAYERS:
            raise TooManyLayers(
                f"pauli engine: more than {MAX_WALKED_LAYERS:,} layers to walk: a repeated block that is neither "
                "Clifford (folded by its period) nor converges (docs/methods.md, \"Repeated blocks\") is walked cycle "
                "by cycle; use fewer cycles")
        plan = self.book(layer)
        for f, v in plan.stochastic.items():
            self.stochastic[f] = self.stochastic.get(f, 0.0) + v
        added = False
        if self.pull:
            added = self._add(plan)
            self._conjugate(plan)
        else:
            self._conjugate(plan)
            added = self._add(plan)
        if added or not plan.clifford:
            self._since += 1
            self._tidy(cut=self._since >= self.every)
        held = len(self.coh) + len(self.tags) + len(self.obs) + len(self.err)
        self.terms_max = max(self.terms_max, held)
        if held > MAX_TERMS:
            raise TooManyTerms(held, MAX_TERMS)

    def _add(self, plan: LayerPlan) -> bool:
        added = False
        if len(plan.coherent):
            if self.second is not None:
                self.second.add(plan.coherent, self.coh)
            self.coh = Store.concat([self.coh, plan.coherent.copy()])
            added = True
        if self.pull and self.carry_tags and plan.jump_sites:
            parts = [self.tags]
            for site in plan.jump_sites:
                m = len(site.needed)
                keys = np.arange(self.tag_count, self.tag_count + m)
                parts.append(from_local(self.n, np.full(m, site.qa), np.full(m, site.qb), site.needed, keys, np.ones(m)))
                self.occurrences.append((site, self.tag_count, 1))
                self.tag_weight.append(site.weight)
                self.tag_count += m
            self.tags = Store.concat(parts)
            added = True
        if self.pull and len(self.obs) and plan.gen_maps:
            self.err = Store.concat([self.err, generate(self.obs, list(plan.gen_maps), plan.gen_qa, plan.gen_qb)])
            added = True
            self.kappa_left -= plan.kappa
        return added

    def _conjugate(self, plan: LayerPlan) -> None:
        names = ("coh", "tags", "obs", "err") if self.pull else ("coh",)
        for cls in plan.classes:
            for name in names:
                setattr(self, name, self._apply(cls, getattr(self, name)))
            if self.second is not None:
                self.second.sum = self._apply(cls, self.second.sum)

    def _apply(self, cls, st: Store) -> Store:
        return apply_class(cls, st, self.n)

    # -- merging and truncation ---------------------------------------------------------------

    def _tidy(self, cut: bool = True) -> None:
        if cut:
            self._since = 0
        self.coh = self.coh.merged()
        if self.second is not None:
            self.second.sum = self.second.sum.merged()  # never truncated: the bound is first order's
        if cut and self.eps > 0 and len(self.coh):
            c = self.coh.coef * self.scale
            total = c.sum(axis=1)
            weight = np.maximum(np.abs(total), np.abs(c).max(axis=1))
            drop = weight < self.eps
            if drop.any():
                self.bound_l2 += float(np.sqrt(np.sum(total[drop] ** 2)))
                self.bound_l1 += float(np.sum(np.abs(total[drop])))
                self._logged("coh", self.coh, drop)
                self.coh = self.coh.take(~drop)
        if not self.pull:
            return
        self.tags = self.tags.merged()
        if cut and self.eps > 0 and len(self.tags):
            w = np.concatenate(self.tag_weight) if len(self.tag_weight) > 1 else self.tag_weight[0]
            self.tag_weight = [w]
            mag = np.abs(self.tags.coef[:, 0])
            drop = w[self.tags.key] * mag < self.tag_eps
            if drop.any():
                if len(self.tag_dropped) < self.tag_count:
                    self.tag_dropped = np.concatenate([self.tag_dropped, np.zeros(self.tag_count - len(self.tag_dropped))])
                self.tag_dropped += np.bincount(self.tags.key[drop], weights=mag[drop], minlength=self.tag_count)
                self._logged("tags", self.tags, drop)
                self.tags = self.tags.take(~drop)
        for name in ("obs", "err"):
            st = getattr(self, name).merged()
            if cut and self.eps > 0 and len(st):
                mag = np.abs(st.coef[:, 0])
                drop = mag < self.eps
                if drop.any():
                    lost = np.bincount(st.key[drop], weights=mag[drop], minlength=self.num_obs)
                    self.obs_bound += lost * (max(self.kappa_left, 0.0) if name == "obs" else 1.0)
                    self._logged(name, st, drop)
                    st = st.take(~drop)
            setattr(self, name, st)

    def _logged(self, name: str, st: Store, drop: np.ndarray) -> None:
        if self.log is not None:
            self.log.add(name, self.layers_walked, st.take(drop))

    # -- repeated blocks ----------------------------------------------------------------------

    def snapshot(self) -> SimpleNamespace:
        """The carried sums and running totals (stores are never changed in place)."""
        return SimpleNamespace(
            coh=self.coh, obs=self.obs, err=self.err, tags=self.tags, tag_count=self.tag_count,
            bound_l2=self.bound_l2, bound_l1=self.bound_l1, obs_bound=self.obs_bound.copy(),
            stochastic=dict(self.stochastic), kappa_left=self.kappa_left,
            second=None if self.second is None else self.second.sum,
        )

    def _repeat(self, rep: NoisyRepeat) -> None:
        count = int(rep.count)
        if self.second is None and fold(self, rep):
            return
        step = None  # the second-order sum's change over the last cycle
        last = None  # the last cycle's Step (_converge), while the block may still converge
        h2_steps: list[Store] = []  # H_2's change per cycle since S's change became steady
        start = self.layers_walked
        for k in range(count):
            if k >= PATIENCE_CYCLES:
                self._check_patience(rep, k, start)
            before = self.snapshot()
            outer = self.log
            self.log = DropLog(self.layers_walked, outer)
            try:
                self._items(rep.body)
            finally:
                log, self.log = self.log, outer
            if k + 1 < count and not self._fixed(before):
                now = self._step(before, log)
                steady = now is not None and last is not None and same_step(now, last)
                last = now
                if self.second is not None and now is not None:  # H_2's changes, while S's are steady
                    change = difference(self.second.sum, before.second)
                    h2_steps = [*h2_steps, change] if steady else [change]
                if steady and (self.second is None or self._second_steady(h2_steps, count - k - 1)):
                    rest = count - k - 1
                    self._skip(before, rest)
                    self.coh = Store.concat([self.coh, _scaled(now.coh, float(rest))]).merged()
                    self.err = Store.concat([self.err, _scaled(now.err, float(rest))]).merged()
                    self.note_block(rep, {"mode": "converged", "cycles_walked": k + 1})
                    return
                continue
            if k + 1 < count and self._fixed(before):
                if self.second is not None:
                    # with S fixed, H_2 changes by Δ_k = C Δ_{k-1} C† per cycle: constant once two agree
                    now = Store.concat([self.second.sum, _scaled(before.second, -1.0)]).merged()
                    if step is None or not _equal(now, step):
                        step = now
                        continue
                    self.second.sum = Store.concat([self.second.sum, _scaled(step, float(count - k - 1))]).merged()
                self._skip(before, count - k - 1)
                self.note_block(rep, {"mode": "fixed point", "cycles_walked": k + 1})
                return
        self.note_block(rep, {"mode": "cycles", "cycles_walked": count})

    def _check_patience(self, rep: NoisyRepeat, k: int, start: int) -> None:
        """Refuse now when ``k`` cycles of ``rep`` neither converged nor reached a fixed point and
        walking the remaining ones would pass MAX_WALKED_LAYERS."""
        per_cycle = (self.layers_walked - start) / k
        if self.layers_walked + (int(rep.count) - k) * per_cycle > MAX_WALKED_LAYERS:
            raise TooManyLayers(
                f"pauli engine: a repeated block has neither converged nor reached a fixed "
                f"point after {k} cycles, and walking the rest cycle by cycle would pass {MAX_WALKED_LAYERS:,} layers "
                "(docs/methods.md, \"Repeated blocks\"); use fewer cycles or the generators engine")

    def note_block(self, rep: NoisyRepeat, entry: dict) -> None:
        """Report how a repeated block was handled (count: of the block it was cut from, if cut)."""
        whole = self.origin.get(ObjectKey(rep), rep)
        self.blocks.append({"count": int(whole.count), **entry})
        self.block_of.append(ObjectKey(whole))

    def _second_steady(self, steps: list[Store], rest: int) -> bool:
        """With S's change Δ steady, H_2 changes per cycle by d_k = C d_{k-1} C† + L(Δ), L linear
        (the cycle's commutators with the incoming sum), so its second differences obey
        e_k = C e_{k-1} C†: once two agree, d grows by e per cycle and the remaining ``rest`` cycles
        add rest·d_k + rest(rest+1)/2·e (added here; True). False while they do not agree yet."""
        if len(steps) < 3:
            return False
        e = difference(steps[-1], steps[-2])
        if not same_rows(e, difference(steps[-2], steps[-3])):
            return False
        self.second.sum = Store.concat([self.second.sum, _scaled(steps[-1], float(rest)),
                                        _scaled(e, rest * (rest + 1) / 2)]).merged()
        return True

    def _step(self, b: SimpleNamespace, log: DropLog) -> Step | None:
        """The cycle just walked as a :class:`~budget.engines.pauli._converge.Step`, or None when it
        cannot be part of a converged run (it made jump tags, or changed the tags or the observable)."""
        if b.tag_count != self.tag_count or not (_equal(b.tags, self.tags) and _equal(b.obs, self.obs)):
            return None
        return Step(b.coh, self.coh, b.err, self.err, tuple(log.entries))

    def _fixed(self, b: SimpleNamespace) -> bool:
        return (
            b.tag_count == self.tag_count and _equal(b.coh, self.coh) and _equal(b.obs, self.obs) and _equal(b.err, self.err)
        )

    def _skip(self, b: SimpleNamespace, rest: int) -> None:
        """Count ``rest`` more cycles like the last (their stochastic part, bound and kappa)."""
        if self.log is not None:
            self.log.add("skip", self.layers_walked, rest)
        self.bound_l2 += rest * (self.bound_l2 - b.bound_l2)
        self.bound_l1 += rest * (self.bound_l1 - b.bound_l1)
        self.obs_bound += rest * (self.obs_bound - b.obs_bound)
        self.kappa_left -= rest * (b.kappa_left - self.kappa_left)
        for f, v in self.stochastic.items():
            self.stochastic[f] = v + rest * (v - b.stochastic.get(f, 0.0))
