"""Fold a long-period repeated block by the orbits of its error terms (baby-step giant-step).

Setting (process metric, ``"push"`` walk). A block C of Clifford layers maps Paulis by a signed
permutation c. The coherent term t of the block (a Hermitian Pauli P_t with coefficient h_t at the
block's end) lands, in repetition k counted from the last one, on c^k(P_t); N repetitions give the
multiset {c^k(P_t) : 0 <= k < N}. The period r of c can be long (4,092 repetitions for a
scrambling cycle on a 32 x 32 grid), so walking min(N, r) repetitions, as :mod:`_walk` does when it
folds by the period, costs r times the terms of one repetition.

Orbits. Each Pauli P_t lies on an orbit of c: the smallest L_t > 0 with c^L_t(P_t) = ε_t P_t
(ε_t = ±1; when ε_t = -1 the signed orbit has length 2 L_t). Two terms interfere only when they lie
on one orbit, P_u = σ c^m(P_t); placing every term of an orbit at its offset m from a root term, the
amplitude on the orbit's Pauli at position j is a step function of j, so Σ_Q |A_Q|² over all
landing Paulis is a sum over a few runs of equal amplitude (closed form for any N, 10^9 included).

Finding orbits without walking them: baby-step giant-step (Shanks, "Class number, a theory of
factorization, and genera", Proc. Symp. Pure Math. 20 (1971); the discrete-logarithm form of the
method). Baby steps: the walker emits B repetitions as usual, giving the 128-bit fingerprints of
c^j(P) for j < B and every distinct term Pauli P. Giant steps: the fingerprint is GF(2)-linear,
fp(c^{iB}(P)) = Φ_i · bits(P) with Φ_i the fingerprints of c^{iB}(X_q), c^{iB}(Z_q); Φ_{i+1} is
Φ_i times the bit matrix of c^B (one GF(2) product of 2n x 2n by 2n x 128, done as a float matrix
product mod 2), so a giant step costs no walk at all. A giant fingerprint equal to a baby one,
c^{iB}(P_t) = ± c^j(P_u), gives the offset m = iB - j of u from t (u = t: the orbit length). Giant
steps go on until every term's orbit has closed (or has no neighbour within N repetitions); the cost
is B repetitions plus about max L / B cheap steps instead of max L repetitions.

Signs are not linear, so they are taken only for the few relations used: c^{iB} as a stim tableau
power of c^B, applied to P_t, compared with the phase of the baby image.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
import scipy.sparse

from budget.engines.frame.groups import group_rows
from budget.engines.frame.pauli_frame import Frame, num_words, unpack_bits

MAX_GIANT_STEPS = 1024
"""Giant steps taken at most (offsets up to this many times B repetitions) before giving up."""


@dataclass(frozen=True)
class FoldedTerms:
    """The coherent terms of one folded block as runs of equal group amplitude.

    Row g of ``w`` is a run of ``lens[g]`` landing Paulis that all carry the amplitude
    (w @ amps)[g]; ``w[g, t]`` is how many times (with sign) term t lands on each of them. Shares
    of term t: Re(conj(amps[t]) · Σ_g lens[g] w[g, t] A_g).
    """

    w: scipy.sparse.csr_matrix
    lens: np.ndarray
    amps: np.ndarray
    tags: np.ndarray


@dataclass
class OrbitRecord:
    """What the search found (``details["orbit_folds"]`` and tests); field names are the keys."""

    count: int
    baby_steps: int
    giant_steps: int
    distinct_paulis: int
    orbits: int
    longest_orbit: int | None
    open_orbits: int
    sign_flipping_orbits: int
    orbits_with_several_paulis: int
    tableau_powers: int

    def as_dict(self) -> dict:
        return dataclasses.asdict(self)


def _slots(x: np.ndarray, z: np.ndarray, n: int) -> np.ndarray:
    """(R, w) frame-row indices of the set bits of Pauli rows (X_q -> q, Z_q -> n + q), padded
    with 2n (the identity row), X bits first: the generator order of ``Frame.image``."""
    bits = np.concatenate([unpack_bits(x, n), unpack_bits(z, n)], axis=1)
    width = max(1, int(bits.sum(axis=1).max()) if len(bits) else 1)
    order = np.argsort(-bits.astype(np.int16), axis=1, kind="stable")[:, :width]
    return np.where(np.take_along_axis(bits, order, axis=1) == 1, order, 2 * n)


class _XorProduct:
    """GF(2) products out[r] = XOR of ``table_of[b]`` over the set bits b of fixed byte-rows.

    ``rows`` (R, C) uint8, bit b at byte b // 8, bit b % 8; ``table_of`` (8C, 2) uint64 changes
    from call to call. Uses a table of all 256 XOR combinations per byte (the "four Russians"
    method, Arlazarov, Dinic, Kronrod & Faradzev, Dokl. Akad. Nauk SSSR 194 (1970)): C lookups per
    row instead of 8C; the lookup positions depend only on ``rows`` and are built once.
    """

    def __init__(self, rows: np.ndarray):
        self.c = rows.shape[1]
        self.index = rows.astype(np.int32) + (np.arange(self.c, dtype=np.int32) * 256)[None]

    def __call__(self, table_of: np.ndarray) -> np.ndarray:
        c = self.c
        per_bit = table_of.reshape(c, 8, 2)
        table = np.zeros((256, c, 2), np.uint64)
        for v in range(1, 256):
            low = (v & -v).bit_length() - 1
            table[v] = table[v & (v - 1)] ^ per_bit[:, low]
        flat = table.transpose(1, 0, 2).reshape(c * 256, 2)
        lo, hi = np.ascontiguousarray(flat[:, 0]), np.ascontiguousarray(flat[:, 1])
        return np.stack(
            [np.bitwise_xor.reduce(np.take(lo, self.index), axis=1), np.bitwise_xor.reduce(np.take(hi, self.index), axis=1)],
            axis=1,
        )


def _padded_bytes(frame: Frame) -> np.ndarray:
    """(2n, 16W) uint8: x words then z words of each generator row, as bytes."""
    n = frame.n
    return np.ascontiguousarray(np.concatenate([frame.x[: 2 * n], frame.z[: 2 * n]], axis=1)).view(np.uint8)


def _padded_index(n: int) -> np.ndarray:
    """Position in the padded bit space (x bits 0..64W-1, z bits 64W..) of generator b < 2n."""
    wb = num_words(n) * 64
    q = np.arange(n)
    return np.concatenate([q, wb + q])


class _BabyTable:
    """Lookup of (point, step) by fingerprint."""

    def __init__(self, keys: np.ndarray):  # keys (B, D, 2)
        b, d = keys.shape[:2]
        flat = keys.reshape(-1, 2)
        self.order = np.argsort(flat[:, 0], kind="stable")
        self.k0 = flat[self.order, 0]
        self.k1 = flat[self.order, 1]
        self.d = d

    def find(self, q: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(query index, step j, point) of every baby entry equal to a query fingerprint."""
        order = np.argsort(q[:, 0])  # sorted queries walk the table in order (cache friendly)
        lo, hi = np.empty(len(q), np.int64), np.empty(len(q), np.int64)
        lo[order] = np.searchsorted(self.k0, q[order, 0], "left")
        hi[order] = np.searchsorted(self.k0, q[order, 0], "right")
        n = hi - lo
        qi = np.repeat(np.arange(len(q)), n)
        pos = np.repeat(lo - np.cumsum(n) + n, n) + np.arange(n.sum())
        ok = self.k1[pos] == q[qi, 1]
        qi, flat = qi[ok], self.order[pos[ok]]
        return qi, flat // self.d, flat % self.d


class _Forest:
    """Union-find over points, keeping the spanning edges (u, v, m, hit) that joined components."""

    def __init__(self, d: int):
        self.parent = np.arange(d)
        self.edges: list[tuple[int, int, int, tuple[int, int]]] = []
        self.joined = np.zeros(d, bool)

    def root(self, a: int) -> int:
        p = self.parent
        while p[a] != a:
            p[a] = p[p[a]]
            a = p[a]
        return a

    def join(self, u: int, v: int, m: int, hit: tuple[int, int]) -> None:
        ru, rv = self.root(u), self.root(v)
        if ru != rv:
            self.parent[ru] = rv
            self.edges.append((u, v, m, hit))
            self.joined[u] = self.joined[v] = True

    def labels(self) -> np.ndarray:
        """Root of every point (vectorised path halving)."""
        p = self.parent
        while True:
            q = p[p]
            if np.array_equal(q, p):
                return p
            p[:] = q

    def join_all(self, u: np.ndarray, v: np.ndarray, m: np.ndarray, i: int, j: np.ndarray) -> None:
        """Join the pairs that link different components (one pair per pair of components)."""
        lab = self.labels()
        cross = lab[u] != lab[v]
        if not cross.any():
            return
        u, v, m, j = u[cross], v[cross], m[cross], j[cross]
        _, first = np.unique(np.stack([lab[u], lab[v]], axis=1), axis=0, return_index=True)
        for k in np.sort(first):
            self.join(int(u[k]), int(v[k]), int(m[k]), (i, int(j[k])))


class OrbitSearch:
    """Orbits of the distinct term Paulis of one block (see module docstring).

    Args:
        count: repetitions N of the block.
        baby_keys: (B, T, 2) fingerprints of c^j(P_t), j < B, for T terms (emission order);
            baby_phases (B, T) their phase exponents, -1 where not known yet (then taken from
            ``frames[j]``, the frame of c^j, when needed).
        images: (x, z, e) explicit rows of P_t at the block's end (j = 0).
        step: the frame of c^B (block-relative).
        starts, counts: term t lands on c^{start + k}(P_t) for k < count (block terms: 0 and N;
            terms after the block: 0 and 1; terms before it, pushed to the block's start: N and 1).
    """

    def __init__(
        self,
        count: int,
        baby_keys: np.ndarray,
        baby_phases: np.ndarray,
        images,
        step: Frame,
        *,
        starts: np.ndarray | None = None,
        counts: np.ndarray | None = None,
        frames: list[Frame] | None = None,
    ):
        self.count = count
        self.n = step.n
        self.baby = baby_keys.shape[0]
        t = baby_keys.shape[1]
        self.starts = np.zeros(t, np.int64) if starts is None else np.asarray(starts, np.int64)
        self.counts = np.full(t, count, np.int64) if counts is None else np.asarray(counts, np.int64)
        self.outside = bool(np.any(self.counts != count) or np.any(self.starts != 0))
        x, z, e = images
        inv, first = group_rows(baby_keys[0])
        self.inv, self.first = inv, first
        rel = (e.astype(np.int64) - e[first][inv]) & 3
        if np.any(rel & 1):
            raise ValueError("terms on one Pauli differ by a phase other than ±1 (internal error)")
        self.rho = 1 - rel  # term sign relative to its point's representative
        self.px, self.pz, self.pe = x[first], z[first], e[first]
        self.keys = baby_keys[:, first]
        self.phases = baby_phases[:, first].astype(np.int64)
        self.frames = frames
        self.step = step
        self.slots = _slots(self.px, self.pz, self.n)
        self._powers: dict[int, Frame] = {}

    # -- giant steps -------------------------------------------------------------------------
    def run(self, *, max_giant: int | None = None) -> tuple[list, OrbitRecord] | None:
        max_giant = MAX_GIANT_STEPS if max_giant is None else max_giant
        n, b, d = self.n, self.baby, len(self.first)
        table = _BabyTable(self.keys)
        product = _XorProduct(_padded_bytes(self.step))  # rows: bits of c^B(generator b)
        where = _padded_index(n)
        phi = np.zeros((2 * num_words(n) * 64, 2), np.uint64)  # fp of c^{iB}(generator), padded space
        phi[where] = Frame.identity(n).fxz[: 2 * n]  # i = 0: fingerprints of the generators
        slots = self.slots
        point_bytes = np.ascontiguousarray(np.concatenate([self.px, self.pz], axis=1)).view(np.uint8)
        by_bytes = _XorProduct(point_bytes) if slots.shape[1] > point_bytes.shape[1] // 4 else None
        length = np.zeros(d, np.int64)  # 0: orbit not closed yet
        close_hit: dict[int, tuple[int, int]] = {}
        forest = _Forest(d)
        i = 0
        while True:
            i += 1
            if i > max_giant:
                return None
            step = product(phi)  # fp of c^{iB}(generator b) = fp of c^{(i-1)B}(c^B(b))
            phi = np.zeros_like(phi)
            phi[where] = step
            if by_bytes is None:  # few generators per point: XOR their fingerprints
                g = np.bitwise_xor.reduce(np.concatenate([step, np.zeros((1, 2), np.uint64)])[slots], axis=1)
            else:  # dense points: one byte-table product, like the step itself
                g = by_bytes(phi)
            qi, j, p = table.find(g)
            m = i * b - j
            own = p == qi
            sel = own & (length[qi] == 0)
            best = np.full(d, -1, np.int64)
            np.maximum.at(best, qi[sel], j[sel])  # largest j: the smallest offset, the orbit length
            for u in np.flatnonzero(best >= 0):
                length[u] = i * b - best[u]
                close_hit[int(u)] = (i, int(best[u]))
            forest.join_all(qi[~own], p[~own], m[~own], i, j[~own])
            open_ = length == 0
            if not open_.any():
                break
            reach = self.count + b if self.outside else self.count - 1
            if i * b >= reach and not np.any(open_ & forest.joined):
                break
        return self._assemble(length, close_hit, forest, i)

    # -- signs -------------------------------------------------------------------------------
    def _power(self, i: int) -> Frame:
        """The frame of c^{iB} (stim tableau power of c^B, by repeated squaring)."""
        if i not in self._powers:
            if not self._powers:
                self._base = self.step.to_stim()
            self._powers[i] = Frame.from_stim(self._base**i)
        return self._powers[i]

    def _signs(self, asks: list[tuple[int, tuple[int, int], int]]) -> np.ndarray:
        """σ in c^{iB}(P_u) = σ c^j(P_w) for each (u, (i, j), w).

        When the offset m = iB - j is below B, c^m(P_u) is a baby image whose phase the walk
        recorded: σ compares it with P_w's. Otherwise the image through c^{iB} (a stim tableau
        power) is formed with its phase and compared with the phase of the baby image."""
        out = np.zeros(len(asks), np.int64)
        b = self.baby
        by_i: dict[int, list[int]] = {}
        near: list[int] = []
        for a, (_, (i, j), _) in enumerate(asks):
            (near if i * b - j < b else by_i.setdefault(i, [])).append(a)
        if near:
            u = np.array([asks[a][0] for a in near])
            m = np.array([asks[a][1][0] * b - asks[a][1][1] for a in near])
            w = np.array([asks[a][2] for a in near])
            self._fill_phases(m, u)
            self._fill_phases(np.zeros_like(w), w)
            if not np.array_equal(self.keys[m, u], self.keys[0, w]):
                raise ValueError("orbit search: a matched fingerprint is not the same Pauli (internal error)")
            out[near] = self._sign_of((self.phases[m, u] - self.phases[0, w]) & 3)
        for i, idx in by_i.items():
            u = np.array([asks[a][0] for a in idx])
            j = np.array([asks[a][1][1] for a in idx])
            w = np.array([asks[a][2] for a in idx])
            frame = self._power(i)
            _, _, e = frame.image(self.slots[u], self.pe[u])
            self._fill_phases(j, w)
            if not np.array_equal(np.bitwise_xor.reduce(frame.fxz[self.slots[u]], axis=1), self.keys[j, w]):
                raise ValueError("orbit search: a matched fingerprint is not the same Pauli (internal error)")
            out[idx] = self._sign_of((e.astype(np.int64) - self.phases[j, w]) & 3)
        return out

    @staticmethod
    def _sign_of(d: np.ndarray) -> np.ndarray:
        if np.any(d & 1):
            raise ValueError("orbit search: non-Hermitian relation (internal error)")
        return 1 - d

    def _fill_phases(self, j: np.ndarray, w: np.ndarray) -> None:
        """Phase exponents of c^j(P_w) not recorded by the walk, from the frames of c^j."""
        for jj in np.unique(j[self.phases[j, w] < 0]):
            ws = np.unique(w[(j == jj) & (self.phases[j, w] < 0)])
            self.phases[jj, ws] = self.frames[jj].image(self.slots[ws], self.pe[ws])[2]

    # -- positions and runs ------------------------------------------------------------------
    def _assemble(self, length, close_hit, forest: _Forest, steps: int):
        d = len(self.first)
        eps = np.ones(d, np.int64)
        closing = [(u, hit, u) for u, hit in close_hit.items()]
        signs = self._signs(closing + [(u, hit, w) for u, w, _, hit in forest.edges])
        eps[[u for u, _, _ in closing]] = signs[: len(closing)]
        adj: dict[int, list[tuple[int, int, int]]] = {}
        for (u, w, m, _), sg in zip(forest.edges, signs[len(closing) :]):
            sg = int(sg)  # P_w = sg c^m(P_u)
            adj.setdefault(u, []).append((w, m, sg))
            adj.setdefault(w, []).append((u, -m, sg))
        pos = np.zeros(d, np.int64)
        sign = np.ones(d, np.int64)
        seen = np.zeros(d, bool)
        comps: list[list[int]] = []
        for r in range(d):
            if seen[r]:
                continue
            seen[r] = True
            comp, stack = [r], [r]
            while stack:
                a = stack.pop()
                for w, m, sg in adj.get(a, ()):
                    if seen[w]:
                        continue
                    seen[w] = True
                    p, s = pos[a] + m, sign[a] * sg
                    if length[r]:
                        wraps, p = divmod(int(p), int(length[r]))
                        s *= int(eps[r]) ** (wraps & 1)
                    pos[w], sign[w] = p, s
                    comp.append(w)
                    stack.append(w)
            comps.append(comp)
        record = OrbitRecord(
            count=self.count,
            baby_steps=self.baby,
            giant_steps=steps,
            distinct_paulis=d,
            orbits=len(comps),
            longest_orbit=int(length.max()) if length.any() else None,
            open_orbits=int(np.count_nonzero(length == 0)),
            sign_flipping_orbits=sum(1 for c in comps if eps[c[0]] == -1),
            orbits_with_several_paulis=sum(1 for c in comps if len(c) > 1),
            tableau_powers=len(self._powers),
        )
        return (comps, pos, sign, length, eps), record

    def unmatched(self, coef: np.ndarray, tags: np.ndarray, *, first: int) -> FoldedTerms:
        """Terms from ``first`` on (those outside the block) as groups of equal Pauli, not matched
        against the block's images: the approximate fallback when the search gave up."""
        keep = np.arange(first, len(self.inv))
        points, inv = np.unique(self.inv[keep], return_inverse=True)
        w = scipy.sparse.csr_matrix((np.ones(len(keep)), (inv.reshape(-1), keep)), shape=(len(points), len(self.inv)))
        return FoldedTerms(w, np.ones(len(points)), (coef * self.rho).astype(float), tags)

    def folded(self, coef: np.ndarray, tags: np.ndarray) -> tuple[FoldedTerms, OrbitRecord] | None:
        """Run the search and return the block's terms as runs, or None when it gave up."""
        found = self.run()
        if found is None:
            return None
        (comps, pos, sign, length, eps), record = found
        n_pts, t = len(self.first), len(self.inv)
        # pulses: distinct (point, start, count) among the terms
        pulse_key = np.stack([self.inv, self.starts, self.counts], axis=1)
        pulses, term_pulse = np.unique(pulse_key, axis=0, return_inverse=True)
        term_pulse = term_pulse.reshape(-1)
        by_point = _terms_by_point(pulses[:, 0], n_pts)
        plain = np.array([len(by_point[c[0]]) == 1 for c in comps], bool)
        single = np.array([c[0] for c, ok in zip(comps, plain) if ok and len(c) == 1], np.int64)
        one = np.array([by_point[p][0] for p in single], np.int64)
        lone = (pulses[one, 1] == 0) & (pulses[one, 2] == self.count) if len(one) else np.zeros(0, bool)
        lens, idx, vals = _single_runs(self.count, length[single[lone]], eps[single[lone]])
        rows, cols, data, all_lens = [np.arange(len(lens))], [one[lone][idx]], [vals], [lens]
        g = len(lens)
        done = set(single[lone].tolist())
        for comp in comps:
            if comp[0] in done:
                continue
            members = np.concatenate([by_point[p] for p in comp])
            at = pos[pulses[members, 0]] + pulses[members, 1]
            seg_lens, weights = runs(self.count, int(length[comp[0]]), int(eps[comp[0]]), at, pulses[members, 2])
            r, k = np.nonzero(weights)
            rows.append(g + r)
            cols.append(members[k])
            data.append(weights[r, k])
            all_lens.append(seg_lens)
            g += len(seg_lens)
        per_pulse = scipy.sparse.csr_matrix(
            (np.concatenate(data), (np.concatenate(rows), np.concatenate(cols))), shape=(g, len(pulses))
        )
        incidence = scipy.sparse.csr_matrix((np.ones(t), (term_pulse, np.arange(t))), shape=(len(pulses), t))
        amps = coef * self.rho * sign[self.inv]
        return FoldedTerms((per_pulse @ incidence).tocsr(), np.concatenate(all_lens), amps.astype(float), tags), record


def _terms_by_point(inv: np.ndarray, d: int) -> list[np.ndarray]:
    order = np.argsort(inv, kind="stable")
    bounds = np.searchsorted(inv[order], np.arange(d + 1))
    return [order[bounds[k] : bounds[k + 1]] for k in range(d)]


def _single_runs(count: int, length: np.ndarray, eps: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Runs of orbits holding one distinct Pauli (see :func:`runs`), vectorised:
    (run lengths, index into the inputs, weights)."""
    idx = np.arange(len(length))
    parts = []
    open_ = length == 0
    parts.append((np.full(open_.sum(), float(count)), idx[open_], np.ones(open_.sum())))
    plus = (length > 0) & (eps == 1)
    q, s = np.divmod(count, np.maximum(length, 1))
    for sel, size, weight in ((plus & (s > 0), s, q + 1), (plus & (q > 0), length - s, q)):
        parts.append((size[sel].astype(float), idx[sel], weight[sel].astype(float)))
    minus = (length > 0) & (eps == -1)
    s2 = count % np.maximum(2 * length, 1)
    size = np.minimum(s2, 2 * length - s2)
    sel = minus & (size > 0)
    parts.append((size[sel].astype(float), idx[sel], np.ones(sel.sum())))
    return tuple(np.concatenate([p[i] for p in parts]) for i in range(3))


def runs(count, length: int, eps: int, pos: np.ndarray, counts: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Runs of equal weights for terms at offsets ``pos`` on one orbit.

    Term k lands on orbit positions pos_k, pos_k + 1, ..., pos_k + counts_k - 1 (``counts``
    defaults to ``count`` for every term). On a closed orbit of length L and sign ε
    (c^L(P) = ε P), position p stands for the Pauli at p mod L with sign ε^(p div L). Returns
    (run lengths (S,), weights (S, K)): the signed number of times term k lands on each Pauli of
    run s. ``length`` 0 means an open orbit (a line: no wrapping).
    """
    pos = np.asarray(pos, np.int64)
    cnt = np.full(len(pos), count, np.int64) if counts is None else np.asarray(counts, np.int64)
    if length == 0:
        starts = np.unique(np.concatenate([pos, pos + cnt]))
        ends = starts[1:]
        starts = starts[:-1]
        w = ((starts[:, None] >= pos[None]) & (starts[:, None] < (pos + cnt)[None])).astype(float)
    else:
        circle = length if eps == 1 else 2 * length
        q, s = np.divmod(cnt, circle)
        pos = pos % circle
        cuts = np.concatenate([[0], pos % length, ((pos + s) % circle) % length])
        starts = np.unique(cuts)
        ends = np.append(starts[1:], length)

        def on(p: np.ndarray) -> np.ndarray:
            return (((p[:, None] - pos[None]) % circle) < s[None]).astype(float)

        w = q[None] + on(starts) if eps == 1 else on(starts) - on(starts + length)
    lens = (ends - starts).astype(float)
    keep = np.any(w != 0, axis=1) & (lens > 0)
    return lens[keep], w[keep]
