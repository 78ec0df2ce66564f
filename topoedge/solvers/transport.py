"""Six-terminal Hall bar and its Landauer-Buttiker resistances (solver).

The geometry (lead numbering clockwise from the source: 0 source, 1 and 2
the top probes, 3 drain, 4 and 5 the bottom probes), the two gauges and the
value functions are described in :mod:`topoedge.models.hallbar`, which
builds the bar.

Parameters of the value functions (kwant ``params``, see
:func:`hallbar_params`): ``t`` (hopping, the energy unit), ``phi`` (flux per
plaquette in ``h/e``), ``zeeman`` (splitting in units of ``t``; spin up is
shifted by ``-zeeman/2``), ``onsite`` (uniform energy, ``t``), ``disorder``
(Anderson disorder strength ``W_dis`` in ``t``: every site of the scattering
region, not the leads, gets ``W_dis * u`` with ``u`` uniform in
``[-1/2, 1/2)``, spin-independent) and ``seed`` (seed of the
:func:`numpy.random.default_rng` generator drawing ``u``).

References
----------
.. [1] M. Buttiker, "Four-terminal phase-coherent conductance", Phys. Rev.
   Lett. 57, 1761 (1986).
.. [2] M. Buttiker, "Absence of backscattering in the quantum Hall effect in
   multiprobe conductors", Phys. Rev. B 38, 9375 (1988).
.. [3] D. R. Hofstadter, Phys. Rev. B 14, 2239 (1976).
.. [4] P. W. Anderson, "Absence of diffusion in certain random lattices",
   Phys. Rev. 109, 1492 (1958).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ..scenario.units import VON_KLITZING

__all__ = ["HallResult", "AveragedHall", "hall_resistances", "disorder_average", "solvers", "sum_rule_violation",
           "SUM_RULE_TOLERANCE"]
from ..models.hallbar import LEAD_NAMES, hallbar_params


# --------------------------------------------------------------------- solver
@dataclass(frozen=True)
class HallResult:
    """Resistances of one Hall-bar measurement.

    Attributes
    ----------
    r_xy, r_xx : float
        Hall and longitudinal resistance in units of ``h/e^2``.
    r_xy_ohm, r_xx_ohm : float
        The same in ohm (``h/e^2 = 25812.807... ohm``).
    voltages : (n_leads,) ndarray
        Lead voltages per unit current, ``V_i / I`` in ``h/e^2`` (drain 0).
    conductance : (n_leads, n_leads) ndarray
        Conductance matrix in ``e^2/h``.
    modes : (n_leads,) ndarray of int
        Open channels (both spins) in each lead at the Fermi energy.
    by_spin : dict or None
        With conserved S_z: ``{"up": {"r_xy", "r_xx"}, "down": {...}}`` in
        ``h/e^2`` for each spin sector as a conductor of its own (None in a
        sector where some lead has no open channel of that spin).
    """

    r_xy: float
    r_xx: float
    r_xy_ohm: float
    r_xx_ohm: float
    voltages: np.ndarray
    conductance: np.ndarray
    modes: np.ndarray
    by_spin: dict | None = None


def hall_resistances(
    fsyst,
    energy: float,
    params: dict,
    *,
    current_leads: tuple[int, int] = (0, 3),
    hall_probes: tuple[int, int] = (1, 5),
    long_probes: tuple[int, int] = (1, 2),
) -> HallResult:
    """Hall and longitudinal resistance from the Landauer-Buttiker equations.

    The currents into the sample are ``I_i = sum_j G_ij V_j`` with the
    conductance matrix ``G`` of :meth:`kwant.solvers.common.SMatrix.conductance_matrix`
    (units ``e^2/h``, both spins summed). A current ``I`` enters at the
    source ``current_leads[0]`` and leaves at the drain ``current_leads[1]``;
    every other lead is a voltage probe with zero net current. The drain
    voltage is fixed to 0 and its row and column are dropped, which makes
    the system regular; the remaining voltages are solved for.

    Parameters
    ----------
    fsyst : kwant.system.FiniteSystem
        ``hallbar_builder(...).finalized()``.
    energy : float
        Fermi energy in units of ``t``.
    params : dict
        See :func:`hallbar_params` (``phi`` required).
    current_leads : (int, int)
        Source and drain.
    hall_probes : (int, int)
        ``R_xy = (V[a] - V[b]) / I`` for ``(a, b) = hall_probes``; by
        default top left minus bottom left.
    long_probes : (int, int)
        ``R_xx = (V[a] - V[b]) / I``; by default top left minus top right.

    Returns
    -------
    HallResult

    Raises
    ------
    ValueError
        If a lead has no open channel at ``energy`` (then the Landauer-Buttiker
        system is singular), or the lead indices are invalid.

    Notes
    -----
    Sign convention (measured in the tests): with ``phi > 0`` (the field
    along ``+z``; counter-clockwise plaquette phase ``+2 pi phi``) and the
    default probes, ``R_xy = -h/(nu e^2)`` on the plateau with ``nu`` filled
    Landau levels; ``phi -> -phi`` makes it positive. On a plateau ``R_xx``
    vanishes (below ``1e-9 h/e^2`` in the clean bars of the tests).

    References
    ----------
    .. [1] M. Buttiker, "Four-terminal phase-coherent conductance", Phys. Rev.
       Lett. 57, 1761 (1986).
    """
    n = len(fsyst.leads)
    for name, pair in (("current_leads", current_leads), ("hall_probes", hall_probes),
                       ("long_probes", long_probes)):
        if len(pair) != 2 or not all(0 <= int(i) < n for i in pair) or pair[0] == pair[1]:
            raise ValueError(f"{name} must be two different lead indices in 0 .. {n - 1}, got {pair!r}")
    source, drain = (int(i) for i in current_leads)
    smat = _smatrix(fsyst, energy, hallbar_params(fsyst, params))
    modes = np.array([smat.num_propagating(i) for i in range(n)])
    closed = [i for i in range(n) if modes[i] == 0]
    if closed:
        names = ", ".join(f"{i} ({LEAD_NAMES[i] if n == 6 else 'lead'})" for i in closed)
        raise ValueError(
            f"E_F = {energy:.6g} t is outside the bands of lead(s) {names}: no open channel, "
            f"so the voltages are undefined; choose E_F inside the lead bands "
            f"(open channels per lead: {modes.tolist()})"
        )
    g = np.asarray(smat.conductance_matrix(), dtype=float)
    v = _voltages(g, source, drain)
    r_xy = float(v[hall_probes[0]] - v[hall_probes[1]])
    r_xx = float(v[long_probes[0]] - v[long_probes[1]])
    by_spin = None
    if all(len(info.block_nmodes) == 2 for info in smat.lead_info):
        by_spin = {}
        for block, name in enumerate(("up", "down")):
            g_s = _block_conductance(smat, n, block)
            if any(info.block_nmodes[block] == 0 for info in smat.lead_info):
                by_spin[name] = None
                continue
            v_s = _voltages(g_s, source, drain)
            by_spin[name] = {"r_xy": float(v_s[hall_probes[0]] - v_s[hall_probes[1]]),
                             "r_xx": float(v_s[long_probes[0]] - v_s[long_probes[1]])}
    return HallResult(r_xy, r_xx, r_xy * VON_KLITZING, r_xx * VON_KLITZING, v, g, modes, by_spin)


#: Largest violation of the conductance sum rules accepted (e^2/h).
SUM_RULE_TOLERANCE = 1e-6


def sum_rule_violation(g: np.ndarray) -> float:
    """Largest row or column sum of a conductance matrix (e^2/h).

    Current conservation (every row sums to zero) and the absence of current
    at equal voltages (every column sums to zero) follow from the unitarity
    of the S-matrix [1]_; a solver that lost accuracy breaks them.

    References
    ----------
    .. [1] M. Buttiker, Phys. Rev. Lett. 57, 1761 (1986).
    """
    g = np.asarray(g, dtype=float)
    return float(max(np.abs(g.sum(axis=0)).max(), np.abs(g.sum(axis=1)).max()))


@lru_cache(maxsize=1)
def solvers() -> dict:
    """kwant's scattering solvers usable here, fastest first: ``{"mumps": ..., "scipy": ...}``.

    MUMPS (when kwant was built with it) runs with the approximate-minimum-
    degree ordering: with the ordering kwant chooses, this build of MUMPS
    returned conductance matrices off by up to 0.3 e^2/h on a 320 x 160
    spinful bar (found by :func:`sum_rule_violation`; SciPy and MUMPS with
    AMD agree there to 1e-13). Built once (cached).
    """
    import kwant.solvers.sparse

    found = {}
    try:
        import kwant.solvers.mumps
    except ImportError:
        pass
    else:
        solver = kwant.solvers.mumps.Solver()
        solver.options(ordering="amd")
        found["mumps"] = solver.smatrix
    found["scipy"] = kwant.solvers.sparse.smatrix
    return found


def _smatrix(fsyst, energy: float, params: dict):
    """The S-matrix from the fastest solver whose conductances obey the sum rules."""
    violations = []
    for name, smatrix in solvers().items():
        smat = smatrix(fsyst, energy, params=params)
        violation = sum_rule_violation(smat.conductance_matrix())
        if violation <= SUM_RULE_TOLERANCE:
            return smat
        violations.append(f"{name} {violation:.2g}")
    raise ValueError(
        f"the scattering solvers lost accuracy at E_F = {energy:.6g} t: the conductance matrix "
        f"breaks current conservation by {', '.join(violations)} e^2/h (at most "
        f"{SUM_RULE_TOLERANCE:g} allowed); try a slightly different E_F or a smaller bar"
    )


def _voltages(g: np.ndarray, source: int, drain: int) -> np.ndarray:
    """Lead voltages per unit current (drain at 0, no net current in the probes)."""
    n = g.shape[0]
    keep = [i for i in range(n) if i != drain]
    current = np.zeros(n)
    current[source] = 1.0
    v = np.zeros(n)
    v[keep] = np.linalg.solve(g[np.ix_(keep, keep)], current[keep])
    return v


def _block_conductance(smat, n: int, block: int) -> np.ndarray:
    """Conductance matrix (e^2/h) of one conserved spin block: G_ii = N_i - R_ii, G_ij = -T_ij."""
    g = np.empty((n, n))
    for i in range(n):
        for j in range(n):
            t = smat.transmission((i, block), (j, block))
            g[i, j] = smat.lead_info[i].block_nmodes[block] - t if i == j else -t
    return g


@dataclass(frozen=True)
class AveragedHall:
    """Disorder average of Hall-bar resistances (units ``h/e^2``; ``*_ohm`` in ohm).

    ``*_sem`` is the standard error of the mean, ``std(ddof=1) / sqrt(n)``
    (0 for a single seed); ``samples`` holds the per-seed results.
    ``by_spin`` (with conserved S_z): ``{"up": {"r_xy", "r_xx"}, "down": ...}``,
    the seed means of :attr:`HallResult.by_spin` (None for a sector that has
    no open channel in some lead for some seed); None without spin.
    """

    r_xy: float
    r_xy_sem: float
    r_xx: float
    r_xx_sem: float
    r_xy_ohm: float
    r_xx_ohm: float
    seeds: tuple[int, ...]
    samples: tuple[HallResult, ...]
    by_spin: dict | None = None


def disorder_average(fsyst, energy: float, params: dict, *, seeds: Sequence[int], **probes) -> AveragedHall:
    """Mean and standard error of ``R_xy`` and ``R_xx`` over disorder seeds.

    Parameters
    ----------
    fsyst, energy, params
        As in :func:`hall_resistances`; ``params["disorder"]`` is ``W_dis``
        in units of ``t``, ``params["seed"]`` is replaced by each seed.
    seeds : sequence of int
        Seeds of the disorder realisations (at least one).
    **probes
        ``current_leads``, ``hall_probes``, ``long_probes`` of
        :func:`hall_resistances`.

    Returns
    -------
    AveragedHall

    Raises
    ------
    ValueError
        If ``seeds`` is empty (or as :func:`hall_resistances`).

    References
    ----------
    .. [1] P. W. Anderson, Phys. Rev. 109, 1492 (1958) (the disorder model).
    """
    seeds = tuple(int(s) for s in seeds)
    if not seeds:
        raise ValueError("disorder_average needs at least one seed")
    samples = tuple(hall_resistances(fsyst, energy, {**params, "seed": s}, **probes) for s in seeds)
    xy = np.array([r.r_xy for r in samples])
    xx = np.array([r.r_xx for r in samples])

    def sem(a):
        return float(a.std(ddof=1) / np.sqrt(a.size)) if a.size > 1 else 0.0

    by_spin = None
    if all(r.by_spin is not None for r in samples):
        by_spin = {}
        for name in ("up", "down"):
            values = [r.by_spin[name] for r in samples]
            by_spin[name] = None if any(v is None for v in values) else {
                key: float(np.mean([v[key] for v in values])) for key in ("r_xy", "r_xx")
            }
    return AveragedHall(float(xy.mean()), sem(xy), float(xx.mean()), sem(xx),
                        float(xy.mean()) * VON_KLITZING, float(xx.mean()) * VON_KLITZING, seeds, samples,
                        by_spin)
