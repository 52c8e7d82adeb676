"""The intermediate-coupling Hamiltonian model: bases, coefficient matrices, solutions."""
