"""The tolerance report in words and as JSON: the floor statement and the documented JSON form
(docs/tolerances.md §6, schema version 1)."""

from __future__ import annotations

import math

from budget.analysis.sensitivity import knob_key
from budget.analysis.tolerances import SCHEMA_VERSION, ToleranceReport
from budget.errors.context_terms import knob_in_lab_units


def floor_message(report: ToleranceReport) -> str | None:
    """The plain statement when the incoherent floor alone exceeds the target, else None."""
    if report.feasible:
        return None
    sources = ", ".join(f"{name} {value:.3g}" for name, value in report.main_floor_sources())
    depth = (
        "not even one repetition meets it"
        if report.max_cycles == 0
        else f"at most {report.max_cycles} repetitions meet it even with perfect calibration"
    )
    return (
        f"the incoherent floor {report.incoherent_floor:.3g} alone exceeds the target {report.target:g} "
        f"(main sources: {sources or 'none named'}); no calibration of coherent knobs can fix this; {depth}"
    )


def tolerances_json(report: ToleranceReport) -> dict:
    """The report as JSON-ready data (docs/tolerances.md, schema version 1); infinities become null."""
    return {
        "schema_version": SCHEMA_VERSION,
        "kind": "tolerances",
        "target": report.target,
        "metric": report.metric,
        "assume": report.assume,
        "allocation": report.allocation,
        "incoherent_floor": report.incoherent_floor,
        "floor_sources": dict(report.floor_sources),
        "coherent_budget": report.coherent_budget,
        "feasible": report.feasible,
        "floor_message": floor_message(report),
        "common_factor": _finite(report.common_factor),
        "current": {"signed": report.current_signed, "assumed": report.current_assumed},
        "cycles": report.cycles,
        "max_cycles": report.max_cycles,
        "exact": report.exact,
        "tolerances": [
            {
                "family": r.family,
                "knob": r.knob,
                "key": knob_key((r.family, r.knob)),
                "current_rad": r.current_rad,
                "tolerance_rad": _finite(r.tolerance_rad),
                "lab_unit": knob_in_lab_units(r.knob, 0.0)[1],  # kHz for spectator ZZ (zz_rad_per_us)
                "tolerance_lab": _finite(knob_in_lab_units(r.knob, r.tolerance_rad)[0]),
                "tighten_by": _finite(r.tighten_by),
                "status": r.status,
                "order": r.order,
                "first_order_rad": _finite(r.first_order_rad),
                "capped": r.capped,
                "worst_site": r.worst_site,
                "sites_over": r.sites_over,
                "sites": [
                    {"site": x.site, "current_rad": x.current_rad, "tolerance_rad": _finite(x.tolerance_rad), "over": x.over}
                    for x in r.sites
                ],
            }
            for r in report.rows
        ],
        "closed_loop": None if report.closed_loop is None else report.closed_loop.as_json(),
        "floor_remedy": None if report.floor_remedy is None else report.floor_remedy.as_json(),
        "warnings": list(report.warnings),
    }


def _finite(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None
