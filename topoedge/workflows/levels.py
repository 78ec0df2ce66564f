"""Interaction-driven level ordering of the bulk: which spin-split Landau levels the exchange fills.

``levels_run(scenario)`` takes a scenario in a field, finds its filling
factor nu, its interaction strength ``lambda = E_C / hbar omega_c`` and its
Zeeman ratio ``z = Delta_Z / hbar omega_c``, and computes with the
continuum Hartree-Fock energies of filled Landau levels
(:mod:`topoedge.solvers.landau_exchange`):

- the ground-state set of filled levels over the plane (lambda, z) up to
  ``levels.coulomb_max`` and ``levels.zeeman_max`` (the level-ordering
  diagram), with the exact first-order transition lines;
- the transitions along lambda at the scenario's z, and the ground state,
  the activation gap and its kind (spin or cyclotron) at the scenario's
  point;
- for a scenario with ``[material]`` and ``[field]``: the exchange-enhanced
  activation gaps in meV at every filling 1 .. ``levels.max_filling``
  against B (``levels.fields``), beside the bare cyclotron and Zeeman
  energies.

Where the scenario's numbers come from: physical scenarios take E_C,
hbar omega_c and Delta_Z from the material at the field asked for; lattice
scenarios take ``E_C = U_C a / l_B`` from ``interaction.coulomb`` and the
continuum ``hbar omega_c = 4 pi |phi| t`` of the flux, and ``Delta_Z`` from
``spin.zeeman``. A metal gate (``interaction.gate_distance``, in a) screens
the interaction at ``d / l_B``.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np

from ..models.lattices import lattice
from ..scenario import ConfigError, Model, Scenario, resolve
from ..solvers.landau_exchange import FilledSet, candidate_sets, exchange_matrix, ground_state, lower_envelope
from ..util.progress import as_progress

__all__ = ["LevelsResult", "levels_run", "check_levels", "scenario_point", "MAX_FILLING"]

#: Largest filling factor of the diagram.
MAX_FILLING = 12


@dataclass(frozen=True)
class ScenarioPoint:
    """The scenario's place in the diagram: filling, E_C / hbar omega_c, Delta_Z / hbar omega_c, gate."""

    filling: int
    filling_exact: float | None
    coulomb: float
    zeeman: float
    gate: float | None          # d / l_B
    cyclotron_mev: float | None
    source: str                 # where lambda came from


@dataclass(frozen=True, eq=False)
class LevelsResult:
    """What :func:`levels_run` computed (energies in hbar omega_c unless named *_mev)."""

    scenario: Scenario
    point: ScenarioPoint
    sets: tuple[FilledSet, ...]
    coulomb_axis: np.ndarray
    zeeman_axis: np.ndarray
    diagram: np.ndarray                   # (zeeman, coulomb) index into sets
    lines: tuple                          # per zeeman row: ((lambda, before, after), ...)
    along: tuple                          # pieces (start, end, index) along lambda at the scenario's z
    ground: int                           # index of the scenario's ground state
    gap: float                            # activation gap at the scenario's point
    gap_kind: str
    gap_levels: tuple                     # (highest filled, lowest empty)
    exchange: np.ndarray                  # X_nm (E_C) of the scenario's gate
    fields: np.ndarray | None = None      # (B,) tesla
    field_gaps: np.ndarray | None = None  # (nu, B) activation gaps, meV
    field_kinds: tuple | None = None      # (nu, B) "spin" or "cyclotron"
    field_sets: tuple | None = None       # (nu, B) ground-state labels
    field_transitions: tuple = ()         # (nu, B, before, after)
    cyclotron_mev: np.ndarray | None = None
    zeeman_mev: np.ndarray | None = None
    lattice: object = None                # LatticeLevels of the lattice part, or None
    lattice_note: str | None = None       # why there is no lattice part
    units: object = None
    seconds: float = 0.0
    warnings: tuple = field(default_factory=tuple)

    def to_dict(self) -> dict:
        from .. import __version__

        p = self.point
        best = self.sets[self.ground]
        top, bottom = self.gap_levels
        out = {
            "topoedge_version": __version__, "title": self.scenario.title, "source": self.scenario.source,
            "config": self.scenario.to_dict(),
            "units": "energies per flux quantum and gaps in hbar omega_c; lambda = E_C / hbar omega_c, "
                     "z = Delta_Z / hbar omega_c; *_mev in meV, fields in T",
            "method": "continuum Hartree-Fock of filled Landau levels (exchange only; neutralising background; "
                      "no Landau-level mixing)",
            "filling": p.filling, "filling_exact": p.filling_exact, "coulomb_ratio": p.coulomb,
            "zeeman_ratio": p.zeeman, "gate_lb": p.gate, "coulomb_from": p.source,
            "ground_state": {"levels": best.label, "polarisation": best.polarisation,
                             "energy": float(best.energy(p.coulomb, p.zeeman))},
            "candidates": [{"levels": s.label, "energy": float(s.energy(p.coulomb, p.zeeman)),
                            "polarisation": s.polarisation} for s in self.sets],
            "gap": {"value": self.gap, "kind": self.gap_kind, "highest_filled": top.label,
                    "lowest_empty": bottom.label,
                    "mev": None if p.cyclotron_mev is None else self.gap * p.cyclotron_mev},
            "transitions": [{"coulomb_ratio": float(end), "before": self.sets[i].label,
                             "after": self.sets[j].label}
                            for (_, end, i), (_, _, j) in zip(self.along, self.along[1:])],
            "exchange_integrals": [[float(v) for v in row] for row in self.exchange],
            "lattice": (self.lattice.to_dict(self.sets, p.cyclotron_mev) if self.lattice is not None
                        else {"skipped": self.lattice_note}),
            "warnings": list(self.warnings), "seconds": self.seconds,
        }
        if self.fields is not None:
            out["against_field"] = {
                "fields_t": [float(b) for b in self.fields],
                "cyclotron_mev": [float(v) for v in self.cyclotron_mev],
                "zeeman_mev": [float(v) for v in self.zeeman_mev],
                "gaps_mev": {str(nu + 1): [float(v) for v in row] for nu, row in enumerate(self.field_gaps)},
                "transitions": [{"filling": nu, "b_tesla": b, "before": before, "after": after}
                                for nu, b, before, after in self.field_transitions],
            }
        return out


def scenario_point(s: Scenario, units) -> ScenarioPoint:
    """Filling, lambda, z and gate of a scenario in lattice units (``units``: its physical units or None).

    Raises
    ------
    ConfigError
        Without a field, without an interaction strength, or for a filling
        that is not a positive integer within the levels the model holds.
    """
    entry = lattice(s.lattice.kind)
    if not entry.in_field:
        raise ConfigError(f"lattice.kind: got {s.lattice.kind!r}, a zero-field model; expected a lattice in a "
                          "field (Landau levels): " + ", ".join(k for k in ("square", "honeycomb")))
    phi = abs(float(s.lattice.flux))
    length_a = math.sqrt(1.0 / (2 * math.pi * phi))              # l_B / a
    cyclotron_t = 4 * math.pi * phi                                # continuum hbar omega_c, t
    bands_per_level = abs(s.lattice.flux.numerator)
    filling_exact = None
    if units is not None:
        cyclotron_t = units.cyclotron_t
        lam = units.coulomb_mev / units.cyclotron_mev
        source = "[material] and [field]"
        filling_exact = units.filling
        if s.interaction.coulomb is not None:
            lam = s.interaction.coulomb * units.lattice_constant_nm / units.magnetic_length_nm / cyclotron_t
            source = "interaction.coulomb"
    elif s.interaction.coulomb is not None:
        lam = s.interaction.coulomb / length_a / cyclotron_t
        source = "interaction.coulomb"
    else:
        raise ConfigError("interaction.coulomb: unset and no [material] with [field]; expected an interaction "
                          "strength U_C > 0 in t, or a material and a field that give E_C")
    if not lam > 0:
        raise ConfigError(f"interaction.coulomb: got {s.interaction.coulomb!r}, E_C / hbar omega_c = {lam:.3g}; "
                          "expected an interaction > 0")
    zeeman = (s.spin.zeeman if s.spin.enabled else 0.0) / cyclotron_t
    if s.levels.filling is not None:
        filling = s.levels.filling
    elif filling_exact is not None:
        filling = max(1, round(filling_exact))
    elif s.fermi.gap is not None and s.fermi.gap % bands_per_level == 0:
        per_spin = 1 if s.spin.enabled else 2          # a spinless band stands for both spins of a level
        filling = s.fermi.gap // bands_per_level * per_spin
    else:
        raise ConfigError("levels.filling: unset, and the scenario has no density and no fermi.gap on a whole "
                          "number of Landau levels; expected levels.filling = nu (1 .. 12)")
    # the lattice holds Landau-like levels below its band centre: q/2 of them per spin
    held = 2 * max(1, s.lattice.flux.denominator // (2 * bands_per_level)) if units is None else MAX_FILLING
    if not 1 <= filling <= min(MAX_FILLING, held):
        raise ConfigError(f"levels.filling: got {filling}; expected a positive integer filling <= "
                          f"{min(MAX_FILLING, held)} (the spin-split Landau levels below the band centre at flux "
                          f"{s.lattice.flux})")
    gate = None
    if s.interaction.gate_distance is not None:
        a_over_lb = (units.lattice_constant_nm / units.magnetic_length_nm) if units is not None else 1 / length_a
        gate = s.interaction.gate_distance * a_over_lb
    return ScenarioPoint(filling=filling, filling_exact=filling_exact, coulomb=lam, zeeman=zeeman, gate=gate,
                         cyclotron_mev=None if units is None else units.cyclotron_mev, source=source)


def check_levels(s: Scenario, units) -> tuple[ScenarioPoint, tuple[str, ...]]:
    """Refuse bad input before any work; return the scenario's point and the warnings."""
    point = scenario_point(s, units)
    cfg = s.levels
    if cfg.fields and (len(cfg.fields) != 2 or not 0 < cfg.fields[0] < cfg.fields[1]):
        raise ConfigError(f"levels.fields: got {list(cfg.fields)}; expected an empty array or two fields "
                          "0 < B_min < B_max in tesla")
    if cfg.fields and units is None:
        raise ConfigError("levels.fields: given without field.b_tesla; expected [material] and [field] for the "
                          "gaps against the field")
    from .levels_lattice import check_lattice_grid, lattice_supported

    if lattice_supported(s) is None:
        check_lattice_grid(s, point.filling)
    warnings = []
    if abs(point.zeeman) >= 1:
        warnings.append(f"the Zeeman splitting is {abs(point.zeeman):.3g} hbar omega_c, larger than the "
                        "cyclotron gap: the levels of the two spins interleave and the diagram's spin-split "
                        "Landau-level picture no longer holds")
    if point.coulomb > cfg.coulomb_max:
        warnings.append(f"E_C / hbar omega_c = {point.coulomb:.3g} of the scenario lies beyond "
                        f"levels.coulomb_max = {cfg.coulomb_max:g}; the diagram does not reach it")
    return point, tuple(warnings)


def levels_run(scenario: Scenario | Model, *, progress=None, diagram: bool = True, store=None) -> LevelsResult:
    """The level-ordering diagram, the scenario's ground state and gap, and gaps against B (module notes).

    With ``diagram=False`` only the scenario's point is computed (continuum and
    lattice), as a point of a sweep: the diagram's axes hold the point alone,
    and there are no lattice samples along the interaction and no gaps against B.
    ``store`` (a :class:`~topoedge.util.points.PointStore`) makes the lattice
    part resumable (:func:`topoedge.workflows.levels_lattice.lattice_levels`).
    """
    start = time.perf_counter()
    model = resolve(scenario)
    s, units = model.scenario, model.units
    progress = as_progress(progress)
    point, warnings = check_levels(s, units)
    cfg = s.levels
    orbitals = point.filling + 2
    x = exchange_matrix(orbitals, gate=point.gate)
    sets = tuple(candidate_sets(point.filling, x))
    full = diagram                       # the name is reused for the ground-state map below
    points = cfg.points if full else 1
    with progress.stage(f"diagram: nu = {point.filling}, {points} x {points} points"):
        if full:
            coulomb_axis = np.linspace(0.0, max(cfg.coulomb_max, 0.0), cfg.points)
            zeeman_axis = np.linspace(min(0.0, 1.1 * point.zeeman), max(cfg.zeeman_max, 1.1 * point.zeeman),
                                      cfg.points)
        else:
            coulomb_axis, zeeman_axis = np.array([point.coulomb]), np.array([point.zeeman])
        diagram = ground_state(list(sets), coulomb_axis[None, :], zeeman_axis[:, None])
        lines = tuple(tuple((end, i, j) for (_, end, i), (_, _, j) in zip(pieces, pieces[1:]))
                      for pieces in (lower_envelope(list(sets), 0.0, coulomb_axis[-1], zeeman=z)
                                     for z in zeeman_axis))
        along = tuple(lower_envelope(list(sets), 0.0, max(coulomb_axis[-1], point.coulomb), zeeman=point.zeeman))
    ground = int(ground_state(list(sets), point.coulomb, point.zeeman))
    gap, kind, top, bottom = sets[ground].gap(point.coulomb, point.zeeman, x)
    extra = {}
    if units is not None and full:
        with progress.stage("gaps against the field"):
            extra = _against_field(s, units, cfg)
    from .levels_lattice import lattice_levels, lattice_supported

    note = lattice_supported(s)
    if note is None:
        found = lattice_levels(s, units, point, list(sets), zeeman_axis, progress=progress, samples=full,
                               store=store)
        extra["lattice"] = found
        if found.ground != ground:
            warnings = warnings + (f"the lattice (flux {found.flux}) fills {sets[found.ground].name}, the continuum "
                                   f"{sets[ground].name}: lattice corrections decide at this point",)
        strays = [c["levels"] for c in found.to_dict(list(sets), None)["candidates"] if not c["fills_its_levels"]]
        if strays:
            warnings = warnings + (f"on the lattice the solutions of {', '.join(strays)} hold other levels than "
                                   "their candidate's (a second self-consistent state; a coarse lattice)",)
        if not all(found.point_converged) or not found.converged.all():
            warnings = warnings + ("some lattice candidates did not converge (see lattice.candidates and "
                                   "lattice.samples in summary.json)",)
    return LevelsResult(
        scenario=s, point=point, sets=sets, coulomb_axis=coulomb_axis, zeeman_axis=zeeman_axis, diagram=diagram,
        lines=lines, along=along, ground=ground, gap=float(gap), gap_kind=kind, gap_levels=(top, bottom),
        exchange=x, units=units, seconds=time.perf_counter() - start, warnings=warnings, lattice_note=note,
        **extra)


def _against_field(s: Scenario, units, cfg) -> dict:
    """Activation gaps (meV) at fillings 1 .. max_filling for every field of ``levels.fields``."""
    from ..scenario.units import coulomb_mev, cyclotron_mev, magnetic_length_nm
    import scipy.constants as const

    mat = s.material
    b0 = abs(units.b_tesla)
    lo, hi = cfg.fields if cfg.fields else (b0 / 4, b0 * 4)
    fields = np.geomspace(lo, hi, cfg.field_points)
    hw = np.array([cyclotron_mev(mat.effective_mass, b) for b in fields])
    # signed Delta_Z = -g mu_B B (spin up lower for Delta_Z > 0), the convention of the lattice model
    zeeman_per_tesla = abs(mat.g_factor) * const.physical_constants["Bohr magneton"][0] / (1e-3 * const.e)   # meV/T
    zeeman_sign = -math.copysign(1.0, mat.g_factor) * math.copysign(1.0, units.b_tesla)
    dz = zeeman_sign * zeeman_per_tesla * fields
    gate_nm = None if s.interaction.gate_distance is None else s.interaction.gate_distance * units.lattice_constant_nm
    gaps = np.empty((cfg.max_filling, fields.size))
    kinds, labels, changes = [], [], []
    fixed = None if gate_nm is not None else exchange_matrix(cfg.max_filling + 2)

    def state(nu: int, b: float):
        """Ground state, gap (meV) and its kind at filling nu and field b (T)."""
        x = fixed if fixed is not None else exchange_matrix(cfg.max_filling + 2, gate=gate_nm / magnetic_length_nm(b))
        x = x[:nu + 2, :nu + 2]
        hw_b = cyclotron_mev(mat.effective_mass, b)
        lam, z = coulomb_mev(mat.permittivity, b) / hw_b, zeeman_sign * zeeman_per_tesla * b / hw_b
        sets = candidate_sets(nu, x)
        best = sets[int(ground_state(sets, lam, z))]
        gap, kind, _, _ = best.gap(lam, z, x)
        return best.label, gap * hw_b, kind

    for nu in range(1, cfg.max_filling + 1):
        row = [state(nu, b) for b in fields]
        gaps[nu - 1] = [g for _, g, _ in row]
        kinds.append(tuple(k for _, _, k in row))
        labels.append(tuple(label for label, _, _ in row))
        for j in range(1, fields.size):
            if row[j][0] != row[j - 1][0]:                 # a first-order transition: bisect to 1e-6 relative
                lo_b, hi_b = fields[j - 1], fields[j]
                while hi_b - lo_b > 1e-6 * hi_b:
                    mid = 0.5 * (lo_b + hi_b)
                    if state(nu, mid)[0] == row[j - 1][0]:
                        lo_b = mid
                    else:
                        hi_b = mid
                changes.append((nu, float(0.5 * (lo_b + hi_b)), row[j - 1][0], row[j][0]))
    return dict(fields=fields, field_gaps=gaps, field_kinds=tuple(kinds), field_sets=tuple(labels),
                field_transitions=tuple(changes), cyclotron_mev=hw, zeeman_mev=dz)
