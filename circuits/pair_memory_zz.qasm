// Two coupled qubits held in memory, North Fen Cryogenics Lab demo (invented).
// Their static ZZ coupling adds a conditional phase in every idle span; nothing undoes it, so the
// error builds up coherently cycle after cycle. Model: circuits/fen_pair_zz.toml. Repeat with --cycles.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[2];
id q[0];
id q[0];
id q[0];
id q[0];
