"""Numerical systems (stage 3): ribbon and Bloch Hamiltonians as arrays, the magnetic cell as a cyclic matrix."""
