"""Detector inference against stim's generated circuits (issue 13).

Reference: stim's circuit generator (Gidney, Quantum 5, 497 (2021)) declares the detectors and
logical observables of repetition- and surface-code memory experiments; our inference works from
the OpenQASM stim writes (no detector annotations) and must find the same space, and for these
circuits the same detectors, since both follow the same convention.
"""

from __future__ import annotations

import pytest
import stim

from budget.analysis.detectors import infer_checks
from budget.circuit.qasm import parse_qasm
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.problems import InputError


def stim_annotations(circuit: stim.Circuit) -> tuple[list[frozenset[int]], dict[int, frozenset[int]]]:
    """Absolute record indices of stim's DETECTOR and OBSERVABLE_INCLUDE instructions."""
    count, dets, obs = 0, [], {}
    for inst in circuit.flattened():
        if inst.name in ("M", "MR", "MX", "MY", "MRX"):
            count += len(inst.targets_copy())
        elif inst.name == "DETECTOR":
            dets.append(frozenset(count + t.value for t in inst.targets_copy()))
        elif inst.name == "OBSERVABLE_INCLUDE":
            k = int(inst.gate_args_copy()[0])
            obs[k] = obs.get(k, frozenset()) ^ frozenset(count + t.value for t in inst.targets_copy())
    return dets, obs


def rank(vectors) -> int:
    pivots: dict[int, int] = {}
    r = 0
    for vec in vectors:
        v = sum(1 << i for i in vec)
        while v:
            p = v.bit_length() - 1
            if p not in pivots:
                pivots[p] = v
                r += 1
                break
            v ^= pivots[p]
    return r


def noisy_from_stim(circuit: stim.Circuit, version: int = 3):
    text = circuit.without_noise().to_qasm(open_qasm_version=version, skip_dets_and_obs=True)
    return attach(parse_qasm(text, source="gen.qasm"), ErrorModel.from_dict({}))


CASES = [
    ("repetition_code:memory", 3, 5),
    ("repetition_code:memory", 5, 1),
    ("surface_code:rotated_memory_z", 3, 3),
    ("surface_code:rotated_memory_x", 3, 4),
    ("surface_code:rotated_memory_z", 5, 2),
    ("surface_code:unrotated_memory_z", 3, 2),
]


@pytest.mark.parametrize("code, distance, rounds", CASES)
def test_inferred_space_equals_stims(code, distance, rounds):
    gen = stim.Circuit.generated(code, distance=distance, rounds=rounds)
    checks = infer_checks(noisy_from_stim(gen, 2 if distance == 3 else 3))
    dets, obs = stim_annotations(gen)
    ours = [set(d.measurements) for d in checks.detectors] + [set(o) for o in checks.observables]
    theirs = [set(d) for d in dets] + [set(o) for o in obs.values()]
    assert rank(ours) == rank(theirs) == rank(ours + theirs) == len(ours)
    # the space of all deterministic parities has dimension (record length - random rank)
    assert len(ours) == checks.num_measurements - checks.random_rank
    # same convention: the very same detectors, and one observable made of final data only
    assert {frozenset(d.measurements) for d in checks.detectors} == set(dets)
    assert len(checks.observables) == len(obs) == 1
    assert all(d.ideal == 0 for d in checks.detectors)


def test_rounds_and_kinds_follow_the_cycle():
    gen = stim.Circuit.generated("repetition_code:memory", distance=3, rounds=4)
    checks = infer_checks(noisy_from_stim(gen))
    by_round: dict[int, list[str]] = {}
    for d in checks.detectors:
        by_round.setdefault(d.round, []).append(d.kind)
    assert by_round == {0: ["single"] * 2, 1: ["repeat"] * 2, 2: ["repeat"] * 2, 3: ["repeat"] * 2, 4: ["final"] * 2}


def test_user_named_observables():
    gen = stim.Circuit.generated("repetition_code:memory", distance=3, rounds=2)
    noisy = noisy_from_stim(gen)
    m = gen.num_measurements
    checks = infer_checks(noisy, observables=[[m - 3]])  # first data qubit
    assert checks.observables == ((m - 3,),)
    with pytest.raises(InputError, match=r"--logical 0 \(observable 0\): this parity is random"):
        # the outcome of measuring H|0> is random
        text = "OPENQASM 3;\nqubit q;\nbit[2] b;\nh q;\nb[0] = measure q;\nreset q;\nb[1] = measure q;\n"
        infer_checks(attach(parse_qasm(text), ErrorModel.from_dict({})), observables=[[0]])
    with pytest.raises(InputError, match="must lie in"):
        infer_checks(noisy, observables=[[m]])


def test_logical_refuses_a_parity_the_checks_fix(tmp_path):
    """The first-round outcome of a check (record index 0) is deterministic but a detector, not a
    logical observable, and an observable named twice adds nothing the first did not. The CLI
    prints one line, exit code 2, no output file."""
    from typer.testing import CliRunner

    from budget.cli import app

    gen = stim.Circuit.generated("repetition_code:memory", distance=3, rounds=2)
    noisy = noisy_from_stim(gen)
    m = gen.num_measurements
    with pytest.raises(InputError, match="fixed by the checks"):
        infer_checks(noisy, observables=[[0]])
    with pytest.raises(InputError, match="fixed by the checks"):  # the same observable named twice
        infer_checks(noisy, observables=[[m - 3], [m - 3]])
    path = tmp_path / "rep.qasm"
    path.write_text(gen.without_noise().to_qasm(open_qasm_version=3, skip_dets_and_obs=True))
    out = tmp_path / "o.json"
    model = tmp_path / "m.toml"
    model.write_text("[qubits]\nreadout_error = 0.01\n")
    res = CliRunner().invoke(app, ["analyze", str(path), "-e", str(model), "--metric", "detectors", "--logical", "0",
                                   "--json", str(out)], env={"COLUMNS": "400"})
    assert res.exit_code == 2 and not out.exists()
    lines = [ln for ln in res.output.strip().splitlines() if ln.strip()]
    assert len(lines) == 1 and "--logical 0" in lines[0] and "fixed by the checks" in lines[0], res.output
