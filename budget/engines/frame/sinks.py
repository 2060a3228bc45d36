"""Collect the mapped error terms of every executed layer (what the walker emits into).

Per layer, each site's local Paulis are mapped at once (:func:`site_images`): the image of
v = Π_{j∈v} row_j (slot order) has fingerprint XOR_j f_j (fingerprints are linear) and phase
e0 + Σ_j e_j + 2 Σ_{i<j both in v} |z_i ∧ x_j| (mod 4), from Z X = -X Z. So each term costs O(1)
after O(W) work per site. Collectors:

- :class:`GroupSink` ``key="xz"`` (process metric, ``"push"``): coherent terms keyed by the
  fingerprint of their output-frame Pauli, amplitude h·i^e (terms on the same Pauli share |x ∧ z|,
  so the common phase drops out of |A|² and of the shares); stochastic rates simply add.
- :class:`GroupSink` ``key="x"`` (state metric, ``"pull"``): keyed by the X part of the input-frame
  Pauli (its action on |0…0> is i^e |x>); a stochastic term counts only when its X part is not zero.
- :class:`ObservableSink` (``"pull"``): δ<O> = 2i h <0|Q O_in|0> for each coherent Q anticommuting
  with O (non-zero only when x_Q = x_O), and -2 p <O> for each anticommuting stochastic Pauli.
- :class:`LandingSink` (``"push"``, full bit rows): where each term lands, for the qubit map.

Each emitted layer is one batch; the walker multiplies a batch's weights afterwards when a repeated
block is folded (:meth:`_Batches.scale`).
"""

from __future__ import annotations

import numpy as np

from budget.engines.frame.rows import group_rows
from budget.engines.frame.pauli_frame import Frame, fingerprints, unpack_bits
from budget.engines.frame.terms import LayerTable, TermBuilder, stochastic_terms, term_slots
from budget.errors.noisy import NoisyLayer
from budget.memo import ObjectKey
from budget.pauli_algebra import popcount

BITS16 = (np.arange(16)[:, None] >> np.arange(4)) & 1
"""(16, 4): the generator bits of each local Pauli index v."""

PHASE = np.array([1, 1j, -1, -1j])
"""i^e for e = 0..3."""


_PAIRS = [(i, j) for j in range(4) for i in range(j)]
PAIR_BITS = np.array([[((v >> i) & 1) & ((v >> j) & 1) for i, j in _PAIRS] for v in range(16)])
"""(16, 6): which ordered generator pairs (i < j) a local Pauli v contains."""


def site_keys(frame: Frame, rows: np.ndarray, *, full: bool) -> np.ndarray:
    """Fingerprints (S, 16, 2) of the images of all 16 local Paulis of each site (XOR of rows)."""
    fp = (frame.fxz if full else frame.fx)[rows]
    f16 = np.zeros((len(rows), 16, 2), np.uint64)
    for v in range(1, 16):
        j = v.bit_length() - 1
        f16[:, v] = f16[:, v ^ (1 << j)] ^ fp[:, j]
    return f16


def site_cross(frame: Frame, rows: np.ndarray) -> np.ndarray:
    """(S, 6) parities |z_i ∧ x_j| mod 2 of each site's generator rows, for the pairs i < j.

    One-qubit sites (rows 1 and 3 are the identity) only need the pair (X_a, Z_a)."""
    x, z = frame.x, frame.z
    cross = np.zeros((len(rows), len(_PAIRS)), np.int64)
    cross[:, _PAIRS.index((0, 2))] = popcount(z[rows[:, 0]] & x[rows[:, 2]]) & 1
    two = rows[:, 1] != frame.n * 2
    if np.any(two):
        r2 = rows[two]
        for p, (i, j) in enumerate(_PAIRS):
            if (i, j) != (0, 2):
                cross[two, p] = popcount(z[r2[:, i]] & x[r2[:, j]]) & 1
    return cross


def term_phases(frame: Frame, table: LayerTable, terms) -> np.ndarray:
    """Phase exponents (T,) of the terms' images: e0 + Σ_j e_j + 2 Σ_{i<j in v} |z_i ∧ x_j| (mod 4)."""
    rows = table.rows[terms.site]
    cross = site_cross(frame, table.rows)[terms.site]
    e = (BITS16[terms.v] * frame.e[rows]).sum(axis=1) + 2 * (PAIR_BITS[terms.v] * cross).sum(axis=1)
    return (e + terms.e0) & 3


def site_images(frame: Frame, rows: np.ndarray, *, full: bool) -> tuple[np.ndarray, np.ndarray]:
    """Fingerprints (S, 16, 2) and phase exponents (S, 16) of the images of all 16 local Paulis."""
    e16 = frame.e[rows].astype(np.int64) @ BITS16.T + 2 * site_cross(frame, rows) @ PAIR_BITS.T
    return site_keys(frame, rows, full=full), e16 & 3


class _Batches:
    """Per-batch amplitude and probability factors (start at 1)."""

    def __init__(self) -> None:
        self.amp: list[float] = []
        self.prob: list[float] = []

    def mark(self) -> int:
        return len(self.amp)

    def scale(self, start: int, stop: int, amplitude: float, probability: float) -> None:
        for b in range(start, stop):
            self.amp[b] *= amplitude
            self.prob[b] *= probability

    def _new(self) -> int:
        self.amp.append(1.0)
        self.prob.append(1.0)
        return len(self.amp) - 1


def _per_source(table: LayerTable, per_site: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    uniq, inv = np.unique(table.source, return_inverse=True)
    return uniq, np.bincount(inv.reshape(-1), weights=per_site, minlength=len(uniq))


class GroupSink(_Batches):
    """Coherent terms by fingerprint, stochastic rates by source (see module docstring).

    Args:
        builder: the term builder of this circuit.
        key: ``"xz"`` (process metric) or ``"x"`` (state metric).
        unit: collect the knob unit terms instead of the Hamiltonian (quadratic form).
    """

    def __init__(self, builder: TermBuilder, *, key: str, unit: bool = False):
        super().__init__()
        self.builder, self.key, self.unit = builder, key, unit
        self.chunks: list[tuple[int, np.ndarray, np.ndarray, np.ndarray, np.ndarray]] = []  # batch, keys, coef, phase, tag
        self.sto: list[tuple[int, np.ndarray, np.ndarray]] = []  # batch, sources, summed rates
        self._static: dict[ObjectKey, tuple] = {}
        self.terms_emitted = 0
        self.rates_emitted = 0
        self.folded: list = []  # FoldedTerms of blocks folded by orbits (budget/engines/frame/orbits.py)

    def _terms(self, table: LayerTable):
        return table.unit if self.unit else table.coherent

    def orbit_terms(self, layer: NoisyLayer) -> int:
        """Number of coherent terms of a layer (the walker's test for folding by orbits, which
        applies to the process metric only; -1 for the state metric)."""
        return len(self._terms(self.builder.layer(layer))) if self.key == "xz" else -1

    def explicit_terms(self, layer: NoisyLayer, frame: Frame):
        """Full images (x, z, e) of the layer's coherent terms through ``frame``, with their
        coefficients and tags, or None."""
        table = self.builder.layer(layer)
        terms = self._terms(table)
        if not len(terms):
            return None
        x, z, e = frame.image(term_slots(table, terms.site, terms.v, frame.n), terms.e0)
        return x, z, e, terms.coef, terms.tag

    def explicit_stages(self, layer: NoisyLayer, frame: Frame) -> list[tuple]:
        """:meth:`explicit_terms` split by the layer's stages, in time order (terms of one stage
        commute; :func:`budget.errors.normal_form.site_stages`); empty without terms."""
        got = self.explicit_terms(layer, frame)
        if got is None:
            return []
        masks = self.builder.layer(layer).stages(self._terms(self.builder.layer(layer)))
        return [got] if masks is None else [tuple(a[m] for a in got) for m in masks]

    def emit(self, layer: NoisyLayer, frame: Frame) -> None:
        b = self._new()
        table = self.builder.layer(layer)
        terms = self._terms(table)
        state = self.key == "x"
        if len(terms) and frame is not None:  # None: the walker collected them elsewhere
            keys = site_keys(frame, table.rows, full=not state)[terms.site, terms.v]
            phase = term_phases(frame, table, terms).astype(np.uint8)
            self.chunks.append((b, keys, terms.coef, phase, terms.tag))  # coef, tag shared with the table
            self.terms_emitted += len(terms)
        if not len(table.rows):
            return
        self.rates_emitted += int(np.count_nonzero(table.rates))
        if state:
            site, v, rates = stochastic_terms(table)
            moved = np.any(site_keys(frame, table.rows, full=False)[site, v] != 0, axis=1)
            per_site = np.bincount(site[moved], weights=rates[moved], minlength=len(table.rows))
            uniq, sums = _per_source(table, per_site)
            self.sto.append((b, uniq, sums))
        else:
            key = ObjectKey(table)
            if key not in self._static:
                self._static[key] = _per_source(table, table.rates.sum(axis=1))
            self.sto.append((b,) + self._static[key])

    def coherent_terms(self, bucket: int | None = None, buckets: int = 1):
        """(fingerprints, amplitudes h·i^e with batch factors applied, tags) of the coherent terms,
        all of them or only those whose fingerprint falls in ``bucket`` of ``buckets`` (by the top
        bits of its first word), so that large sets can be grouped a part at a time."""
        keys, amps, tags = [np.zeros((0, 2), np.uint64)], [np.zeros(0, complex)], [np.zeros(0, np.int64)]
        shift = np.uint64(64 - max(1, (buckets - 1).bit_length()))
        for b, k, coef, phase, tag in self.chunks:
            if bucket is not None and buckets > 1:
                m = (k[:, 0] >> shift) == bucket
                k, coef, phase, tag = k[m], coef[m], phase[m], tag[m]
            keys.append(k)
            amps.append(coef * self.amp[b] * PHASE[phase])
            tags.append(tag)
        return np.concatenate(keys), np.concatenate(amps), np.concatenate(tags)

    @property
    def num_terms(self) -> int:
        return sum(len(c[2]) for c in self.chunks)

    def stochastic_by_source(self, num_sources: int) -> np.ndarray:
        """Counted first-order stochastic infidelity per source, batch factors applied."""
        out = np.zeros(num_sources)
        for b, uniq, sums in self.sto:
            np.add.at(out, uniq, sums * self.prob[b])
        return out


class ObservableSink(_Batches):
    """First-order errors of K Pauli observables O_k, given in the input frame as full rows.

    Args:
        builder: the term builder of this circuit.
        xo, zo: (K, W) bit rows of the observables pulled back to the input; eo: (K,) phases.
    """

    def __init__(self, builder: TermBuilder, xo: np.ndarray, zo: np.ndarray, eo: np.ndarray):
        super().__init__()
        self.builder = builder
        self.xo, self.zo, self.eo = xo, zo, eo.astype(np.int64)
        self.fo = fingerprints(xo, None)  # (K, 2)
        self.expect = np.where(np.any(xo != 0, axis=1), 0.0, PHASE[self.eo].real)  # <0|O_in|0>
        self.values: list[np.ndarray] = []
        self.coherent_values: list[np.ndarray] = []  # the coherent part of ``values``
        self.terms_seen = 0  # coherent terms walked (cost of a second pass over them)

    def emit(self, layer: NoisyLayer, frame: Frame) -> None:
        self._new()
        table = self.builder.layer(layer)
        value = np.zeros(len(self.eo))
        coherent = np.zeros(len(self.eo))
        self.values.append(value)
        self.coherent_values.append(coherent)
        if not len(table.rows):
            return
        self.terms_seen += len(table.coherent)
        f16, e16 = site_images(frame, table.rows, full=False)
        x, z = frame.x[table.rows], frame.z[table.rows]
        xo, zo = self.xo[:, None, None, :], self.zo[:, None, None, :]
        b = popcount(z[None] & xo) & 1  # (K, S, 4)
        a = (popcount(x[None] & zo) + b) & 1  # row anticommutes with O_k
        anti16 = (a @ BITS16.T) & 1  # (K, S, 16)
        b16 = (b @ BITS16.T) & 1
        c = table.coherent
        fc = f16[c.site, c.v]  # fingerprint of each coherent term's image, the same for every O_k
        for k in range(len(value)):
            if len(c):
                hit = (anti16[k, c.site, c.v] == 1) & np.all(fc == self.fo[k], axis=1)
                if np.any(hit):
                    s, v = c.site[hit], c.v[hit]
                    ph = (e16[s, v] + c.e0[hit] + self.eo[k] + 2 * b16[k, s, v]) & 3
                    coherent[k] += float(np.real(np.sum(2j * c.coef[hit] * PHASE[ph])))
                    value[k] += coherent[k]
            if self.expect[k]:
                value[k] += -2.0 * self.expect[k] * float(np.sum(table.rates * anti16[k]))

    def totals(self) -> np.ndarray:
        """First-order change of each <O_k>, batch factors applied."""
        if not self.values:
            return np.zeros(len(self.eo))
        return np.asarray(self.prob) @ np.array(self.values)

    def coherent_totals(self) -> np.ndarray:
        """The coherent (linear) part of :meth:`totals`."""
        if not self.coherent_values:
            return np.zeros(len(self.eo))
        return np.asarray(self.prob) @ np.array(self.coherent_values)


class LandingSink(_Batches):
    """Where errors land (output frame, ``"push"``), from full bit rows.

    Coherent terms are kept with their exact output Pauli (x and z words) so groups can be formed
    without fingerprints; stochastic terms add their rate to every qubit of their support.
    """

    def __init__(self, builder: TermBuilder):
        super().__init__()
        self.builder = builder
        self.keys: list[np.ndarray] = []
        self.amps: list[np.ndarray] = []
        self.batch_of: list[int] = []
        self.land: dict[int, np.ndarray] = {}
        self._slots: dict[ObjectKey, tuple[np.ndarray, np.ndarray, list]] = {}  # table -> slots

    def _layer_slots(self, table: LayerTable, n: int) -> tuple[np.ndarray, np.ndarray, list]:
        """(coherent slots, stochastic slots, runs (rate, term indices) of equal stochastic rates)
        of a table; they do not depend on
        the frame, so each table's are built once (the key holds the table)."""
        hit = self._slots.get(ObjectKey(table))
        if hit is None:
            c = table.coherent
            site, v, rates = stochastic_terms(table)
            order = np.argsort(rates, kind="stable")  # runs of equal rates (few per layer)
            values, starts = np.unique(rates[order], return_index=True)
            runs = [(float(r), order[a:b]) for r, a, b in zip(values, starts, [*starts[1:], len(order)])]
            hit = self._slots[ObjectKey(table)] = (term_slots(table, c.site, c.v, n), term_slots(table, site, v, n), runs)
        return hit

    def emit(self, layer: NoisyLayer, frame: Frame) -> None:
        b = self._new()
        table = self.builder.layer(layer)
        n = frame.n
        c = table.coherent
        coherent_slots, slots, runs = self._layer_slots(table, n)
        if len(c):
            x, z, e = frame.image(coherent_slots, c.e0)
            self.keys.append(np.concatenate([x, z], axis=1))
            self.amps.append(c.coef * PHASE[e])
            self.batch_of.append(b)
        if runs:
            supp = frame.image_x(slots) | frame.image_z(slots)
            land = np.zeros(n)
            for rate, idx in runs:  # column counts of the support bits, one run of equal rates at a time
                land += rate * unpack_bits(supp[idx], n).sum(axis=0, dtype=np.int64)
            self.land[b] = land

    def landing(self, n: int) -> np.ndarray:
        """Σ_g |A_g|² [q ∈ supp Q_g] + Σ_t p_t [q ∈ supp Q_t], batch factors applied."""
        out = np.zeros(n)
        for b, v in self.land.items():
            out += v * self.prob[b]
        if self.keys:
            keys = np.concatenate(self.keys)
            amps = np.concatenate(self.amps) * np.concatenate([np.full(len(a), self.amp[b]) for a, b in zip(self.amps, self.batch_of)])
            inv, first = group_rows(keys)
            weight = np.abs(np.bincount(inv, amps.real) + 1j * np.bincount(inv, amps.imag)) ** 2
            w = keys.shape[1] // 2
            for i in range(0, len(first), 8192):
                k = keys[first[i : i + 8192]]
                bits = unpack_bits(k[:, :w] | k[:, w:], n).astype(np.float32)
                out += weight[i : i + 8192].astype(np.float32) @ bits
        return out
