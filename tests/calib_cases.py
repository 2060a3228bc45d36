"""Tiny invented circuits and a file helper shared by the sweep and plan tests."""

from __future__ import annotations

from pathlib import Path

ONE_X = 'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[1];\nx q[0];\n'
X_AND_SX = 'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\nx q[0];\nsx q[1];\n'


def files(tmp_path: Path, circuit: str, model: str) -> tuple[Path, Path]:
    """Write the circuit and the model text; return their paths."""
    c, m = tmp_path / "c.qasm", tmp_path / "m.toml"
    c.write_text(circuit)
    m.write_text(model)
    return c, m
