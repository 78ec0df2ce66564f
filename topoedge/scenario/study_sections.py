"""The sections of the studies beyond a single run: ``[disorder]``, ``[interaction]``.

Frozen dataclasses like those of :mod:`topoedge.scenario.sections` (which
gathers them into the :class:`~topoedge.scenario.sections.Scenario`); each
key is one row of the schema table and one field here.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["LevelsConfig", "DisorderConfig", "BackgroundConfig", "InteractionConfig", "START_STATES", "MIXINGS",
           "BACKGROUND_PROFILES"]


@dataclass(frozen=True)
class DisorderConfig:
    """Topology of a finite disordered flake (``topoedge disorder``).

    Attributes
    ----------
    flake : int
        Side of the square flake in the lattice's length unit (a, or a_cc).
    strength : float
        Anderson disorder W_dis (t, uniform in [-W/2, W/2] per site) of the
        marker map.
    strengths : tuple of float
        Disorder strengths W_dis (t) of the sigma_xy curves and the
        robustness map.
    seeds : int
        Disorder realisations per strength (seeds 0 .. seeds-1).
    region : float
        Central fraction of the flake (in x and in y) over which the marker
        is averaged and sigma_xy is traced.
    moments : int or None
        Chebyshev moments of the kernel-polynomial expansions; None: chosen
        from the clean gap at E_F.
    vectors : int
        Random phase vectors of the Kubo-Bastin trace.
    energies : int
        Fermi energies of the sigma_xy curves (from the band bottom to 1.5
        (E_F - bottom) above E_F).
    hallbar : bool
        Also solve the scenario's six-terminal Hall bar (``[hallbar]``
        length and width, its own disorder replaced by each strength, the
        same seeds) at E_F: the transport view of the plateau beside the
        marker and sigma_xy (lattices with a Hall bar only).
    unit : str
        Unit of ``strength`` and ``strengths``: ``"t"``, or ``"meV"`` for a
        scenario with ``[material]`` and ``[field]`` (converted to t once,
        when the scenario is resolved).
    """

    flake: int = 60
    strength: float = 0.0
    strengths: tuple[float, ...] = (0.0, 1.0, 2.0, 4.0, 8.0)
    seeds: int = 2
    region: float = 0.4
    moments: int | None = None
    vectors: int = 8
    energies: int = 41
    hallbar: bool = True
    unit: str = "t"


#: Starting states of the self-consistent loop (the names of
#: topoedge.solvers.hartree_fock.START_STATES; repeated here so that reading a
#: scenario does not import the solvers).
START_STATES = ("unpolarised", "polarised", "edge", "random")
MIXINGS = ("diis", "linear")
BACKGROUND_PROFILES = ("linear", "erf")


@dataclass(frozen=True)
class BackgroundConfig:
    """Positive background charge that neutralises the electrons and makes the edge.

    Attributes
    ----------
    profile : str
        One of `BACKGROUND_PROFILES`: the fall from the bulk value to zero.
    width : float
        Width w of the fall at each edge, in lattice constants a (0: sharp).
    setback : float
        Rows next to each boundary kept free of background, in a.
    """

    profile: str = "linear"
    width: float = 0.0
    setback: float = 0.0


@dataclass(frozen=True)
class InteractionConfig:
    """Coulomb interaction; with it, ``run`` is self-consistent Hartree-Fock.

    Attributes
    ----------
    enabled : bool
        Self-consistent run; true when the ``[interaction]`` section is
        present unless it says otherwise.
    coulomb : float or None
        ``U_C = e^2 / (4 pi eps0 eps_r a)``, in t; unset: from
        ``[material]`` and ``[field]``.
    onsite : float or None
        ``V(0)``, in t; unset: ``4 ln(1 + sqrt 2) U_C`` (1/r averaged over
        the unit cell).
    gate_distance : float or None
        Metal gate at this distance, in a (image charge); unset: no gate.
    background : BackgroundConfig
    k_points : int or None
        Momenta ``N_k`` of the self-consistent loop (even); unset: the
        smallest even number >= max(32, 12 l_B / a) that holds a whole
        number of electrons.
    temperature : float
        Smearing ``k_B T``, in t (0: zero temperature).
    mixing : str
        "diis" (Pulay/Anderson) or "linear".
    alpha : float
        Mixing weight of the new residual.
    history : int
        DIIS depth.
    tol : float
        Converged when the density matrix changes by less than this.
    max_iter : int
        Iterations per start before a run is reported as not converged.
    starts : tuple of str
        Starting states; the lowest converged energy is kept.
    scan_widths : tuple of float
        Background widths w (a) of the edge-structure scan reported beside
        the main run (empty: no scan).
    """

    enabled: bool = False
    coulomb: float | None = None
    onsite: float | None = None
    gate_distance: float | None = None
    background: BackgroundConfig = BackgroundConfig()
    k_points: int | None = None
    temperature: float = 0.0
    mixing: str = "diis"
    alpha: float = 0.3
    history: int = 8
    tol: float = 1e-7
    max_iter: int = 1000
    starts: tuple[str, ...] = ("polarised", "edge", "unpolarised")
    scan_widths: tuple[float, ...] = ()


@dataclass(frozen=True)
class LevelsConfig:
    """Interaction-driven level ordering of the bulk at integer filling (``topoedge levels``).

    Attributes
    ----------
    filling : int or None
        Integer filling factor nu (1 .. 12); unset: the nearest integer to
        the scenario's filling (``field.density_cm2``, or ``fermi.gap`` over
        the bands of one Landau level).
    coulomb_max : float
        Largest ``E_C / hbar omega_c`` of the diagram (dimensionless, > 0).
    zeeman_max : float
        Largest ``Delta_Z / hbar omega_c`` of the diagram (dimensionless, > 0).
    points : int
        Points along each axis of the diagram.
    fields : tuple of float
        ``[B_min, B_max]`` in tesla of the gaps against the field (physical
        scenarios); empty: a quarter to four times ``field.b_tesla``.
    field_points : int
        Fields of the gaps against the field.
    max_filling : int
        Largest filling of the gaps against the field (1 .. max_filling).
    lattice : bool
        Also solve every candidate by bulk Hartree-Fock on the lattice
        (square lattice with spin): at the scenario's point and at
        ``lattice_points`` interaction strengths up to ``coulomb_max``.
    lattice_points : int
        Interaction strengths of the lattice part.
    random_starts : int
        Random starts of the lattice part at the scenario's point with the
        spins free to share the bands (what the loop finds by itself,
        reported beside the candidates).
    grid : tuple of int
        ``[N1, N2]`` momenta of the lattice part (the torus is ``N1`` cells
        by ``N2`` magnetic cells); empty: the smallest that spans six magnetic
        lengths both ways.
    """

    filling: int | None = None
    coulomb_max: float = 4.0
    zeeman_max: float = 0.5
    points: int = 201
    fields: tuple[float, ...] = ()
    field_points: int = 120
    max_filling: int = 6
    lattice: bool = True
    lattice_points: int = 10
    random_starts: int = 2
    grid: tuple[int, ...] = ()
