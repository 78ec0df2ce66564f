"""Model descriptions (stage 1): kwant builders of the lattices, the lattice registry, edge profiles, the Hall bar."""
