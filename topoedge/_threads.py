"""BLAS thread control for stacks of small matrices.

Threaded BLAS gains nothing on matrices of a few dozen rows and loses much to
synchronisation, the more so on shared cores; the batched small-matrix work of
the solvers therefore runs on one BLAS thread. The controller is created once:
scanning the loaded libraries on every call would cost a millisecond each.
"""

from __future__ import annotations

from functools import lru_cache

from threadpoolctl import ThreadpoolController


@lru_cache(maxsize=1)
def _controller() -> ThreadpoolController:
    return ThreadpoolController()


def one_blas_thread():
    """Context manager limiting BLAS to one thread inside its block."""
    return _controller().limit(limits=1, user_api="blas")


#: Matrices up to this size are diagonalised in stacks on one BLAS thread.
SMALL_MATRIX = 200


def eigh_stack(h, *, vectors: bool = True):
    """``numpy.linalg.eigh`` (or ``eigvalsh``) over a stack ``(..., n, n)``.

    Small matrices (n <= ``SMALL_MATRIX``) run on one BLAS thread.
    """
    import numpy as np

    solve = np.linalg.eigh if vectors else np.linalg.eigvalsh
    if h.shape[-1] > SMALL_MATRIX:
        return solve(h)
    with one_blas_thread():
        return solve(h)
