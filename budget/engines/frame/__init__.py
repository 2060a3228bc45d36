"""Pauli-frame tools shared by the clifford and pauli engines (packed Pauli strings, Clifford
tableaux, the folded walk of a Clifford circuit, orbits and sinks of repeated blocks)."""
