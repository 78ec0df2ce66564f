"""Ribbon spectrum and per-state observables (solver stage).

For every momentum ``k`` the solver returns the eigenvalues ``E_n(k)`` of the
ribbon Bloch Hamiltonian and, for every eigenstate, its mean position across
the ribbon ``<y>``, its spread ``sqrt(<y^2> - <y>^2)``, its spin ``<S_z>`` and
its group velocity ``dE_n/dk = <n|dH/dk|n>`` (Hellmann-Feynman theorem, not a
finite difference).

The ribbon is split into spin blocks and each block solved by the one block
solver of :mod:`topoedge.solvers.blocks` (tridiagonal, banded or dense, chosen
by one rule shared with the edge-mode search). When the second spin block is
the first shifted by a constant (a uniform Zeeman term), it is not solved
again: its states are the first block's, shifted
(:meth:`topoedge.systems.ribbon.RibbonHamiltonian.shift_from`).

References
----------
.. [1] J. J. M. Cuppen, "A divide and conquer method for the symmetric
   tridiagonal eigenproblem", Numer. Math. 36, 177 (1981).
.. [2] R. P. Feynman, "Forces in molecules", Phys. Rev. 56, 340 (1939)
   (Hellmann-Feynman theorem).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..systems.ribbon import RibbonHamiltonian
from .blocks import DenseBlock, spin_blocks

__all__ = ["RibbonSpectrum", "ribbon_spectrum", "k_grid"]

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
        :class:`topoedge.util.progress.Stage` once per momentum.

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

    blocks = spin_blocks(ham, solver)
    keys = _FIELDS if observables else ("energy",)
    names, merged = [], []
    shift = blocks[1].ham.shift_from(blocks[0].ham) if len(blocks) == 2 else None
    if hasattr(progress, "set_total"):
        solves = blocks[:1] if shift is not None else blocks
        progress.set_total(sum(b.steps(len(k)) if isinstance(b, DenseBlock) else len(k) for b in solves))
    if shift is not None:
        # The second spin block is the first one shifted by a constant (a
        # spin-independent model with a uniform Zeeman term): diagonalise
        # once, over the union of the two windows, and shift.
        names += [blocks[0].kind, blocks[0].kind + "(shifted copy)"]
        wide = None if window is None else (min(window[0], window[0] - shift), max(window[1], window[1] - shift))
        rows = blocks[0].rows(k, wide, observables, progress)
        sz_b = float(blocks[1].ham.sz[0]) if blocks[1].ham.sz is not None else np.nan
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
        for block in blocks:
            names.append(block.kind)
            merged.append(_pad(block.rows(k, window, observables, progress), keys))

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
