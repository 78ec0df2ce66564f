"""Flux-energy spectrum of the square lattice with every gap labelled by its Chern sum.

For every flux ``phi = p/q`` flux quanta per plaquette with ``1 <= q <= q_max``
and ``0 <= p <= q`` (``gcd(p, q) = 1``, so ``phi`` runs over ``[0, 1]``) the
bulk Hamiltonian of the magnetic unit cell (``1 x q`` sites, built by
:func:`topoedge.models.square.bulk_builder`) is diagonalised on a grid of reduced
momenta, and the Chern sum of every spectral gap is computed by the
link-variable method (:func:`topoedge.solvers.chern.chern_numbers`) [1]_. Drawn over
the flux, the band energy ranges form Hofstadter's butterfly [2]_ and the
gaps, coloured by their Chern sums, its phase diagram [3]_.

Units: energies in the hopping ``t``, flux in flux quanta ``phi0 = h/e`` per
plaquette, reduced momenta as phases per magnetic cell; Chern numbers are
integers.

Symmetry flux -> 1 - flux
-------------------------
Only the fluxes ``phi <= 1/2`` are computed; the entry at ``1 - phi`` is
obtained from the one at ``phi`` with the same band and gap energies and
every Chern number (band, gap, and per spin) negated. This is exact for the
square lattice: the Peierls phase ``exp(-2 pi i phi y (x_i - x_j))`` of the
builders has an integer ``y (x_i - x_j)``, so ``H(1 - phi) = H(-phi)``, and
``H(-phi) = H(phi)^*`` because the on-site, Zeeman and hopping amplitudes
are real. Complex conjugation is the time reversal of the orbital motion (it
leaves ``S_z`` and the Zeeman term alone): ``E_n(k; 1 - phi) =
E_n(-k; phi)`` and the Berry curvature changes sign,
``F(k; 1 - phi) = -F(-k; phi)``. The momentum grids used here are invariant
under ``k -> -k``, and the link variables obey the same relation plaquette
by plaquette, so the lattice Chern numbers are negated exactly, not only in
the continuum limit (common practice; the test suite compares mirrored
entries with direct computations).

Momentum grid
-------------
By default each flux uses ``n1 x n2`` reduced momenta with ``n1`` the smallest
multiple of ``2q`` that is at least 12 and ``n2 = 8`` (:func:`butterfly_grid`),
instead of the ``2q x 2q`` of :func:`topoedge.solvers.chern.default_grid`
(``full_grid=True`` restores it). Why this is enough:

- *Band and gap energies are exact.* By Chambers' relation [4]_ the
  characteristic polynomial of the Hofstadter Bloch Hamiltonian depends on
  the momenta only through ``cos(q k1) + cos(k2)``, so every band has its
  extremes (and neighbouring bands their smallest direct gap) where
  ``q k1`` is a multiple of ``pi`` and ``k2`` is 0 or ``pi``; every such
  point lies on the grid. A uniform Zeeman or on-site term shifts a whole
  spin sector and does not change this.
- *Chern numbers are converged.* The lattice Chern number equals the
  continuum one when the field strength of every plaquette satisfies
  ``|F_12| < pi`` [1]_, i.e. when the Bloch states change little from one
  grid point to the next. Along ``k1`` the grid is the default one (2 points
  per period ``2 pi / q`` of the energies). Along ``k2`` the states change
  slowly: ``k2`` is the phase of the one hop that crosses the cell, which a
  gauge transformation spreads as ``exp(i k2 / q)`` over the ``q`` hops
  across it, so the momentum acts on a state spread over the cell only
  through this phase. Measured: the smallest single-band link overlap
  ``|<u(k)|u(k + 2 pi/8)>|`` along ``k2`` is at least 0.5 on 8 points for
  every ``q`` tried (5 to 80); for all 491 fluxes with ``q <= 40`` (12148
  open gaps, spinless) every gap Chern sum on this grid equals the one on
  the default grid and solves the TKNN equation [5]_. The eigenvectors,
  hence the Chern numbers, do not depend on the Zeeman and on-site terms
  (uniform shifts of each spin sector), so this check covers every scenario
  up to ``q = 40``; beyond, ``full_grid=True`` (``--full-grid``) repeats a
  computation on the default grid for comparison.
- *Cost.* The default grid has ``q / 4`` times more points; the whole
  spectrum for ``q <= 40`` took 25 s instead of 80 s on 2 processes (the
  refinement of small direct gaps in ``chern_numbers``, which does not
  depend on the grid, then takes most of the time).

Labelled gaps
-------------
``chern_numbers`` reports every gap wider than 1e-5 t; only those wider than
``min_gap`` (default 0.02 t) are listed in ``summary.json`` and drawn. In the
150-dpi figure one pixel is about 0.009 t, so a 0.02 t gap shows as about
2 pixels of colour between the band lines (1 pixel wide) and a narrower one
would vanish under them. At ``q <= 40`` with the default scenario the gaps
left out are 44 % of the 22402 open gaps but 2.7 % of their total width: the
figure loses no visible colour, the summary much clutter. ``butterfly.h5``
keeps every open gap, with a ``labelled`` flag.

The work is spread over a pool of processes (largest ``q`` first, for load
balance), each on one BLAS thread: the matrices are small (``q`` rows per
spin sector), so threaded BLAS would only add synchronisation.

Results folder (see :func:`write_butterfly`):

``summary.json``    :func:`butterfly_summary`: every flux with its gaps wider
                    than ``min_gap`` (energy window, Chern sum, spin Chern
                    numbers), the settings and the timing
``butterfly.h5``    every flux, band and open gap (layout below)
``butterfly.png``,  the figure of :func:`butterfly_figure`
``butterfly.pdf``

``butterfly.h5`` layout (energies in ``t``; one row per flux, band or gap; a
band or gap refers to its flux by ``flux_index``)::

    /flux/p, /flux/q          (Nf,) flux p/q, sorted by p/q
    /flux/value               (Nf,) p/q as a float, flux quanta per plaquette
    /flux/mirrored            (Nf,) True when obtained from 1 - p/q by symmetry
    /flux/grid                (Nf, 2) momentum grid of the Chern numbers
    /flux/seconds             (Nf,) computation time of the flux (0 if mirrored)
    /bands/flux_index         (Nb,)
    /bands/energy_range       (Nb, 2) [min, max] of the band over the grid
    /bands/spin               (Nb,) +1 up, -1 down, 0 without spin
    /bands/chern              (Nb,) band Chern number, NaN for touching bands
    /gaps/flux_index          (Ng,) every open gap (wider than 1e-5 t)
    /gaps/below               (Ng,) number of bands below (both spins)
    /gaps/energy_range        (Ng, 2) [bottom, top] of the gap
    /gaps/chern               (Ng,) Chern sum of the bands below
    /gaps/spin_chern          (Ng, 2) [up, down] parts (only with spin)
    /gaps/labelled            (Ng,) True when wider than min_gap (drawn)
    root attributes           topoedge_version, scenario_json, source,
                              q_max, min_gap, jobs, seconds, full_grid,
                              spin, zeeman, onsite

References
----------
.. [1] T. Fukui, Y. Hatsugai, H. Suzuki, "Chern numbers in discretized
   Brillouin zone: efficient method of computing (spin) Hall conductances",
   J. Phys. Soc. Jpn. 74, 1674 (2005).
.. [2] D. R. Hofstadter, "Energy levels and wave functions of Bloch electrons
   in rational and irrational magnetic fields", Phys. Rev. B 14, 2239 (1976).
.. [3] D. Osadchy, J. E. Avron, "Hofstadter butterfly as quantum phase
   diagram", J. Math. Phys. 42, 5665 (2001).
.. [4] W. G. Chambers, "Linear-network model for magnetic breakdown in two
   dimensions", Phys. Rev. 140, A135 (1965).
.. [5] D. J. Thouless, M. Kohmoto, M. P. Nightingale, M. den Nijs, "Quantized
   Hall conductance in a two-dimensional periodic potential", Phys. Rev. Lett.
   49, 405 (1982).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, replace
from fractions import Fraction
from functools import partial
from typing import TYPE_CHECKING

import numpy as np

from ..util.points import PointStore
from ..util.progress import as_progress
from ..util.workers import default_jobs, process_pool, stop_pool

if TYPE_CHECKING:  # importing chern at module level would load kwant in every worker at start-up
    from ..solvers.chern import Band, Gap

__all__ = ["Q_MAX_LIMIT", "K2_POINTS", "FluxSpectrum", "ButterflyResult", "butterfly_fluxes", "butterfly_grid",
           "flux_spectrum", "mirror_spectrum", "compute_butterfly"]

#: Largest denominator accepted by :func:`compute_butterfly`. The cost of the
#: whole spectrum grows roughly like q_max^5 (46 s of CPU time at q_max = 40).
Q_MAX_LIMIT = 200
#: Reduced momenta along k2 (across the magnetic cell) of the default grid.
K2_POINTS = 8


@dataclass(frozen=True, eq=False)
class FluxSpectrum:
    """Bulk bands and open gaps at one flux.

    Attributes
    ----------
    flux : fractions.Fraction
        ``p/q`` flux quanta per plaquette.
    bands : tuple of topoedge.solvers.chern.Band
        Every band (both spins), sorted by energy; energies in ``t``. (Their
        ``group`` refers to band groups that are not kept.)
    gaps : tuple of topoedge.solvers.chern.Gap
        Every open spectral gap (wider than ``chern_numbers``' ``gap_min``,
        1e-5 t), with its Chern sum and, with spin, ``spin_chern``.
    grid : (int, int)
        Momentum grid of the link-variable method.
    mirrored : bool
        True when obtained from ``1 - flux`` by symmetry (see the module notes).
    seconds : float
        Wall time of the computation of this flux (0 when mirrored).
    """

    flux: Fraction
    bands: tuple[Band, ...]
    gaps: tuple[Gap, ...]
    grid: tuple[int, int]
    mirrored: bool = False
    seconds: float = 0.0

    @property
    def p(self) -> int:
        return self.flux.numerator

    @property
    def q(self) -> int:
        return self.flux.denominator

    def labelled_gaps(self, min_gap: float) -> tuple[Gap, ...]:
        """The gaps wider than ``min_gap`` (units of ``t``)."""
        return tuple(g for g in self.gaps if g.energy_max - g.energy_min > min_gap)


@dataclass(frozen=True, eq=False)
class ButterflyResult:
    """The flux-energy spectrum: one :class:`FluxSpectrum` per flux, sorted by flux.

    Attributes
    ----------
    entries : tuple of FluxSpectrum
    q_max : int
    spin : bool
    zeeman : float
        Zeeman splitting, ``t``.
    onsite : float
        Uniform on-site energy, ``t``.
    full_grid : bool
        Whether :func:`topoedge.solvers.chern.default_grid` was used instead of
        :func:`butterfly_grid`.
    jobs : int
        Number of worker processes used.
    seconds : float
        Wall time of the whole computation.
    """

    entries: tuple[FluxSpectrum, ...]
    q_max: int
    spin: bool
    zeeman: float
    onsite: float
    full_grid: bool
    jobs: int
    seconds: float

    def entry(self, flux) -> FluxSpectrum:
        """The entry at ``flux`` (a Fraction or ``"p/q"``)."""
        flux = Fraction(flux)
        for e in self.entries:
            if e.flux == flux:
                return e
        raise KeyError(f"flux {flux} is not in this spectrum (q_max = {self.q_max})")


# ---------------------------------------------------------------- computation


def butterfly_fluxes(q_max: int) -> list[Fraction]:
    """Every flux ``p/q`` in ``[0, 1]`` with ``1 <= q <= q_max``, ``gcd(p, q) = 1``, sorted."""
    fluxes = {Fraction(p, q) for q in range(1, q_max + 1) for p in range(q + 1) if math.gcd(p, q) == 1}
    return sorted(fluxes)


def butterfly_grid(q: int) -> tuple[int, int]:
    """Momentum grid ``(n1, n2)`` for flux ``p/q``: ``n1`` the smallest multiple of ``2q`` >= 12, ``n2 = 8``.

    See the module notes for why this grid gives exact band edges and
    converged Chern numbers.
    """
    return 2 * q * math.ceil(6 / q), K2_POINTS


def flux_spectrum(flux, *, spin: bool = True, zeeman: float = 0.0, onsite: float = 0.0,
                  full_grid: bool = False) -> FluxSpectrum:
    """Bands and gap Chern sums of the square-lattice bulk at one flux.

    Parameters
    ----------
    flux : Fraction or str
        ``p/q`` flux quanta per plaquette.
    spin : bool
        Two orbitals (spin up, down) per site.
    zeeman : float
        Zeeman splitting, ``t`` (spin up at ``-zeeman/2``).
    onsite : float
        Uniform on-site energy, ``t``.
    full_grid : bool
        Use :func:`topoedge.solvers.chern.default_grid` instead of :func:`butterfly_grid`.

    Returns
    -------
    FluxSpectrum
    """
    from ..systems.bloch import BlochHamiltonian
    from ..models.square import bulk_builder, model_params
    from ..solvers.chern import chern_numbers, default_grid

    flux = Fraction(flux)
    start = time.perf_counter()
    bloch = BlochHamiltonian.from_kwant(
        bulk_builder(flux, spin=spin), params=model_params(phi=flux, zeeman=zeeman, onsite=onsite))
    grid = default_grid(bloch) if full_grid else butterfly_grid(flux.denominator)
    result = chern_numbers(bloch, grid=grid)
    return FluxSpectrum(flux=flux, bands=result.bands, gaps=result.gaps, grid=result.grid,
                        seconds=time.perf_counter() - start)


def mirror_spectrum(entry: FluxSpectrum) -> FluxSpectrum:
    """The entry at ``1 - flux``: same energies, every Chern number negated.

    Exact for the square lattice (``H(1 - phi) = H(phi)^*``, see the module
    notes).
    """
    bands = tuple(replace(b, chern=None if b.chern is None else -b.chern) for b in entry.bands)
    gaps = tuple(
        replace(g, chern=-g.chern,
                spin_chern=None if g.spin_chern is None else {s: -c for s, c in g.spin_chern.items()})
        for g in entry.gaps
    )
    return replace(entry, flux=1 - entry.flux, bands=bands, gaps=gaps, mirrored=True, seconds=0.0)


def compute_butterfly(
    q_max: int = 40,
    *,
    spin: bool = True,
    zeeman: float = 0.0,
    onsite: float = 0.0,
    jobs: int | None = None,
    full_grid: bool = False,
    progress: bool = False,
    store: PointStore | None = None,
) -> ButterflyResult:
    """Bands and gap Chern sums at every flux ``p/q`` in ``[0, 1]`` with ``q <= q_max``.

    Parameters
    ----------
    q_max : int
        Largest denominator, ``1 <= q_max <= Q_MAX_LIMIT``.
    spin : bool
        Two orbitals (spin up, down) per site; with a Zeeman term both spin
        species appear as separate bands.
    zeeman : float
        Zeeman splitting, ``t``; must be 0 without spin.
    onsite : float
        Uniform on-site energy, ``t``.
    jobs : int, optional
        Worker processes; all available cores by default. With 1 everything
        runs in this process.
    full_grid : bool
        Use :func:`topoedge.solvers.chern.default_grid` (``2q x 2q``) instead of the
        cheaper :func:`butterfly_grid` (same results, see the module notes).
    progress : bool or Progress
        True: a progress bar (tqdm, on stderr); a
        :class:`topoedge.util.progress.Progress`: one stage (a bar or log lines).
    store : PointStore, optional
        Where every computed flux is kept the moment it is finished; fluxes
        found there (from an interrupted earlier run with the same options)
        are not computed again.

    Returns
    -------
    ButterflyResult

    Raises
    ------
    ValueError
        For ``q_max`` or ``jobs`` out of range, or a Zeeman term without spin.

    Notes
    -----
    Only fluxes ``<= 1/2`` are computed, largest ``q`` first; the others
    follow from :func:`mirror_spectrum`. The Chern numbers come from
    :func:`topoedge.solvers.chern.chern_numbers` at every computed flux.
    """
    if isinstance(q_max, bool) or not isinstance(q_max, (int, np.integer)) or not 1 <= q_max <= Q_MAX_LIMIT:
        raise ValueError(f"q_max must be an integer with 1 <= q_max <= {Q_MAX_LIMIT}, got {q_max!r}")
    if jobs is not None and (isinstance(jobs, bool) or not isinstance(jobs, (int, np.integer)) or jobs < 1):
        raise ValueError(f"jobs must be an integer >= 1, got {jobs!r}")
    if not spin and zeeman != 0:
        raise ValueError(f"a Zeeman term needs spin: got zeeman = {zeeman} with spin = False")
    q_max = int(q_max)
    fluxes = butterfly_fluxes(q_max)
    half = Fraction(1, 2)
    todo = sorted((f for f in fluxes if f <= half), key=lambda f: (-f.denominator, f))
    store = store if store is not None else PointStore(None)
    computed: dict[Fraction, FluxSpectrum] = {}
    for flux in todo:
        found = store.load(f"{flux.numerator}_{flux.denominator}")
        if isinstance(found, FluxSpectrum) and found.flux == flux:
            computed[flux] = found
    todo = [f for f in todo if f not in computed]
    workers = max(1, min(default_jobs() if jobs is None else int(jobs), max(len(todo), 1)))
    task = partial(flux_spectrum, spin=spin, zeeman=float(zeeman), onsite=float(onsite), full_grid=full_grid)

    start = time.perf_counter()

    def keep(flux: Fraction, entry: FluxSpectrum) -> None:
        computed[flux] = entry
        store.save(f"{flux.numerator}_{flux.denominator}", entry)

    with as_progress(progress).stage(f"butterfly: {len(todo)} fluxes with q <= {q_max}", len(todo)) as bar:
        if workers == 1:
            from ..util.threads import one_blas_thread

            with one_blas_thread():
                for flux in todo:
                    keep(flux, task(flux))
                    bar.update()
        else:
            from concurrent.futures import as_completed

            # spawned workers: safe whatever threads this process runs (BLAS, tqdm)
            pool = process_pool(workers)
            try:
                futures = {pool.submit(task, flux): flux for flux in todo}
                for future in as_completed(futures):
                    keep(futures[future], future.result())
                    bar.update()
            except BaseException:
                stop_pool(pool)
                raise
            pool.shutdown(wait=True)
    entries = []
    for flux in fluxes:
        entries.append(computed[flux] if flux <= half else mirror_spectrum(computed[1 - flux]))
    return ButterflyResult(entries=tuple(entries), q_max=q_max, spin=bool(spin), zeeman=float(zeeman),
                           onsite=float(onsite), full_grid=bool(full_grid), jobs=workers,
                           seconds=time.perf_counter() - start)


# ---------------------------------------------------------------- files


