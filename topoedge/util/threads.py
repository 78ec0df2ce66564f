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
def blas_controller() -> ThreadpoolController:
    # The controller knows only the libraries loaded when it is created:
    # load NumPy's and SciPy's BLAS first (the wheels bring two separate
    # OpenBLAS builds), or a worker that imports SciPy later (through kwant)
    # would run SciPy's BLAS on every core in each worker at once.
    import numpy.linalg  # noqa: F401
    import scipy.linalg  # noqa: F401

    return ThreadpoolController()


def one_blas_thread():
    """Context manager limiting BLAS to one thread inside its block."""
    return blas_controller().limit(limits=1, user_api="blas")


#: Matrices up to this size are diagonalised in stacks on one BLAS thread.
SMALL_MATRIX = 200


def eigh_stack(h, *, vectors: bool = True):
    """``numpy.linalg.eigh`` (or ``eigvalsh``) over a stack ``(..., n, n)``.

    Small matrices (n <= ``SMALL_MATRIX``) run on one BLAS thread. LAPACK's
    divide-and-conquer solver, which numpy uses, fails to converge on rare
    matrices with many degenerate eigenvalues (seen on Hofstadter Bloch
    Hamiltonians at special momenta); those matrices alone are then solved by
    the MRRR driver (``scipy.linalg.eigh(driver="evr")``).
    """
    import numpy as np

    solve = np.linalg.eigh if vectors else np.linalg.eigvalsh
    limit = one_blas_thread() if h.shape[-1] <= SMALL_MATRIX else _no_limit()
    with limit:
        try:
            return solve(h)
        except np.linalg.LinAlgError:
            return _eigh_one_by_one(h, vectors)


class _no_limit:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def _eigh_one_by_one(h, vectors: bool):
    import numpy as np
    import scipy.linalg as sla

    n = h.shape[-1]
    flat = h.reshape(-1, n, n)
    w = np.empty(flat.shape[:2])
    v = np.empty(flat.shape, dtype=np.result_type(flat.dtype, float)) if vectors else None
    for i, m in enumerate(flat):
        try:
            out = np.linalg.eigh(m) if vectors else (np.linalg.eigvalsh(m),)
        except np.linalg.LinAlgError:
            out = sla.eigh(m, driver="evr", eigvals_only=not vectors)
            out = out if vectors else (out,)
        w[i] = out[0]
        if vectors:
            v[i] = out[1]
    w = w.reshape(h.shape[:-1])
    return (w, v.reshape(h.shape)) if vectors else w
