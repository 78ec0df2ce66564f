"""Chern numbers of bulk bands by the link-variable method (solver stage).

On a periodic ``N1 x N2`` grid of reduced momenta the eigenvectors of a group
of bands ``Psi(k)`` (columns) define the link variables::

    U_mu(k) = det[Psi(k)^dagger Psi(k + mu)] / |det[...]|,   mu = 1, 2

and the lattice field strength of every plaquette::

    F_12(k) = Arg[U_1(k) U_2(k + 1) U_1(k + 2)^* U_2(k)^*],   -pi < F <= pi

The Chern number of the group is ``c = (1/2 pi) sum_k F_12(k)``, an integer on
any grid that equals the continuum value once ``|F_12| < pi`` on every
plaquette. The determinant (multi-band) form handles bands that touch inside a
group. The result does not depend on the phases or the unitary mixing of the
eigenvectors at any k.

Bands are grouped per spin sector (when ``S_z`` is conserved the two spin
blocks are diagonalised separately): neighbouring bands of a sector whose
smallest direct gap on the grid is below ``gap_min`` form one group. The Chern
sum below a spectral gap is the sum of the Chern numbers of the groups below
it. Where the smallest direct gap on the grid might close between grid points
(it changes by more than its own size from one grid point to the next) it is
refined by a local minimisation.

Sign convention: momenta and the loop orientation follow
:mod:`topoedge.systems.bloch` (``H(k) = sum_R H_R exp(i k.R)``, loop
``k -> k + 1 -> k + 1 + 2 -> k + 2``, direction 1 along ``x`` and 2 along
``y``). With the builders' convention (counter-clockwise plaquette phase
``+2 pi phi``, electrons) the gap above the lowest Landau level at small
``phi > 0`` has Chern number ``+1``, and the Chern numbers solve
``r = q s_r + p t_r`` with Chern sum ``t_r`` below gap ``r``.

References
----------
.. [1] T. Fukui, Y. Hatsugai, H. Suzuki, "Chern numbers in discretized
   Brillouin zone: efficient method of computing (spin) Hall conductances",
   J. Phys. Soc. Jpn. 74, 1674 (2005).
.. [2] D. J. Thouless, M. Kohmoto, M. P. Nightingale, M. den Nijs, "Quantized
   Hall conductance in a two-dimensional periodic potential", Phys. Rev. Lett.
   49, 405 (1982).
"""

from __future__ import annotations


import numpy as np
from scipy.optimize import minimize

from ..util.threads import eigh_stack, one_blas_thread
from ..systems.bloch import BlochHamiltonian
from .chern_results import Band, BandGroup, ChernResult, Gap, GapClosedError, SubspaceChern

__all__ = [
    "Band", "BandGroup", "Gap", "ChernResult", "GapClosedError",
    "SubspaceChern", "chern_numbers", "builder_chern", "default_grid", "link_chern", "path_bands", "subspace_chern",
]


def default_grid(bloch: BlochHamiltonian) -> tuple[int, int]:
    """Grid of reduced momenta: the smallest multiple of 2 points per band (of one spin) that is >= 12.

    A multiple of ``2 n`` (``n`` bands per sector) contains the momenta
    ``k = pi m / n`` where the bands of the square-lattice magnetic cell have
    their extremes (Chambers' relation), so band energy ranges are exact.
    """
    # Bands per spin (also when a spin-orbit term mixes the two spins: the
    # resolution needed is that of one spin's bands, not of their sum).
    n = bloch.size // (2 if bloch.sz is not None else 1)
    step = 2 * max(n, 1)
    size = step * -(-12 // step)
    return size, size


def link_chern(vectors: np.ndarray) -> tuple[float, float]:
    """Chern number of the subspace spanned by ``vectors`` on a periodic grid.

    Parameters
    ----------
    vectors : (N1, N2, N, g) complex ndarray
        Orthonormal columns spanning the subspace at every grid point.

    Returns
    -------
    chern_raw : float
        ``(1/2 pi) sum F_12``: an integer up to rounding.
    link_min : float
        Smallest ``|det|`` of the overlap matrices (near 0: grid too coarse).
    """
    with one_blas_thread():
        return _link_chern(vectors)


def _link_chern(vectors: np.ndarray) -> tuple[float, float]:
    conj = vectors.conj()
    if vectors.shape[-1] == 1:
        o1 = np.sum(conj[..., 0] * np.roll(vectors[..., 0], -1, axis=0), axis=-1)
        o2 = np.sum(conj[..., 0] * np.roll(vectors[..., 0], -1, axis=1), axis=-1)
    else:
        o1 = np.linalg.det(np.swapaxes(conj, -1, -2) @ np.roll(vectors, -1, axis=0))
        o2 = np.linalg.det(np.swapaxes(conj, -1, -2) @ np.roll(vectors, -1, axis=1))
    link_min = float(min(np.abs(o1).min(), np.abs(o2).min()))
    u1 = o1 / np.abs(o1)
    u2 = o2 / np.abs(o2)
    plaquette = u1 * np.roll(u2, -1, axis=0) * np.roll(u1, -1, axis=1).conj() * u2.conj()
    return float(np.angle(plaquette).sum() / (2 * np.pi)), link_min


def _sectors_on_grid(bloch: BlochHamiltonian, n1: int, n2: int):
    """Eigenpairs on the ``n1 x n2`` grid of every spin sector (or of the whole ``bloch``).

    Yields ``(spin, part, k1, k2, energies, vectors, fresh)``. A sector equal
    to the previous one plus a constant (a uniform Zeeman term) is not
    diagonalised again: it gets the previous eigenvectors and shifted
    energies, with ``fresh`` False.
    """
    blocks = bloch.spin_blocks()
    sectors = [("up", blocks[0]), ("down", blocks[1])] if blocks is not None else [(None, None)]
    previous = None
    for spin, idx in sectors:
        part = bloch if idx is None else bloch.block(idx)
        shift = part.shift_from(previous[0]) if previous is not None else None
        if shift is None:
            k1, k2, hk = part.grid(n1, n2)
            # small matrices on one BLAS thread (threads only synchronise there)
            energies, vectors = eigh_stack(hk)
        else:
            _, k1, k2, energies, vectors = previous
            energies = energies + shift
        previous = (part, k1, k2, energies, vectors)
        yield spin, part, k1, k2, energies, vectors, shift is None


def _single_band_chern(vectors: np.ndarray) -> list[tuple[float, float]]:
    """:func:`link_chern` of every band on its own, in one pass over the grid."""
    n1, n2 = vectors.shape[:2]
    o1 = np.empty((n1, n2, vectors.shape[-1]), dtype=complex)
    o2 = np.empty_like(o1)
    chunk = max(1, n1 // 8)  # conjugate a few rows at a time: no full copies
    for s in range(0, n1, chunk):
        rows = slice(s, min(s + chunk, n1))
        conj = vectors[rows].conj()
        nxt = np.arange(rows.start, rows.stop) + 1
        o1[rows] = np.einsum("xyib,xyib->xyb", conj, vectors[nxt % n1])
        o2[rows, :-1] = np.einsum("xyib,xyib->xyb", conj[:, :-1], vectors[rows, 1:])
        o2[rows, -1] = np.einsum("xib,xib->xb", conj[:, -1], vectors[rows, 0])
    link_min = np.minimum(np.abs(o1).min(axis=(0, 1)), np.abs(o2).min(axis=(0, 1)))
    u1, u2 = o1 / np.abs(o1), o2 / np.abs(o2)
    plaquette = u1 * np.roll(u2, -1, axis=0) * np.roll(u1, -1, axis=1).conj() * u2.conj()
    raw = np.angle(plaquette).sum(axis=(0, 1)) / (2 * np.pi)
    return [(float(c), float(m)) for c, m in zip(raw, link_min)]


def _refined_gap(bloch, j, k1, k2, gaps):
    """Smallest direct gap between bands j, j+1 near the grid minimum."""
    i1, i2 = np.unravel_index(np.argmin(gaps), gaps.shape)
    g0 = gaps[i1, i2]
    neighbours = [gaps[(i1 + d1) % gaps.shape[0], (i2 + d2) % gaps.shape[1]]
                  for d1, d2 in ((1, 0), (-1, 0), (0, 1), (0, -1))]
    if g0 >= max(neighbours) - g0:  # the gap cannot close within a grid step
        return float(g0)
    d1, d2 = 2 * np.pi / gaps.shape[0], 2 * np.pi / gaps.shape[1]

    def gap(x):
        e = eigh_stack(bloch.at(x[0], x[1]), vectors=False)
        return e[j + 1] - e[j]

    start = np.array([k1[i1], k2[i2]])
    simplex = [start - [d1 / 2, d2 / 2], start + [d1, -d2 / 2], start + [-d1 / 2, d2]]
    with one_blas_thread():
        res = minimize(gap, start, method="Nelder-Mead",
                       options=dict(xatol=1e-10, fatol=1e-14, maxiter=300, initial_simplex=simplex))
    return min(float(g0), float(res.fun))


def chern_numbers(
    bloch: BlochHamiltonian, *, grid: tuple[int, int] | None = None, gap_min: float = 1e-5
) -> ChernResult:
    """Chern numbers of every band group and gap of a bulk Hamiltonian.

    Parameters
    ----------
    bloch : BlochHamiltonian
    grid : (int, int), optional
        Number of reduced momenta along each direction; :func:`default_grid`
        if omitted.
    gap_min : float
        Direct gaps (on the grid, refined) below this value (units of ``t``)
        count as closed: such bands form one group, and spectral gaps narrower
        than it are not reported.

    Returns
    -------
    ChernResult

    Raises
    ------
    ValueError
        For a grid with fewer than 3 points in a direction or ``gap_min <= 0``.
    """
    n1, n2 = grid if grid is not None else default_grid(bloch)
    if n1 < 3 or n2 < 3:
        raise ValueError(f"the momentum grid needs at least 3 x 3 points, got {n1} x {n2}")
    if not gap_min > 0:
        raise ValueError(f"gap_min must be > 0, got {gap_min}")
    groups, sector_bands, spins = [], [], []
    for spin, part, k1, k2, energies, vectors, fresh in _sectors_on_grid(bloch, n1, n2):
        spins.append(spin)
        if fresh:
            direct = np.diff(energies, axis=-1)            # (n1, n2, n - 1)
            gap_sizes = [_refined_gap(part, j, k1, k2, direct[..., j]) for j in range(part.size - 1)]
            single = _single_band_chern(vectors)
        # else: a copy of the previous sector shifted by a constant: the same
        # gaps and Chern numbers.
        start = 0
        for j in range(part.size):
            last = j == part.size - 1
            if last or gap_sizes[j] >= gap_min:
                members = tuple(range(start, j + 1))
                if len(members) == 1:
                    raw, link_min = single[j]
                else:
                    raw, link_min = link_chern(vectors[..., start : j + 1])
                e = energies[..., start : j + 1]
                groups.append(BandGroup(
                    spin=spin, bands=members, chern=int(round(raw)), chern_raw=raw,
                    energy_min=float(e.min()), energy_max=float(e.max()),
                    gap_above=None if last else float(gap_sizes[j]), link_min=link_min,
                ))
                for n in members:
                    sector_bands.append((spin, n, len(groups) - 1, len(members),
                                         float(energies[..., n].min()), float(energies[..., n].max())))
                start = j + 1

    order = sorted(range(len(sector_bands)), key=lambda i: (sector_bands[i][4], sector_bands[i][5]))
    bands = tuple(
        Band(index=pos, spin=sector_bands[i][0], sector_index=sector_bands[i][1],
             chern=groups[sector_bands[i][2]].chern if sector_bands[i][3] == 1 else None,
             energy_min=sector_bands[i][4], energy_max=sector_bands[i][5], group=sector_bands[i][2])
        for pos, i in enumerate(order)
    )
    gaps = []
    for r in range(1, len(bands)):
        top = max(b.energy_max for b in bands[:r])
        bottom = min(b.energy_min for b in bands[r:])
        if bottom - top < gap_min:
            continue
        below_groups = {b.group for b in bands[:r]}
        if below_groups & {b.group for b in bands[r:]}:
            continue  # a group straddles the window: not a gap of every sector
        chern = sum(groups[g].chern for g in below_groups)
        spin_chern = None
        if spins != [None]:
            spin_chern = {s: sum(groups[g].chern for g in below_groups if groups[g].spin == s) for s in spins}
        direct = min(
            (groups[g].gap_above for g in below_groups
             if groups[g].gap_above is not None
             and not any(groups[h].spin == groups[g].spin and groups[h].bands[0] == groups[g].bands[-1] + 1
                         for h in below_groups)),
            default=np.inf,
        )
        gaps.append(Gap(below=r, energy_min=top, energy_max=bottom, chern=chern,
                        spin_chern=spin_chern, direct_gap=float(direct)))
    return ChernResult(grid=(n1, n2), gap_min=gap_min, bands=bands, groups=tuple(groups),
                       gaps=tuple(gaps), sectors=tuple(spins))


def path_bands(bloch: BlochHamiltonian, points: int = 200) -> dict:
    """Bulk bands along the path Gamma - X - M - Gamma of the reduced zone.

    Returns
    -------
    dict
        ``distance`` (P,), ``ticks`` [(position, label)], and per sector
        ``energies[spin]`` (P, n) with ``spin`` in ("up", "down") or (None,).
    """
    corners = np.array([[0.0, 0.0], [np.pi, 0.0], [np.pi, np.pi], [0.0, 0.0]])
    seg = np.linalg.norm(np.diff(corners, axis=0), axis=1)
    s = np.linspace(0.0, seg.sum(), points)
    cum = np.concatenate([[0.0], np.cumsum(seg)])
    k = np.stack([np.interp(s, cum, corners[:, i]) for i in (0, 1)], axis=-1)
    blocks = bloch.spin_blocks()
    parts = {"up": bloch.block(blocks[0]), "down": bloch.block(blocks[1])} if blocks else {None: bloch}
    energies = {spin: np.linalg.eigvalsh(part.at(k[:, 0], k[:, 1])) for spin, part in parts.items()}
    return {"distance": s, "ticks": list(zip(cum, ["Γ", "X", "M", "Γ"])), "energies": energies}


def builder_chern(builder, *, params: dict | None = None, grid: tuple[int, int] | None = None,
                  gap_min: float = 1e-5, spin: bool | None = None) -> ChernResult:
    """Chern numbers of every band and gap of any kwant builder with two translation symmetries.

    The user's own system goes through the same steps as the built-in
    lattices: :meth:`BlochHamiltonian.from_kwant` (its Fourier components,
    once) and :func:`chern_numbers` (link variables on ``grid``, the same
    open-gap checks).

    Parameters
    ----------
    builder : kwant.Builder
        With exactly two translation symmetries and ``norbs`` declared.
    params : dict, optional
        kwant ``params`` of its value functions.
    grid : (int, int), optional
        Momentum grid (default :func:`default_grid`).
    gap_min : float
        Direct gaps below this (energy unit of the model) count as closed.
    spin : bool, optional
        See :meth:`BlochHamiltonian.from_kwant`.

    Returns
    -------
    ChernResult
        ``gap_above(r)`` gives the Chern sum of the ``r`` lowest bands, or
        raises :class:`GapClosedError` where the grid finds that gap closed.

    References
    ----------
    .. [1] T. Fukui, Y. Hatsugai and H. Suzuki, J. Phys. Soc. Jpn. 74, 1674 (2005).
    """
    bloch = BlochHamiltonian.from_kwant(builder, params=params, spin=spin)
    return chern_numbers(bloch, grid=grid, gap_min=gap_min)


def subspace_chern(bloch: BlochHamiltonian, gap: Gap, *, grid: tuple[int, int]) -> SubspaceChern:
    """Chern sum below a gap from the subspace of all bands below it, per sector.

    :func:`chern_numbers` adds up the Chern numbers of the band groups
    below a gap; that sum is right when the grid resolves every group below.
    Here the link variables are those of the whole occupied subspace (the
    determinant of its overlap matrix), so the result depends only on the gap
    itself being open and resolved by the grid, not on bands far below it.
    When the two disagree, the grid resolves one of them poorly (bands with
    large Chern numbers near a van Hove energy for the band sum; a large
    total Chern number on few points, more than half a flux quantum of Berry
    curvature per plaquette, for the subspace): a finer grid settles it.

    Parameters
    ----------
    bloch : BlochHamiltonian
    gap : Gap
        A gap of ``chern_numbers(bloch)``.
    grid : (int, int)
        Momentum grid.

    Returns
    -------
    SubspaceChern
        ``chern`` (total), ``spin_chern`` ({"up", "down"} or None),
        ``link_min`` (smallest ``|det|`` of the overlaps, near 0: grid too
        coarse) and ``grid``.

    References
    ----------
    .. [1] T. Fukui, Y. Hatsugai, H. Suzuki, J. Phys. Soc. Jpn. 74, 1674
       (2005) (the multi-band link variables).
    """
    n1, n2 = grid
    total, by_spin, weakest = 0, {}, 1.0
    for spin, _, _, _, energies, vectors, _ in _sectors_on_grid(bloch, n1, n2):
        below = int(np.count_nonzero(energies[0, 0] < gap.middle))
        if np.any((energies.min(axis=(0, 1)) < gap.middle) != (energies.max(axis=(0, 1)) < gap.middle)):
            raise GapClosedError(f"a band of sector {spin or 'all'} crosses the gap at {gap.middle:.6g} t")
        chern, link_min = (0.0, 1.0) if below == 0 else link_chern(vectors[..., :below])
        total += int(round(chern))
        weakest = min(weakest, link_min)
        if spin is not None:
            by_spin[spin] = int(round(chern))
    return SubspaceChern(chern=total, spin_chern=by_spin or None, link_min=float(weakest), grid=(n1, n2))
