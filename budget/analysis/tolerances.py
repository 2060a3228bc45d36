"""Tolerances: how far may each coherent knob stray so that the circuit meets a target infidelity?

Leading order (design.md §5): e ≈ δᵀAδ + s. The incoherent floor s is fixed by the hardware; the
coherent budget is B = E - s. Two readings of "the knob stays within its tolerance t_f":

- ``worst``: every knob may sit anywhere in |δ_f| <= t_f with any sign; require
  max over that box of δᵀAδ <= B (:mod:`budget.analysis.worstcase`, exact for up to 20
  interfering knobs, an upper bound beyond, so the tolerances stay safe).
- ``random``: independent signs, t_f an r.m.s. value σ_f; the cross terms average out and
  E[δᵀAδ] = Σ_f A_ff σ_f² <= B.

How B is split (``allocation``):

- ``equal``: every knob with A_ff > 0 gets the same share: t_f = c / sqrt(A_ff), c chosen so the
  constraint holds with equality (worst: c² = B / max_s Σ s_f s_g A_fg / sqrt(A_ff A_gg)).
- ``common-factor``: every current value shrinks by the same factor F: t_f = |δ_f| / F. F is the
  answer to "how much better must calibration get"; it is reported under either allocation.

Both constraints scale as c², which is why one scalar solves each allocation exactly.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass, field
from typing import Any, Literal, Sequence

import numpy as np

from budget.analysis.sensitivity import check_form, knob_key
from budget.analysis.worstcase import EXACT_UP_TO, box_maximum
from budget.engines.base import QuadraticForm
from budget.errors.context_terms import HARDWARE_KNOBS, HARDWARE_REMEDY, knob_in_lab_units
from budget.problems import InputError

Assumption = Literal["worst", "random"]
Allocation = Literal["equal", "common-factor"]
ASSUMPTIONS: tuple[str, ...] = ("worst", "random")
ALLOCATIONS: tuple[str, ...] = ("equal", "common-factor")
SCHEMA_VERSION = 1
NO_EFFECT = "no effect found"
"""Status of a knob whose error cancels (or does not reach the metric) at leading order and whose
higher-order effect no engine run could find (or that was not checked)."""
VALID_UP_TO = 0.1
"""Leading-order infidelity of one knob beyond which the quadratic form is not trusted."""
LEADING_ORDER_ONLY = "leading order only: "
"""Prefix of warnings that a converged closed-loop check with the exact engine settles."""
ZERO_RELATIVE = 1e-9
"""A sensitivity below this fraction of the largest (at least 1 per rad²) counts as zero."""


@dataclass(frozen=True)
class SiteTolerance:
    """One place a knob acts (a gate on given qubits, or one operation): its value and tolerance.

    ``site`` is the row label of the site-level quadratic form (``"cz q[0],q[1]"``).
    """

    site: str
    knob: str
    current_rad: float
    tolerance_rad: float

    @property
    def over(self) -> bool:
        """Today's value lies outside the tolerance."""
        return abs(self.current_rad) > self.tolerance_rad * (1 + 1e-12)


@dataclass(frozen=True)
class KnobTolerance:
    """One ranked row: a knob's current value (signed), its tolerance and how much it must tighten.

    A family row covers every site of the family: ``tolerance_rad`` applies to each site
    (``allocation="equal"``) and ``current_rad`` is the worst site's value; ``sites`` lists them
    all, :attr:`worst_site` and :attr:`sites_over` say where calibration is needed.
    ``tolerance_rad`` is ``inf`` for a knob with no effect found (see ``order``); ``tighten_by`` =
    max over sites of |current| / tolerance (0 when at zero, ``inf`` when the tolerance is 0).
    ``status``: ``"tighten"``, ``"ok"``, :data:`NO_EFFECT` or ``"floor too high"``.
    ``order``: ``"first"`` (from the quadratic form), ``"second"`` (the knob's first-order effect
    vanishes; its tolerance comes from evaluating the circuit as a function of the knob) or
    ``"none"`` (no effect found). ``first_order_rad``: the tolerance before the closed-loop check.
    ``capped``: the tolerance was limited to π (a larger angle is no calibration tolerance).
    """

    family: str
    knob: str
    current_rad: float
    tolerance_rad: float
    tighten_by: float
    status: str
    sites: tuple[SiteTolerance, ...] = ()
    first_order_rad: float = math.nan
    order: str = "first"
    capped: bool = False

    @property
    def worst_site(self) -> str | None:
        """The site furthest outside (or least inside) its tolerance; None without sites."""
        if not self.sites:
            return None
        return max(self.sites, key=lambda s: (_ratio(s.current_rad, s.tolerance_rad), abs(s.current_rad))).site

    @property
    def sites_over(self) -> int:
        """How many sites lie outside their tolerance today."""
        return sum(s.over for s in self.sites)


@dataclass(frozen=True)
class ToleranceReport:
    """Tolerances for one target.

    Attributes:
        target: E, the largest acceptable infidelity of the chosen metric.
        metric, assume, allocation: how it was computed.
        incoherent_floor: s; floor_sources: family -> part of s.
        coherent_budget: E - s (negative when the floor alone exceeds E).
        feasible: s < E.
        rows: ranked by ``tighten_by``, largest first.
        common_factor: F, the factor by which every current value must shrink (<= 1: none needed).
        current_signed: δᵀAδ + s at the current values with their signs.
        current_assumed: the same under the assumption (worst signs, or r.m.s.) at current sizes.
        cycles: repetitions of the circuit the form was built for.
        max_cycles: the most repetitions the floor alone allows, floor(cycles·E/s) (first order: the
            floor grows linearly with depth); None when there is no floor.
        exact: the worst case was enumerated exactly (False: an upper bound was used).
        warnings: plain-word caveats.
        closed_loop: the check of the tolerances by an engine run with every knob at its
            tolerance (:mod:`budget.analysis.closed_loop`); None when it did not run.
        floor_remedy: what incoherent numbers would meet the target when the floor exceeds it
            (:mod:`budget.analysis.floor`); None otherwise.
    """

    target: float
    metric: str
    assume: str
    allocation: str
    incoherent_floor: float
    floor_sources: dict[str, float]
    coherent_budget: float
    feasible: bool
    rows: tuple[KnobTolerance, ...]
    common_factor: float
    current_signed: float
    current_assumed: float
    cycles: int
    max_cycles: int | None
    exact: bool
    warnings: tuple[str, ...] = field(default=())
    closed_loop: Any = None
    floor_remedy: Any = None

    def main_floor_sources(self, count: int = 3) -> list[tuple[str, float]]:
        """The largest parts of the floor, largest first."""
        return sorted(self.floor_sources.items(), key=lambda kv: -kv[1])[:count]


def check_target(target: object) -> float:
    """The target as a float, or InputError: a real number with 0 < E < 1."""
    if isinstance(target, bool) or not isinstance(target, numbers.Real) or not 0 < float(target) < 1:
        raise InputError(f"target = {target!r}: expected an infidelity E with 0 < E < 1")
    return float(target)


def tolerances(
    qf: QuadraticForm,
    target: float,
    *,
    assume: Assumption = "worst",
    allocation: Allocation = "equal",
    metric: str = "process",
    cycles: int = 1,
    exact_up_to: int = EXACT_UP_TO,
    groups: Sequence[tuple[str, str]] | None = None,
) -> ToleranceReport:
    """The largest tolerance per knob such that the leading-order prediction stays within ``target``.

    Args:
        qf: the quadratic form of the circuit (already repeated ``cycles`` times), one row per
            site and knob (or per family and knob when sites are not told apart).
        target: E in (0, 1) on ``metric``.
        assume: ``"worst"`` (worst signs at the edges) or ``"random"`` (r.m.s. tolerances).
        allocation: ``"equal"`` shares or ``"common-factor"`` scaling of today's values.
        cycles: repetitions of the circuit behind ``qf`` (for ``max_cycles``), >= 1.
        groups: the report row (family, knob) of each row of ``qf``; rows of one group share one
            tolerance (every site of a family within ±t, each with its own sign). None: one
            report row per row of ``qf``.

    A sensitivity A_ff counts as zero when it is below :data:`ZERO_RELATIVE` times the largest
    one (or times 1 per rad², the size of one gate's over-rotation, when all are smaller): such
    values are rounding noise of a cancellation, not a first-order effect.

    Check (design.md §3): N repetitions of an X over-rotation, process metric, A = N²/4, so
    the worst-case tolerance is 2·sqrt(E)/N, within 5 % of the exact 2·arcsin(sqrt(E))/N for E <= 0.1:

    >>> qf = QuadraticForm((("x", "overrotation"),), np.array([[100.0**2 / 4]]), np.array([1e-3]), 0.0, {})
    >>> r = tolerances(qf, 1e-4)
    >>> round(r.rows[0].tolerance_rad, 8), round(r.rows[0].tighten_by, 6), r.rows[0].status
    (0.0002, 5.0, 'tighten')
    """
    check_form(qf)
    target = check_target(target)
    if assume not in ASSUMPTIONS:
        raise InputError(f"assume = {assume!r}: expected one of {', '.join(ASSUMPTIONS)}")
    if allocation not in ALLOCATIONS:
        raise InputError(f"allocation = {allocation!r}: expected one of {', '.join(ALLOCATIONS)}")
    if isinstance(cycles, bool) or not isinstance(cycles, numbers.Integral) or cycles < 1:
        raise InputError(f"cycles = {cycles!r}: expected a whole number >= 1")
    labels = list(qf.labels)
    groups = list(groups) if groups is not None else labels
    if len(groups) != len(labels):
        raise ValueError(f"tolerances: {len(groups)} groups for {len(labels)} rows of the quadratic form")
    keys = list(dict.fromkeys(groups))
    member = np.array([keys.index(g) for g in groups], dtype=int)
    values = np.asarray(qf.values_rad, dtype=float)
    now = np.abs(values)
    live = live_rows(qf.matrix)
    a = np.where(np.outer(live, live), np.asarray(qf.matrix, dtype=float), 0.0)
    diag = np.diag(a).copy()
    floor, budget = float(qf.floor), target - float(qf.floor)
    exact, warnings, gap = True, [], 1.0

    def coherent(t: np.ndarray) -> float:  # the assumed coherent infidelity of site tolerances t
        nonlocal exact, gap
        t = np.where(live, t, 0.0)
        if assume == "random":
            return float(np.sum(diag * t**2))
        m = box_maximum(a, t, exact_up_to=exact_up_to)
        exact = exact and m.exact
        if not m.exact and m.attained > 0:
            gap = max(gap, m.value / m.attained)
        return m.value

    # a group's own weight: its sites at ±1 rad, the rest at zero (worst or mean over signs)
    weight = np.array([coherent((member == g).astype(float)) for g in range(len(keys))])
    group_live = weight > ZERO_RELATIVE * max(1.0, float(np.max(weight, initial=0.0)))
    live &= group_live[member]
    assumed_now = coherent(now)
    factor = math.sqrt(assumed_now / budget) if budget > 0 else math.inf
    counted = group_live[member]  # sites of groups with a first-order effect
    if budget <= 0:
        tol = np.where(counted, 0.0, math.inf)
    elif allocation == "common-factor":
        tol = np.where(counted, now / factor if factor > 0 else math.inf, math.inf)
    else:
        unit = np.where(counted, 1 / np.sqrt(np.where(group_live, weight, 1.0))[member], 0.0)
        spread = coherent(unit)
        tol = np.where(counted, unit * math.sqrt(budget / spread), math.inf) if spread > 0 else np.full(len(now), math.inf)
    if budget > 0 and np.any(counted & (tol > math.pi)):
        names = sorted({knob_key(groups[i]) for i in np.flatnonzero(counted & (tol > math.pi))})
        warnings.append(f"{LEADING_ORDER_ONLY}{', '.join(names)}: the leading-order tolerance exceeds π rad, which is no calibration "
                        "tolerance; it is capped at π (the knob barely matters at leading order)")
    single = np.where(live & np.isfinite(tol), diag * np.where(np.isfinite(tol), np.minimum(tol, math.pi), 0.0) ** 2, 0.0)
    if budget > 0 and np.any(single > VALID_UP_TO):
        i = int(np.argmax(single))
        warnings.append(f"{LEADING_ORDER_ONLY}{knob_key(groups[i])} at its tolerance alone gives a leading-order "
                        f"infidelity of {single[i]:.3g}, beyond about {VALID_UP_TO:g} where the quadratic form holds; "
                        "only an engine run at the tolerances (the closed-loop check) can confirm them")
    rows = [
        make_row(key, [SiteTolerance(labels[i][0], labels[i][1], float(values[i]), _capped(float(tol[i])))
                       for i in np.flatnonzero(member == g)], feasible=budget > 0,
                 order="first" if group_live[g] else "none")
        for g, key in enumerate(keys)
    ]
    rows.sort(key=lambda r: (-r.tighten_by, -abs(r.current_rad), r.family, r.knob))
    if not exact and gap - 1 <= 1e-9:  # the bound meets a setting found: rounding, not a gap
        warnings.append(
            f"more than {exact_up_to} interfering knobs: the worst case uses an upper bound, and a sign setting "
            "reaches it (docs/tolerances.md), so the leading-order tolerances are exact"
        )
    elif not exact:
        warnings.append(
            f"more than {exact_up_to} interfering knobs: the worst case uses an upper bound at most "
            f"{100 * (gap - 1):.3g} % above the worst setting found (docs/tolerances.md), so the leading-order "
            f"tolerances are safe and at most {100 * (math.sqrt(gap) - 1):.2g} % too tight"
        )
    return ToleranceReport(
        target=target, metric=metric, assume=assume, allocation=allocation, incoherent_floor=floor,
        floor_sources=dict(qf.floor_sources), coherent_budget=budget, feasible=budget > 0, rows=tuple(rows),
        common_factor=factor, current_signed=float(values @ np.asarray(qf.matrix) @ values) + floor,
        current_assumed=assumed_now + floor, cycles=int(cycles),
        max_cycles=int(math.floor(cycles * target / floor * (1 + 1e-12))) if floor > 0 else None,
        exact=exact, warnings=tuple(warnings),
    )


def hardware_notes(report: ToleranceReport) -> tuple[str, ...]:
    """One line per row of a knob the hardware sets (static ZZ) that must tighten: the rate it
    needs, and that calibration does not get there (``budget plan`` leaves such rows alone)."""
    out = []
    for r in report.rows:
        if r.knob in HARDWARE_KNOBS and r.status == "tighten":
            now, unit = knob_in_lab_units(r.knob, r.current_rad)
            need, _ = knob_in_lab_units(r.knob, r.tolerance_rad)
            out.append(f"{r.family}: the static ZZ must fall from {now:.4g} to {need:.4g} {unit}; it is {HARDWARE_REMEDY} "
                       "(budget plan schedules no calibration for it)")
    return tuple(out)


def live_rows(matrix: np.ndarray) -> np.ndarray:
    """Rows of A whose sensitivity A_ff is more than rounding noise (see :func:`tolerances`)."""
    diag = np.diag(np.asarray(matrix, dtype=float))
    return diag > ZERO_RELATIVE * max(1.0, float(np.max(diag, initial=0.0)))


def make_row(key: tuple[str, str], sites: list[SiteTolerance], *, feasible: bool, order: str = "first",
             first_order_rad: float | None = None) -> KnobTolerance:
    """One report row from its sites: the worst site's value and tolerance, the largest tighten factor."""
    worst = max(sites, key=lambda s: (_ratio(s.current_rad, s.tolerance_rad), abs(s.current_rad)))
    tol = worst.tolerance_rad
    first = tol if first_order_rad is None else first_order_rad
    capped = any(math.pi <= s.tolerance_rad < math.inf for s in sites)
    if math.isinf(tol):
        return KnobTolerance(key[0], key[1], worst.current_rad, math.inf, 0.0, NO_EFFECT, tuple(sites), first, "none")
    tighten = _ratio(worst.current_rad, tol)
    status = "floor too high" if not feasible else "tighten" if tighten > 1 + 1e-12 else "ok"
    return KnobTolerance(key[0], key[1], worst.current_rad, tol, tighten, status, tuple(sites), first, order, capped)


def _capped(tol: float) -> float:
    return min(tol, math.pi) if math.isfinite(tol) else tol


def _ratio(value: float, tol: float) -> float:
    if math.isinf(tol):
        return 0.0
    return abs(value) / tol if tol > 0 else (0.0 if value == 0 else math.inf)
