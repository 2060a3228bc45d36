"""Sensitivity: the leading-order infidelity as a quadratic form in the coherent knobs.

To leading order (design.md §5) the infidelity of the whole circuit is

    e ≈ δᵀ A δ + s,

δ the coherent knob values in radians (one entry per (family, knob)), A real symmetric in
infidelity per radian squared, s the incoherent floor. The engines build A from the propagated
unit generators (Blume-Kohout et al., "A taxonomy of small Markovian errors", PRX Quantum 3,
020335 (2022)); this module only reads it:

- A_ff, the *sensitivity* of knob f: the infidelity one radian of that knob alone would cause;
- A_fg / sqrt(A_ff A_gg), the *overlap* of two knobs in [-1, 1]: +1 when their propagated errors
  land on the same operator (they add in amplitude), -1 when one undoes the other (echo);
- 2 A_fg δ_f δ_g, the *cross term* at the current values: positive = the two errors add up,
  negative = they cancel;
- δ_f (A δ)_f, the *share* of knob f; the shares add up to δᵀAδ.

Per operation: :func:`budget.analysis.families.per_operation` renames families so the same engines
give A per operation.

The form is first order on purpose. The second-order (Magnus) term of the effective generator is
bilinear in the knobs, so it adds terms of degree 3 and 4 in δ to the infidelity, which no
quadratic form holds; where the first order cancels (an echo) A_ff is rounding noise and the
infidelity is quartic in δ. The tolerances therefore treat such a sensitivity as zero relative to
the others (:mod:`budget.analysis.tolerances`) and take the knob's tolerance, and the final scale
of all tolerances, from the engine itself in closed loop (:mod:`budget.analysis.closed_loop`),
whose engines carry the second order and, within their reach, every order of the coherent part
(docs/methods.md, "Orders" and "Sensitivity").
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
import numpy as np

from budget.analysis.measured_form import detector_quadratic_form
from budget.engines.door import choose, measured_engine
from budget.engines.base import QuadraticForm
from budget.errors.noisy import NoisyCircuit
from budget.problems import InputError

def quadratic_form(circuit: NoisyCircuit, metric: str, *, engine: str = "auto", detector: int | None = None) -> QuadraticForm:
    """The quadratic form e ≈ δᵀAδ + s of a noisy circuit, from the engine auto's rule picks among
    the engines that build quadratic forms (:func:`budget.engines.door.choose` with
    ``needs="quadratic_form"``), or the one named.

    Raises:
        TooLargeError: no engine that builds quadratic forms fits, or fits in time (one line).
        InputError: ``engine`` names an engine that builds no quadratic form.
    """
    if metric == "detectors":
        measured_engine("detectors", engine, None, what="the detectors metric's form")
        return detector_quadratic_form(circuit, engine=engine, detector=detector)
    if metric == "record":
        raise InputError("metric = 'record': tolerances and cost need a quadratic form e ≈ δᵀAδ + s, which the "
                         "record metric does not have; use --metric detectors (Clifford circuits with detectors), "
                         "or analyze and depth for the record metric")
    if detector is not None:
        raise InputError(f"detector = {detector!r}: a target on one detector needs the detectors metric")
    return choose(circuit, metric, engine, needs="quadratic_form").engine.quadratic_form(circuit, metric)


def knob_key(label: tuple[str, str]) -> str:
    """The user-facing name of a (family, knob) label: ``"cz.cphase"``."""
    return f"{label[0]}.{label[1]}"


def check_form(qf: QuadraticForm) -> None:
    """Raise ValueError unless ``qf`` is a usable quadratic form.

    Rules: A square with one row per label, finite, symmetric (to 1e-9 relative), diagonal not
    negative (one knob alone cannot lower the infidelity below the floor); values finite, one per
    label; floor finite and not negative; labels distinct.
    """
    n = len(qf.labels)
    a = np.asarray(qf.matrix, dtype=float)
    v = np.asarray(qf.values_rad, dtype=float)
    if a.shape != (n, n):
        raise ValueError(f"quadratic form: matrix shape {a.shape} does not match {n} labels")
    if v.shape != (n,):
        raise ValueError(f"quadratic form: values_rad shape {v.shape} does not match {n} labels")
    if len(set(qf.labels)) != n:
        raise ValueError("quadratic form: a (family, knob) label appears twice")
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(v)) and np.isfinite(qf.floor)):
        raise ValueError("quadratic form: matrix, values and floor must be finite numbers")
    scale = float(np.max(np.abs(a))) if n else 0.0
    if n and np.max(np.abs(a - a.T)) > 1e-9 * max(scale, 1e-300):
        raise ValueError("quadratic form: matrix A must be symmetric")
    if n and np.min(np.diag(a)) < -1e-12 * max(scale, 1e-300):
        raise ValueError(
            f"quadratic form: A[{knob_key(qf.labels[int(np.argmin(np.diag(a)))])}] = "
            f"{np.min(np.diag(a)):.3g} per rad²: a diagonal entry must not be negative"
        )
    if qf.floor < 0:
        raise ValueError(f"quadratic form: floor = {qf.floor!r}: the incoherent floor must not be negative")


@dataclass(frozen=True)
class KnobSensitivity:
    """One knob's row: sensitivity A_ff (infidelity per rad²), current value, share of δᵀAδ."""

    family: str
    knob: str
    per_rad2: float
    current_rad: float
    share: float


@dataclass(frozen=True)
class Interference:
    """Two knobs whose propagated errors overlap.

    Attributes:
        first, second: ``"family.knob"`` names.
        overlap: A_fg / sqrt(A_ff A_gg) in [-1, 1].
        coupling_per_rad2: A_fg.
        cross_term: 2 A_fg δ_f δ_g at the current values (part of the infidelity).
        effect: ``"add up"`` (cross term > 0), ``"cancel"`` (< 0) or ``"idle"`` (a knob is at 0).
    """

    first: str
    second: str
    overlap: float
    coupling_per_rad2: float
    cross_term: float
    effect: str


@dataclass(frozen=True)
class Sensitivity:
    """The sensitivity report: knobs (ranked by share), interfering pairs, coherent part, floor."""

    knobs: tuple[KnobSensitivity, ...]
    pairs: tuple[Interference, ...]
    coherent: float
    floor: float
    floor_sources: dict[str, float]

    @property
    def total(self) -> float:
        """δᵀAδ + s, the leading-order prediction at the current values."""
        return self.coherent + self.floor


MIN_OVERLAP = 1e-3
"""Weakest overlap listed as interference. By Cauchy-Schwarz the cross term is bounded by the two
knobs' own contributions, |2 A_fg δ_f δ_g| <= |overlap| (A_ff δ_f² + A_gg δ_g²), so a pair below
10⁻³ moves the infidelity by less than 0.1 % of what the two knobs cost alone (and its overlap
would read ±0.000 at the three decimals the views show)."""


def sensitivity(qf: QuadraticForm, *, top_pairs: int = 8, min_overlap: float = MIN_OVERLAP) -> Sensitivity:
    """Read a quadratic form: per-knob sensitivities and shares, and the strongest interference.

    Pairs are ranked by |overlap| (a property of the circuit, not of today's values), at most
    ``top_pairs``, only those with |overlap| >= ``min_overlap`` (:data:`MIN_OVERLAP`).

    >>> qf = QuadraticForm((("x", "overrotation"), ("sx", "overrotation")),
    ...                    np.array([[1.0, -0.5], [-0.5, 0.25]]), np.array([0.01, 0.01]), 1e-4, {"x": 1e-4})
    >>> s = sensitivity(qf)
    >>> round(s.coherent, 8), s.pairs[0].effect, round(s.pairs[0].overlap, 6)
    (2.5e-05, 'cancel', -1.0)
    """
    check_form(qf)
    a = np.asarray(qf.matrix, dtype=float)
    v = np.asarray(qf.values_rad, dtype=float)
    shares = v * (a @ v)
    knobs = sorted(
        (KnobSensitivity(f, k, float(a[i, i]), float(v[i]), float(shares[i])) for i, (f, k) in enumerate(qf.labels)),
        key=lambda r: (-abs(r.share), -r.per_rad2),
    )
    pairs = []
    d = np.sqrt(np.clip(np.diag(a), 0.0, None))
    for i, j in zip(*np.triu_indices(len(v), 1)):
        if d[i] == 0 or d[j] == 0:
            continue
        overlap = float(np.clip(a[i, j] / (d[i] * d[j]), -1.0, 1.0))
        if abs(overlap) < min_overlap:
            continue
        cross = float(2 * a[i, j] * v[i] * v[j])
        effect = "add up" if cross > 0 else "cancel" if cross < 0 else "idle"
        pairs.append(Interference(knob_key(qf.labels[i]), knob_key(qf.labels[j]), overlap, float(a[i, j]), cross, effect))
    pairs.sort(key=lambda p: (-abs(p.overlap), -abs(p.cross_term)))
    return Sensitivity(tuple(knobs), tuple(pairs[:top_pairs]), float(v @ a @ v), float(qf.floor), dict(qf.floor_sources))


def sensitivity_json(s: Sensitivity) -> dict:
    """The same numbers as plain JSON-ready data."""
    return {
        "coherent": s.coherent,
        "incoherent_floor": s.floor,
        "floor_sources": dict(s.floor_sources),
        "total": s.total,
        "knobs": [
            {"family": k.family, "knob": k.knob, "per_rad2": k.per_rad2, "current_rad": k.current_rad, "share": k.share}
            for k in s.knobs
        ],
        "interference": [dataclasses.asdict(p) for p in s.pairs],
    }
