"""Edge modes of a ribbon at a Fermi energy (solver stage).

At a Fermi energy ``E_F`` every state of the ribbon spectrum with
``E_n(k) = E_F`` is a mode at the Fermi level. This module finds all of them,
refines each root, measures the state there (velocity, position and spread
across the ribbon, spin) and counts the modes per edge, direction and spin.
The net number of modes on one edge, counted with the sign of their velocity,
is the quantity the bulk-edge correspondence relates to the bulk Chern
numbers [1]_ [2]_.

The crossings are found by :func:`topoedge.solvers.crossings.find_crossings`
(a scan with rigorous interval decisions, refinement and root search; see
that module for the algorithm and the edge assignment).

Sign convention
---------------
Velocities are ``dE/dk`` in units of ``t a`` (``hbar = 1``) for Bloch waves
``exp(i k x)`` along ``+x``. For the builders of :mod:`topoedge.models.square`
with ``phi = p/q > 0`` the net number of bottom-edge modes in the ``r``-th
bulk gap is ``+t_r`` of the Diophantine equation ``r = q s_r + p t_r``,
``|t_r| <= q/2`` [1]_ [2]_, and the top edge carries ``-t_r``; reversing the
field flips both. In the Landau-level gaps at small ``phi`` (``t_r = r``)
the bottom-edge modes therefore move along ``+x`` (``dE/dk > 0``).

The crossing search itself and its references: :mod:`topoedge.solvers.crossings`.

References
----------
.. [1] D. J. Thouless, M. Kohmoto, M. P. Nightingale and M. den Nijs,
   "Quantized Hall conductance in a two-dimensional periodic potential",
   Phys. Rev. Lett. 49, 405 (1982).
.. [2] Y. Hatsugai, "Chern number and edge states in the integer quantum Hall
   effect", Phys. Rev. Lett. 71, 3697 (1993).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..systems.ribbon import RibbonHamiltonian
from .crossings import NEAR_GAP, EdgeMode, find_crossings
from .spectrum import k_grid

__all__ = ["EdgeMode", "EdgeSummary", "EdgeCount", "RibbonModes", "find_crossings", "count_edge_modes",
           "builder_edge_modes"]


# ------------------------------------------------------------------ results


@dataclass(frozen=True)
class EdgeSummary:
    """The modes of one edge at the Fermi energy.

    Attributes
    ----------
    net : int
        Sum of ``sign(velocity)`` over the modes of the edge (net chirality).
    counter_pairs : int
        ``(number of modes - |net|) // 2``: pairs of counter-propagating modes.
    by_spin : dict
        ``{"up": {"net": int, "counter_pairs": int}, "down": {...}}`` for a
        spinful ribbon, an empty dict for a spinless one. Modes whose spin is
        neither up nor down (``|<S_z>| <= 0.25``, possible only when ``S_z``
        is not conserved) count in ``net`` but in neither spin.
    modes : tuple of EdgeMode
        Ordered from the outer boundary inwards (bottom edge: increasing
        ``y``; top edge: decreasing ``y``).
    """

    net: int
    counter_pairs: int
    by_spin: dict
    modes: tuple[EdgeMode, ...]

    def to_dict(self) -> dict:
        """JSON-able dictionary ``{"net", "counter_pairs", "modes", "by_spin"}``."""
        return {
            "net": int(self.net),
            "counter_pairs": int(self.counter_pairs),
            "modes": [m.to_dict() for m in self.modes],
            "by_spin": {s: dict(v) for s, v in self.by_spin.items()},
        }


@dataclass(frozen=True)
class EdgeCount:
    """Edge modes of a ribbon at one Fermi energy.

    Attributes
    ----------
    fermi_energy : float
        ``E_F`` in units of t.
    bottom, top : EdgeSummary
        The modes of the bottom (small ``y``) and top edge.
    bulk : tuple of EdgeMode
        Crossings by delocalised states (``E_F`` lies in a bulk band), ordered
        by ``k``.
    touching : tuple of dict
        Bands that reach ``E_F`` within ``tol`` without crossing it (extrema,
        flat bands), each ``{"k", "energy", "y", "spin"}``.
    in_gap : bool
        True when there are no bulk crossings and no touching bands, i.e. the
        edge counts are well defined.
    message : str or None
        A plain sentence explaining why ``in_gap`` is False, else None.
    """

    fermi_energy: float
    bottom: EdgeSummary
    top: EdgeSummary
    bulk: tuple[EdgeMode, ...]
    touching: tuple[dict, ...]
    in_gap: bool
    message: str | None

    def to_dict(self) -> dict:
        """JSON-able dictionary of the count."""
        return {
            "fermi_energy": float(self.fermi_energy),
            "bottom": self.bottom.to_dict(),
            "top": self.top.to_dict(),
            "bulk": [m.to_dict() for m in self.bulk],
            "touching": [dict(t) for t in self.touching],
            "in_gap": bool(self.in_gap),
            "message": self.message,
        }


# ------------------------------------------------------------- public API


def _net(modes) -> tuple[int, int]:
    net = int(sum(np.sign(m.velocity) for m in modes))
    return net, (len(modes) - abs(net)) // 2


def _summary(modes: list[EdgeMode], spinful: bool, inward) -> EdgeSummary:
    modes = sorted(modes, key=inward)
    net, pairs = _net(modes)
    by_spin = {}
    if spinful:
        for label in ("up", "down"):
            n, p = _net([m for m in modes if m.spin == label])
            by_spin[label] = {"net": n, "counter_pairs": p}
    return EdgeSummary(net=net, counter_pairs=pairs, by_spin=by_spin, modes=tuple(modes))


def count_edge_modes(
    ham: RibbonHamiltonian,
    fermi_energy: float,
    *,
    k_points: int = 400,
    tol: float = 1e-9,
    bulk_spread: float | None = None,
    near_gap: float = NEAR_GAP,
) -> EdgeCount:
    """Count the modes per edge, direction and spin at a Fermi energy.

    Parameters
    ----------
    ham : RibbonHamiltonian
        The ribbon.
    fermi_energy : float
        ``E_F`` in units of t.
    k_points : int
        Points of the scan grid (see :func:`find_crossings`).
    tol : float
        Energy tolerance in t for a band touching ``E_F``.
    bulk_spread : float, optional
        Spread in lattice constants from which a state counts as bulk;
        default a quarter of the ribbon width ``(max(y) - min(y)) / 4``.
    near_gap : float
        See :func:`find_crossings`.

    Returns
    -------
    EdgeCount
        ``bottom.net`` and ``top.net`` are the net chiralities (sum of
        ``sign(dE/dk)``) of the two edges. They are meaningful when
        ``in_gap`` is True; otherwise ``message`` says why not (a bulk band
        or a touching band at ``E_F``), and the counts are not to be trusted.

    Raises
    ------
    TypeError, ValueError
        As :func:`find_crossings`.

    Notes
    -----
    In the ``r``-th gap of the bulk Hofstadter spectrum at flux ``p/q`` the
    net chirality of an edge equals the sum of the Chern numbers of the
    filled bulk bands, ``t_r`` of ``r = q s_r + p t_r`` [1]_ [2]_; edge
    potentials can add counter-propagating pairs but do not change ``net``.

    References
    ----------
    .. [1] D. J. Thouless, M. Kohmoto, M. P. Nightingale and M. den Nijs,
       Phys. Rev. Lett. 49, 405 (1982).
    .. [2] Y. Hatsugai, Phys. Rev. Lett. 71, 3697 (1993).

    Examples
    --------
    >>> from topoedge.models.square import ribbon_builder, model_params
    >>> ham = RibbonHamiltonian.from_kwant(ribbon_builder(41, spin=False),
    ...                                    params=model_params(phi=1/3))
    >>> count = count_edge_modes(ham, -1.4)   # lowest gap of phi = 1/3
    >>> count.in_gap, count.bottom.net, count.top.net
    (True, 1, -1)
    """
    crossings, touching = find_crossings(
        ham, fermi_energy, k_points=k_points, tol=tol, bulk_spread=bulk_spread, near_gap=near_gap
    )
    fermi_energy = float(fermi_energy)
    spinful = ham.sz is not None
    bottom = _summary([m for m in crossings if m.edge == "bottom"], spinful, lambda m: m.y)
    top = _summary([m for m in crossings if m.edge == "top"], spinful, lambda m: -m.y)
    bulk = tuple(sorted((m for m in crossings if m.edge == "bulk"), key=lambda m: m.k))
    in_gap = not bulk and not touching
    message = None
    if not in_gap:
        parts = []
        if bulk:
            parts.append(
                f"E_F = {fermi_energy:.6g} t lies in a bulk band: {len(bulk)} delocalised "
                f"state{'s' if len(bulk) != 1 else ''} cross{'' if len(bulk) != 1 else 'es'} it"
            )
        exact = [t for t in touching if "gap" not in t]
        near = [t for t in touching if "gap" in t]
        if exact:
            parts.append(
                f"E_F = {fermi_energy:.6g} t touches a band without crossing it "
                f"({len(exact)} point{'s' if len(exact) != 1 else ''} of a flat band or "
                f"band extremum within tol = {tol:g} t)"
            )
        if near:
            t = near[0]
            parts.append(
                f"E_F = {fermi_energy:.6g} t lies only {t['gap']:.1e} t from a band at k = {t['k']:.4f} "
                "without crossing it (a band extremum, or a finite-size gap where modes of the two edges "
                "meet and hybridise through the ribbon: widen the ribbon or move E_F)"
            )
        message = "; ".join(parts) + "; move E_F into a gap for a meaningful edge count."
    return EdgeCount(
        fermi_energy=fermi_energy,
        bottom=bottom,
        top=top,
        bulk=bulk,
        touching=tuple(touching),
        in_gap=in_gap,
        message=message,
    )


@dataclass(frozen=True, eq=False)
class RibbonModes:
    """What :func:`builder_edge_modes` computes for a user's ribbon."""

    hamiltonian: RibbonHamiltonian
    spectrum: object            # topoedge.solvers.spectrum.RibbonSpectrum
    edges: EdgeCount


def builder_edge_modes(builder, fermi_energy: float, *, params: dict | None = None,
                       spin: bool | None = None, k_points: int = 400,
                       spectrum_k_points: int = 201) -> RibbonModes:
    """Ribbon spectrum and edge-mode count of any kwant builder with one translation symmetry.

    The user's ribbon goes through the same steps as the built-in ones:
    :meth:`RibbonHamiltonian.from_kwant` (with kwant's ``params`` passed to
    its value functions), :func:`topoedge.solvers.spectrum.ribbon_spectrum` and
    :func:`count_edge_modes` (every crossing of ``E_F``, its velocity,
    position and spin; near misses and touching bands reported).

    Parameters
    ----------
    builder : kwant.Builder
        With exactly one translation symmetry, in a 2D space, ``norbs``
        declared. "Across" is the direction perpendicular to the period.
    fermi_energy : float
        ``E_F`` in the energy unit of the builder's values.
    params : dict, optional
        kwant ``params`` of the value functions.
    spin : bool, optional
        Whether every site has two orbitals ordered (up, down); default: True
        exactly when every site has two orbitals.
    k_points : int
        Scan grid of the crossing search.
    spectrum_k_points : int
        Momenta of the returned spectrum (``k`` in ``[-pi, pi)`` per period).

    Returns
    -------
    RibbonModes
        ``edges.bottom.net`` and ``edges.top.net`` are the net chiralities of
        the two edges (meaningful when ``edges.in_gap``; otherwise
        ``edges.message`` says why not).

    Raises
    ------
    TypeError
        If the builder does not have exactly one translation symmetry.
    ValueError
        If ``norbs`` is not declared.

    References
    ----------
    .. [1] Y. Hatsugai, "Chern number and edge states in the integer quantum
       Hall effect", Phys. Rev. Lett. 71, 3697 (1993).
    """
    from .spectrum import ribbon_spectrum

    ham = RibbonHamiltonian.from_kwant(builder, params=params, spin=spin)
    spec = ribbon_spectrum(ham, k_grid(spectrum_k_points))
    return RibbonModes(ham, spec, count_edge_modes(ham, fermi_energy, k_points=k_points))
