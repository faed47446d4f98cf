"""Stage 2: parameter sets and the PPP model matrices (core Hamiltonian, gamma)."""
