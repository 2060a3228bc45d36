"""Uncertainty sweep: the distribution of the circuit's infidelity when the model's values are
uncertain, how it moves over hours of drift, and which value's uncertainty matters most.

    >>> from budget.analysis.sweep import sweep                         # doctest: +SKIP
    >>> r = sweep("circuits/echo_xy4.qasm", "lab_uncertain.toml", samples=2000, hours=8, target=1e-2)
    >>> r.median, r.q05, r.q95, r.p_meet_target

Method (docs/methods.md, sweeps):

- **Monte Carlo.** Sample k draws every varied value (:mod:`budget.analysis.uncertainty`) from
  rng([seed, k]) and runs the engine's brief path on the drawn model. Mean, standard deviation,
  median, 5 % and 95 % quantiles and P(infidelity <= target) are read from the samples; the mean
  carries its Monte Carlo standard error std/√n.
- **Drift.** The same samples at ``hour_points`` times from 0 to H, each drifting value moved by
  ±D·h in the sample's drawn direction.
- **Variance-based sensitivity.** Sobol indices (Sobol, Math. Comput. Simul. 55, 271 (2001)) from a
  Saltelli design (Saltelli et al., Comput. Phys. Commun. 181, 259 (2010)): two scrambled Sobol'
  point sets A and B and, per uncertain value i, A with column i from B; n·(d+2) evaluations for
  base size n; estimators of ``scipy.stats.sobol_indices`` (Saltelli 2010 first order, Jansen 1999
  total order). The total index S_T,i is the share of the variance that value i takes part in;
  its 90 % bootstrap interval (seeded) states the estimator's own error.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

import numpy as np
from scipy import stats

from budget.analysis._sweep_exec import Context, Stream, run_tasks
from budget.analysis.run import read_circuit
from budget.analysis.uncertainty import CONTEXT_SECTIONS, Varied, at_hour, draw, name_of, varied_values
from budget.circuit.gates import ALIASES
from budget.circuit.ir import StructuredCircuit
from budget.errors.model import ErrorModel, load_model
from budget.errors.params import split_names
from budget.errors.uncertain import central_values
from budget.problems import InputError

BOOTSTRAP = 200  # resamples for the Sobol indices' confidence intervals


@dataclass(frozen=True)
class Distribution:
    """Summary of sampled infidelities (and P(<= target) when a target is given)."""

    mean: float
    std: float
    median: float
    q05: float
    q95: float
    mean_stderr: float
    p_meet_target: float | None

    @classmethod
    def of(cls, values: np.ndarray, target: float | None) -> "Distribution":
        """Summary of ``values``; equal values (nothing varied) give that value and a spread of
        exactly 0, not the last-bit noise of a floating-point mean and standard deviation."""
        v = np.asarray(values, float)
        if v.size and np.all(v == v[0]):
            x = float(v[0])
            return cls(x, 0.0, x, x, x, 0.0, None if target is None else float(x <= target))
        std = float(v.std(ddof=1)) if v.size > 1 else 0.0
        q05, med, q95 = (float(x) for x in np.quantile(v, [0.05, 0.5, 0.95]))
        p = float(np.mean(v <= target)) if target is not None else None
        return cls(float(v.mean()), std, med, q05, q95, std / math.sqrt(v.size), p)


@dataclass(frozen=True)
class Contribution:
    """One uncertain value's Sobol indices: total order (``index``) with its 90 % bootstrap
    interval (``index_low``, ``index_high``; the estimator's own Monte Carlo error), and first order."""

    knob: str
    site: str
    index: float
    first_order: float
    index_low: float | None = None
    index_high: float | None = None


@dataclass(frozen=True)
class SweepResult:
    """What ``budget sweep`` reports. ``hours``: (hour, Distribution) pairs, hour 0 first."""

    source: str
    samples: int
    target: float | None
    now: Distribution
    hours: tuple[tuple[float, Distribution], ...]
    contributions: tuple[Contribution, ...]
    varied: tuple[Varied, ...]
    sobol_base: int
    unused: tuple[str, ...] = ()  # uncertain values of gates or qubits the circuit does not have (not drawn)
    metric: str = "process"

    def to_dict(self) -> dict:
        """The documented JSON (docs/json-schema.md, ``budget sweep``)."""
        d = self.now
        return {
            "metric": self.metric,
            "samples": self.samples,
            "infidelity": {"mean": d.mean, "std": d.std, "median": d.median, "q05": d.q05, "q95": d.q95},
            "p_meet_target": d.p_meet_target,
            "contributions": [{"knob": c.knob, "site": c.site, "index": c.index} for c in self.contributions],
            "hours": [{"hour": h, "mean": x.mean, "median": x.median, "q05": x.q05, "q95": x.q95,
                       "p_meet_target": x.p_meet_target} for h, x in self.hours],
        }


def sweep(circuit: Any, errors: Any, *, samples: int = 2000, hours: float = 0.0, hour_points: int = 5,
          target: float | None = None, seed: int = 1, cycles: int = 1, metric: str = "process", engine: str = "auto",
          sobol_base: int = 64, out: Any = None, workers: int | None = None, scheduler: Any = None,
          progress: Callable[[int, int], None] | None = None) -> SweepResult:
    """Run an uncertainty sweep (see the module docstring).

    Args:
        circuit, errors: as for :func:`budget.analysis.run.analyze` (errors: a path or a dict).
        samples: Monte Carlo samples, >= 2. hours: drift horizon H (0: no drift curve).
        hour_points: times from 0 to H (>= 2 when hours > 0). target: infidelity E for P(<= E).
        sobol_base: Saltelli base size n, a power of 2 (0: no sensitivity indices).
        out: JSON-lines file the results stream to; an existing file of the same sweep is resumed.
        workers: local processes (default: all cores; 1 = this process). scheduler: Dask
            (``"local"``, an address, or a ``distributed.Client``); overrides ``workers``.
        progress: ``progress(done, total)`` callback.
    """
    if isinstance(samples, bool) or not isinstance(samples, int) or samples < 2:
        raise InputError(f"samples = {samples!r}: expected a whole number >= 2")
    if not (isinstance(hours, (int, float)) and math.isfinite(hours) and hours >= 0):
        raise InputError(f"hours = {hours!r}: expected a number of hours >= 0")
    if hours > 0 and hour_points < 2:
        raise InputError(f"hour_points = {hour_points!r}: expected at least 2 times (0 and H)")
    if target is not None and not 0 < target < 1:
        raise InputError(f"target = {target!r}: expected an infidelity between 0 and 1")
    if sobol_base and (sobol_base < 2 or sobol_base & (sobol_base - 1)):
        raise InputError(f"sobol_base = {sobol_base!r}: expected 0 or a power of 2 (Sobol' points come in 2^m)")
    raw, model = _raw_model(errors)
    plain, _ = central_values(raw, model.source)
    structured = read_circuit(circuit).with_cycles(cycles)
    every = varied_values(model, plain)
    use = [used_by(v.path, structured) for v in every]
    varied = tuple(v for v, u in zip(every, use) if u)
    unused = tuple(f"{v.knob}@{v.site}" for v, u in zip(every, use) if not u)
    context = Context(structured, plain, tuple(v.path for v in varied), metric, engine, model.source)
    times = tuple(float(h) for h in np.linspace(0.0, hours, hour_points)) if hours > 0 else (0.0,)
    draws = [draw(varied, seed, k) for k in range(samples)]
    tasks = [(("mc", k, t), list(at_hour(varied, v, s, h))) for t, h in enumerate(times) for k, (v, s) in enumerate(draws)]
    random = [i for i, v in enumerate(varied) if v.spread.random]
    n_sobol = sobol_base if len(random) > 1 else 0  # one uncertain value: S = S_T = 1, no design needed
    tasks += _saltelli_tasks(varied, random, n_sobol, seed)
    header = {"circuit": structured.source, "model": model.source, "seed": seed, "samples": samples,
              "hours": times, "sobol_base": n_sobol, "cycles": cycles, "metric": metric, "engine": engine,
              "varied": [f"{v.knob}@{v.site}" for v in varied]}
    header["hours"] = list(times)  # JSON has lists, not tuples: compare like with like on resume
    stream = Stream(out, header)
    try:
        run_tasks(context, tasks, stream, workers=workers, scheduler=scheduler, progress=progress)
    finally:
        stream.close()
    res = stream.done
    beyond = sum(1 for v in res.values() if math.isnan(v))
    if beyond:
        raise InputError(f"{beyond} of {len(res)} drawn models are beyond the first-order range of the "
                         f"{engine if engine != 'auto' else 'chosen'} engine, which gives no value for them (as "
                         "`budget analyze` shows); use --engine exact where it fits, or fewer cycles")
    dists = tuple((h, Distribution.of(np.array([res[("mc", k, t)] for k in range(samples)]), target))
                  for t, h in enumerate(times))
    contributions = _sobol(res, varied, random, n_sobol, seed) if n_sobol else ()
    if len(random) == 1 and sobol_base and dists[0][1].std > 0:
        v = varied[random[0]]
        contributions = (Contribution(v.knob, v.site, 1.0, 1.0),)
    return SweepResult(structured.source, samples, target, dists[0][1], dists if hours > 0 else (), contributions,
                       varied, n_sobol, unused, metric)


def used_by(path: tuple[str, ...], circuit: StructuredCircuit) -> bool:
    """Whether the circuit uses a model value: a qubit value of a qubit it has (defaults always), a
    gate value of a gate it applies (on the named qubits, either order, for a per-qubit table).
    Drawing values nothing uses would only thin the Sobol design and list knobs that cannot matter."""
    if path[0] == "qubits":
        return len(path) < 3 or path[1] in circuit.qubits
    if path[0] == "couplings":  # a pair table: both qubits on the circuit; the default: any pair
        return len(path) < 3 or set(split_names(path[1])) <= set(circuit.qubits)
    if path[0] in CONTEXT_SECTIONS:  # whether a crosstalk, bleed or context rule fires depends on the layers
        return True
    gate = ALIASES.get(path[1], path[1])
    knob, site = name_of(path)
    for op in circuit.distinct_operations():
        if op.gate == gate and (site == "all" or set(split_names(site)) == {circuit.qubits[q] for q in op.qubits}):
            return True
    return False


def _raw_model(errors: Any) -> tuple[dict, Any]:
    """The model as a dict with its uncertainty tables kept (for drawing), and the validated model."""
    if isinstance(errors, dict):
        return errors, ErrorModel.from_dict(errors)
    model = load_model(errors)  # every rule checked first, with the loader's messages
    return tomllib.loads(Path(errors).read_text(encoding="utf-8")), model


def _saltelli_tasks(varied: tuple[Varied, ...], random: list[int], n: int, seed: int) -> list:
    """Tasks of the Saltelli design: A (n rows), B (n rows), then AB_i for each uncertain value i."""
    if not n:
        return []
    d = len(random)
    u = stats.qmc.Sobol(d=2 * d, scramble=True, seed=seed).random(n)
    u = np.clip(u, 1e-12, 1 - 1e-12)
    a, b = u[:, :d], u[:, d:]
    base = np.array([v.spread.center for v in varied], float)

    def row(q: np.ndarray) -> list[float]:
        x = base.copy()
        for j, i in enumerate(random):
            x[i] = varied[i].spread.ppf(q[j])
        return list(x)

    tasks = [(("sobol", "A", j), row(a[j])) for j in range(n)] + [(("sobol", "B", j), row(b[j])) for j in range(n)]
    for i in range(d):
        ab = a.copy()
        ab[:, i] = b[:, i]
        tasks += [(("sobol", f"AB{i}", j), row(ab[j])) for j in range(n)]
    return tasks


def _sobol(res: dict, varied: tuple[Varied, ...], random: list[int], n: int, seed: int) -> tuple[Contribution, ...]:
    f_a = np.array([[res[("sobol", "A", j)] for j in range(n)]])
    f_b = np.array([[res[("sobol", "B", j)] for j in range(n)]])
    f_ab = np.array([[[res[("sobol", f"AB{i}", j)] for j in range(n)]] for i in range(len(random))])
    if np.var(np.concatenate([f_a, f_b], axis=1)) == 0:
        return tuple(Contribution(varied[i].knob, varied[i].site, 0.0, 0.0) for i in random)
    idx = stats.sobol_indices(func={"f_A": f_a, "f_B": f_b, "f_AB": f_ab}, n=n)
    first, total = np.atleast_2d(idx.first_order), np.atleast_2d(idx.total_order)

    def total_of(rows: np.ndarray) -> np.ndarray:  # the same estimator on resampled rows of the design
        r = stats.sobol_indices(func={"f_A": f_a[:, rows], "f_B": f_b[:, rows], "f_AB": f_ab[..., rows]}, n=n)
        return np.atleast_2d(r.total_order)[0]

    # seeded percentile bootstrap (SobolResult.bootstrap draws unseeded numbers)
    ci = stats.bootstrap((np.arange(n),), total_of, vectorized=False, n_resamples=BOOTSTRAP, confidence_level=0.9,
                         method="percentile", rng=np.random.default_rng(seed)).confidence_interval
    low, high = np.atleast_2d(ci.low), np.atleast_2d(ci.high)
    out = [Contribution(varied[i].knob, varied[i].site, float(total[0, j]), float(first[0, j]),
                        float(low[0, j]), float(high[0, j]))
           for j, i in enumerate(random)]
    return tuple(sorted(out, key=lambda c: -c.index))
