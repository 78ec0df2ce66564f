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

import json
import math
import time
from dataclasses import dataclass, replace
from fractions import Fraction
from functools import partial
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from .. import __version__
from ..util.workers import default_jobs, init_worker, stop_pool

if TYPE_CHECKING:  # importing chern at module level would load kwant in every worker at start-up
    from ..solvers.chern import Band, Gap
    from ..scenario import Scenario

__all__ = [
    "Q_MAX_LIMIT", "K2_POINTS", "CHERN_CLIP", "BUTTERFLY_FILES",
    "FluxSpectrum", "ButterflyResult",
    "butterfly_fluxes", "butterfly_grid", "flux_spectrum", "mirror_spectrum", "compute_butterfly",
    "butterfly_summary", "format_butterfly", "chern_colours", "plot_butterfly", "butterfly_figure",
    "write_butterfly", "default_jobs",
]

#: Largest denominator accepted by :func:`compute_butterfly`. The cost of the
#: whole spectrum grows roughly like q_max^5 (46 s of CPU time at q_max = 40).
Q_MAX_LIMIT = 200
#: Reduced momenta along k2 (across the magnetic cell) of the default grid.
K2_POINTS = 8
#: Chern sums beyond +-CHERN_CLIP share the colour of +-CHERN_CLIP in the figure.
CHERN_CLIP = 8
#: Files of a butterfly results folder.
BUTTERFLY_FILES = ("summary.json", "butterfly.h5", "butterfly.png", "butterfly.pdf")


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
    progress : bool
        Show a progress bar (tqdm, on stderr).

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
    workers = max(1, min(default_jobs() if jobs is None else int(jobs), len(todo)))
    task = partial(flux_spectrum, spin=spin, zeeman=float(zeeman), onsite=float(onsite), full_grid=full_grid)

    from tqdm.auto import tqdm

    start = time.perf_counter()
    computed: dict[Fraction, FluxSpectrum] = {}
    with tqdm(total=len(todo), disable=not progress, unit="flux", desc=f"fluxes q <= {q_max}",
              leave=False, dynamic_ncols=True) as bar:
        if workers == 1:
            from ..util.threads import one_blas_thread

            with one_blas_thread():
                for flux in todo:
                    computed[flux] = task(flux)
                    bar.update()
        else:
            import multiprocessing
            from concurrent.futures import ProcessPoolExecutor, as_completed

            # "spawn": fresh workers, safe whatever threads this process runs (BLAS, tqdm).
            pool = ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn"),
                                       initializer=init_worker)
            try:
                futures = {pool.submit(task, flux): flux for flux in todo}
                for future in as_completed(futures):
                    computed[futures[future]] = future.result()
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


# ---------------------------------------------------------------- summary


def _gap_dict(gap) -> dict:
    return {"below": gap.below, "energy_min": gap.energy_min, "energy_max": gap.energy_max,
            "width": gap.energy_max - gap.energy_min, "chern": gap.chern, "spin_chern": gap.spin_chern}


def butterfly_summary(result: ButterflyResult, *, min_gap: float, scenario: Scenario | None = None) -> dict:
    """JSON-able summary: every flux with its gaps wider than ``min_gap``, settings and timing.

    Parameters
    ----------
    result : ButterflyResult
    min_gap : float
        Smallest width (``t``, exclusive) of a listed and drawn gap.
    scenario : topoedge.scenario.Scenario, optional
        Saved as ``config`` (and its file as ``source``).

    Returns
    -------
    dict
        Energies in ``t``; ``fluxes[]`` has ``flux`` ("p/q"), ``p``, ``q``,
        ``value``, ``mirrored``, ``bands`` (number, both spins),
        ``energy_min``/``energy_max`` of the spectrum and ``gaps[]`` (each
        ``below``, ``energy_min``, ``energy_max``, ``width``, ``chern``,
        ``spin_chern`` ({"up", "down"} or null)).
    """
    fluxes, labelled, total = [], [], 0
    for e in result.entries:
        gaps = e.labelled_gaps(min_gap)
        total += len(e.gaps)
        labelled += [g.chern for g in gaps]
        fluxes.append({
            "flux": f"{e.p}/{e.q}", "p": e.p, "q": e.q, "value": float(e.flux), "mirrored": e.mirrored,
            "bands": len(e.bands),
            "energy_min": min(b.energy_min for b in e.bands), "energy_max": max(b.energy_max for b in e.bands),
            "gaps": [_gap_dict(g) for g in gaps],
        })
    return {
        "topoedge_version": __version__,
        "kind": "butterfly",
        "title": scenario.title if scenario is not None else "",
        "source": scenario.source if scenario is not None else None,
        "config": scenario.to_dict() if scenario is not None else None,
        "model": {"lattice": "square", "spin": result.spin, "zeeman_t": result.zeeman,
                  "onsite_t": result.onsite},
        "units": {"energy": "t (nearest-neighbour hopping)", "flux": "flux quanta h/e per plaquette"},
        "q_max": result.q_max,
        "min_gap": min_gap,
        "jobs": result.jobs,
        "grid": ("chern.default_grid: 2q x 2q, at least 12" if result.full_grid
                 else f"2q x {K2_POINTS} (first axis: smallest multiple of 2q >= 12)"),
        "symmetry": "fluxes above 1/2 from 1 - flux: same energies, Chern numbers negated",
        "counts": {
            "fluxes": len(result.entries),
            "computed": sum(not e.mirrored for e in result.entries),
            "mirrored": sum(e.mirrored for e in result.entries),
            "bands": sum(len(e.bands) for e in result.entries),
            "open_gaps": total,
            "labelled_gaps": len(labelled),
        },
        "chern_range": [min(labelled), max(labelled)] if labelled else None,
        "seconds": result.seconds,
        "worker_seconds": sum(e.seconds for e in result.entries),
        "fluxes": fluxes,
    }


def format_butterfly(summary: dict, out: Path | None = None) -> str:
    """Short human-readable summary of a butterfly run."""
    c, m = summary["counts"], summary["model"]
    spin = f"spin 1/2, Zeeman {m['zeeman_t']:g} t" if m["spin"] else "spinless"
    lines = [
        f"topoedge {summary['topoedge_version']} butterfly: square lattice, flux p/q in [0, 1] "
        f"with q <= {summary['q_max']}" + (f" ({summary['source']})" if summary.get("source") else ""),
        f"  model        {spin}, on-site {m['onsite_t']:g} t (energies in units of t)",
        f"  fluxes       {c['fluxes']} ({c['computed']} computed, {c['mirrored']} from 1 - flux), "
        f"{c['bands']} bands; grid {summary['grid']}",
    ]
    span = summary["chern_range"]
    chern = f"; Chern sums {span[0]} .. {span[1]}" if span else ""
    lines.append(f"  gaps         {c['open_gaps']} open, {c['labelled_gaps']} wider than "
                 f"{summary['min_gap']:g} t labelled{chern}")
    lines.append(f"  time         {summary['seconds']:.1f} s on {summary['jobs']} process"
                 f"{'es' if summary['jobs'] > 1 else ''} ({summary['worker_seconds']:.1f} s of computation)")
    if out is not None:
        lines.append(f"  results      {out}/ ({', '.join(BUTTERFLY_FILES)})")
    return "\n".join(lines)


# ---------------------------------------------------------------- figure


def chern_colours(clip: int = CHERN_CLIP):
    """Discrete diverging colours for Chern sums ``-clip .. clip``, grey at 0.

    Positive sums run from yellow (``C = 1``) through orange and red to dark
    red (``YlOrRd``), negative ones from pale green through teal and blue to
    navy (``YlGnBu``): the sign reads from warm against cool, the size from
    hue and darkness together, so that neighbouring integers stay apart.
    Values beyond ``+-clip`` take the end colours.

    Returns
    -------
    cmap : matplotlib.colors.ListedColormap
        ``2 clip + 1`` colours, with under/over colours for the clipped ends.
    norm : matplotlib.colors.BoundaryNorm
        Bins of width 1 centred on the integers.
    """
    import matplotlib
    from matplotlib import colors

    steps = np.linspace(0.25, 1.0, clip)  # skip the near-white start of both maps
    warm, cool = matplotlib.colormaps["YlOrRd"], matplotlib.colormaps["YlGnBu"]
    rgba = [cool(x) for x in steps[::-1]] + [colors.to_rgba("0.55")] + [warm(x) for x in steps]
    cmap = colors.ListedColormap(rgba, name="chern").with_extremes(under=rgba[0], over=rgba[-1])
    norm = colors.BoundaryNorm(np.arange(-clip - 0.5, clip + 1.5), cmap.N)
    return cmap, norm


def plot_butterfly(result: ButterflyResult, *, ax, min_gap: float, clip: int = CHERN_CLIP) -> dict:
    """Bands as black vertical segments and labelled gaps coloured by Chern sum.

    Parameters
    ----------
    result : ButterflyResult
    ax : matplotlib.axes.Axes
    min_gap : float
        Gaps wider than this (``t``) are drawn.
    clip : int
        Colour scale limit: ``|C| >= clip`` share the end colours.

    Returns
    -------
    dict
        ``{"bands": LineCollection, "gaps": LineCollection, "cmap", "norm"}``.
    """
    from matplotlib.collections import LineCollection

    band_segments, gap_segments, gap_chern = [], [], []
    for e in result.entries:
        x = float(e.flux)
        band_segments += [((x, b.energy_min), (x, b.energy_max)) for b in e.bands]
        for g in e.labelled_gaps(min_gap):
            gap_segments.append(((x, g.energy_min), (x, g.energy_max)))
            gap_chern.append(g.chern)
    cmap, norm = chern_colours(clip)
    gaps = LineCollection(gap_segments, cmap=cmap, norm=norm, linewidths=2.0, capstyle="butt", zorder=1)
    gaps.set_array(np.clip(np.asarray(gap_chern, dtype=float), -clip, clip))
    ax.add_collection(gaps)
    # Projecting caps: a band narrower than a pixel still shows as a dot.
    bands = LineCollection(band_segments, colors="k", linewidths=0.5, capstyle="projecting", zorder=2)
    ax.add_collection(bands)
    lo = min(b.energy_min for e in result.entries for b in e.bands)
    hi = max(b.energy_max for e in result.entries for b in e.bands)
    pad = 0.02 * (hi - lo)
    ax.set_xlim(-0.01, 1.01)
    ax.set_ylim(lo - pad, hi + pad)
    ax.set_xlabel(r"flux $\phi = p/q$ (flux quanta $h/e$ per plaquette)")
    ax.set_ylabel("$E$ ($t$)")
    return {"bands": bands, "gaps": gaps, "cmap": cmap, "norm": norm}


def butterfly_figure(result: ButterflyResult, *, min_gap: float, clip: int = CHERN_CLIP, title: str = ""):
    """Figure of the flux-energy spectrum with a Chern-sum colour bar and a legend."""
    import matplotlib.pyplot as plt
    from matplotlib.lines import Line2D

    fig, ax = plt.subplots(figsize=(11, 7.5), layout="constrained")
    art = plot_butterfly(result, ax=ax, min_gap=min_gap, clip=clip)
    bar = fig.colorbar(art["gaps"], ax=ax, extend="both", ticks=range(-clip, clip + 1), fraction=0.04,
                       pad=0.01, aspect=35)
    labels = [str(c) for c in range(-clip, clip + 1)]
    labels = [label.replace("-", "\u2212") for label in labels]  # typographic minus, as matplotlib's ticks
    labels[0], labels[-1] = f"\u2264\u2212{clip}", f"\u2265{clip}"
    bar.ax.set_yticklabels(labels)
    bar.ax.tick_params(labelsize=9)
    bar.set_label(f"Chern sum $C$ of the bands below the gap (colours clipped at $|C| = {clip}$)", fontsize=10)
    handles = [Line2D([], [], color="k", lw=1.2, label="bulk band (energy range)"),
               Line2D([], [], color=art["cmap"](art["norm"](3)), lw=3,
                      label=f"gap wider than {min_gap:g} $t$, coloured by $C$")]
    ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, 1.0), ncols=2, fontsize=9,
              framealpha=0.95)
    spin = (f"spin 1/2, Zeeman {result.zeeman:g} $t$" if result.spin else "spinless")
    onsite = f", on-site {result.onsite:g} $t$" if result.onsite else ""
    head = f"{title}: " if title else ""
    ax.set_title(f"{head}square lattice, flux $p/q$ with $q \\leq {result.q_max}$, {spin}{onsite}\n"
                 "Chern sums by the link-variable method", fontsize=10)
    return fig


# ---------------------------------------------------------------- files


def _write_h5(path: Path, result: ButterflyResult, summary: dict) -> None:
    import h5py

    entries = result.entries
    min_gap = summary["min_gap"]
    bands = [(i, b) for i, e in enumerate(entries) for b in e.bands]
    gaps = [(i, g) for i, e in enumerate(entries) for g in e.gaps]
    with h5py.File(path, "w") as f:
        fl = f.create_group("flux")
        fl.create_dataset("p", data=np.array([e.p for e in entries], dtype=int))
        fl.create_dataset("q", data=np.array([e.q for e in entries], dtype=int))
        fl.create_dataset("value", data=np.array([float(e.flux) for e in entries]))
        fl.create_dataset("mirrored", data=np.array([e.mirrored for e in entries], dtype=bool))
        fl.create_dataset("grid", data=np.array([e.grid for e in entries], dtype=int).reshape(-1, 2))
        fl.create_dataset("seconds", data=np.array([e.seconds for e in entries]))
        bg = f.create_group("bands")
        bg.create_dataset("flux_index", data=np.array([i for i, _ in bands], dtype=int))
        bg.create_dataset("energy_range", data=np.array([[b.energy_min, b.energy_max] for _, b in bands]).reshape(-1, 2))
        bg.create_dataset("spin", data=np.array([{"up": 1, "down": -1}.get(b.spin, 0) for _, b in bands], dtype=int))
        bg.create_dataset("chern", data=np.array([np.nan if b.chern is None else b.chern for _, b in bands], dtype=float))
        gg = f.create_group("gaps")
        gg.create_dataset("flux_index", data=np.array([i for i, _ in gaps], dtype=int))
        gg.create_dataset("below", data=np.array([g.below for _, g in gaps], dtype=int))
        gg.create_dataset("energy_range", data=np.array([[g.energy_min, g.energy_max] for _, g in gaps]).reshape(-1, 2))
        gg.create_dataset("chern", data=np.array([g.chern for _, g in gaps], dtype=int))
        if result.spin:
            gg.create_dataset("spin_chern", data=np.array(
                [[g.spin_chern["up"], g.spin_chern["down"]] for _, g in gaps], dtype=int).reshape(-1, 2))
            gg["spin_chern"].attrs["columns"] = "up, down"
        gg.create_dataset("labelled", data=np.array([g.energy_max - g.energy_min > min_gap for _, g in gaps], dtype=bool))
        f.attrs["topoedge_version"] = __version__
        f.attrs["scenario_json"] = json.dumps(summary.get("config"), sort_keys=True)
        f.attrs["source"] = summary.get("source") or ""
        for key in ("q_max", "min_gap", "jobs", "seconds"):
            f.attrs[key] = summary[key]
        f.attrs["full_grid"] = result.full_grid
        f.attrs["spin"] = result.spin
        f.attrs["zeeman"] = result.zeeman
        f.attrs["onsite"] = result.onsite
        f.attrs["units"] = "energies in t; flux in flux quanta h/e per plaquette"


def write_butterfly(out: Path, result: ButterflyResult, summary: dict, *, force: bool = False) -> Path:
    """Write ``summary.json``, ``butterfly.h5``, ``butterfly.png`` and ``butterfly.pdf`` atomically.

    Through :func:`topoedge.outputs.results.write_folder`: the files go into a hidden
    temporary sibling of ``out``, renamed into place only when all are
    complete.

    Parameters
    ----------
    out : Path
        The results folder.
    result : ButterflyResult
    summary : dict
        From :func:`butterfly_summary` (gives ``min_gap`` and the scenario).
    force : bool
        Replace an existing folder (only once the new one is complete).

    Returns
    -------
    Path
        ``out``.

    Raises
    ------
    topoedge.outputs.results.ResultsExistError
        If ``out`` exists and ``force`` is false.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..outputs.results import write_folder, write_json

    fig = butterfly_figure(result, min_gap=summary["min_gap"])
    try:
        return write_folder(Path(out), {
            "summary.json": write_json(summary),
            "butterfly.h5": lambda path: _write_h5(path, result, summary),
            "butterfly.png": lambda path: fig.savefig(path, dpi=150),
            "butterfly.pdf": lambda path: fig.savefig(path),
        }, force=force)
    finally:
        plt.close(fig)
