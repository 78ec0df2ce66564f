"""Topology of a finite disordered flake: marker map, sigma_xy curves, plateau robustness.

``disorder_run(scenario)`` takes a scenario (any lattice), finds the clean
bulk's E_F, gap and Chern number, cuts a flake of ``disorder.flake`` from
the lattice's plane and, for every disorder strength of ``disorder.strengths``
and every seed, computes on the central ``disorder.region`` of the flake

- the local Chern marker averaged there at E_F (dense projector for small
  flakes, kernel polynomials beyond; :mod:`topoedge.solvers.marker`), and
- the Kubo-Bastin Hall conductivity sigma_xy(E_F) at ``disorder.energies``
  Fermi energies (:mod:`topoedge.solvers.kubo`), and
- with ``disorder.hallbar`` on a lattice that has a Hall bar, the Hall and
  longitudinal resistances of the scenario's six-terminal bar
  (``[hallbar]`` length and width) at E_F with the same strength and seed
  (:mod:`topoedge.solvers.transport`); its sigma_xy inverts the resistivity
  tensor of the seed means, ``rho_xy = <R_xy>``, ``rho_xx = <R_xx> W / L``
  (L the distance of the longitudinal probes, W the width):
  ``sigma_xy = -rho_xy / (rho_xx^2 + rho_xy^2)``, which is ``-1 / R_xy`` =
  C on a plateau and stays bounded where the states localise,

plus the marker of every site (a map) at ``disorder.strength``. The
plateau breaks at the smallest strength where the seed-averaged value
leaves the clean Chern number by more than 1/2. Every (strength, seed)
point is kept in a :class:`~topoedge.util.points.PointStore` the moment it
is finished, so an interrupted run resumes.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np

from ..models.lattices import lattice
from ..scenario import ConfigError, Model, Scenario, resolve
from ..solvers.chern import Gap
from ..solvers.kpm import moments_for_gap, spectral_bounds
from ..solvers.kubo import hall_conductivity_kpm
from ..solvers.marker import local_chern_marker, local_chern_marker_kpm
from ..systems.flake import Flake, central_sites
from ..util.points import PointStore
from ..util.progress import as_progress
from .build import params_of
from .bulk import bulk_chern, fermi_level, replace_chern_refine

__all__ = ["DisorderResult", "disorder_run", "build_flake", "DENSE_UP_TO", "PLATEAU_TOLERANCE"]

#: Orbitals up to which the marker uses the dense projector (N^2 memory, N^3 time).
DENSE_UP_TO = 2500
#: The plateau is left where the seed average differs from the clean C by more than this.
PLATEAU_TOLERANCE = 0.5
#: Most sites of the marker map beyond the dense size (a regular subset of the flake).
MAP_SITES = 900


@dataclass(frozen=True, eq=False)
class DisorderResult:
    """What :func:`disorder_run` computed (energies in t, lengths in the lattice's unit)."""

    scenario: Scenario
    fermi_energy: float
    gap: Gap
    chern: int
    flake_sites: int
    orbitals: int
    region_sites: int
    moments: int
    resolution: float              # pi a / M, t
    vectors: int
    map_strength: float
    map_sites: np.ndarray          # indices of the sites with a marker value
    map_marker: np.ndarray
    positions: np.ndarray
    map_method: str
    strengths: np.ndarray          # (W,)
    seeds: int
    marker: np.ndarray             # (W, seeds) marker averaged over the region
    energies: np.ndarray           # (E,)
    sigma: np.ndarray              # (W, seeds, E) sigma_xy in e^2/h
    sigma_fermi: np.ndarray        # (W, seeds) sigma_xy at E_F
    clean_steps: tuple             # (energy_min, energy_max, C) of the clean gaps in range
    hallbar_r_xy: np.ndarray | None = None   # (W, seeds) R_xy of the Hall bar at E_F, h/e^2 (NaN: unsolved)
    hallbar_r_xx: np.ndarray | None = None   # (W, seeds) R_xx, h/e^2
    hallbar_size: tuple | None = None        # (length, width) in sites
    hallbar_aspect: float = 1.0              # longitudinal probe distance / width
    units: object = None
    strength_unit: str = "t"                 # the unit the strengths were given in (t or meV)
    seconds: float = 0.0
    warnings: tuple = field(default_factory=tuple)

    def breaking_strength(self, values: np.ndarray) -> float | None:
        """Smallest strength whose seed average leaves the clean C by more than PLATEAU_TOLERANCE."""
        mean = values.mean(axis=1)
        off = np.nonzero(np.abs(mean - self.chern) > PLATEAU_TOLERANCE)[0]
        return float(self.strengths[off[0]]) if off.size else None

    @property
    def hallbar_sigma(self) -> np.ndarray | None:
        """sigma_xy of the Hall bar per strength, e^2/h: the resistivity tensor of the seed means inverted.

        ``rho_xy = <R_xy>``, ``rho_xx = <R_xx> / aspect``;
        ``sigma_xy = -rho_xy / (rho_xx^2 + rho_xy^2)`` (``-1/R_xy`` on a
        plateau, where ``R_xx = 0``; the sign of :mod:`topoedge.solvers.transport`).
        """
        if self.hallbar_r_xy is None:
            return None
        rho_xy = _seed_mean(self.hallbar_r_xy)
        rho_xx = _seed_mean(self.hallbar_r_xx) / self.hallbar_aspect
        with np.errstate(divide="ignore", invalid="ignore"):
            return -rho_xy / (rho_xx ** 2 + rho_xy ** 2)

    def hallbar_breaking_strength(self) -> float | None:
        """Smallest strength where the Hall bar is off the plateau.

        Off: its sigma_xy (:attr:`hallbar_sigma`) differs from the clean C by more than PLATEAU_TOLERANCE
        (e^2/h), or <R_xx> exceeds PLATEAU_TOLERANCE (h/e^2), or no seed was solved.
        """
        sigma = self.hallbar_sigma
        if sigma is None:
            return None
        rxx = _seed_mean(self.hallbar_r_xx)
        with np.errstate(invalid="ignore"):
            on = (np.abs(sigma - self.chern) <= PLATEAU_TOLERANCE) & (np.abs(rxx) <= PLATEAU_TOLERANCE)
        off = np.nonzero(~on)[0]
        return float(self.strengths[off[0]]) if off.size else None

    def to_dict(self) -> dict:
        from .. import __version__

        hallbar = None
        if self.hallbar_r_xy is not None:
            hallbar = {"length": self.hallbar_size[0], "width": self.hallbar_size[1],
                       "probe_distance_over_width": self.hallbar_aspect,
                       "r_xy_mean": _floats(_seed_mean(self.hallbar_r_xy)),
                       "r_xx_mean": _floats(_seed_mean(self.hallbar_r_xx)),
                       "sigma_xy": _floats(self.hallbar_sigma),
                       "unsolved": int(np.isnan(self.hallbar_r_xy).sum())}

        return {
            "topoedge_version": __version__, "title": self.scenario.title, "source": self.scenario.source,
            "config": self.scenario.to_dict(),
            "units": "energies and disorder strengths in t; sigma_xy in e^2/h (sigma_xy = C in a clean gap); "
                     "R_xy and R_xx in h/e^2; lengths in the lattice's length unit",
            "physical": None if self.units is None else {
                "t_mev": self.units.hopping_mev, "a_nm": self.units.lattice_constant_nm,
                "fermi_energy_mev": (self.fermi_energy - self.energy_zero) * self.units.hopping_mev,
                "strengths_mev": [float(w) * self.units.hopping_mev for w in self.strengths],
                "flake_side_nm": self.scenario.disorder.flake * self.units.lattice_constant_nm},
            "fermi": {"energy": self.fermi_energy, "gap_below": self.gap.below,
                      "gap_min": self.gap.energy_min, "gap_max": self.gap.energy_max, "chern": self.chern},
            "flake": {"sites": self.flake_sites, "orbitals_per_site": self.orbitals,
                      "region_sites": self.region_sites, "side": self.scenario.disorder.flake,
                      "region": self.scenario.disorder.region},
            "kpm": {"moments": self.moments, "vectors": self.vectors, "resolution_t": self.resolution},
            "map": {"strength": self.map_strength, "method": self.map_method, "sites": int(self.map_sites.size),
                    "region_mean": self._map_region_mean()},
            "strengths": [float(w) for w in self.strengths], "seeds": self.seeds,
            "marker_mean": [float(v) for v in self.marker.mean(axis=1)],
            "marker_spread": [float(v) for v in self.marker.std(axis=1)],
            "sigma_fermi_mean": [float(v) for v in self.sigma_fermi.mean(axis=1)],
            "sigma_fermi_spread": [float(v) for v in self.sigma_fermi.std(axis=1)],
            "plateau_broken_at": {"marker": self.breaking_strength(self.marker),
                                  "sigma_xy": self.breaking_strength(self.sigma_fermi),
                                  "hallbar": self.hallbar_breaking_strength(),
                                  "tolerance": PLATEAU_TOLERANCE},
            "hallbar": hallbar,
            "warnings": list(self.warnings), "seconds": self.seconds,
        }

    @property
    def strength_scale(self) -> float:
        """Strengths in t times this are in :attr:`strength_unit`."""
        return self.units.hopping_mev if self.strength_unit == "meV" else 1.0

    @property
    def energy_zero(self) -> float:
        """The band bottom of the clean square lattice (-4 t + onsite), where physical energies start."""
        return -4.0 + self.scenario.lattice.onsite

    def _map_region_mean(self) -> float | None:
        """The map's marker averaged over the sites of the central region it holds."""
        inside = np.isin(self.map_sites, central_sites(self.positions, self.scenario.disorder.region))
        return float(self.map_marker[inside].mean()) if inside.any() else None


def _seed_mean(values: np.ndarray) -> np.ndarray:
    """Mean over the seeds (axis 1) of the solved realisations; NaN where none was solved."""
    solved = np.isfinite(values)
    count = solved.sum(axis=1)
    total = np.where(solved, values, 0.0).sum(axis=1)
    return np.where(count > 0, total / np.maximum(count, 1), np.nan)


def _floats(values) -> list:
    return [None if not np.isfinite(v) else float(v) for v in values]


def hallbar_view(scenario: Scenario) -> bool:
    """Whether the disorder run also solves the scenario's Hall bar."""
    return scenario.disorder.hallbar and "hallbar" in lattice(scenario.lattice.kind).supports


def build_flake(scenario: Scenario) -> Flake:
    """The clean flake of a scenario in lattice units (``disorder.flake`` on a side)."""
    from ..models.flakes import flake_builder

    entry = lattice(scenario.lattice.kind)
    builder = flake_builder(entry.flake_plane(scenario.lattice, scenario.spin), float(scenario.disorder.flake))
    return Flake.from_kwant(builder.finalized(), params_of(scenario), site_area=entry.site_area)


def check_disorder(scenario: Scenario) -> None:
    """Refuse a flake too small for the magnetic length (lattice units), before anything is built."""
    entry = lattice(scenario.lattice.kind)
    cfg = scenario.disorder
    length = entry.scales(scenario.lattice).get("magnetic_length_a") if entry.in_field else None
    if length:
        smallest = int(math.ceil(max(6 * length, 4 * length / cfg.region)))
        if cfg.flake < smallest:
            raise ConfigError(f"disorder.flake: got {cfg.flake} at l_B = {length:.3g} {entry.length_unit}; expected "
                              f"at least {smallest} (six magnetic lengths, and a central region of at least four)")
    if hallbar_view(scenario):
        from ..scenario.checks import check_hallbar

        check_hallbar(scenario)
    orbitals = entry.orbitals_per_site * (2 if scenario.spin.enabled and entry.in_field else 1)
    sites_est = cfg.flake * cfg.flake / entry.site_area
    if sites_est * orbitals > 4_000_000:
        raise ConfigError(f"disorder.flake: got {cfg.flake}, about {sites_est * orbitals:.3g} orbitals; expected at "
                          "most 4e6 orbitals (about 2000 x 2000 sites)")


def disorder_run(scenario: Scenario | Model, *, progress=None, store: PointStore | None = None) -> DisorderResult:
    """Marker map, marker averages and sigma_xy curves of the scenario's flake (see the module notes).

    Raises
    ------
    ConfigError
        For a flake too small for the magnetic length, or ``disorder.moments``
        too few to resolve the clean gap at E_F.
    topoedge.solvers.chern.GapClosedError
        When E_F of the clean bulk is not in a gap.
    """
    start = time.perf_counter()
    model = resolve(scenario)
    s = model.scenario
    cfg = s.disorder
    progress = as_progress(progress)
    store = store if store is not None else PointStore(None)
    check_disorder(s)
    with progress.stage("bulk: clean Chern numbers"):
        chern, _, _ = bulk_chern(replace_chern_refine(s))
    ef, gap = fermi_level(s, chern)
    with progress.stage(f"flake: {cfg.flake} x {cfg.flake}"):
        clean = build_flake(s)
    lo, hi = spectral_bounds(clean.hamiltonian)
    width = gap.energy_max - gap.energy_min
    finite = bool(np.isfinite(width))
    needed = moments_for_gap(width, hi - lo, digits=1.0) if finite else 64      # resolution = half the gap
    if cfg.moments is not None and cfg.moments < needed:
        resolution = math.pi * (hi - lo) / 2 / cfg.moments
        raise ConfigError(f"disorder.moments: got {cfg.moments}; their resolution pi a/M = {resolution:.3g} t is wider "
                          f"than half the clean gap at E_F ({width:.3g} t); expected at least {needed}")
    moments = cfg.moments if cfg.moments is not None else (moments_for_gap(width, hi - lo, digits=6.0) if finite
                                                            else 256)
    region = clean.central(cfg.region)
    bottom = min(b.energy_min for b in chern.bands)
    top = min(max(b.energy_max for b in chern.bands), ef + 1.5 * (ef - bottom))
    energies = np.linspace(bottom, top, cfg.energies)
    steps = tuple((float(g.energy_min), float(g.energy_max), int(g.chern)) for g in chern.gaps
                  if g.energy_max > bottom and g.energy_min < top)

    # The marker map at disorder.strength, seed 0.
    flake = clean.with_disorder(cfg.strength, seed=0)
    with progress.stage("marker map"):
        if flake.size <= DENSE_UP_TO:
            map_sites, method = np.arange(flake.sites), "dense"
            map_marker = local_chern_marker(flake, ef)
        else:
            stride = max(1, int(math.ceil(math.sqrt(flake.sites / MAP_SITES))))
            map_sites = _grid_subset(flake.positions, stride)
            map_marker, method = local_chern_marker_kpm(flake, ef, map_sites, moments=moments), "kpm"

    strengths = np.asarray(cfg.strengths, dtype=float)
    bar = None
    if hallbar_view(s):
        from .hallbar_scan import hallbar_aspect, hallbar_system

        bar = hallbar_system(s)
        aspect = hallbar_aspect(s)
        r_xy = np.full((strengths.size, cfg.seeds), np.nan)
        r_xx = np.full((strengths.size, cfg.seeds), np.nan)
    marker = np.empty((strengths.size, cfg.seeds))
    sigma = np.empty((strengths.size, cfg.seeds, energies.size))
    sigma_fermi = np.empty((strengths.size, cfg.seeds))
    with progress.stage(f"disorder: {strengths.size} strengths x {cfg.seeds} seeds", strengths.size * cfg.seeds) as st:
        for i, w in enumerate(strengths):
            for seed in range(cfg.seeds):
                name = f"W{w!r}_seed{seed}_M{moments}_R{cfg.vectors}_E{cfg.energies}"
                if bar is not None:
                    name += f"_H{s.hallbar.length}x{s.hallbar.width}"
                point = store.load(name)
                if point is None:
                    dis = clean.with_disorder(float(w), seed=seed)
                    if dis.size <= DENSE_UP_TO:
                        m = float(local_chern_marker(dis, ef)[region].mean())
                    else:
                        m = float(local_chern_marker_kpm(dis, ef, region, moments=moments).mean())
                    values = hall_conductivity_kpm(dis, [*energies, ef], sites=region, moments=moments,
                                                   vectors=cfg.vectors, seed=seed)
                    point = {"marker": m, "sigma": values[:-1], "sigma_fermi": float(values[-1])}
                    if bar is not None:
                        point.update(_hallbar_point(bar, ef, float(w), seed))
                    store.save(name, point)
                if bar is not None:
                    r_xy[i, seed], r_xx[i, seed] = point["r_xy"], point["r_xx"]
                marker[i, seed] = point["marker"]
                sigma[i, seed] = point["sigma"]
                sigma_fermi[i, seed] = point["sigma_fermi"]
                st.update(1)
    return DisorderResult(
        scenario=s, fermi_energy=float(ef), gap=gap, chern=int(gap.chern), flake_sites=clean.sites,
        orbitals=clean.orbitals, region_sites=int(region.size), moments=int(moments),
        resolution=math.pi * (hi - lo) / 2 / moments, vectors=cfg.vectors,
        map_strength=float(cfg.strength), map_sites=map_sites, map_marker=np.asarray(map_marker),
        positions=clean.positions, map_method=method, strengths=strengths, seeds=cfg.seeds, marker=marker,
        energies=energies, sigma=sigma, sigma_fermi=sigma_fermi, clean_steps=steps,
        hallbar_r_xy=None if bar is None else r_xy, hallbar_r_xx=None if bar is None else r_xx,
        hallbar_size=None if bar is None else (s.hallbar.length, s.hallbar.width),
        hallbar_aspect=1.0 if bar is None else aspect, units=model.units,
        strength_unit=model.given.disorder.unit,
        seconds=time.perf_counter() - start)


def _hallbar_point(bar, ef: float, strength: float, seed: int) -> dict:
    """R_xy and R_xx (h/e^2) of the Hall bar at E_F for one disorder realisation (NaN when unsolvable)."""
    from ..solvers.transport import hall_resistances

    fsyst, params = bar
    try:
        r = hall_resistances(fsyst, ef, {**params, "disorder": strength, "seed": seed})
    except ValueError:                    # a closed lead or a singular probe system at this realisation
        return {"r_xy": math.nan, "r_xx": math.nan}
    return {"r_xy": float(r.r_xy), "r_xx": float(r.r_xx)}


def _grid_subset(positions: np.ndarray, stride: int) -> np.ndarray:
    """Sites on every ``stride``-th row and column (by rounded position), at most about MAP_SITES."""
    cells = np.floor(positions / stride).astype(int)
    _, first = np.unique(cells, axis=0, return_index=True)
    return np.sort(first)
