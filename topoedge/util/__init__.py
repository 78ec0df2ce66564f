"""Utilities (stage 0): atomic writing, JSON, memory budget, progress, BLAS threads, worker processes."""
