"""Calibration device time: what measuring each knob to its tolerance costs, and how often.

For every knob that must tighten (or that drifts), the plan runs amplified phase estimation
(:mod:`budget.analysis.phase_estimation`) on each place the family's gate acts (its *sites*)
that lies outside its tolerance (every site for a drifting knob):
a depth ladder 1, 2, 4, … to fix the phase's 2π branch, then the final depth (n* = 1/Γ, or less
for a loose tolerance) with enough shots that std(δ̂) = tolerance / k (Kimmel, Low, Yoder, PRA 92,
062315 (2015)). Two circuits (cos and
sin quadrature) per depth. Device time = shots × (overhead + depth × gate duration) summed over
circuits, plus a per-circuit overhead.

Drift: a knob calibrated to within σ = t/k that then drifts at D rad/hour stays within its
tolerance t for (t - σ)/D hours; that is its recalibration interval. A *round* calibrates every
planned knob; rounds per day follow from the shortest interval.

The optional ``[calibration]`` table of the error-model file (already parsed into a dict) sets
everything; see :class:`CalibrationSettings` for keys, units and defaults.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, field, fields
from typing import Any, Mapping

from budget.analysis.phase_estimation import Probe, final_depth, find_probes  # noqa: F401 (re-exported)
from budget.analysis.sensitivity import knob_key
from budget.analysis.tolerances import NO_EFFECT, ToleranceReport
from budget.errors.context_terms import HARDWARE_KNOBS, HARDWARE_REMEDY, context_knob_keys
from budget.errors.toml_keys import KeyPaths

HOURS_PER_DAY = 24.0


@dataclass(frozen=True)
class CalibrationSettings:
    """Keys of the ``[calibration]`` table, with units and defaults.

    Attributes:
        shot_overhead_us: reset + readout per shot, µs (default 100: passive reset of a few T1 of
            tens of µs plus a µs readout; common practice, no source; about 10 with active reset).
        circuit_overhead_ms: per distinct circuit (compile, load, settle), ms (default 0).
        sigma_factor: k, tolerance / required standard deviation (default 3).
        ladder_shots: shots per circuit at each ladder depth below n* (default 100; enough to pick
            the branch when the phase step is well below π, common practice, no source).
        max_depth: the deepest repetition count used (default 10000).
        parallel_sites: sites of one family are measured at the same time (default false: one
            after another).
        drift_rad_per_hour: ``"family.knob"`` -> drift rate magnitude, rad per hour.
        source: where the table came from (for messages).
    """

    shot_overhead_us: float = 100.0
    circuit_overhead_ms: float = 0.0
    sigma_factor: float = 3.0
    ladder_shots: int = 100
    max_depth: int = 10_000
    parallel_sites: bool = False
    drift_rad_per_hour: Mapping[str, float] = field(default_factory=dict)
    source: str = "<defaults>"


_NUMBERS: dict[str, tuple[str, dict]] = {
    "shot_overhead_us": ("expected a number of µs >= 0", {"low": 0.0}),
    "circuit_overhead_ms": ("expected a number of ms >= 0", {"low": 0.0}),
    "sigma_factor": ("expected a number > 1 (tolerance / standard deviation)", {"low": 1.0, "strict": True}),
    "ladder_shots": ("expected a whole number >= 1", {"low": 1.0, "whole": True}),
    "max_depth": ("expected a whole number >= 1", {"low": 1.0, "whole": True}),
}
"""Key -> (rule, bounds) of the numeric keys (:meth:`budget.errors.toml_keys.KeyPaths.number`)."""
_TABLE = ("calibration",)


def read_calibration(table: Mapping[str, Any] | None, *, source: str = "<dict>") -> CalibrationSettings:
    """Validate the parsed ``[calibration]`` table (None or {} = defaults).

    Every bad value raises one ModelError naming the key, the value, the file and the rule, worded
    as everywhere else in the error-model file (:class:`budget.errors.toml_keys.KeyPaths`).

    >>> read_calibration({"sigma_factor": 2, "drift_rad_per_hour": {"cz.cphase": 0.002}}).sigma_factor
    2.0
    """
    if table is None:
        return CalibrationSettings(source=source)
    keys = KeyPaths(source)
    keys.table(_TABLE, table)
    known = [f.name for f in fields(CalibrationSettings) if f.name != "source"]
    values: dict[str, Any] = {"source": source}
    for key, value in table.items():
        path = _TABLE + (key,)
        if key.startswith("drift") and key != "drift_rad_per_hour":
            raise keys.fail(path, value, "give drift rates with their unit, as calibration.drift_rad_per_hour")
        if key not in known:
            raise keys.unknown(path, value, known)
        if key == "parallel_sites":
            values[key] = keys.flag(path, value)
        elif key == "drift_rad_per_hour":
            values[key] = _drifts(keys, value)
        else:
            rule, bounds = _NUMBERS[key]
            values[key] = keys.number(path, value, rule, **bounds)
    return CalibrationSettings(**values)


def _drifts(keys: KeyPaths, value: Any) -> dict[str, float]:
    path = _TABLE + ("drift_rad_per_hour",)
    if not isinstance(value, Mapping):
        raise keys.fail(path, value, 'expected a table such as {"cz.cphase" = 0.002}')
    out = {}
    for knob, rate in value.items():
        if isinstance(rate, str):
            raise keys.fail(path + (str(knob),), rate, "expected a plain number in rad per hour (the unit is in the key name)")
        out[str(knob)] = keys.number(path + (str(knob),), rate, "expected a drift rate >= 0 in rad per hour", low=0.0)
    return out


@dataclass(frozen=True)
class SiteRun:
    """The experiment at one site: ladder depths, final depth n*, shots, circuits and device time."""

    qubits: tuple[str, ...]
    gamma_per_rep: float
    phase_per_rad: float
    ladder: tuple[int, ...]
    depth: int
    shots_final: int
    circuits: int
    shots_total: int
    device_s: float


@dataclass(frozen=True)
class KnobPlan:
    """Calibrating one knob: why, to what σ, where, how long; with drift, how long it holds.

    ``reason``: ``"tighten"`` (outside its tolerance now) or ``"drift"`` (within it, but drifting).
    ``hold_hours``: time within tolerance after a calibration, (t - σ)/D; None without drift.
    """

    family: str
    knob: str
    reason: str
    tolerance_rad: float
    sigma_rad: float
    sites: tuple[SiteRun, ...]
    device_s: float
    drift_rad_per_hour: float | None
    hold_hours: float | None


@dataclass(frozen=True)
class CalibrationPlan:
    """The whole plan and the totals a group lead can quote.

    Attributes:
        knobs: planned knobs, most device time first.
        round_s: device time of one round (every planned knob once).
        interval_hours: the shortest hold time (None: nothing drifts).
        rounds_per_day: 24 h / interval_hours.
        day_share: round_s × rounds_per_day / 1 day (> 1: calibration cannot keep up).
        scheduled_share: Σ device_s / hold time when each knob is recalibrated on its own clock.
        unplanned: ``"family.knob"`` -> why no experiment is planned for it.
        settings: what the plan assumed.
    """

    knobs: tuple[KnobPlan, ...]
    round_s: float
    interval_hours: float | None
    rounds_per_day: float | None
    day_share: float | None
    scheduled_share: float | None
    unplanned: dict[str, str]
    settings: CalibrationSettings


def model_knob_keys(model: Any) -> frozenset[str]:
    """Every ``"family.knob"`` an ErrorModel defines (gate tables and per-qubit tables alike, and
    the context sections: :func:`budget.errors.context_terms.context_knob_keys`)."""
    out = set(context_knob_keys(model.context, model.gates))
    for gate, gp in list(model.gates.items()) + [(g, p) for (g, _), p in model.gate_overrides.items()]:
        out.update(f"{gp.family or gate}.{k}" for k in gp.knob_values())
    return frozenset(out)


def _drift_of(row_key: tuple[str, str], drifts: Mapping[str, float]) -> float | None:
    """The drift rate for a row: its own key, else its base family's (``"cz q[0],q[1]"`` -> ``"cz"``)."""
    family, knob = row_key
    rate = drifts.get(knob_key(row_key), drifts.get(knob_key((family.split(" ", 1)[0], knob))))
    return rate or None


def calibration_plan(
    report: ToleranceReport,
    probes: Mapping[tuple[str, str], tuple[Probe, ...]],
    settings: CalibrationSettings,
    *,
    model_knobs: frozenset[str] = frozenset(),
) -> CalibrationPlan:
    """Plan the phase-estimation experiments for every knob that must tighten or that drifts.

    A drift key ``"cz.cphase"`` applies to family ``cz`` and to its per-pair or per-operation
    families (``"cz q[0],q[1]"``); a more specific key (``"cz q[0],q[1].cphase"``) wins. Keys the
    model defines (``model_knobs``, see :func:`model_knob_keys`) but this circuit does not use are
    ignored; any other key raises ModelError (a knob the model does not have).
    """
    keys = {knob_key((r.family, r.knob)) for r in report.rows}
    keys |= {knob_key((r.family.split(" ", 1)[0], r.knob)) for r in report.rows}
    for key, rate in settings.drift_rad_per_hour.items():
        if key not in keys and key not in model_knobs:
            known = sorted(keys | model_knobs)
            close = difflib.get_close_matches(key, known, n=1)
            hint = f"did you mean {close[0]!r}?" if close else f"knobs: {', '.join(known) or 'none'}"
            raise KeyPaths(settings.source).fail(_TABLE + ("drift_rad_per_hour", key), rate,
                                                 f"the model has no knob {key}; {hint}")
    k = settings.sigma_factor
    plans: list[KnobPlan] = []
    unplanned: dict[str, str] = {}
    for row in report.rows if report.feasible else ():
        key = knob_key((row.family, row.knob))
        drift = _drift_of((row.family, row.knob), settings.drift_rad_per_hour)
        if row.status != "tighten" and drift is None:
            continue
        if row.knob in HARDWARE_KNOBS:
            unplanned[key] = HARDWARE_REMEDY
            continue
        if not 0 < row.tolerance_rad < math.inf:
            unplanned[key] = "no effect found" if row.status == NO_EFFECT else "its tolerance is zero"
            continue
        sigma = row.tolerance_rad / k
        chosen = probes.get((row.family, row.knob), ())
        if row.status == "tighten" and drift is None:  # only the sites outside their tolerance
            chosen = tuple(p for p in chosen if _site_over(row, p.qubits))
        sites = [_site(p, sigma, settings) for p in chosen]
        why = next((s for s in sites if isinstance(s, str)), None if sites else "no operation of the circuit carries it")
        if why is not None:
            unplanned[key] = why
            continue
        times = [s.device_s for s in sites]
        plans.append(KnobPlan(
            row.family, row.knob, "tighten" if row.status == "tighten" else "drift", row.tolerance_rad, sigma,
            tuple(sites), max(times) if settings.parallel_sites else math.fsum(times), drift,
            (row.tolerance_rad - sigma) / drift if drift else None,
        ))
    plans.sort(key=lambda p: -p.device_s)
    round_s = math.fsum(p.device_s for p in plans)
    holds = [p.hold_hours for p in plans if p.hold_hours is not None]
    interval = min(holds) if holds else None
    per_day = HOURS_PER_DAY / interval if interval else None
    return CalibrationPlan(
        tuple(plans), round_s, interval, per_day,
        round_s * per_day / (HOURS_PER_DAY * 3600) if per_day else None,
        math.fsum(p.device_s / (p.hold_hours * 3600) for p in plans if p.hold_hours) if holds else None,
        unplanned, settings,
    )


def _site_over(row: Any, qubits: tuple[str, ...]) -> bool:
    """Whether the row's site on ``qubits`` lies outside its tolerance (True when sites are not told apart)."""
    name = f"{row.family} {','.join(qubits)}"
    match = [s for s in row.sites if s.site == name]
    return match[0].over if match else True


def _site(probe: Probe, sigma: float, settings: CalibrationSettings) -> SiteRun | str:
    """The experiment at one site, or why there is none."""
    if probe.phase_per_rad <= 0:
        return "repeating the gate does not amplify this knob; it needs an interleaved sequence"
    if not math.isfinite(probe.gamma_per_rep):
        return f"on {','.join(probe.qubits)} the gate's incoherent error erases the signal in one repetition"
    n, final = final_depth(sigma, probe.gamma_per_rep, probe.phase_per_rad, max_depth=settings.max_depth,
                           min_shots=2 * settings.ladder_shots)
    ladder = tuple(2**j for j in range(max(0, math.ceil(math.log2(n))))) if n > 1 else ()
    per_shot = lambda depth: settings.shot_overhead_us * 1e-6 + depth * probe.duration_ns * 1e-9  # noqa: E731
    circuits = 2 * (len(ladder) + 1)
    device = math.fsum([2 * settings.ladder_shots * per_shot(d) for d in ladder] + [final * per_shot(n)])
    return SiteRun(
        probe.qubits, probe.gamma_per_rep, probe.phase_per_rad, ladder, n, final, circuits,
        2 * settings.ladder_shots * len(ladder) + final, device + circuits * settings.circuit_overhead_ms * 1e-3,
    )


def calibration_json(plan: CalibrationPlan) -> dict:
    """The plan as JSON-ready data (seconds, hours, radians as in the field names)."""
    s = plan.settings
    return {
        "settings": {
            "shot_overhead_us": s.shot_overhead_us, "circuit_overhead_ms": s.circuit_overhead_ms,
            "sigma_factor": s.sigma_factor, "ladder_shots": s.ladder_shots, "max_depth": s.max_depth,
            "parallel_sites": s.parallel_sites, "drift_rad_per_hour": dict(s.drift_rad_per_hour),
        },
        "knobs": [
            {
                "family": p.family, "knob": p.knob, "reason": p.reason, "tolerance_rad": p.tolerance_rad,
                "sigma_rad": p.sigma_rad, "device_s": p.device_s, "drift_rad_per_hour": p.drift_rad_per_hour,
                "hold_hours": p.hold_hours,
                "sites": [
                    {
                        "qubits": list(r.qubits), "gamma_per_rep": r.gamma_per_rep, "phase_per_rad": r.phase_per_rad,
                        "ladder": list(r.ladder), "depth": r.depth, "shots_final": r.shots_final,
                        "circuits": r.circuits, "shots_total": r.shots_total, "device_s": r.device_s,
                    }
                    for r in p.sites
                ],
            }
            for p in plan.knobs
        ],
        "unplanned": dict(plan.unplanned),
        "totals": {
            "round_minutes": plan.round_s / 60, "interval_hours": plan.interval_hours,
            "rounds_per_day": plan.rounds_per_day, "day_share": plan.day_share,
            "scheduled_share": plan.scheduled_share,
        },
    }
