"""Results of the Chern-number solvers: bands, band groups, gaps and their Chern sums (solver stage).

The records :func:`topoedge.solvers.chern.chern_numbers` and the Landau-level
solver :func:`topoedge.solvers.landau.landau_chern` return, and the error both
raise when a gap asked for is closed. Energies in units of the hopping ``t``;
Chern numbers in the sign convention of :mod:`topoedge.solvers.chern`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Band", "BandGroup", "Gap", "ChernResult", "GapClosedError", "SubspaceChern"]


class GapClosedError(ValueError):
    """A requested gap is closed, or an energy lies inside a bulk band.

    The message is in the solver's terms (bands, gaps, energies); ``gap`` is
    the number of bands below the gap asked for (None for an energy). The
    scenario layer adds the configuration key it came from.
    """

    def __init__(self, message: str, *, gap: int | None = None):
        super().__init__(message)
        self.gap = gap


@dataclass(frozen=True)
class Band:
    """One bulk band, bottom to top over all sectors (``index`` from 0)."""

    index: int
    spin: str | None
    sector_index: int
    chern: int | None          # None when the band touches a neighbour (see its group)
    energy_min: float
    energy_max: float
    group: int

    def to_dict(self) -> dict:
        return {"index": self.index, "spin": self.spin, "chern": self.chern,
                "energy_min": self.energy_min, "energy_max": self.energy_max, "group": self.group}


@dataclass(frozen=True)
class BandGroup:
    """Bands of one sector separated from the rest of the sector by gaps."""

    spin: str | None
    bands: tuple[int, ...]     # sector band indices
    chern: int
    chern_raw: float           # sum of F / 2 pi before rounding
    energy_min: float
    energy_max: float
    gap_above: float | None    # smallest direct gap to the next band of the sector, t
    link_min: float            # smallest |det| of the link overlaps (1 = smooth)


@dataclass(frozen=True)
class Gap:
    """A spectral gap of the bulk with ``below`` bands under it."""

    below: int
    energy_min: float
    energy_max: float
    chern: int
    spin_chern: dict | None    # {"up": int, "down": int} when S_z is conserved
    direct_gap: float          # smallest direct gap between the bands adjacent to it, per sector

    @property
    def middle(self) -> float:
        return 0.5 * (self.energy_min + self.energy_max)

    def to_dict(self) -> dict:
        return {"below": self.below, "energy_min": self.energy_min, "energy_max": self.energy_max,
                "chern": self.chern, "spin_chern": self.spin_chern, "direct_gap": self.direct_gap}


@dataclass(frozen=True)
class SubspaceChern:
    """Chern sum below a gap from the occupied subspace as a whole.

    Attributes
    ----------
    chern : int or None
        Total Chern number of the subspace (None when the check was skipped).
    spin_chern : dict or None
        ``{"up": int, "down": int}`` when S_z is conserved.
    link_min : float or None
        Smallest ``|det|`` of the link overlaps (near 0: grid too coarse).
    grid : tuple of int or None
        Momentum grid of the check.
    skipped : str or None
        Why the check was not made (the Landau-level check skips subspaces
        of many bands), None when it was.
    can_skip : bool
        Whether the check that produced it may skip (then ``skipped`` is part
        of its dictionary, null when it ran).
    """

    chern: int | None
    spin_chern: dict | None
    link_min: float | None
    grid: tuple[int, int] | None
    skipped: str | None = None
    can_skip: bool = False

    def to_dict(self) -> dict:
        out = {"chern": self.chern, "spin_chern": self.spin_chern, "link_min": self.link_min,
               "grid": list(self.grid) if self.grid is not None else None}
        if self.can_skip:
            out["skipped"] = self.skipped
        return out


@dataclass(frozen=True, eq=False)
class ChernResult:
    """Bands, groups and gaps of a bulk Hamiltonian on one grid."""

    grid: tuple[int, int]
    gap_min: float
    bands: tuple[Band, ...]
    groups: tuple[BandGroup, ...]
    gaps: tuple[Gap, ...]
    sectors: tuple = field(default=(None,))
    #: "dense" (every band at every grid point) or "landau" (the lowest bands
    #: only, :mod:`topoedge.solvers.landau`).
    solver: str = "dense"
    #: Number of all bands of the cell (None: ``len(bands)``, every band computed).
    total_bands: int | None = None
    #: Energy (t) above which bands were not computed (inf: all computed).
    energy_ceiling: float = np.inf

    def gap_at(self, energy: float) -> Gap:
        """The spectral gap containing ``energy``.

        Raises
        ------
        GapClosedError
            If ``energy`` lies inside a bulk band (naming it) or outside the spectrum.
        """
        for band in self.bands:
            if band.energy_min - self.gap_min <= energy <= band.energy_max + self.gap_min:
                spin = f", spin {band.spin}" if band.spin else ""
                raise GapClosedError(
                    f"E_F = {energy:.6g} t lies inside bulk band {band.index}{spin} "
                    f"({band.energy_min:.6g} .. {band.energy_max:.6g} t); E_F must be in a gap "
                    f"(open gaps near it: {self._gap_list(energy)})"
                )
        for gap in self.gaps:
            if gap.energy_min < energy < gap.energy_max:
                return gap
        if energy >= self.energy_ceiling:
            raise GapClosedError(f"E_F = {energy:.6g} t lies above the {len(self.bands)} bands computed "
                                 f"(up to {self.energy_ceiling:.6g} t); compute more bands")
        if energy < self.bands[0].energy_min:
            return Gap(0, -np.inf, self.bands[0].energy_min, 0, self._zero_spin(), np.inf)
        if energy > self.bands[-1].energy_max:
            return Gap(len(self.bands), self.bands[-1].energy_max, np.inf, 0, self._zero_spin(), np.inf)
        raise GapClosedError(f"E_F = {energy:.6g} t is in no open gap (open gaps near it: {self._gap_list(energy)})")

    def gap_above(self, r: int) -> Gap:
        """The gap above the ``r`` lowest bands (spin bands included), 1 <= r < N.

        Raises
        ------
        GapClosedError
            If that gap is closed, naming the overlapping bands or the direct gap.
        """
        n = self.total_bands or len(self.bands)
        if not 1 <= r < n:
            raise GapClosedError(f"expected 1 <= gap < {n} (the number of bulk bands)", gap=r)
        if r > len(self.bands):
            raise GapClosedError(f"only the lowest {len(self.bands)} bands were computed; "
                                 "compute more bands", gap=r)
        for gap in self.gaps:
            if gap.below == r:
                return gap
        lower, upper = self.bands[:r], self.bands[r:]
        top = max(b.energy_max for b in lower) + 0.0  # + 0.0: no "-0.000000" in the message
        bottom = min((b.energy_min for b in upper), default=self.energy_ceiling) + 0.0
        top, bottom = (0.0 if abs(x) < 5e-7 else x for x in (top, bottom))
        raise GapClosedError(
            f"the gap above band {r - 1} is closed (bands below reach {top:.6f} t, "
            f"bands above start at {bottom:.6f} t, minimum gap {self.gap_min:g} t); "
            f"open gaps near it: {self._gap_list(below=r)}", gap=r
        )

    def _zero_spin(self):
        return None if self.sectors == (None,) else {s: 0 for s in self.sectors}

    def _gap_list(self, energy: float | None = None, below: int | None = None, each_side: int = 2) -> str:
        """The open gaps nearest to ``energy`` (or to the gap above ``below`` bands), a few on each side."""
        gaps = list(self.gaps)
        if not gaps:
            return "none"
        if energy is not None:
            split = sum(g.energy_max <= energy for g in gaps)
        else:
            split = sum(g.below < (below or 0) for g in gaps)
        shown = gaps[max(split - each_side, 0):split + each_side]
        text = ", ".join(f"{g.below} ({g.energy_min:.4g} .. {g.energy_max:.4g} t)" for g in shown)
        more = len(gaps) - len(shown)
        return text + (f"; {more} more" if more else "")

    def to_dict(self) -> dict:
        return {"grid": list(self.grid), "gap_min": self.gap_min,
                "bands": [b.to_dict() for b in self.bands], "gaps": [g.to_dict() for g in self.gaps]}
