"""The cheapest calibration schedule for H hours: which knobs, how precisely, how often.

Model (docs/methods.md, *Calibration schedule*). Under the random-sign assumption of
``budget tolerances --assume random`` the leading-order infidelity is s + Σ_i A_ii m_i, m_i the
mean square of knob i (A the quadratic form, s the incoherent floor). A knob measured to a standard
deviation σ and recalibrated every τ hours while drifting at D rad/hour in an unknown direction (the ``[calibration.drift_rad_per_hour]`` rate, else
the knob's inline ``drift_per_hour``) has,
at the end of each interval (its worst time), m = σ² + (D τ)². A knob left alone keeps today's
value δ, known to σ_now when the model gives an uncertainty, and drifts for the whole horizon:
m = (|δ| + D H)² + σ_now². Each measurement costs device time
c(σ) of amplified phase estimation (:mod:`budget.analysis.calibration`, Kimmel, Low, Yoder,
PRA 92, 062315 (2015)), paid H/τ times.

Each knob picks one option o from a menu (leave it; or σ from a geometric grid and H/τ from 1, 2,
4, … rounds), a multiple-choice knapsack written as a mixed-integer linear programme:

    minimise    Σ_io c_io x_io
    subject to  Σ_o x_io = 1                  for every knob i
                Σ_io A_ii m_io x_io <= E - s
                x_io ∈ {0, 1}

solved with ``scipy.optimize.milp`` (HiGHS). The comparison: every calibratable knob measured to
the tightest tolerance of the equal-share allocation (σ = t_min / k), all in common rounds as often
as the budget needs.

Knobs the hardware sets (static ZZ, :data:`~budget.errors.context_terms.HARDWARE_KNOBS`) have one
option, ``"hardware"``: their load A_ii δ² stays whatever is scheduled (a calibration would measure
the coupling, not lower it). When the floor and those loads alone reach the target, no schedule
exists and the message says which couplings must fall (``budget tolerances`` gives their rates).
The signs are random here, as ``budget tolerances --assume random``; the default worst-sign
tolerances are stricter, and the schedule's notes say so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, milp

from budget.analysis.calibration import CalibrationSettings, SiteRun, _drift_of, _site, read_calibration
from budget.analysis.floor import accurate_floor
from budget.analysis.phase_estimation import Probe, find_probes
from budget.analysis.run import read_circuit, read_model
from budget.analysis.sensitivity import knob_key, quadratic_form
from budget.analysis.tolerances import check_target, tolerances
from budget.analysis.uncertainty import name_of
from budget.circuit.gates import ALIASES
from budget.errors.attach import attach
from budget.errors.context_terms import HARDWARE_KNOBS, HARDWARE_REMEDY, knob_text
from budget.errors.params import GateParams
from budget.problems import InputError

SIGMA_STEPS = 16  # σ grid: σ_ref·2^{-j/2}, j = 1..16 (σ_ref: one knob alone using the whole budget)
MAX_ROUNDS_LOG2 = 10  # up to 1024 calibrations over the horizon


@dataclass(frozen=True)
class KnobSchedule:
    """One knob's part of the schedule. ``action`` is ``"leave"`` or ``"calibrate"``."""

    family: str
    knob: str
    action: str
    sigma_rad: float | None
    every_hours: float | None
    rounds: int
    sites: tuple[SiteRun, ...]
    device_s_per_round: float
    device_s: float
    mean_square_rad2: float
    per_rad2: float
    current_rad: float
    drift_rad_per_hour: float


@dataclass(frozen=True)
class Schedule:
    """The optimal schedule and the everything-at-the-tightest-tolerance comparison."""

    source: str
    target: float
    hours: float
    floor: float
    knobs: tuple[KnobSchedule, ...]
    predicted: float
    device_s: float
    baseline_device_s: float | None
    baseline_sigma_rad: float | None
    baseline_rounds: int | None
    notes: tuple[str, ...] = ()

    @property
    def minutes_per_day(self) -> float:
        return self.device_s / 60 / self.hours * 24


def plan(circuit: Any, errors: Any, *, target: float, hours: float, cycles: int = 1, metric: str = "process",
         engine: str = "auto") -> Schedule:
    """The cheapest calibration schedule keeping the predicted infidelity below ``target`` for ``hours``."""
    target = check_target(target)
    if isinstance(hours, bool) or not isinstance(hours, (int, float)) or not 0 < hours < math.inf:
        raise InputError(f"hours = {hours!r}: expected a positive number of hours")
    structured = read_circuit(circuit).with_cycles(cycles)
    model = read_model(errors)
    settings = read_calibration(model.calibration, source=model.source)
    noisy = attach(structured, model)
    qf, _ = accurate_floor(quadratic_form(noisy, metric, engine=engine), noisy, metric, target, engine=engine)
    budget = target - qf.floor
    if budget <= 0:
        raise InputError(f"target = {target:g}: the incoherent floor alone is {qf.floor:.3g} (T1/T2 and gate error "
                         "rates); no calibration of the coherent knobs can meet it")
    probes = find_probes(noisy)
    diag = np.diag(np.asarray(qf.matrix, float))
    spreads = knob_spreads(model)
    menus = [_menu(label, float(diag[i]), float(qf.values_rad[i]), probes.get(label, ()), settings, budget, hours,
                   *spreads.get(label, (0.0, 0.0)))
             for i, label in enumerate(qf.labels)]
    fixed = [(m[0], float(diag[i])) for i, m in enumerate(menus)
             if m[0].action == "hardware" and m[0].per_rad2 * m[0].mean_square_rad2 > 0]
    fixed_load = math.fsum(m.per_rad2 * m.mean_square_rad2 for m, _ in fixed)
    if fixed and fixed_load >= budget:
        rows = ", ".join(f"{m.family} at {knob_text(m.current_rad, m.knob, lambda x: f'{x:.3g}')}" for m, _ in fixed)
        raise InputError(f"target = {target:g}: the incoherent floor {qf.floor:.3g} and the static ZZ ({rows}) already "
                         f"give {qf.floor + fixed_load:.3g}; static ZZ is {HARDWARE_REMEDY}; budget tolerances gives "
                         "the rate each coupling may have")
    choice = _solve(menus, diag, budget, structured.source)
    knobs = tuple(sorted((m[c] for m, c in zip(menus, choice)), key=lambda k: (-k.device_s, k.family, k.knob)))
    predicted = qf.floor + float(sum(k.per_rad2 * k.mean_square_rad2 for k in knobs))
    base = _baseline(menus, diag, budget, qf, settings, probes, hours, target)
    notes = ["signs: random, as budget tolerances --assume random (its default, worst signs, asks for tighter "
             "tolerances)"]
    if fixed:
        notes.append(f"static ZZ ({', '.join(m.family for m, _ in fixed)}): {HARDWARE_REMEDY}; its load "
                     f"{fixed_load:.3g} is kept as it is")
    return Schedule(structured.source, target, float(hours), float(qf.floor), knobs, predicted,
                    float(sum(k.device_s for k in knobs)), *base, notes=tuple(notes))


def knob_spreads(model: Any) -> dict[tuple[str, str], tuple[float, float]]:
    """(family, knob) -> (standard deviation today, drift rad/hour) of knobs the model gives with an
    uncertainty or an inline ``drift_per_hour`` (the largest over a family's tables; a uniform
    uncertainty on [low, high] has standard deviation (high - low)/√12)."""
    out: dict[tuple[str, str], tuple[float, float]] = {}
    for s in model.uncertain:
        if s.path[0] != "gates":
            continue
        gate = ALIASES.get(s.path[1], s.path[1])
        knob = name_of(s.path)[0].split(".", 1)[1]
        family = (model.gates.get(gate) or GateParams()).family or gate
        sigma = s.sigma or ((s.high - s.low) / math.sqrt(12) if s.low is not None else 0.0)
        old = out.get((family, knob), (0.0, 0.0))
        out[(family, knob)] = (max(old[0], sigma), max(old[1], s.drift_per_hour))
    return out


def _menu(label: tuple[str, str], a: float, value: float, sites: tuple[Probe, ...], settings: CalibrationSettings,
          budget: float, hours: float, sigma_now: float = 0.0, drift_inline: float = 0.0) -> list[KnobSchedule]:
    """Every option of one knob: leave it, or (σ, rounds) pairs whose experiment exists. A knob left
    alone has mean square (|δ| + D H)² + σ_now² (today's value, its drift, its uncertainty)."""
    family, knob = label
    drift = _drift_of(label, settings.drift_rad_per_hour) or drift_inline
    common = dict(per_rad2=a, current_rad=value, drift_rad_per_hour=drift)
    leave = (abs(value) + drift * hours) ** 2 + sigma_now**2
    if knob in HARDWARE_KNOBS:
        return [KnobSchedule(family, knob, "hardware", None, None, 0, (), 0.0, 0.0, leave, **common)]
    out = [KnobSchedule(family, knob, "leave", None, None, 0, (), 0.0, 0.0, leave, **common)]
    if a <= 0 or not sites:
        return out
    sigma_ref = math.sqrt(budget / a)
    for j in range(1, SIGMA_STEPS + 1):
        sigma = sigma_ref * 2 ** (-j / 2)
        runs = [_site(p, sigma, settings) for p in sites]
        if any(isinstance(r, str) for r in runs):
            break
        per_round = max(r.device_s for r in runs) if settings.parallel_sites else math.fsum(r.device_s for r in runs)
        for k in range(MAX_ROUNDS_LOG2 + 1 if drift else 1):
            rounds = 2**k
            tau = hours / rounds
            out.append(KnobSchedule(family, knob, "calibrate", sigma, tau, rounds, tuple(runs), per_round,
                                    per_round * rounds, sigma**2 + (drift * tau) ** 2, **common))
    return out


def _solve(menus: list[list[KnobSchedule]], diag: np.ndarray, budget: float, source: str) -> list[int]:
    """The MILP of the module docstring; returns the chosen option of each knob."""
    if not menus:  # no coherent knob: nothing to schedule
        return []
    sizes = [len(m) for m in menus]
    n = sum(sizes)
    cost = np.concatenate([[o.device_s for o in m] for m in menus])
    load = np.concatenate([[o.per_rad2 * o.mean_square_rad2 for o in m] for m in menus])
    pick = np.zeros((len(menus), n))
    start = 0
    for i, size in enumerate(sizes):
        pick[i, start:start + size] = 1.0
        start += size
    scale = budget  # keep the budget row near 1 for the solver's tolerances
    res = milp(cost, integrality=np.ones(n), bounds=Bounds(0, 1),
               constraints=[LinearConstraint(pick, 1, 1), LinearConstraint(load[None, :] / scale, -np.inf, 1.0)])
    if res.status != 0 or res.x is None:
        raise InputError(f"{source}: no schedule meets the target even with every knob at the finest precision "
                         f"({res.message})")
    x = np.round(res.x).astype(int)
    out, start = [], 0
    for size in sizes:
        out.append(int(np.argmax(x[start:start + size])))
        start += size
    return out


def _baseline(menus, diag, budget, qf, settings, probes, hours, target) -> tuple:
    """Every calibratable knob at σ = t_min/k (equal-share tolerances, random signs), common rounds."""
    report = tolerances(qf, target, assume="random", allocation="equal")
    finite = [r.tolerance_rad for r in report.rows if 0 < r.tolerance_rad < math.inf and r.knob not in HARDWARE_KNOBS]
    if not finite:
        return None, None, None
    sigma = min(finite) / settings.sigma_factor
    index = {label: i for i, label in enumerate(qf.labels)}
    for k in range(MAX_ROUNDS_LOG2 + 1):
        rounds, total, load = 2**k, 0.0, qf.floor
        for label, i in index.items():
            m = menus[i][0]
            runs = [_site(p, sigma, settings) for p in probes.get(label, ())] if diag[i] > 0 and m.action != "hardware" else []
            if runs and not any(isinstance(r, str) for r in runs):
                per = max(r.device_s for r in runs) if settings.parallel_sites else math.fsum(r.device_s for r in runs)
                total += per * rounds
                load += diag[i] * (sigma**2 + (m.drift_rad_per_hour * hours / rounds) ** 2)
            else:
                load += diag[i] * m.mean_square_rad2
        if load <= target:
            return total, sigma, rounds
    return None, sigma, None


def schedule_json(s: Schedule) -> dict:
    """The schedule as JSON-ready data (docs/json-schema.md, ``budget plan``)."""
    return {
        "target": s.target, "hours": s.hours, "incoherent_floor": s.floor, "predicted_infidelity": s.predicted,
        "device_minutes": s.device_s / 60, "device_minutes_per_day": s.minutes_per_day,
        "baseline": {"device_minutes": None if s.baseline_device_s is None else s.baseline_device_s / 60,
                     "sigma_rad": s.baseline_sigma_rad, "rounds": s.baseline_rounds},
        "notes": list(s.notes),
        "knobs": [
            {"knob": knob_key((k.family, k.knob)), "action": k.action, "sigma_rad": k.sigma_rad,
             "every_hours": k.every_hours, "rounds": k.rounds, "device_minutes": k.device_s / 60,
             "depth": max((r.depth for r in k.sites), default=None),
             "shots_per_round": sum(r.shots_total for r in k.sites) or None,
             "sites": len(k.sites), "current_rad": k.current_rad, "drift_rad_per_hour": k.drift_rad_per_hour,
             "mean_square_rad2": k.mean_square_rad2, "per_rad2": k.per_rad2}
            for k in s.knobs
        ],
    }
