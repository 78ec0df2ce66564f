"""Ribbon spectrum and per-state observables (solver stage).

For every momentum ``k`` the solver returns the eigenvalues ``E_n(k)`` of the
ribbon Bloch Hamiltonian and, for every eigenstate, its mean position across
the ribbon ``<y>``, its spread ``sqrt(<y^2> - <y>^2)``, its spin ``<S_z>`` and
its group velocity ``dE_n/dk = <n|dH/dk|n>`` (Hellmann-Feynman theorem, not a
finite difference).

Three block solvers are registered in ``BLOCK_SOLVERS``:

``tridiagonal``
    For Hamiltonians that are tridiagonal once the orbitals are ordered across
    the ribbon (nearest-neighbour hopping, one orbital per row and spin block):
    the Hermitian tridiagonal matrix is made real by a diagonal phase
    transformation and passed to LAPACK's real symmetric tridiagonal solvers
    (divide and conquer for all states, bisection and inverse iteration for
    a window),
    ``O(W^2)`` per momentum instead of ``O(W^3)``.
``banded``
    For wider bands: LAPACK's Hermitian band solvers through
    :func:`scipy.linalg.eig_banded`.
``dense``
    Any ribbon: batched :func:`numpy.linalg.eigh` over chunks of momenta.

The user-facing ``solver`` argument of :func:`ribbon_spectrum` chooses among
them: ``auto`` splits spin blocks when ``S_z`` is conserved, orders the
orbitals of each block across the ribbon and picks ``tridiagonal`` for
half-bandwidth 1, ``banded`` up to a quarter of the block size and ``dense``
beyond; ``banded`` does the same without the dense fallback; ``dense`` uses
the dense solver on the unsplit Hamiltonian. A new block solver is a function
``f(block, k, window, observables, progress)`` returning one dict of 1D
arrays per momentum, registered here and chosen in ``_choose``.

References
----------
.. [1] J. J. M. Cuppen, "A divide and conquer method for the symmetric
   tridiagonal eigenproblem", Numer. Math. 36, 177 (1981).
.. [2] R. P. Feynman, "Forces in molecules", Phys. Rev. 56, 340 (1939)
   (Hellmann-Feynman theorem).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp

from ._threads import eigh_stack
from .hamiltonian import RibbonHamiltonian, abs_max, diagonal
from .progress import ticks as _ticks

__all__ = ["RibbonSpectrum", "ribbon_spectrum", "k_grid", "BLOCK_SOLVERS"]

# Largest number of complex matrix elements diagonalised in one batched call
# of the dense solver (about 128 MiB of Hamiltonians).
_DENSE_CHUNK_ELEMENTS = 8_000_000
_FIELDS = ("energy", "velocity", "y_mean", "y_spread", "sz")


def k_grid(n: int) -> np.ndarray:
    """``n`` equally spaced momenta in ``[-pi, pi)`` (units of 1/period)."""
    if n < 1:
        raise ValueError(f"need at least one k point, got {n}")
    return -np.pi + 2 * np.pi * np.arange(n) / n


@dataclass(frozen=True, eq=False)
class RibbonSpectrum:
    """Eigenvalues and per-state observables of a ribbon on a k grid.

    Arrays of per-state quantities have shape ``(Nk, M)`` and are sorted by
    energy along the last axis. With an energy window the number of states
    differs between momenta: ``count[i]`` states are valid at ``k[i]`` and the
    rest are NaN.

    Attributes
    ----------
    k : (Nk,) ndarray
        Momenta along the ribbon, units of 1/period (1/a).
    energy : (Nk, M) ndarray
        ``E_n(k)`` in the energy unit of the Hamiltonian (``t``).
    velocity : (Nk, M) ndarray or None
        ``dE_n/dk`` in ``t a`` (``hbar = 1``); None if observables were skipped.
    y_mean, y_spread : (Nk, M) ndarray or None
        Mean position across the ribbon and its spread, lattice constants.
    sz : (Nk, M) ndarray or None
        ``<S_z>`` (+-1/2 for spin eigenstates), NaN for spinless models.
    count : (Nk,) int ndarray
        Number of valid states at each momentum.
    window : (float, float) or None
        Energy window ``(E_min, E_max)`` the states were restricted to.
    solver : str
        The solver used for each block, e.g. ``"tridiagonal+tridiagonal"``.
    """

    k: np.ndarray
    energy: np.ndarray
    velocity: np.ndarray | None
    y_mean: np.ndarray | None
    y_spread: np.ndarray | None
    sz: np.ndarray | None
    count: np.ndarray
    window: tuple[float, float] | None
    solver: str


def _observables(prob, ham: RibbonHamiltonian, velocity) -> dict:
    """Per-state observables from ``|psi|^2`` of shape (..., n, m)."""
    y_mean = np.einsum("i,...im->...m", ham.position, prob)
    y2 = np.einsum("i,...im->...m", ham.position**2, prob)
    spread = np.sqrt(np.clip(y2 - y_mean**2, 0.0, None))
    if ham.sz is None:
        sz = np.full(y_mean.shape, np.nan)
    else:
        sz = np.einsum("i,...im->...m", ham.sz, prob)
    return {"velocity": velocity, "y_mean": y_mean, "y_spread": spread, "sz": sz}


def _pad(rows: list[dict], keys) -> dict:
    """Stack per-k dicts of 1D arrays into NaN-padded (Nk, M) arrays."""
    m = max((len(r["energy"]) for r in rows), default=0)
    out = {}
    for key in keys:
        arr = np.full((len(rows), m), np.nan)
        for i, r in enumerate(rows):
            arr[i, : len(r[key])] = r[key]
        out[key] = arr
    return out


def _solve_tridiagonal(ham: RibbonHamiltonian, k, window, observables, progress):
    h0, h1 = ham.h0, ham.h1
    n = ham.size
    phase = np.exp(-1j * k)[:, None]
    h1_lower, h1_upper = diagonal(h1, -1), diagonal(h1, 1)     # h1[i+1, i], h1[i, i+1]
    d = np.real(diagonal(h0))[None, :] + 2 * np.real(diagonal(h1)[None, :] * phase)
    e = diagonal(h0, -1)[None, :] + h1_lower[None, :] * phase + np.conj(h1_upper)[None, :] / phase
    e_abs = np.abs(e)
    rotate = np.exp(-1j * np.angle(e))
    dd = 2 * np.imag(diagonal(h1)[None, :] * phase)
    de = (-1j * h1_lower[None, :] * phase + 1j * np.conj(h1_upper)[None, :] / phase) * rotate
    de = np.real(de)

    rows = []
    _dstevd = sla.lapack.dstevd
    for i in _ticks(range(len(k)), progress, "ribbon spectrum"):
        if window is None:
            kwargs = {}
        else:
            kwargs = dict(select="v", select_range=window)
        if not observables:
            w = sla.eigh_tridiagonal(d[i], e_abs[i], eigvals_only=True, **kwargs)
            rows.append({"energy": w})
            continue
        if window is None and n > 1:
            # All states: LAPACK's divide and conquer (dstevd) is the fastest
            # tridiagonal eigensolver with vectors at ribbon sizes.
            w, v, info = _dstevd(d[i], e_abs[i], compute_v=1)
            if info != 0:  # rare divide-and-conquer failure: MRRR instead
                w, v = sla.eigh_tridiagonal(d[i], e_abs[i], lapack_driver="stemr")
        else:
            w, v = sla.eigh_tridiagonal(d[i], e_abs[i], **kwargs)
        vel = dd[i] @ (v * v) + 2 * (de[i] @ (v[:-1] * v[1:]))
        row = _observables(v * v, ham, vel)
        row["energy"] = w
        rows.append(row)
    return rows


def _band_storage(hk: np.ndarray, b: int) -> np.ndarray:
    """Lower band storage ``a[i - j, j] = H[i, j]`` of a batch of matrices."""
    n = hk.shape[-1]
    ab = np.zeros(hk.shape[:-2] + (b + 1, n), dtype=hk.dtype)
    for o in range(b + 1):
        ab[..., o, : n - o] = np.diagonal(hk, offset=-o, axis1=-2, axis2=-1)
    return ab


def _solve_banded(ham: RibbonHamiltonian, k, window, observables, progress):
    b = ham.bandwidth()
    rows = []
    for i in _ticks(range(len(k)), progress, "ribbon spectrum"):
        ab = _band_storage(ham.bloch(k[i]), b)
        kwargs = {} if window is None else dict(select="v", select_range=window)
        if not observables:
            rows.append({"energy": sla.eig_banded(ab, lower=True, eigvals_only=True, **kwargs)})
            continue
        w, v = sla.eig_banded(ab, lower=True, **kwargs)
        vel = np.real(np.einsum("im,im->m", v.conj(), ham.velocity(k[i]) @ v))
        row = _observables(np.abs(v) ** 2, ham, vel)
        row["energy"] = w
        rows.append(row)
    return rows


def _solve_dense(ham: RibbonHamiltonian, k, window, observables, progress):
    n = ham.size
    chunk = max(1, _DENSE_CHUNK_ELEMENTS // (n * n))
    rows = []
    starts = range(0, len(k), chunk)
    for s in _ticks(starts, progress, "ribbon spectrum"):
        ks = k[s : s + chunk]
        hk = ham.bloch(ks)
        if observables:
            w, v = eigh_stack(hk)
            vel = np.real(np.einsum("kim,kim->km", v.conj(), ham.velocity(ks) @ v))
            prob = np.abs(v) ** 2
            obs = _observables(prob, ham, vel)
        else:
            w = eigh_stack(hk, vectors=False)
        for j in range(len(ks)):
            keep = slice(None) if window is None else (w[j] >= window[0]) & (w[j] <= window[1])
            row = {"energy": w[j][keep]}
            if observables:
                row.update({key: val[j][keep] for key, val in obs.items()})
            rows.append(row)
    return rows


BLOCK_SOLVERS: dict[str, Callable] = {
    "tridiagonal": _solve_tridiagonal,
    "banded": _solve_banded,
    "dense": _solve_dense,
}


def _uniform_shift(a: RibbonHamiltonian, b: RibbonHamiltonian) -> float | None:
    """``c`` if ``b`` equals ``a`` plus ``c`` times the identity, else None.

    Exact to rounding (1e-14 of the largest element); both blocks must have the
    same orbital positions and a uniform ``S_z``.
    """
    if a.size != b.size or not np.array_equal(a.position, b.position):
        return None
    if b.sz is not None and np.ptp(b.sz) != 0:
        return None
    if len(a.far) != len(b.far):
        return None
    tol = 1e-14 * max(max(abs_max(m) for m in (a.h0, *a.hoppings)), 1.0)
    diff = b.h0 - a.h0
    c = float(np.real(diff[0, 0]))
    if any(abs_max(mb - ma) > tol for ma, mb in zip(a.hoppings, b.hoppings)):
        return None
    identity = sp.identity(a.size, format="csr") if sp.issparse(diff) else np.eye(a.size)
    if abs_max(diff - c * identity) > tol:
        return None
    return c


def _choose(block: RibbonHamiltonian, solver: str) -> str:
    if solver == "dense":
        return "dense"
    b = block.bandwidth()
    if b <= 1 and not block.far:  # the tridiagonal solver knows h0 and h1 only
        return "tridiagonal"
    if solver == "banded" or b <= block.size // 4:
        return "banded"
    return "dense"


def ribbon_spectrum(
    ham: RibbonHamiltonian,
    k,
    *,
    window: tuple[float, float] | None = None,
    solver: str = "auto",
    observables: bool = True,
    progress: bool = False,
) -> RibbonSpectrum:
    """Eigenvalues and observables of a ribbon at the momenta ``k``.

    Parameters
    ----------
    ham : RibbonHamiltonian
        The ribbon (see :meth:`RibbonHamiltonian.from_kwant`).
    k : (Nk,) array_like
        Momenta along the ribbon in units of 1/period.
    window : (float, float), optional
        Keep only the states with ``E_min <= E <= E_max`` (energy unit of the
        Hamiltonian). The banded solvers then compute only those states.
    solver : {"auto", "banded", "dense"}
        ``auto`` and ``banded`` split conserved spin blocks and use the
        tridiagonal or band solvers where the structure allows it; ``dense``
        diagonalises the full ``H(k)`` with batched ``numpy.linalg.eigh``.
    observables : bool
        Compute eigenvectors and the per-state observables; if False only the
        energies are returned (the observable fields are None).
    progress : bool or Stage
        Show a progress bar (True), or advance a
        :class:`topoedge.progress.Stage` once per momentum.

    Returns
    -------
    RibbonSpectrum

    Raises
    ------
    ValueError
        For an unknown solver, an empty or non-finite ``k`` or an empty window.

    Notes
    -----
    States of different spin blocks are merged and sorted by energy; a
    degenerate pair may therefore appear in either order.
    """
    if solver not in ("auto", "banded", "dense"):
        raise ValueError(f"solver must be 'auto', 'banded' or 'dense', got {solver!r}")
    k = np.atleast_1d(np.asarray(k, dtype=float))
    if k.ndim != 1 or k.size == 0 or not np.all(np.isfinite(k)):
        raise ValueError(f"k must be a non-empty 1D array of finite momenta, got shape {k.shape}")
    if window is not None:
        window = (float(window[0]), float(window[1]))
        if not window[0] < window[1]:
            raise ValueError(f"energy window must have E_min < E_max, got {window}")

    if solver == "dense":
        parts = [ham]
    else:
        blocks = ham.spin_blocks() or [np.arange(ham.size)]
        parts = [ham.block(idx) for idx in blocks]

    keys = _FIELDS if observables else ("energy",)
    names, merged = [], []
    shift = _uniform_shift(parts[0], parts[1]) if len(parts) == 2 else None
    if hasattr(progress, "set_total"):
        solves = 1 if shift is not None else len(parts)
        steps = [len(k) if _choose(p, solver) != "dense" else
                 len(range(0, len(k), max(1, _DENSE_CHUNK_ELEMENTS // (p.size * p.size)))) for p in parts]
        progress.set_total(sum(steps[:solves]))
    if shift is not None:
        # The second spin block is the first one shifted by a constant (a
        # spin-independent model with a uniform Zeeman term): diagonalise
        # once, over the union of the two windows, and shift.
        name = _choose(parts[0], solver)
        names += [name, name + "(shifted copy)"]
        wide = None if window is None else (min(window[0], window[0] - shift), max(window[1], window[1] - shift))
        rows = BLOCK_SOLVERS[name](parts[0], k, wide, observables, progress)
        sz_b = float(parts[1].sz[0]) if parts[1].sz is not None else np.nan
        for offset, sz in ((0.0, None), (shift, sz_b)):
            sel = []
            for r in rows:
                e = r["energy"] + offset
                keep = slice(None) if window is None else (e >= window[0]) & (e <= window[1])
                new = {key: r[key][keep] for key in keys}
                new["energy"] = e[keep]
                if observables and sz is not None:
                    new["sz"] = np.full(len(new["energy"]), sz)
                sel.append(new)
            merged.append(_pad(sel, keys))
    else:
        for block in parts:
            name = _choose(block, solver)
            names.append(name)
            rows = BLOCK_SOLVERS[name](block, k, window, observables, progress)
            merged.append(_pad(rows, keys))

    fields = {key: np.concatenate([m[key] for m in merged], axis=1) for key in merged[0]}
    order = np.argsort(fields["energy"], axis=1, kind="stable")
    fields = {key: np.take_along_axis(val, order, axis=1) for key, val in fields.items()}
    count = np.sum(np.isfinite(fields["energy"]), axis=1)
    width = int(count.max(initial=0))
    fields = {key: val[:, :width] for key, val in fields.items()}
    return RibbonSpectrum(
        k=k,
        energy=fields["energy"],
        velocity=fields.get("velocity"),
        y_mean=fields.get("y_mean"),
        y_spread=fields.get("y_spread"),
        sz=fields.get("sz"),
        count=count,
        window=window,
        solver="+".join(names),
    )
