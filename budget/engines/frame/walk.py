"""Walk a noisy Clifford circuit once, keeping a running Pauli frame, with repeats folded.

Two directions:

- ``"pull"`` walks forwards and keeps π_t(P) = V_t† P V_t, V_t the circuit up to and including
  layer t. An error right after layer t is mapped back to the input frame by π_t (the state metric
  and observables are evaluated on |0…0>).
- ``"push"`` walks backwards and keeps σ_t(P) = S_t P S_t†, S_t the circuit after layer t. An error
  after layer t is mapped to the output frame by σ_t (process metric, where errors land).

Repeated blocks. A block C of Clifford layers maps Paulis by a signed permutation c, and the
Clifford group on n qubits is finite, so c^r = identity for some period r (signs included). The
errors of repetition k and k + r then land on the same Pauli with the same sign: N repetitions are
q = N // r whole periods plus s = N % r, and the terms of repetition k < r enter with weight
q + [k < s] (amplitudes for coherent terms, rates for stochastic ones). The walker unrolls one
repetition at a time and compares the frame with the frame at the block's start, so it finds r
while it goes; the cost is min(r, N) repetitions whatever N is (nested blocks multiply).

When no period turns up within ``max_unrolled`` repetitions and N is larger, the block is folded
approximately: the window of repetitions walked stands for N/K windows that do not interfere
(coherent amplitudes scaled by sqrt(N/K), rates by N/K, exact when no error of one window lands on
the Pauli of an error in another), and the frame after the block is the exact power c^N computed by
repeated squaring of tableaus (stim.Tableau ** N). A warning says so.

Long periods, process metric: when a top-level block is the only repeated block carrying coherent
terms, :meth:`Walker._orbit_repeat` walks only ``orbit_baby`` repetitions and hands the rest to
the orbit search of :mod:`budget.engines.frame.orbits` (cost independent of N and about B + r/B steps
instead of r repetitions); coherent terms of plain layers around it are collected in its frame by
:meth:`Walker._collect` and matched against its orbits.
"""

from __future__ import annotations

from typing import Protocol

import numpy as np

from budget.circuit.clifford_check import operation_clifford
from budget.circuit.walk import Kind, Visitor, gate_kind
from budget.engines.frame.orbits import OrbitSearch, _slots
from budget.engines.frame.pauli_frame import Frame, GateClass, layer_classes
from budget.errors.noisy import NoisyItem, NoisyLayer, NoisyRepeat
from budget.memo import ObjectKey

MAX_UNROLLED = 4096
"""Default cap on repetitions walked while looking for a block's period."""
ORBIT_BABY = 64
"""Baby steps (repetitions walked) of the orbit search for long-period blocks (see _orbits)."""
ORBIT_MIN_FACTOR = 4
"""The orbit search is used for blocks repeated at least this many times ORBIT_BABY."""
SNAPSHOT_STRIDE = 64
"""A copy of the frame is kept every this many repetitions, so that advancing the frame by the
remainder N mod r after folding re-walks fewer than this many repetitions."""


class Sink(Protocol):
    """Receives each executed layer's errors mapped through the frame."""

    def mark(self) -> int: ...

    def scale(self, start: int, stop: int, amplitude: float, probability: float) -> None: ...

    def emit(self, layer: NoisyLayer, frame: Frame) -> None: ...


class Walker(Visitor):
    """One pass over a circuit in one direction (see module docstring).

    ``plans`` may be shared between walkers over the same circuit objects (gate classes per layer
    and direction, keyed by object id; the caller keeps the circuit alive meanwhile).

    Attributes:
        frame: the running map; after :meth:`run`, the map of the whole circuit.
        periods: (block count N, period r or None) for every block folded.
        warnings: plain-words notes about approximate folding.
        layers_walked: executed layers actually visited (cost measure).
    """

    where = "clifford engine (Pauli-frame walk)"

    def __init__(
        self,
        n: int,
        direction: str,
        sink: Sink | None = None,
        *,
        max_unrolled: int = MAX_UNROLLED,
        plans: dict | None = None,
        orbit_baby: int = ORBIT_BABY,
        cycle_terms=None,
    ):
        if direction not in ("pull", "push"):
            raise ValueError(f"direction {direction!r}: expected 'pull' or 'push'")
        self.n = n
        self.direction = direction
        self.sink = sink
        self.max_unrolled = max_unrolled
        self.frame = Frame.identity(n)
        self.periods: list[tuple[int, int | None]] = []
        self.warnings: list[str] = []
        self.layers_walked = 0
        self._emit = sink is not None
        self._plans: dict[tuple, tuple[GateClass, ...]] = {} if plans is None else plans
        self.orbit_baby = orbit_baby
        self.orbit_records: list[dict] = []
        self._orbit_block: NoisyItem | None = None
        self._outside: tuple = (None, None)  # coherent terms after / before that block (_collect)
        self._frame_lost = False
        self.cycle_terms = cycle_terms  # (explicit terms of one repetition, per layer) -> extra terms of each repetition
        self.cycle_notes: list[str] = []

    def run(self, items: tuple[NoisyItem, ...]) -> Frame:
        """Walk ``items`` (the whole circuit body). Returns the frame of the whole circuit, except
        when a block was folded by its orbits (see :meth:`_orbit_repeat`): then the frame is not
        computed (no caller needs it there) and None is returned."""
        found = self._orbit_candidate(items)
        if found is not None:
            at = found
            self._orbit_block = items[at]
            self._outside = (self._collect(items[at + 1 :], "pull"), self._collect(items[:at], "push"))
            self._frame_lost = True  # only the block's own frame matters (see _orbit_repeat)
        self._items(items)
        return None if self._frame_lost else self.frame

    def _orbit_candidate(self, items: tuple[NoisyItem, ...]) -> int | None:
        """Index of the top-level block to fold by orbits, or None.

        Eligible: process-type sinks (``orbit_terms``), the only repeated block of the circuit
        whose layers carry coherent terms, repeated at least ORBIT_MIN_FACTOR x ORBIT_BABY times
        (blocks nested in it fold by their period within each repetition). Other items with coherent terms must be plain top-level layers: their
        terms are mapped to the block's end frame and matched against its orbits.
        """
        count_terms = getattr(self.sink, "orbit_terms", None)
        if self.direction != "push" or not self._emit or not self.orbit_baby or count_terms is None:
            return None

        def coherent(item: NoisyItem) -> bool:
            if gate_kind(item, self.where) is Kind.LAYER:
                return count_terms(item) > 0
            return any(coherent(x) for x in item.body)

        blocks = [i for i, it in enumerate(items) if gate_kind(it, self.where) is Kind.REPEAT and coherent(it)]
        if len(blocks) != 1:
            return None
        rep = items[blocks[0]]
        if int(rep.count) < ORBIT_MIN_FACTOR * self.orbit_baby:
            return None
        return blocks[0]

    def _collect(self, items: tuple[NoisyItem, ...], direction: str):
        """Explicit coherent terms of ``items`` (outside the block) in the block's end frame
        (``"pull"`` from the block's end for items after it) or start frame (``"push"`` to the
        block's start for items before it): (x, z, e, coef, tag) or None."""
        sink = _Explicit(self.sink, forward=False)
        if any(gate_kind(it, self.where) is Kind.LAYER and self.sink.orbit_terms(it) > 0 for it in items):
            Walker(self.n, direction, sink, max_unrolled=self.max_unrolled, plans=self._plans, orbit_baby=0).run(items)
        if not sink.parts:
            return None
        return tuple(np.concatenate([p[i] for p in sink.parts]) for i in range(5))

    def _items(self, items: tuple[NoisyItem, ...]) -> None:
        self.visit_all(items, reverse=self.direction == "push")

    def _plan(self, layer: NoisyLayer) -> tuple[GateClass, ...]:
        # keys hold the layer and operation objects (ObjectKey), so a recycled id() never hits
        key = (ObjectKey(layer), self.direction)
        if key not in self._plans:
            content = (tuple(map(ObjectKey, layer.operations)), self.direction)
            if content not in self._plans:
                ops = self._plans.setdefault("ops", {})
                pairs = []
                for nop in layer.operations:
                    hit = ops.get(ObjectKey(nop))
                    if hit is None:
                        cl = operation_clifford(nop.op)
                        if cl is None:
                            raise ValueError(f"operation {nop.op.gate} on {nop.op.qubits} is not Clifford")
                        hit = ops[ObjectKey(nop)] = (nop.op.qubits, cl)
                    pairs.append(hit)
                self._plans[content] = layer_classes(pairs, self.direction)
            self._plans[key] = self._plans[content]
        return self._plans[key]

    def layer(self, layer: NoisyLayer) -> None:
        self.layers_walked += 1
        if self._frame_lost:  # rates only; coherent terms here were collected by _collect
            if self._emit:
                self.sink.emit(layer, None)
            return
        if self.direction == "pull":
            self.frame.apply(self._plan(layer))
        if self._emit:
            self.sink.emit(layer, self.frame)
        if self.direction == "push":
            self.frame.apply(self._plan(layer))

    def repeat(self, rep: NoisyRepeat) -> None:
        count = int(rep.count)
        if rep is self._orbit_block:
            self._orbit_repeat(rep)
            return
        if self._frame_lost:  # stochastic terms only: one repetition, rates times N
            marks = [self.sink.mark()] if self._emit else []
            self._items(rep.body)
            if self._emit:
                self.sink.scale(marks[0], self.sink.mark(), float(count), float(count))
            self.periods.append((count, 1))
            return
        start = self.frame.copy()
        marks = [self.sink.mark()] if self._emit else []
        limit = min(count, self.max_unrolled)
        snapshots = {0: start}
        for k in range(limit):
            self._items(rep.body)
            if self._emit:
                marks.append(self.sink.mark())
            if k + 1 < count and self.frame.equals(start):
                self._fold(rep, k + 1, marks, snapshots)
                return
            if (k + 1) % SNAPSHOT_STRIDE == 0:
                snapshots[k + 1] = self.frame.copy()
        if count <= self.max_unrolled:
            self.periods.append((count, None))
            return
        self._approximate(rep, start, limit, marks)

    def _orbit_repeat(self, rep: NoisyRepeat) -> None:
        """Fold the block by the orbits of its terms (see :mod:`budget.engines.frame.orbits`).

        The block is walked from the identity frame (its own end frame); coherent terms of plain
        layers outside it were collected by :meth:`_collect` in the block's end frame (after it)
        or start frame (before it, landing N repetitions later). B = ``orbit_baby`` repetitions
        are emitted as usual (baby steps); if the frame comes back within them and nothing
        outside carries coherent terms, the block is folded by its period; otherwise the orbit
        search replaces the coherent terms by runs of equal amplitude, and the stochastic rates of
        the block are scaled by N / B.
        """
        count, b, sink = int(rep.count), self.orbit_baby, self.sink
        outside = [(part, start) for part, start in zip(self._outside, (0, count)) if part is not None]
        self._frame_lost = False
        self.frame = Frame.identity(self.n)
        start = self.frame.copy()
        marks, chunk_at = [sink.mark()], [len(sink.chunks)]
        emitted = sink.terms_emitted + sink.rates_emitted
        recorder = _Explicit(sink, forward=True)
        o_slots = [_slots(part[0], part[1], self.n) for part, _ in outside]
        o_keys: list[np.ndarray] = []
        frames: list[Frame] = []
        extra, x_keys, x_phases = None, [], []  # per-repetition extra terms (cycle_terms) and their images
        for k in range(b):
            if outside:  # fingerprints of c^k(Q) for the outside terms Q; frames for their phases
                o_keys.append(np.concatenate([np.bitwise_xor.reduce(self.frame.fxz[sl], axis=1) for sl in o_slots]))
                frames.append(self.frame.copy())
            if extra is not None:
                x_keys.append(np.bitwise_xor.reduce(self.frame.fxz[x_slots], axis=1))
                x_phases.append(self.frame.image(x_slots, extra[2])[2].astype(np.int64))
            self.sink = recorder if k == 0 else sink
            self._items(rep.body)
            self.sink = sink
            if k == 0 and self.cycle_terms is not None:
                extra = self._cycle_terms(rep, recorder.parts)
                if extra is not None:
                    x_slots = _slots(extra[0], extra[1], self.n)
                    x_keys.append(np.bitwise_xor.reduce(start.fxz[x_slots], axis=1))
                    x_phases.append(start.image(x_slots, extra[2])[2].astype(np.int64))
            marks.append(sink.mark())
            chunk_at.append(len(sink.chunks))
            if self.frame.equals(start) and not outside and extra is None:
                q, s = divmod(count, k + 1)
                for j in range(k + 1):
                    w = float(q + (1 if j < s else 0))
                    sink.scale(marks[j], marks[j + 1], w, w)
                self.periods.append((count, k + 1))
                self._frame_lost = True
                return
        self._frame_lost = True
        self.periods.append((count, None))
        per_rep = [sink.chunks[chunk_at[k] : chunk_at[k + 1]] for k in range(b)]
        block = [np.stack([np.concatenate([c[i] for c in chunks]) for chunks in per_rep]) for i in (1, 3)] if per_rep[0] else None
        parts = []  # (keys (B, T, 2), phases (B, T), x, z, e, coef, tag, start, count) per kind of term
        if block is not None:
            images = [np.concatenate([im[i] for im in recorder.parts]) for i in range(3)]
            # amplitude factors of folded inner blocks (the same in every repetition) join the coefficients
            coef = np.concatenate([c[2] * sink.amp[c[0]] for c in per_rep[0]])
            tags = np.concatenate([c[4] for c in per_rep[0]])
            parts.append((block[0], block[1].astype(np.int64), *images, coef, tags, 0, count))
        if extra is not None:
            parts.append((np.stack(x_keys), np.stack(x_phases), *extra, 0, count))
        for (x, z, e, coef, tags), start_at in outside:
            keys = np.stack([k[: len(coef)] for k in o_keys])
            o_keys = [k[len(coef) :] for k in o_keys]
            parts.append((keys, np.full(keys.shape[:2], -1, np.int64), x, z, e, coef, tags, start_at, 1))
        if not parts:  # nothing coherent after all: rates times N / B
            sink.scale(marks[0], marks[-1], 1.0, count / b)
            return
        cat = lambda i: np.concatenate([p[i] for p in parts], axis=1 if i < 2 else 0)  # noqa: E731
        sizes = [len(p[5]) for p in parts]
        search = OrbitSearch(
            count,
            cat(0),
            cat(1),
            (cat(2), cat(3), cat(4)),
            self.frame,
            starts=np.repeat([p[7] for p in parts], sizes),
            counts=np.repeat([p[8] for p in parts], sizes),
            frames=frames or None,
        )
        found = search.folded(cat(5), cat(6))
        if found is None:
            sink.scale(marks[0], marks[-1], float(np.sqrt(count / b)), count / b)
            if outside:
                sink.folded.append(search.unmatched(cat(5), cat(6), first=sizes[0] if block is not None else 0))
            self.warnings.append(
                f"a block repeated {count} times: the orbits of its error terms did not close within the "
                "searched range; its errors were folded assuming errors more than "
                f"{b} repetitions apart never land on the same Pauli (not checked); the result is approximate"
            )
            return
        terms, record = found
        del sink.chunks[chunk_at[0] :]
        sink.folded.append(terms)
        sink.scale(marks[0], marks[-1], 1.0, count / b)
        per_rep_terms = (sink.terms_emitted + sink.rates_emitted - emitted) / b
        self.orbit_records.append(record.as_dict() | {"terms_per_repetition": per_rep_terms})

    def _cycle_terms(self, rep: NoisyRepeat, parts: list[tuple]):
        """The extra terms of every repetition of an orbit-folded block (``cycle_terms``, e.g. the
        second-order terms within one repetition), from the explicit terms of its first one; None
        when there are none or the body holds a repeated block (its fold weights are not in
        ``parts``)."""
        if any(gate_kind(it, self.where) is Kind.REPEAT for it in rep.body):
            self.cycle_notes.append("a block folded by orbits holds a repeated block: its terms within a repetition stay first order")
            return None
        got = self.cycle_terms(parts)
        if isinstance(got, str):
            self.cycle_notes.append(got)
            return None
        return got if got is not None and len(got[3]) else None

    def _fold(self, rep: NoisyRepeat, period: int, marks: list[int], snapshots: dict[int, Frame]) -> None:
        q, s = divmod(int(rep.count), period)
        self.periods.append((int(rep.count), period))
        if self._emit:
            for k in range(period):
                w = float(q + (1 if k < s else 0))
                if w != 1.0:
                    self.sink.scale(marks[k], marks[k + 1], w, w)
            if hasattr(self.sink, "fold"):  # the second-order pass (budget/engines/clifford/second.py)
                self.sink.fold(marks[: period + 1], int(rep.count))
        base = s - s % SNAPSHOT_STRIDE  # frame is back at the start: advance it by s blocks
        self.frame = snapshots[base].copy()
        was, self._emit = self._emit, False
        for _ in range(s - base):
            self._items(rep.body)
        self._emit = was

    def _approximate(self, rep: NoisyRepeat, start: Frame, walked: int, marks: list[int]) -> None:
        count = int(rep.count)
        ratio = count / walked
        self.periods.append((count, None))
        if self._emit:
            self.sink.scale(marks[0], marks[-1], float(np.sqrt(ratio)), ratio)
            if hasattr(self.sink, "approximate"):
                self.sink.approximate()
        block = Walker(self.n, self.direction, max_unrolled=self.max_unrolled, plans=self._plans)
        block.run(rep.body)
        power = block.frame.to_stim() ** count
        self.frame = Frame.from_stim(power.then(start.to_stim()))
        self.warnings.append(
            f"a block repeated {count} times has no period within {walked} repetitions: its errors were "
            f"folded assuming errors more than {walked} repetitions apart never land on the same Pauli "
            "(true for scrambling blocks, not checked); the result is approximate"
        )


class _Explicit:
    """A sink that keeps the explicit coherent terms (x, z, e, coef, tag) of every layer it sees,
    passing emissions on to ``forward`` (the GroupSink) when given."""

    def __init__(self, sink, forward: bool):
        self.sink, self.forward = sink, forward
        self.parts: list[tuple] = []

    def mark(self) -> int:
        return self.sink.mark() if self.forward else 0

    def scale(self, *args) -> None:
        if self.forward:
            self.sink.scale(*args)

    def emit(self, layer: NoisyLayer, frame: Frame) -> None:
        if self.forward:
            self.sink.emit(layer, frame)
        got = self.sink.explicit_terms(layer, frame)
        if got is not None:
            self.parts.append(got)
