"""Running a sweep's evaluations: in this process, on local cores, or on a Dask cluster; results
streamed to a JSON-lines file so that an interrupted sweep resumes where it stopped.

An evaluation task is ``(key, values)``: ``key`` a tuple naming it (``("mc", k, hour_index)`` or
``("sobol", j)``), ``values`` the varied model values. :func:`evaluate` turns a chunk of tasks
into ``(key, infidelity)`` pairs; it is a plain module-level function so that worker processes and
Dask workers can import it.
"""

from __future__ import annotations

import json
import math
import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterable, Mapping

from budget.analysis.measured import MEASURED_METRICS, measured_values
from budget.analysis.uncertainty import with_values
from budget.engines.door import choose_engine
from budget.circuit.ir import StructuredCircuit
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.problems import InputError


@dataclass(frozen=True)
class Context:
    """What every evaluation needs: the circuit, the model dict (central values), the paths of the
    varied values, the metric and the engine name."""

    circuit: StructuredCircuit
    plain: Mapping[str, Any]
    paths: tuple[tuple[str, ...], ...]
    metric: str
    engine: str
    source: str


def evaluate(context: Context, chunk: list[tuple[tuple, list[float]]]) -> list[tuple[tuple, float]]:
    """The infidelity of each task's drawn model (the engine's brief path, as depth curves use; the
    detector and record metrics through :func:`measured_values`, as their depth curves)."""
    out = []
    for key, values in chunk:
        model = ErrorModel.from_dict(with_values(context.plain, context.paths, values), source=context.source)
        noisy = attach(context.circuit, model)
        if context.metric in MEASURED_METRICS:
            out.append((tuple(key), float(measured_values(noisy, context.metric, context.engine)[0])))
            continue
        engine = choose_engine(noisy, context.metric, context.engine, brief=True)
        result = engine.run(noisy, context.metric)
        # beyond the engine's range there is no value (the analysis shows none either): NaN, refused by sweep()
        out.append((tuple(key), math.nan if result.beyond_range else float(result.infidelity)))
    return out


class Stream:
    """The JSON-lines results file: a header line describing the sweep, then one line per result.

    Opening an existing file resumes it: its header must describe the same sweep, complete lines
    are kept, a last line cut off by an interruption is dropped.
    """

    def __init__(self, path: str | Path | None, header: dict):
        self.path = Path(path) if path is not None else None
        self.done: dict[tuple, float] = {}
        self.fh = None
        if self.path is None:
            return
        lines: list[str] = []
        if self.path.exists():
            text = self.path.read_text(encoding="utf-8")
            lines = text.split("\n")
            complete = lines[:-1]  # the part after the last newline is incomplete (or empty)
            if complete:
                try:
                    old = json.loads(complete[0]).get("sweep")
                except json.JSONDecodeError:
                    old = None
                if old != header:
                    diff = next((k for k in header if not isinstance(old, dict) or old.get(k) != header[k]), "sweep")
                    raise InputError(f"--out {self.path}: holds results of a different sweep ({diff}: "
                                     f"{(old or {}).get(diff) if isinstance(old, dict) else 'no header'} here, "
                                     f"{header.get(diff)} now); choose another file")
                for line in complete[1:]:
                    row = json.loads(line)
                    self.done[tuple(row["key"])] = float(row["infidelity"])
            lines = complete
        self.fh = open(self.path, "w", encoding="utf-8")
        self.fh.write("\n".join(lines or [json.dumps({"sweep": header})]) + "\n")
        self.fh.flush()

    def add(self, key: tuple, infidelity: float) -> None:
        self.done[tuple(key)] = infidelity
        if self.fh is not None:
            self.fh.write(json.dumps({"key": list(key), "infidelity": infidelity}) + "\n")
            self.fh.flush()

    def close(self) -> None:
        if self.fh is not None:
            self.fh.close()


def run_tasks(context: Context, tasks: list[tuple[tuple, list[float]]], stream: Stream, *, workers: int | None,
              scheduler: Any, progress: Callable[[int, int], None] | None) -> None:
    """Evaluate the tasks not yet in ``stream``, in chunks, recording each result as it arrives.

    Tasks with the same values are evaluated once (a model with nothing uncertain, or a value that
    does not drift, gives every sample the same model); each key still gets its own record."""
    pending = [t for t in tasks if tuple(t[0]) not in stream.done]
    total, done = len(tasks), len(tasks) - len(pending)
    if progress:
        progress(done, total)
    if not pending:
        return
    same: dict[tuple, list[tuple]] = {}
    for key, values in pending:
        same.setdefault(tuple(values), []).append(key)
    todo = [(keys[0], list(values)) for values, keys in same.items()]
    twins = {tuple(keys[0]): keys[1:] for keys in same.values()}
    workers = workers or os.cpu_count() or 1
    size = max(1, min(32, len(todo) // (4 * workers)))
    chunks = [todo[i:i + size] for i in range(0, len(todo), size)]
    for results in _results(context, chunks, workers, scheduler):
        for key, value in results:
            for k in (key, *twins[tuple(key)]):
                stream.add(k, value)
                done += 1
        if progress:
            progress(done, total)


def _results(context: Context, chunks: list, workers: int, scheduler: Any) -> Iterable[list]:
    if scheduler is not None:
        yield from _dask(context, chunks, scheduler)
    elif workers == 1:
        for chunk in chunks:
            yield evaluate(context, chunk)
    else:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            futures = [pool.submit(evaluate, context, chunk) for chunk in chunks]
            for f in as_completed(futures):
                yield f.result()


def _dask(context: Context, chunks: list, scheduler: Any) -> Iterable[list]:
    """On a Dask cluster: ``scheduler`` is a ``distributed.Client``, ``"local"`` (a LocalCluster on
    this machine) or a scheduler address such as ``tcp://10.0.0.5:8786``."""
    import distributed  # slow optional import: only sweeps sent to a cluster need it

    own = None
    if isinstance(scheduler, distributed.Client):
        client = scheduler
    elif scheduler == "local":
        own = client = distributed.Client(distributed.LocalCluster(), set_as_default=False)
    else:
        try:
            own = client = distributed.Client(scheduler, timeout="5s", set_as_default=False)
        except (OSError, TimeoutError, ValueError) as e:
            raise InputError(f"--scheduler {scheduler}: cannot reach a Dask scheduler there ({e})") from None
    try:
        shared = client.scatter(context, broadcast=True)
        futures = [client.submit(evaluate, shared, chunk, pure=False) for chunk in chunks]
        for f in distributed.as_completed(futures, loop=client.loop):
            yield f.result()
    finally:
        if own is not None:
            cluster = own.cluster
            own.close()
            if cluster is not None:
                cluster.close()
