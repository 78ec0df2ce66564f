"""Solvers (stage 4): ribbon spectra, Chern numbers, edge modes, Streda, transport, Hartree-Fock; no scenarios."""
