"""What every figure shares: display units (lattice or meV / nm / 1/nm), markers, colours, titles."""

from __future__ import annotations

from dataclasses import dataclass
import numpy as np
from ..models.lattices import lattice
from ..solvers.spectrum import RibbonSpectrum


SPIN_MARKERS = {"up": "^", "down": "v", "none": "o"}


@dataclass(frozen=True)
class Display:
    """Units of the figure axes: lattice units by default, meV / nm / 1/nm for physical scenarios.

    ``energy(E) = (E - energy_zero) * energy_scale``, ``momentum(k) = k *
    k_scale``, ``length(y) = y * length_scale``.
    """

    energy_unit: str = "$t$"
    energy_scale: float = 1.0
    energy_zero: float = 0.0
    energy_label: str = "$E$"
    k_unit: str = "$1/a$"
    k_scale: float = 1.0
    length_unit: str = "a"
    length_scale: float = 1.0
    magnetic_length: float | None = None     # in length units, for a second scale

    @property
    def physical(self) -> bool:
        return self.energy_unit == "meV"

    def energy(self, e):
        return (np.asarray(e, dtype=float) - self.energy_zero) * self.energy_scale

    def momentum(self, k):
        return np.asarray(k, dtype=float) * self.k_scale

    def length(self, y):
        return np.asarray(y, dtype=float) * self.length_scale


def display_units(result) -> Display:
    """The :class:`Display` of a run: physical with ``[material]`` and ``[field]``, else lattice units."""
    units = getattr(result, "units", None)
    if units is None:
        return Display()
    a = units.lattice_constant_nm
    return Display(energy_unit="meV", energy_scale=units.hopping_mev,
                   energy_zero=-4.0 + result.scenario.lattice.onsite,
                   energy_label="$E$ above the band bottom", k_unit="1/nm", k_scale=1.0 / a,
                   length_unit="nm", length_scale=a, magnetic_length=units.magnetic_length_nm)


def default_energy_range(spec: RibbonSpectrum, fermi_energy: float | None) -> tuple[float, float]:
    """Energy range that shows the bands from the bottom to well above E_F."""
    if spec.window is not None:
        return spec.window
    e = spec.energy[np.isfinite(spec.energy)]
    lo, hi = float(e.min()), float(e.max())
    if fermi_energy is None or not lo < fermi_energy < hi:
        pad = 0.03 * (hi - lo)
        return lo - pad, hi + pad
    top = min(hi, fermi_energy + 1.5 * (fermi_energy - lo))
    pad = 0.05 * (top - lo)
    return lo - pad, top + pad


EDGE_COLOURS = {"bottom": "#08306b", "top": "#67000d", "bulk": "k"}


def title_of(result) -> str:
    sc = result.scenario
    units = getattr(result, "units", None)
    if units is not None:
        field = sc.field
        carriers = ""
        if units.filling is not None:
            mantissa, exponent = f"{field.density_cm2:.3e}".split("e")
            carriers = (f", $n$ = ${float(mantissa):g}\\times 10^{{{int(exponent)}}}$ cm$^{{-2}}$, "
                        f"$\\nu$ = {units.filling:.3f}")
        elif field.fermi_mev is not None:
            carriers = f", $E_F$ = {field.fermi_mev:g} meV"
        exact = abs(units.b_relative_error) < 1e-12
        lattice_b = "exactly" if exact else f"{units.b_lattice_tesla:.4f} T"
        return (f"{sc.title or 'scenario'}\n$B$ = {units.b_tesla:g} T along {'+z' if units.b_tesla > 0 else '-z'}"
                f"{carriers}\nlattice $a$ = {units.lattice_constant_nm:.3g} nm, flux {sc.lattice.flux} "
                f"$h/e$ per plaquette ({lattice_b})")
    entry = lattice(sc.lattice.kind)
    if not entry.in_field:
        return f"{sc.title or 'scenario'}: {entry.title}"
    return f"{sc.title or 'scenario'}: flux {sc.lattice.flux} per {entry.cell}"


def ribbon_geometry(result) -> tuple[tuple[float, float] | None, str, str]:
    """Colour extent, period and length unit of a run's ribbon for the figures."""
    sc = result.scenario
    entry = lattice(sc.lattice.kind)
    if entry.length_unit == "a":
        return None, "a", "sites; 0 = bottom edge"
    pos = result.hamiltonian.position
    period = entry.periods[sc.ribbon.orientation or entry.orientations[0]]
    return (float(pos.min()), float(pos.max())), period, entry.length_unit


