"""Collect the mapped error terms of every executed layer (what the walker emits into).

Three collectors, one per question:

- :class:`PauliSink` (process metric, walked with ``"push"``): coherent terms keyed by their full
  output-frame Pauli with real signed amplitude h·s; stochastic rates summed; optionally where each
  stochastic term lands (its support) for the per-qubit map.
- :class:`PauliSink` with ``key="x"`` (state metric, walked with ``"pull"``): coherent terms keyed
  by the X part of the input-frame Pauli, amplitude h·i^e (the Pauli's action on |0…0> is i^e |x>);
  a stochastic term counts only when its X part is non-zero (Z-type Paulis leave |0…0> alone).
- :class:`ObservableSink` (``"pull"``): the first-order change of <O> for a Pauli observable O,
  δ<O> = i <ψ|[H, O]|ψ> = 2i h <0|Q O_in|0> for each coherent term Q anticommuting with O, and
  -2 p <O> for each stochastic one (all in the input frame).

Each emitted layer is one batch; the walker multiplies a batch's weights afterwards when a repeated
block is folded (:meth:`scale`).
"""

from __future__ import annotations

import numpy as np

from budget.engines._pauli_frame import Frame, hermitian_sign, popcount, unpack_bits
from budget.engines._terms import TermBuilder, Terms
from budget.errors.noisy import NoisyLayer


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


class PauliSink(_Batches):
    """Coherent terms by Pauli key, stochastic rates by source (see module docstring).

    Args:
        builder: the term builder of this circuit.
        key: ``"xz"`` (full Pauli, process metric) or ``"x"`` (X part, state metric).
        landing: also record the support of every stochastic term (``"xz"`` only).
        unit: collect the knob unit terms instead of the Hamiltonian (quadratic form).
    """

    def __init__(self, builder: TermBuilder, *, key: str, landing: bool = False, unit: bool = False):
        super().__init__()
        self.builder = builder
        self.key = key
        self.landing = landing and key == "xz"
        self.unit = unit
        self.keys: list[np.ndarray] = []
        self.amps: list[np.ndarray] = []
        self.srcs: list[np.ndarray] = []
        self.batch_of: list[int] = []
        self.sto_src: list[tuple[int, np.ndarray, np.ndarray]] = []  # (batch, sources, rates)
        self.sto_log: list[float] = []  # per batch: Σ log(1 - p) of counted terms
        self.sto_land: dict[int, np.ndarray] = {}

    def emit(self, layer: NoisyLayer, frame: Frame) -> None:
        b = self._new()
        terms = self.builder.layer(layer)
        coh = terms.unit if self.unit else terms.coherent
        if len(coh):
            x, z, e = frame.image(coh.slots, coh.e0)
            if self.key == "xz":
                self.keys.append(np.concatenate([x, z], axis=1))
                self.amps.append(coh.coef * hermitian_sign(x, z, e))
            else:
                self.keys.append(x)
                self.amps.append(coh.coef * (1j) ** e.astype(np.int64))
            self.srcs.append(coh.src)
            self.batch_of.append(b)
        self._stochastic(b, terms.stochastic, frame)

    def _stochastic(self, b: int, sto: Terms, frame: Frame) -> None:
        if not len(sto):
            self.sto_log.append(0.0)
            return
        rates, src = sto.coef, sto.src
        if self.key == "x":
            counted = np.any(frame.image_x(sto.slots) != 0, axis=1)
            rates, src = rates[counted], src[counted]
        elif self.landing:
            supp = frame.image_x(sto.slots) | _image_z(frame, sto.slots)
            self.sto_land[b] = rates @ unpack_bits(supp, frame.n)
        uniq, inv = np.unique(src, return_inverse=True)
        self.sto_src.append((b, uniq, np.bincount(inv, weights=rates, minlength=len(uniq))))
        self.sto_log.append(float(np.sum(np.log1p(-np.minimum(rates, 1.0)))))

    def coherent_terms(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(keys, amplitudes with batch factors applied, sources) of every coherent term."""
        if not self.keys:
            w = self.builder.n
            width = (2 if self.key == "xz" else 1) * max(1, (w + 63) // 64)
            return np.zeros((0, width), np.uint64), np.zeros(0, complex), np.zeros(0, np.int64)
        factors = np.concatenate(
            [np.full(len(a), self.amp[b]) for a, b in zip(self.amps, self.batch_of)]
        )
        return np.concatenate(self.keys), np.concatenate(self.amps) * factors, np.concatenate(self.srcs)

    def stochastic_by_source(self, num_sources: int) -> np.ndarray:
        """Counted first-order stochastic infidelity per source, batch factors applied."""
        out = np.zeros(num_sources)
        for b, uniq, sums in self.sto_src:
            np.add.at(out, uniq, sums * self.prob[b])
        return out

    def stochastic_log_fidelity(self) -> float:
        """Σ m log(1 - p) over counted stochastic terms (m = multiplicity)."""
        return float(sum(v * self.prob[b] for b, v in enumerate(self.sto_log)))

    def stochastic_landing(self, n: int) -> np.ndarray:
        out = np.zeros(n)
        for b, v in self.sto_land.items():
            out += v * self.prob[b]
        return out


def _image_z(frame: Frame, slots: np.ndarray) -> np.ndarray:
    acc = frame.z[slots[:, 0]]
    for j in range(1, slots.shape[1]):
        acc = acc ^ frame.z[slots[:, j]]
    return acc


class ObservableSink(_Batches):
    """First-order error of one Pauli observable O, given O in the input frame (x_o, z_o, e_o)."""

    def __init__(self, builder: TermBuilder, observable: tuple[np.ndarray, np.ndarray, int]):
        super().__init__()
        self.builder = builder
        self.xo, self.zo, self.eo = observable
        self.expect = float((1j ** self.eo).real) if not np.any(self.xo) else 0.0  # <0|O_in|0>
        self.coherent: list[float] = []
        self.stochastic: list[float] = []

    def emit(self, layer: NoisyLayer, frame: Frame) -> None:
        self._new()
        terms = self.builder.layer(layer)
        c = terms.coherent
        value = 0.0
        if len(c):
            x, z, e = frame.image(c.slots, c.e0)
            anti = ((popcount(x & self.zo) + popcount(z & self.xo)) & 1).astype(bool)
            hit = anti & np.all(x == self.xo, axis=1)
            if np.any(hit):
                ph = (e[hit].astype(np.int64) + self.eo + 2 * popcount(z[hit] & self.xo)) & 3
                value = float(np.real(np.sum(2j * c.coef[hit] * (1j) ** ph)))
        self.coherent.append(value)
        s = terms.stochastic
        value = 0.0
        if len(s) and self.expect:
            x = frame.image_x(s.slots)
            z = _image_z(frame, s.slots)
            anti = ((popcount(x & self.zo) + popcount(z & self.xo)) & 1).astype(bool)
            value = -2.0 * self.expect * float(np.sum(s.coef[anti]))
        self.stochastic.append(value)

    def total(self) -> tuple[float, float]:
        """(coherent, stochastic) first-order change of <O>, batch factors applied."""
        coh = float(np.dot(self.coherent, self.prob)) if self.coherent else 0.0
        sto = float(np.dot(self.stochastic, self.prob)) if self.stochastic else 0.0
        return coh, sto
