"""Collect the mapped error terms of every executed layer (what the walker emits into).

Per layer, each site's 16 local Paulis are mapped at once (:func:`site_images`): the image of
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

from budget.engines._pauli_frame import Frame, fingerprints, popcount, unpack_bits
from budget.engines._terms import LayerTable, TermBuilder, stochastic_terms, term_slots
from budget.errors.noisy import NoisyLayer

BITS16 = (np.arange(16)[:, None] >> np.arange(4)) & 1
"""(16, 4): the generator bits of each local Pauli index v."""

PHASE = np.array([1, 1j, -1, -1j])
"""i^e for e = 0..3."""


def site_images(frame: Frame, rows: np.ndarray, *, full: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Fingerprints (S, 16, 2) and phases (S, 16) of the images of all 16 local Paulis per site,
    plus the sites' frame rows x, z (S, 4, W). ``full`` fingerprints the whole Pauli, else the X part."""
    fp = (frame.fxz if full else frame.fx)[rows]
    e = frame.e[rows].astype(np.int64)
    x, z = frame.x[rows], frame.z[rows]
    cross = np.zeros(rows.shape + (4,), np.int64)
    for i in range(3):
        for j in range(i + 1, 4):
            cross[:, i, j] = popcount(z[:, i] & x[:, j]) & 1
    f16 = np.zeros((len(rows), 16, 2), np.uint64)
    e16 = np.zeros((len(rows), 16), np.int64)
    for v in range(1, 16):
        j = v.bit_length() - 1
        rest = v ^ (1 << j)
        f16[:, v] = f16[:, rest] ^ fp[:, j]
        e16[:, v] = e16[:, rest] + e[:, j] + 2 * (cross[:, :, j] @ BITS16[rest])
    return f16, e16 & 3, x, z


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
        self.keys: list[np.ndarray] = []
        self.amps: list[np.ndarray] = []
        self.tags: list[np.ndarray] = []
        self.batch_of: list[int] = []
        self.sto: list[tuple[int, np.ndarray, np.ndarray]] = []  # batch, sources, summed rates
        self._static: dict[int, tuple] = {}
        self.terms_emitted = 0
        self.rates_emitted = 0

    def emit(self, layer: NoisyLayer, frame: Frame) -> None:
        b = self._new()
        table = self.builder.layer(layer)
        terms = table.unit if self.unit else table.coherent
        state = self.key == "x"
        if len(terms) or (state and len(table.rows)):
            f16, e16, _, _ = site_images(frame, table.rows, full=not state)
        if len(terms):
            self.keys.append(f16[terms.site, terms.v])
            self.amps.append(terms.coef * PHASE[(e16[terms.site, terms.v] + terms.e0) & 3])
            self.tags.append(terms.tag)
            self.batch_of.append(b)
            self.terms_emitted += len(terms)
        if not len(table.rows):
            return
        self.rates_emitted += int(np.count_nonzero(table.rates))
        if state:
            counted = np.where(np.any(f16 != 0, axis=2), table.rates, 0.0)
            uniq, sums = _per_source(table, counted.sum(axis=1))
            self.sto.append((b, uniq, sums))
        else:
            if id(table) not in self._static:
                self._static[id(table)] = _per_source(table, table.rates.sum(axis=1))
            self.sto.append((b,) + self._static[id(table)])

    def coherent_terms(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(fingerprints, amplitudes with batch factors applied, tags) of every coherent term."""
        if not self.keys:
            return np.zeros((0, 2), np.uint64), np.zeros(0, complex), np.zeros(0, np.int64)
        factors = np.concatenate([np.full(len(a), self.amp[b]) for a, b in zip(self.amps, self.batch_of)])
        return np.concatenate(self.keys), np.concatenate(self.amps) * factors, np.concatenate(self.tags)

    def stochastic_by_source(self, num_sources: int) -> np.ndarray:
        """Counted first-order stochastic infidelity per source, batch factors applied."""
        out = np.zeros(num_sources)
        for b, uniq, sums in self.sto:
            np.add.at(out, uniq, sums * self.prob[b])
        return out


class ObservableSink(_Batches):
    """First-order error of one Pauli observable O given in the input frame as full rows."""

    def __init__(self, builder: TermBuilder, observable: tuple[np.ndarray, np.ndarray, int]):
        super().__init__()
        self.builder = builder
        self.xo, self.zo, self.eo = observable
        self.fo = fingerprints(self.xo[None], None)[0]
        self.expect = float((1j**self.eo).real) if not np.any(self.xo) else 0.0  # <0|O_in|0>
        self.values: list[float] = []

    def emit(self, layer: NoisyLayer, frame: Frame) -> None:
        self._new()
        table = self.builder.layer(layer)
        if not len(table.rows):
            self.values.append(0.0)
            return
        f16, e16, x, z = site_images(frame, table.rows, full=False)
        a = (popcount(x & self.zo) + popcount(z & self.xo)) & 1  # row anticommutes with O
        b = popcount(z & self.xo) & 1
        anti16 = (a @ BITS16.T) & 1
        b16 = (b @ BITS16.T) & 1
        value = 0.0
        c = table.coherent
        if len(c):
            hit = (anti16[c.site, c.v] == 1) & np.all(f16[c.site, c.v] == self.fo, axis=1)
            if np.any(hit):
                s, v = c.site[hit], c.v[hit]
                ph = (e16[s, v] + c.e0[hit] + self.eo + 2 * b16[s, v]) & 3
                value += float(np.real(np.sum(2j * c.coef[hit] * PHASE[ph])))
        if self.expect:
            value += -2.0 * self.expect * float(np.sum(table.rates * anti16))
        self.values.append(value)

    def total(self) -> float:
        """First-order change of <O>, batch factors applied."""
        return float(np.dot(self.values, self.prob)) if self.values else 0.0


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

    def emit(self, layer: NoisyLayer, frame: Frame) -> None:
        b = self._new()
        table = self.builder.layer(layer)
        n = frame.n
        c = table.coherent
        if len(c):
            x, z, e = frame.image(term_slots(table, c, n), c.e0)
            self.keys.append(np.concatenate([x, z], axis=1))
            self.amps.append(c.coef * PHASE[e])
            self.batch_of.append(b)
        site, v, rates = stochastic_terms(table)
        if len(rates):
            bits = (v[:, None].astype(np.int64) >> np.arange(4)) & 1
            slots = np.where(bits == 1, table.rows[site], 2 * n)
            supp = frame.image_x(slots) | frame.image_z(slots)
            self.land[b] = rates @ unpack_bits(supp, n)

    def landing(self, n: int) -> np.ndarray:
        """Σ_g |A_g|² [q ∈ supp Q_g] + Σ_t p_t [q ∈ supp Q_t], batch factors applied."""
        from budget.engines._groups import group_rows

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
                out += weight[i : i + 8192] @ unpack_bits(k[:, :w] | k[:, w:], n)
        return out
