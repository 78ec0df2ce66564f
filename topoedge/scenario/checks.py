"""Checks of key combinations, run once a scenario's keys are converted.

One-line :class:`ConfigError` messages ``<key>: <what was wrong>; expected
<what>``: mutually exclusive keys, keys that belong to another lattice,
the self-consistent run's requirements and the physical units (which derive
the lattice model from [material] and [field] with :mod:`topoedge.scenario.units`).
"""

from __future__ import annotations

from .units import Derived, UnitsError, derive
from .sections import ConfigError, Scenario
from ..models.bar_layout import check_layout, probe_layout, validate_probes
from ..models.lattices import LATTICES, lattice
from ..models.profiles import EDGE_PROFILES
from .schema import fraction_text

__all__ = ["check_combinations", "check_hallbar", "ribbon_span", "derive_units", "MATERIAL_KEYS"]


def edge_potential_at(d, edge):
    """The edge potential (t) of ``ribbon.edge`` at distances ``d`` (a) from the edge."""
    import numpy as np

    return EDGE_PROFILES[edge.profile](np.asarray(d, dtype=float), width=edge.width, height=edge.height,
                                       table=edge.table)


def check_combinations(s: Scenario) -> None:
    """Constraints that involve more than one key."""
    edge, width = s.ribbon.edge, s.ribbon.width
    span = ribbon_span(s)
    if edge.width > span / 2:
        unit = lattice(s.lattice.kind).length_unit
        across = f", {span:g} {unit} across" if unit != "a" else ""
        raise ConfigError(f"ribbon.edge.width: got {edge.width!r}, wider than half the ribbon "
                          f"(ribbon.width = {width}{across}); expected at most {span / 2:g}")
    if edge.profile == "table" and not edge.table:
        raise ConfigError("ribbon.edge.table: empty, but ribbon.edge.profile = 'table' needs it; "
                          "expected at least one [distance, potential] row")
    if edge.table and edge.profile != "table":
        raise ConfigError(f"ribbon.edge.table: given with ribbon.edge.profile = "
                          f"{edge.profile!r}; expected no table for that profile "
                          "(set ribbon.edge.profile = 'table' to use it)")
    _check_units(s)
    if s.hallbar.enabled:
        check_hallbar(s)
    if s.fermi.energy is not None and s.fermi.gap is not None:
        raise ConfigError(f"fermi.gap: got {s.fermi.gap} together with fermi.energy = "
                          f"{s.fermi.energy!r}; expected only one of them")
    if not s.disorder.strengths:
        raise ConfigError("disorder.strengths: empty; expected a non-empty array of distinct strengths >= 0 in t "
                          "(e.g. [0.0, 1.0, 2.0])")
    if s.disorder.unit == "meV" and s.field.b_tesla is None:
        raise ConfigError("disorder.unit: got 'meV' without field.b_tesla; expected 't', or [material] and "
                          "[field] that give t in meV")
    if s.interaction.enabled:
        _check_interaction(s)
    _check_lattice(s)
    if s.spin.zeeman != 0 and not s.spin.enabled:
        raise ConfigError(f"spin.zeeman: got {s.spin.zeeman!r} with spin.enabled = false; "
                          f"expected 0 without spin (spin.zeeman = {s.spin.zeeman!r} needs "
                          "spin.enabled = true)")


#: Most sites of a Hall bar (length x width) the checks let through to the memory estimate.
HALLBAR_MAX_SITES = 10**8


def check_hallbar(s: Scenario) -> None:
    """The Hall bar of ``[hallbar]`` (used by the run with ``hallbar.enabled`` and by ``topoedge hallbar``)."""
    bar, edge = s.hallbar, s.ribbon.edge
    if bar.width <= 2 * edge.width:
        raise ConfigError(f"hallbar.width: got {bar.width}, not wider than the two edge ramps "
                          f"(2 x ribbon.edge.width = {2 * edge.width:g}); expected a wider bar")
    if bar.length * bar.width > HALLBAR_MAX_SITES:
        raise ConfigError(f"hallbar.length x hallbar.width: got {bar.length} x {bar.width} = "
                          f"{bar.length * bar.width:.3g} sites; expected at most {HALLBAR_MAX_SITES:.0e} sites "
                          "(a kwant site takes about 2 KB: beyond that no machine holds the bar)")
    potential = None
    if edge.profile != "none":
        def potential(d):
            return edge_potential_at(d, edge)
    try:
        check_layout(bar.length, bar.width, potential)
    except ValueError as err:
        probe, _ = probe_layout(bar.length, bar.width, potential)
        # the probes sit at the quarter points: the shortest bar that holds them, found without building
        shortest = next((n for n in range(bar.length + 1, bar.length + 4 * probe + 64)
                         if _probes_fit(n, probe)), None)
        hint = (f"expected hallbar.length >= {shortest}" if shortest and "narrower" not in str(err)
                else "expected a longer or wider bar, or a narrower ribbon.edge.width")
        raise ConfigError(f"hallbar.length: got {bar.length} with hallbar.width = {bar.width}: {err}; "
                          f"{hint}") from None


def _probes_fit(length: int, probe: int) -> bool:
    try:
        validate_probes(length, probe, (length // 4 - probe // 2, 3 * length // 4 - probe // 2))
    except ValueError:
        return False
    return True


def ribbon_span(s: Scenario) -> float:
    """Distance between the outermost sites of the two edges (a, or a_cc on the honeycomb lattice).

    Square: ``W`` rows span ``W - 1``. Honeycomb (``a_cc = 1``): ``N`` zigzag
    chains span ``3 N / 2 - 1``, ``N`` dimer lines ``(N - 1) sqrt(3) / 2``
    (the geometry of `topoedge.models.honeycomb`).
    """
    return lattice(s.lattice.kind).span(s.ribbon.width, s.ribbon.orientation)


def _check_lattice(s: Scenario) -> None:
    """Keys that belong to one lattice, and what the honeycomb lattice does not have yet."""
    lat = s.lattice
    if s.spin.rashba != 0 and not s.spin.enabled:
        raise ConfigError(f"spin.rashba: got {s.spin.rashba!r} with spin.enabled = false; expected 0 "
                          "without spin (the Rashba term couples the two spins)")
    for enabled, key, what in ((s.interaction.enabled, "interaction.enabled", "[interaction]"),
                               (s.hallbar.enabled, "hallbar.enabled", "the Hall bar")):
        if enabled and s.spin.rashba != 0:
            raise ConfigError(f"spin.rashba: got {s.spin.rashba!r} with {what}, which needs S_z conserved "
                              f"(no Rashba term); expected 0 or {key} = false")
    entry = lattice(lat.kind)
    if entry.in_field and lat.flux == 0 and s.field.b_tesla is None:
        zero_field = [kind for kind, other in LATTICES.items() if not other.in_field]
        raise ConfigError(f"lattice.flux: got '0' on the {entry.title}; expected a nonzero flux p/q (without "
                          "a field there are no Landau levels, no Hall plateau and no chiral edge; topology "
                          f"at zero field: lattice.kind = {' or '.join(map(repr, zero_field))})")
    if entry.in_field and s.field.b_tesla is None and lat.flux.denominator > s.field.q_max:
        raise ConfigError(f"lattice.flux: got '{fraction_text(lat.flux)}'; expected a denominator of at most "
                          f"field.q_max = {s.field.q_max} (the magnetic cell holds {entry.cell_sites_per_q} x q "
                          "sites; raise field.q_max to go further)")
    if entry.in_field and s.field.b_tesla is None and lat.flux != 0:
        length = entry.scales(lat)["magnetic_length_a"]
        span = ribbon_span(s)
        if span < 2 * length:
            unit = entry.length_unit
            raise ConfigError(f"ribbon.width: got {s.ribbon.width} ({span:g} {unit} across), less than two "
                              f"magnetic lengths at flux {fraction_text(lat.flux)} (l_B = {length:.3g} {unit}): "
                              "no Landau level fits between the edges; expected a wider ribbon or a larger flux")
    if s.fermi.gap is not None and (s.field.b_tesla is None or not entry.in_field):
        q = lat.flux.denominator if entry.in_field else 1
        spins = 2 if entry.in_field and s.spin.enabled else 1
        bands = entry.cell_sites_per_q * q * entry.orbitals_per_site * spins
        if s.fermi.gap >= bands:
            per = f": {bands // spins} per spin x 2 spins" if spins == 2 else ""
            raise ConfigError(f"fermi.gap: got {s.fermi.gap}; expected 1 <= gap < {bands} (the number of bulk "
                              f"bands of the {entry.title}{f' at flux {fraction_text(lat.flux)}' if q > 1 else ''}"
                              f"{per})")
    for name in ("staggered", "t2", "t2_phase", "mass"):
        key, value = f"lattice.{name}", getattr(lat, name)
        kinds = [kind for kind, other in LATTICES.items() if name in other.own_keys]
        if value != 0 and name not in entry.own_keys:
            raise ConfigError(f"{key}: got {value!r} with lattice.kind = {lat.kind!r}; expected 0 (it belongs "
                              f"to lattice.kind = {' or '.join(map(repr, kinds))})")
    if s.chern.solver == "landau" and ("landau" not in entry.supports or s.spin.rashba != 0
                                       or (s.field.b_tesla is None and lat.flux.denominator < 3)
                                       or (s.field.b_tesla is None and lat.flux == 0)):
        why = (f"lattice.kind = {lat.kind!r}" if "landau" not in entry.supports else
               f"spin.rashba = {s.spin.rashba!r} (S_z not conserved)" if s.spin.rashba != 0 else
               f"lattice.flux = {fraction_text(lat.flux)} (fewer than 3 bands per spin)")
        raise ConfigError(f"chern.solver: got 'landau' with {why}; expected 'auto' or 'dense' (the "
                          "Landau-level solver is built for the square lattice with S_z conserved)")
    allowed = entry.orientations
    if s.ribbon.orientation is not None and s.ribbon.orientation not in allowed:
        plain_lattice = entry.in_field and not allowed       # e.g. the square lattice
        where = f"on the {entry.title}" if plain_lattice else f"with lattice.kind = {lat.kind!r}"
        having = [kind for kind, other in LATTICES.items() if s.ribbon.orientation in other.orientations
                  and other.in_field]
        hint = ""
        if plain_lattice and having:
            every = " and ".join(LATTICES[having[0]].orientations)
            hint = f" ({every} edges need lattice.kind = {having[0]!r})"
        raise ConfigError(f"ribbon.orientation: got {s.ribbon.orientation!r} {where}; expected no orientation"
                          + "".join(f" or {o!r}" for o in allowed) + hint)
    for enabled, key, what, feature in (
        (s.field.b_tesla is not None, "field.b_tesla", "[material] and [field]", "physical_units"),
        (s.interaction.enabled, "interaction.enabled", "[interaction]", "interaction"),
        (s.hallbar.enabled, "hallbar.enabled", "the Hall bar", "hallbar"),
    ):
        if enabled and feature not in entry.supports:
            raise ConfigError(f"{key}: {what} with lattice.kind = {lat.kind!r}; expected the square lattice "
                              f"({what} is built for the square lattice only)")


def _check_interaction(s: Scenario) -> None:
    """A self-consistent scenario: spinful, filling given, edge from the background only."""
    inter, width = s.interaction, s.ribbon.width
    physical = s.field.b_tesla is not None
    if not s.spin.enabled:
        raise ConfigError("spin.enabled: false with [interaction]; expected true (the self-consistent "
                          "run has both spins)")
    if s.ribbon.edge.profile != "none":
        raise ConfigError(f"ribbon.edge.profile: got {s.ribbon.edge.profile!r} with [interaction], where the "
                          "edge is the potential of the background charge (interaction.background.*); "
                          "expected 'none'")
    if s.hallbar.enabled:
        raise ConfigError("hallbar.enabled: true with [interaction]; expected false (the Hall bar is "
                          "not interacting)")
    if s.fermi.energy is not None or s.field.fermi_mev is not None:
        key = "field.fermi_mev" if physical else "fermi.energy"
        raise ConfigError(f"{key}: given with [interaction], where the electron number equals the "
                          "background charge; expected fermi.gap (bands filled in the bulk) or "
                          "field.density_cm2 instead")
    if s.fermi.gap is None and s.field.density_cm2 is None:
        raise ConfigError("fermi.gap: missing with [interaction]; expected the number of bulk bands "
                          "filled (e.g. fermi.gap = 1 for nu = 1 at flux 1/q), or field.density_cm2")
    if inter.coulomb is None and not physical:
        raise ConfigError("interaction.coulomb: missing; expected U_C in t, or [material] and [field] "
                          "to derive it from the permittivity")
    if inter.coulomb is not None and physical:
        raise ConfigError("interaction.coulomb: given together with [material] and [field], which set it "
                          "(e^2/(4 pi eps0 eps_r a)); expected only one of them")
    for w in (inter.background.width, *inter.scan_widths):
        key = "interaction.background.width" if w == inter.background.width else "interaction.scan_widths"
        if w > width / 2:
            raise ConfigError(f"{key}: got {w!r}, wider than half the ribbon (ribbon.width = {width}); "
                              f"expected at most {width / 2:g}")
    if inter.background.setback >= width / 2:
        raise ConfigError(f"interaction.background.setback: got {inter.background.setback!r}, which leaves "
                          f"no background in a ribbon of {width} rows, so nothing can neutralise the "
                          f"electrons; expected less than {width / 2:g}")


MATERIAL_KEYS = ("effective_mass", "g_factor", "permittivity", "lattice_constant_nm")


def _check_units(s: Scenario) -> None:
    """The [material] and [field] sections: complete, consistent, usable."""
    fld, mat = s.field, s.material
    if fld.b_tesla is None:
        for name in ("fermi_mev", "density_cm2"):
            if getattr(fld, name) is not None:
                raise ConfigError(f"field.{name}: given without field.b_tesla; expected a field in tesla")
        return
    if fld.fermi_mev is not None and fld.density_cm2 is not None:
        raise ConfigError(f"field.density_cm2: got {fld.density_cm2!r} together with field.fermi_mev = "
                          f"{fld.fermi_mev!r}; expected only one of them")
    missing = [name for name in MATERIAL_KEYS if getattr(mat, name) is None]
    if missing:
        raise ConfigError(f"material.{missing[0]}: missing, but field.b_tesla needs it; expected a value "
                          "or material.preset (e.g. 'gaas')")
    derived = derive_units(s)
    if fld.density_cm2 is not None and derived.filling < 0.5:
        raise ConfigError(f"field.density_cm2: got {fld.density_cm2!r}, filling factor {derived.filling:.3f} "
                          "at this field: no filled Landau level; expected a density giving filling >= 0.5")


def derive_units(s: Scenario) -> Derived:
    """Lattice parameters of the scenario's material and field (``field.b_tesla`` set)."""
    mat, fld = s.material, s.field
    try:
        a = None if mat.lattice_constant_nm == "auto" else mat.lattice_constant_nm
        return derive(effective_mass=mat.effective_mass, g_factor=mat.g_factor,
                      permittivity=mat.permittivity, lattice_constant_nm=a,
                      b_tesla=fld.b_tesla, fermi_mev=fld.fermi_mev, density_cm2=fld.density_cm2,
                      q_max=fld.q_max, tolerance=fld.tolerance, onsite_t=s.lattice.onsite,
                      spin=s.spin.enabled)
    except UnitsError as err:
        raise ConfigError(str(err)) from None


