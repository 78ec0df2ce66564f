"""Landau-level-regime bulk solvers: only the bands that matter, in ``O(q)`` per momentum.

At small flux ``phi = p/q`` the magnetic cell has ``q`` bands per spin, of
which only the lowest few (the Landau levels up to a little above E_F)
decide the Hall conductance. The dense route of :mod:`topoedge.solvers.chern`
diagonalises every band of the ``q x q`` Bloch matrix at every grid point,
``O(q^3)`` per point on grids of ``O(q^2)`` points. Here the square-lattice
cell is the ring-shaped tridiagonal matrix of :class:`topoedge.systems.harper.HarperCell`
and every step uses its structure:

- *Band edges* of the lowest ``m`` bands: LAPACK's selected eigenvalues of
  the band matrix (bisection with Sturm counts after the reduction to
  tridiagonal form, ``O(q)`` per call) at the two momenta where every band
  has its extremes (Chambers' relation) [1]_ [2]_.
- *Counts of states below an energy* (Streda route, choice of the bands):
  the number of eigenvalues below it at those two momenta; E_F lies in a gap
  exactly when both counts agree.
- *Eigenvectors* of one group of bands (a Landau level: ``|p|`` magnetic
  subbands, exponentially close) at one momentum: block inverse iteration
  with the shift at the group's centre, using the banded LU factorisation of
  ``H - sigma`` (LAPACK ``zgbtrf``/``zgbtrs``), a Rayleigh-Ritz step and a
  residual check [3]_. Only ``q x (group size + 2)`` numbers are stored.
- *Chern numbers* by the link-variable method [4]_ on the grid ``q g x n2``
  (``k1 = 2 pi J / (q g)``, ``k2 = 2 pi l / n2``): the eigenvectors of a
  whole row of ``q`` momenta ``k1`` follow from one solution by the magnetic
  translation (:func:`topoedge.systems.harper.magnetic_shift`), so only ``g n2``
  solutions per group are needed. The link variables along ``k2`` at every
  shift come from one cumulative sum over the rows; those along ``k1`` are
  the same at every shift up to a phase. The result is the same number the
  dense route gives on the same grid (tested), at a cost ``O(q g n2 c^3)``
  for a group of ``c`` bands instead of ``O(q^4 g n2)``.

Everything is exact for the square lattice with a uniform on-site energy and
Zeeman term (S_z conserved, no Rashba term): the cell is then one ring per
spin sector, and the two sectors differ by a constant, so eigenvectors and
Chern numbers are computed once.

References
----------
.. [1] W. G. Chambers, Phys. Rev. 140, A135 (1965).
.. [2] W. Barth, R. S. Martin and J. H. Wilkinson, "Calculation of the
   eigenvalues of a symmetric tridiagonal matrix by the method of bisection",
   Numer. Math. 9, 386 (1967).
.. [3] G. H. Golub and C. F. Van Loan, *Matrix Computations*, 4th ed. (Johns
   Hopkins University Press, 2013), sections 8.2 (subspace iteration, inverse
   iteration) and 4.3 (banded LU).
.. [4] T. Fukui, Y. Hatsugai, H. Suzuki, J. Phys. Soc. Jpn. 74, 1674 (2005).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg.lapack import zgbtrf, zgbtrs

from ..util.threads import one_blas_thread
from .chern_results import Band, BandGroup, ChernResult, Gap, GapClosedError, SubspaceChern
from ..systems.harper import HarperCell, magnetic_shift
from .harper_bands import band_ranges, count_below, lattice_levels, landau_path_bands, landau_states_below

__all__ = [
    "LandauSolverError", "band_ranges", "count_below", "landau_chern", "landau_subspace_chern",
    "landau_path_bands", "landau_states_below", "bands_for", "DEFAULT_K2_POINTS", "lattice_levels",
]

#: Momenta along k2 (the Bloch phase across the q rows of the cell).
DEFAULT_K2_POINTS = 8
# Extra vectors carried along in the block inverse iteration of a group.
_GUARD = 2
_MAX_ITER = 60
# Residual ||H v - E v|| (units of t) below which an eigenvector is accepted.
_RESIDUAL = 1e-10
# Smallest |det| of the link overlaps accepted before the k1 grid is refined.
_LINK_MIN = 0.3
# Largest number of complex numbers held by the cumulative overlap sums of one link row.
_CUMSUM_ELEMENTS = 2_000_000


class LandauSolverError(RuntimeError):
    """The Landau-level solver cannot resolve a group of bands (it is not in that regime)."""


# ------------------------------------------------------------- subspaces


def _banded_lu(cell: HarperCell, k1: float, k2: float, sigma: float, shift: float):
    ab = cell.general_band(k1, k2, sigma, shift)
    lu, piv, info = zgbtrf(ab, 2, 2)
    if info != 0:  # sigma is an eigenvalue to rounding: move it slightly
        ab = cell.general_band(k1, k2, sigma + 1e-9 * max(1.0, abs(sigma)), shift)
        lu, piv, info = zgbtrf(ab, 2, 2)
    if info != 0:
        raise LandauSolverError(f"banded LU of H - sigma failed (info {info}) at k = ({k1:.4g}, {k2:.4g})")
    return lu, piv


def _group_basis(cell: HarperCell, k1: float, k2: float, shift: float, emin: float, emax: float,
                 size: int, start: np.ndarray) -> np.ndarray:
    """Orthonormal eigenvectors ``(q, size)`` of the ``size`` eigenvalues in ``[emin, emax]``.

    Block inverse iteration with the shift at the centre of the window and
    ``_GUARD`` extra vectors, then Rayleigh-Ritz; ``start`` (``q x (size +
    guard)``) is the previous solution or random vectors.
    """
    sigma = 0.5 * (emin + emax)
    lu, piv = _banded_lu(cell, k1, k2, sigma, shift)
    order = cell.order
    pos = np.empty(cell.q, dtype=int)
    pos[order] = np.arange(cell.q)
    margin = 1e-9 + 1e-6 * (emax - emin)
    v = np.linalg.qr(start)[0]
    res = np.inf
    for _ in range(_MAX_ITER):
        x, info = zgbtrs(lu, 2, 2, v[order], piv)
        v = np.linalg.qr(x[pos])[0]
        hv = cell.matvec(k1, k2, v, shift)
        w, c = np.linalg.eigh(v.conj().T @ hv)
        v, hv = v @ c, hv @ c
        inside = np.flatnonzero((w >= emin - margin) & (w <= emax + margin))
        if inside.size == size:
            res = float(np.linalg.norm(hv[:, inside] - v[:, inside] * w[inside], axis=0).max())
            if res <= _RESIDUAL * max(1.0, abs(cell.t)):
                keep = np.concatenate([inside, np.setdiff1d(np.arange(v.shape[1]), inside)])
                return v[:, keep]
    raise LandauSolverError(
        f"the {size} band(s) between {emin:.6g} and {emax:.6g} t did not converge at k = ({k1:.4g}, "
        f"{k2:.4g}) (residual {res:.1e} t): the group is not narrow against its gaps (not the "
        "Landau-level regime); use the dense solver")


@dataclass
class _Row:
    """Eigenvectors of one group on the base momenta ``k1_i`` (``g``) and every ``k2_l`` (``n2``)."""

    k1: np.ndarray          # (g,)
    k2: np.ndarray          # (n2,)
    vectors: list           # [i][l] -> (q, c)


def _solve_group(cell: HarperCell, shift: float, emin: float, emax: float, size: int, g: int, n2: int,
                 rng: np.random.Generator) -> _Row:
    q = cell.q
    k1 = 2 * np.pi * np.arange(g) / (q * g)
    k2 = 2 * np.pi * np.arange(n2) / n2
    guard = min(_GUARD, q - size)
    start = rng.standard_normal((q, size + guard)) + 1j * rng.standard_normal((q, size + guard))
    vectors = []
    with one_blas_thread():
        for a in k1:
            row = []
            for b in k2:
                full = _group_basis(cell, a, b, shift, emin, emax, size, start)
                start = full
                row.append(full[:, :size])
            vectors.append(row)
    return _Row(k1, k2, vectors)


def _shifts(cell: HarperCell) -> tuple[np.ndarray, int]:
    """Shift ``s_j`` of the row ``k1 = k1_i + 2 pi j / q`` and ``p' = p^-1 mod q``."""
    q = cell.q
    pinv = pow(cell.p % q, -1, q)
    return (-np.arange(q) * pinv) % q, pinv


def _k2_links(u: np.ndarray, v: np.ndarray, cuts: np.ndarray, delta: float) -> np.ndarray:
    """``det <S^s u | S'^s v>`` for the shifts with cut rows ``cuts = q - s``.

    ``<S_k2^s u | S_k2'^s v> = sum_{y < q-s} u_y^* v_y + exp(-i delta) sum_{y >= q-s} u_y^* v_y``
    with ``delta = k2' - k2``; the tail sums come from one cumulative sum.
    """
    q, c = u.shape
    step = max(1, _CUMSUM_ELEMENTS // max(1, c * c))
    prod_total = u.conj().T @ v
    dets = np.empty(cuts.size, dtype=complex)
    order = np.argsort(cuts)
    sorted_cuts = cuts[order]
    # Tail sums at the sorted cut rows, one chunk of rows at a time.
    tail = np.zeros((c, c), dtype=complex)       # sum over rows >= current end
    end = q
    out_idx = cuts.size - 1
    phase = np.exp(-1j * delta)
    while out_idx >= 0:
        begin = max(0, end - step)
        block = np.einsum("yi,yj->yij", u[begin:end].conj(), v[begin:end])
        cum = np.cumsum(block[::-1], axis=0)[::-1] + tail   # cum[y - begin] = sum_{rows >= y}
        while out_idx >= 0 and sorted_cuts[out_idx] >= begin:
            cut = sorted_cuts[out_idx]
            tail_sum = cum[cut - begin] if cut < end else tail
            m = prod_total - tail_sum + phase * tail_sum
            dets[order[out_idx]] = np.linalg.det(m)
            out_idx -= 1
        tail = cum[0]
        end = begin
        if end == 0:
            while out_idx >= 0:       # cuts at row 0: every row wrapped
                m = phase * tail
                dets[order[out_idx]] = np.linalg.det(m)
                out_idx -= 1
    return dets


def _link_field(cell: HarperCell, row: _Row) -> tuple[float, float]:
    """Chern number ``(1/2 pi) sum F`` and the smallest link modulus of one group on ``q g x n2``."""
    q = cell.q
    g, n2 = row.k1.size, row.k2.size
    s, pinv = _shifts(cell)
    c = row.vectors[0][0].shape[1]
    u1 = np.empty((g, q, n2), dtype=complex)     # link J -> J + 1 with J = i + g j
    u2 = np.empty((g, q, n2), dtype=complex)     # link l -> l + 1
    with one_blas_thread():
        for l in range(n2):
            k2 = row.k2[l]
            for i in range(g):
                w = row.vectors[i][l]
                if i < g - 1:
                    u1[i, :, l] = np.linalg.det(w.conj().T @ row.vectors[i + 1][l])
                else:
                    d = np.linalg.det(w.conj().T @ magnetic_shift(row.vectors[0][l], q - pinv, k2))
                    u1[i, :, l] = np.where(s >= pinv, d * np.exp(1j * c * k2), d)
                nxt = (l + 1) % n2
                delta = 2 * np.pi / n2
                u2[i, :, l] = _k2_links(w, row.vectors[i][nxt], q - s, delta)
    # Order the k1 axis as J = i + g j.
    u1 = u1.transpose(1, 0, 2).reshape(q * g, n2)
    u2 = u2.transpose(1, 0, 2).reshape(q * g, n2)
    link_min = float(min(np.abs(u1).min(), np.abs(u2).min()))
    u1, u2 = u1 / np.abs(u1), u2 / np.abs(u2)
    plaquette = u1 * np.roll(u2, -1, axis=0) * np.roll(u1, -1, axis=1).conj() * u2.conj()
    return float(np.angle(plaquette).sum() / (2 * np.pi)), link_min


# ------------------------------------------------------------- Chern numbers


def _groups_of(lo: np.ndarray, hi: np.ndarray, gap_min: float) -> list[tuple[int, int]]:
    """Consecutive bands of a sector whose spectral gaps are below ``gap_min``: ``(first, last)``."""
    groups, start = [], 0
    for j in range(lo.size - 1):
        if lo[j + 1] - hi[j] >= gap_min:
            groups.append((start, j))
            start = j + 1
    return groups  # the last, possibly incomplete group is left out


def _complete_ranges(cell: HarperCell, count: int, gap_min: float, shift: float = 0.0):
    """Ranges of at least ``count`` lowest bands ending with an open gap, and the next band's bottom."""
    m = max(1, min(int(count), cell.q - 1))
    while True:
        lo, hi = band_ranges(cell, m + 1, shift)
        groups = _groups_of(lo, hi, gap_min)
        if groups and groups[-1][1] == m - 1:
            return lo[:m], hi[:m], float(lo[m]), groups
        if m + 1 >= cell.q:
            raise LandauSolverError(f"no open gap above the lowest {count} bands of the {cell.q}-band cell")
        # The last group continues above band m - 1: take one band more (a
        # Landau level holds |p| bands, so this ends after at most |p| steps).
        m += 1


def bands_for(cell: HarperCell, *, energy: float | None = None, below: int | None = None,
              extra_levels: int = 3) -> int:
    """Bands per sector to compute: those below ``energy`` (or ``below`` bands in all) and a few levels more.

    ``extra_levels`` Landau levels (``|p|`` bands each) above are added, so
    that the gap at E_F and its neighbours are resolved.
    """
    p = abs(cell.p)
    if energy is not None:
        needed = max(max(count_below(cell, energy, shift)) for _, shift in cell.sectors())
    elif below is not None:
        needed = int(below)
    else:
        raise ValueError("give energy or below")
    return min(cell.q - 1, needed + extra_levels * p + 1)


def landau_chern(cell: HarperCell, *, bands: int, k2_points: int = DEFAULT_K2_POINTS, gap_min: float = 1e-5,
                 k1_factor: int = 1, progress=None, seed: int = 0) -> ChernResult:
    """Chern numbers of the lowest bands of a square-lattice magnetic cell.

    Parameters
    ----------
    cell : HarperCell
    bands : int
        At least this many lowest bands of each sector are computed (more
        when the group of the last one continues above it).
    k2_points : int
        ``n2``, momenta along ``k2`` (the grid is ``q g x n2``).
    gap_min : float
        Spectral gaps below this (units of t) count as closed: such bands
        form one group.
    k1_factor : int
        ``g``: ``g`` base momenta per ``2 pi / q`` along ``k1``. It is
        doubled, up to 8, for a group whose links come out below 0.3 in
        modulus (eigenvectors changing too fast for the grid).
    progress : optional
        A :class:`topoedge.util.progress.Stage`-like object with ``update()`` and
        ``set_total(n)``, advanced once per group.
    seed : int
        Seed of the random start vectors (results do not depend on it).

    Returns
    -------
    ChernResult
        The computed bands only: ``bands``, ``groups`` and ``gaps`` end below
        the first band not computed (``total_bands`` holds the number of all
        bands), ``solver = "landau"``, ``grid = (q g, n2)``.

    Raises
    ------
    LandauSolverError
        When a group of bands does not converge (bands not narrow against
        their gaps).
    """
    if k2_points < 3:
        raise ValueError(f"k2_points must be >= 3, got {k2_points}")
    sectors = cell.sectors()
    base_shift = sectors[0][1]
    lo, hi, next_bottom, group_list = _complete_ranges(cell, bands, gap_min, base_shift)
    if progress is not None:
        progress.set_total(len(group_list))
    rng = np.random.default_rng(seed)
    group_chern = []
    used_g = k1_factor
    for first, last in group_list:
        g = k1_factor
        while True:
            row = _solve_group(cell, base_shift, float(lo[first]), float(hi[last]), last - first + 1, g,
                               k2_points, rng)
            raw, link_min = _link_field(cell, row)
            if link_min >= _LINK_MIN or g >= 8:
                break
            g *= 2
        used_g = max(used_g, g)
        group_chern.append((raw, link_min))
        if progress is not None:
            progress.update()
    return _assemble(cell, lo - base_shift, hi - base_shift, next_bottom - base_shift, group_list, group_chern,
                     gap_min, grid=(cell.q * used_g, k2_points))


def _assemble(cell, lo0, hi0, next0, group_list, group_chern, gap_min, grid) -> ChernResult:
    """Bands, groups and gaps of every sector (shifted copies) below the first band not computed."""
    sectors = cell.sectors()
    cutoff = min(next0 + shift for _, shift in sectors)
    groups, records = [], []
    for spin, shift in sectors:
        for (first, last), (raw, link_min) in zip(group_list, group_chern):
            emin, emax = float(lo0[first] + shift), float(hi0[last] + shift)
            above = (float(lo0[last + 1] - hi0[last]) if last + 1 < lo0.size else float(next0 - hi0[last]))
            groups.append(BandGroup(spin=spin, bands=tuple(range(first, last + 1)), chern=int(round(raw)),
                                    chern_raw=raw, energy_min=emin, energy_max=emax, gap_above=above,
                                    link_min=link_min))
            for n in range(first, last + 1):
                records.append((spin, n, len(groups) - 1, last - first + 1,
                                float(lo0[n] + shift), float(hi0[n] + shift)))
    # Complete groups entirely below the cutoff; the rest may interleave with bands not computed.
    kept_groups = {gi for gi, grp in enumerate(groups) if grp.energy_max < cutoff}
    kept = [r for r in records if r[2] in kept_groups]
    dropped = [r for r in records if r[2] not in kept_groups]
    order = sorted(range(len(kept)), key=lambda i: (kept[i][4], kept[i][5]))
    bands = tuple(
        Band(index=pos, spin=kept[i][0], sector_index=kept[i][1],
             chern=groups[kept[i][2]].chern if kept[i][3] == 1 else None,
             energy_min=kept[i][4], energy_max=kept[i][5], group=kept[i][2])
        for pos, i in enumerate(order))
    ceiling = min([cutoff] + [r[4] for r in dropped])
    spins = [s for s, _ in sectors]
    gaps = []
    for r in range(1, len(bands) + 1):
        top = max(b.energy_max for b in bands[:r])
        bottom = min([b.energy_min for b in bands[r:]] + [ceiling])
        if bottom - top < gap_min:
            continue
        below_groups = {b.group for b in bands[:r]}
        if below_groups & {b.group for b in bands[r:]}:
            continue
        chern = sum(groups[gi].chern for gi in below_groups)
        spin_chern = None
        if spins != [None]:
            spin_chern = {s: sum(groups[gi].chern for gi in below_groups if groups[gi].spin == s) for s in spins}
        direct = min((groups[gi].gap_above for gi in below_groups
                      if not any(groups[h].spin == groups[gi].spin and groups[h].bands[0] == groups[gi].bands[-1] + 1
                                 for h in below_groups)), default=np.inf)
        gaps.append(Gap(below=r, energy_min=top, energy_max=bottom, chern=chern, spin_chern=spin_chern,
                        direct_gap=float(direct)))
    return ChernResult(grid=grid, gap_min=gap_min, bands=bands, groups=tuple(groups), gaps=tuple(gaps),
                       sectors=tuple(spins),
                       solver="landau", total_bands=cell.q * len(sectors), energy_ceiling=float(ceiling))


def landau_subspace_chern(cell: HarperCell, gap: Gap, *, k2_points: int = DEFAULT_K2_POINTS,
                          k1_factor: int = 1, max_bands: int = 64, gap_min: float = 1e-5,
                          seed: int = 1) -> SubspaceChern:
    """Chern sum below a gap from the occupied subspace as a whole (the run's cross-check).

    The eigenvectors of all bands below the gap in a sector (every group
    solved on its own, the bases joined) give determinant link variables of
    the whole occupied subspace, summed on the ``q g x n2`` grid; ``g`` is doubled (up to 8) until the smallest link modulus
    exceeds 0.3. Skipped (``chern`` None, ``skipped`` giving the reason) for
    more than ``max_bands`` bands per sector.

    Returns
    -------
    SubspaceChern
    """
    sectors = cell.sectors()
    base_shift = sectors[0][1]
    rng = np.random.default_rng(seed)
    results = {}
    grid = None
    weakest = 1.0
    for spin, shift in sectors:
        below = max(count_below(cell, gap.middle, shift))
        if below != min(count_below(cell, gap.middle, shift)):
            raise GapClosedError(f"a band of sector {spin or 'all'} crosses the gap at {gap.middle:.6g} t")
        results[spin] = below
    if max(results.values()) > max_bands:
        return SubspaceChern(chern=None, spin_chern=None, link_min=None, grid=None, can_skip=True,
                             skipped=f"{max(results.values())} bands below E_F in a sector, more than the "
                                     f"{max_bands} the whole-subspace check handles; the band-by-band sum "
                                     "stands alone")
    chern_of = {}
    for count in sorted(set(results.values())):
        if count == 0:
            chern_of[0] = (0.0, 1.0, None)
            continue
        lo, hi, _, group_list = _complete_ranges(cell, count, gap_min, base_shift)
        group_list = [grp for grp in group_list if grp[1] < count]
        if not group_list or group_list[-1][1] != count - 1:
            raise GapClosedError(f"the {count} lowest bands of a sector end inside a group of touching bands")
        g = k1_factor
        while True:
            # The occupied subspace is the sum of the groups' eigenspaces (orthogonal):
            # each group is solved on its own, which converges fast, and the bases joined.
            rows = [_solve_group(cell, base_shift, float(lo[a]), float(hi[b]), b - a + 1, g, k2_points, rng)
                    for a, b in group_list]
            joined = _Row(rows[0].k1, rows[0].k2,
                          [[np.concatenate([r.vectors[i][l] for r in rows], axis=1) for l in range(k2_points)]
                           for i in range(g)])
            raw, link_min = _link_field(cell, joined)
            if link_min >= _LINK_MIN or g >= 8:
                break
            g *= 2
        chern_of[count] = (raw, link_min, (cell.q * g, k2_points))
    total, by_spin = 0, {}
    for spin, _ in sectors:
        raw, link_min, used = chern_of[results[spin]]
        total += int(round(raw))
        weakest = min(weakest, link_min)
        grid = used or grid
        if spin is not None:
            by_spin[spin] = int(round(raw))
    return SubspaceChern(chern=total, spin_chern=by_spin or None, link_min=float(weakest),
                         grid=tuple(grid) if grid else (cell.q, k2_points), can_skip=True)
