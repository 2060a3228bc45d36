"""The model values a sweep varies, and one drawn model per sample (docs/methods.md, sweeps).

A *varied value* is a model value with an uncertainty (``{ value, sigma }`` normal, ``{ low, high }``
uniform, see :mod:`budget.errors.uncertain`) and/or a drift rate (inline ``drift_per_hour``, or
``[calibration.drift_rad_per_hour]`` ``"family.knob"`` keys, which apply to every gate table of that
family that sets the knob). Sample k of a sweep with seed s draws its quantiles and drift directions
from ``numpy.random.default_rng([s, k])``, so any sample can be recomputed on its own, in any order,
on any machine. At hour h a drifting value is x + σ_k·D·h with σ_k = ±1 its drawn direction
(a linear drift of known rate and unknown sign, as the calibration plan assumes).

Draws outside a value's physical range are moved to its edge: times and durations to a small
positive value, probabilities into [0, (d-1)/d] for gates and [0, 1] for readout, T2 to at most 2 T1.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from budget.circuit.gates import ALIASES, GATES
from budget.errors.model import ErrorModel
from budget.errors.uncertain import UNCERTAIN_SECTIONS, Spread

CONTEXT_SECTIONS = tuple(k for k in UNCERTAIN_SECTIONS if k not in ("qubits", "gates"))


@dataclass(frozen=True)
class Varied:
    """One value a sweep varies: where it sits in the model dict, how to draw it, how it drifts.

    ``knob`` and ``site`` name it for reports: ``("cz.cphase", "q[1],q[2]")``, ``("t1_us", "q[3]")``,
    ``("x.overrotation", "all")``.
    """

    spread: Spread
    knob: str
    site: str

    @property
    def path(self) -> tuple[str, ...]:
        return self.spread.path


def varied_values(model: ErrorModel, plain: Mapping[str, Any]) -> tuple[Varied, ...]:
    """Every value with an uncertainty or a drift, in file order (calibration drift keys last).

    ``plain`` is the model dict with central values (:func:`budget.errors.uncertain.central_values`).
    """
    out = {s.path: Varied(s, *name_of(s.path)) for s in model.uncertain}
    drifts = (model.calibration or {}).get("drift_rad_per_hour", {}) if isinstance(model.calibration, Mapping) else {}
    for key, rate in drifts.items():
        family, _, knob = str(key).rpartition(".")
        for path in _family_paths(plain, family, knob):
            if path in out:
                s = out[path].spread
                if not s.drift_per_hour:
                    out[path] = Varied(Spread(s.path, s.center, s.sigma, s.low, s.high, float(rate)), out[path].knob,
                                       out[path].site)
            else:
                out[path] = Varied(Spread(path, float(_get(plain, path)), drift_per_hour=float(rate)), *name_of(path))
    return tuple(out.values())


def name_of(path: tuple[str, ...]) -> tuple[str, str]:
    """(knob, site) of a model path: ``("cz.cphase", "q[1],q[2]")``, ``("t1_us", "all")``."""
    if path[0] == "qubits":
        return (path[-1], path[1] if len(path) == 3 else "all")
    if path[0] in CONTEXT_SECTIONS:  # ("couplings", "q[0],q[1]", "zz_khz") -> ("couplings.zz_khz", "q[0],q[1]")
        return (f"{path[0]}.{path[-1]}", " ".join(path[1:-1]) or "all")
    gate, rest = path[1], path[2:]
    site = "all"
    if len(rest) > 1 and rest[0] not in ("z_phase", "pauli"):
        site, rest = rest[0], rest[1:]
    knob = rest[0] if len(rest) == 1 else f"z_phase[{rest[1]}]" if rest[0] == "z_phase" else f"pauli:{rest[1]}"
    return (f"{gate}.{knob}", site)


def _family_paths(plain: Mapping[str, Any], family: str, knob: str) -> list[tuple[str, ...]]:
    """Paths of ``knob`` in every gate table whose family (or gate name) is ``family``."""
    key, index = (knob.split("[")[0], knob.split("[")[1].rstrip("]")) if "[" in knob else (knob, None)
    paths = []
    for gate, table in plain.get("gates", {}).items():
        fam = table.get("family", ALIASES.get(gate, gate))
        subs = [((), table)] + [((k,), v) for k, v in table.items() if isinstance(v, Mapping) and k != "pauli"]
        for prefix, t in subs:
            if t.get("family", fam) != family or key not in t:
                continue
            paths.append(("gates", gate) + prefix + ((key, index) if index is not None else (key,)))
    return paths


def _get(data: Mapping, path: tuple[str, ...]) -> Any:
    for part in path:
        data = data[int(part)] if isinstance(data, list) else data[part]
    return data


def draw(varied: tuple[Varied, ...], seed: int, index: int) -> tuple[np.ndarray, np.ndarray]:
    """Sample ``index``'s values now and its drift directions (±1), from rng([seed, index])."""
    rng = np.random.default_rng([seed, index])
    u = rng.random(len(varied))
    signs = rng.choice(np.array([-1.0, 1.0]), size=len(varied))
    return np.array([v.spread.ppf(q) if v.spread.random else v.spread.center for v, q in zip(varied, u)], float), signs


def at_hour(varied: tuple[Varied, ...], values: np.ndarray, signs: np.ndarray, hour: float) -> np.ndarray:
    """Values after ``hour`` hours of linear drift in the drawn directions."""
    return values + signs * np.array([v.spread.drift_per_hour for v in varied]) * hour


def with_values(plain: Mapping[str, Any], paths: tuple[tuple[str, ...], ...], values: np.ndarray) -> dict:
    """A copy of the model dict with the values set (moved into their physical range)."""
    data = copy.deepcopy(dict(plain))
    for path, value in zip(paths, values):
        table = data
        for part in path[:-1]:
            table = table[int(part)] if isinstance(table, list) else table[part]
        last = int(path[-1]) if isinstance(table, list) else path[-1]
        table[last] = _physical(path, float(value))
    for name, table in [("", data.get("qubits", {}))] + [(k, v) for k, v in data.get("qubits", {}).items()
                                                         if isinstance(v, dict)]:
        t1 = table.get("t1_us", data.get("qubits", {}).get("t1_us"))
        if isinstance(table.get("t2_us"), float) and isinstance(t1, (int, float)):
            table["t2_us"] = min(table["t2_us"], 2 * t1)
    return data


def _physical(path: tuple[str, ...], value: float) -> float:
    key = next((p for p in reversed(path) if not p.isdigit()), path[-1])
    if key in ("t1_us", "t2_us"):
        return max(value, 1e-6)
    if key == "duration_ns":
        return max(value, 0.0)
    if key == "zz_khz":  # a rate magnitude (docs/error-model.md)
        return max(value, 0.0)
    if key == "fraction":  # crosstalk and bleed fractions live in [-1, 1]
        return min(max(value, -1.0), 1.0)
    if key == "readout_error":
        return min(max(value, 0.0), 1.0)
    if key == "avg_infidelity":
        gate = ALIASES.get(path[1], path[1])
        d = 2 ** GATES[gate].num_qubits if gate in GATES else 2
        return min(max(value, 0.0), (d - 1) / d)
    return value
