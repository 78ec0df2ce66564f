"""Every crossing of the Fermi energy by the bands of a ribbon, refined and measured (solver stage).

The search behind :func:`topoedge.solvers.edges.count_edge_modes`; the ribbon's spin blocks and
their solvers come from :mod:`topoedge.solvers.blocks`.

Algorithm
---------
The ribbon is split into spin sectors when ``S_z`` is conserved
(:meth:`RibbonHamiltonian.spin_blocks`); modes of different sectors cross
each other exactly and are never compared. Inside a sector the ``n``-th
smallest eigenvalue ``E_n(k)`` (the *sorted* band index) is a continuous,
periodic function of ``k``, and by Weyl's inequality [3]_ it is Lipschitz::

    |E_n(k) - E_n(k')| <= V |k - k'|,   V = 2 ||h1||_2 >= max ||dH/dk||

1. *Scan.* On the uniform periodic grid ``k_grid(k_points)`` of spacing
   ``h`` only the states with ``|E_n - E_F| <= V h`` can reach ``E_F`` inside
   an adjacent interval. They are computed with their band index (a
   Sturm-sequence count [4]_ of the states below this window and LAPACK's
   index-selected tridiagonal solver; band or dense solvers for sectors that
   are not tridiagonal) and their velocities.
2. *Decisions.* For band ``n`` on an interval of width ``w`` with end values
   ``f = E_n - E_F`` (the last interval wraps around to ``k_0 + 2 pi``):
   opposite signs with ``|f_a| + |f_b| >= V w`` hold exactly one root (three
   would need a larger variation); equal signs with
   ``|f_a| + |f_b| - 2 tol > V w`` hold none. Both statements are rigorous.
3. *Refinement.* Undecided intervals are halved, with all states of the
   window computed at the new momenta, until they are no wider than
   ``2 pi / 1024``. There the end velocities are trusted: opposite signs
   with both velocities pointing from one sign to the other make a bracket;
   equal signs need a turning point towards ``E_F`` (``s v_a < 0 < s v_b``,
   ``s`` the sign) that could reach it. Such intervals are halved twice more
   for that band alone and then settled at the band's extremum, located by
   bounded Brent minimisation [5]_: beyond ``E_F`` it splits the interval
   into two brackets, within ``tol`` the band touches ``E_F``. This finds
   the *hidden pairs* of a coarse grid: two modes of one sector crossing
   ``E_F`` in opposite directions inside one interval (e.g. a bottom-edge and
   a top-edge mode) change the sign of no sorted band at the grid points,
   because ``E_n`` rises through ``E_F`` and comes back.
4. *Touching.* Values with ``|E_n - E_F| <= tol`` count as zero. A run of
   such points is a band touching ``E_F`` (a flat band or an extremum), a
   single one between opposite signs is an ordinary crossing. A band that
   passes within ``near_gap`` (default 1e-4 t) of ``E_F`` without crossing it, away
   from any crossing, is reported too (with its ``gap``): typically two
   counter-propagating modes of opposite edges meeting at ``E_F`` and
   hybridising through the ribbon, which leaves no crossing to count.
5. *Roots.* Each bracket is refined with Brent's root finder [5]_ on
   ``E_n(k) - E_F`` (``xtol = 1e-12``); the eigenvector there gives the
   velocity ``<psi|dH/dk|psi>`` (Hellmann-Feynman [6]_), ``<y>``, the spread
   and ``<S_z>``.

The cost is one windowed eigensolve per grid point plus the refinement,
which is only needed where bands come within ``V h`` of ``E_F``; flat bands
just inside the window (Landau levels at small flux) double the work.

Edge assignment
---------------
A state at ``E_F`` is an edge mode when it is localised on one side of the
ribbon: its spread ``sqrt(<y^2> - <y>^2)`` is below ``bulk_spread`` (default
a quarter of the ribbon width, ``(max(y) - min(y)) / 4``) *and* at most 10 %
of its weight lies in the far half of the ribbon. It belongs to the
``"bottom"`` edge when ``<y>`` lies in the lower half and to the ``"top"``
edge otherwise. Any other state is ``"bulk"``: the Fermi energy then lies in
a bulk band and the edge count is not meaningful. The weight condition
catches the lowest standing waves of a bulk band across the ribbon, whose
spread (about 0.18 of the width for ``sin^2``) is below a quarter width.

References
----------
.. [1] D. J. Thouless, M. Kohmoto, M. P. Nightingale and M. den Nijs,
   "Quantized Hall conductance in a two-dimensional periodic potential",
   Phys. Rev. Lett. 49, 405 (1982).
.. [2] Y. Hatsugai, "Chern number and edge states in the integer quantum Hall
   effect", Phys. Rev. Lett. 71, 3697 (1993).
.. [3] H. Weyl, "Das asymptotische Verteilungsgesetz der Eigenwerte linearer
   partieller Differentialgleichungen", Math. Ann. 71, 441 (1912).
.. [4] W. Barth, R. S. Martin and J. H. Wilkinson, "Calculation of the
   eigenvalues of a symmetric tridiagonal matrix by the method of bisection",
   Numer. Math. 9, 386 (1967).
.. [5] R. P. Brent, *Algorithms for Minimization without Derivatives*
   (Prentice-Hall, 1973), chapters 4 and 5.
.. [6] R. P. Feynman, "Forces in molecules", Phys. Rev. 56, 340 (1939).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq, minimize_scalar

from ..systems.ribbon import RibbonHamiltonian
from .blocks import Block, spin_blocks
from .spectrum import k_grid

__all__ = ["EdgeMode", "find_crossings", "NEAR_GAP"]


# Interval width (1/a) below which the end velocities of a band are trusted
# to rule out hidden roots; wider intervals are halved on the Lipschitz bound.
_FINE = 2 * math.pi / 1024


# Further halvings of a fine interval with a turning point before the band's
# extremum is located.
_LOCAL_DEPTH = 2


# Relative safety factor on the Lipschitz window of the scan.
_WINDOW_MARGIN = 1.05


# Brent root tolerance in k (units of 1/a).
_XTOL = 1e-12


_TWO_PI = 2 * math.pi


# Largest weight an edge state may have in the far half of the ribbon.
_FAR_WEIGHT = 0.1


# A band that comes closer than this to E_F (t) without crossing it makes
# the count unreliable: a band extremum at E_F, or a finite-size gap where
# counter-propagating modes of the two edges meet at E_F and hybridise
# through the ribbon (measured: 1.4e-6 t across 20 cells of a Haldane
# zigzag ribbon at E_F = 0).
NEAR_GAP = 1e-4


@dataclass(frozen=True)
class EdgeMode:
    """One state at the Fermi energy.

    Attributes
    ----------
    k : float
        Momentum along the ribbon at the crossing, units of 1/a, in
        ``[-pi, pi)``.
    energy : float
        Energy of the state at ``k`` (equal to ``E_F`` to the root
        tolerance), units of t.
    velocity : float
        ``dE/dk`` at the crossing (Hellmann-Feynman), units of t a.
    y : float
        ``<y>`` across the ribbon in lattice constants, measured from the
        bottom row.
    spread : float
        ``sqrt(<y^2> - <y>^2)`` in lattice constants.
    sz : float or None
        ``<S_z>`` (+-0.5 for spin eigenstates); None for a spinless ribbon.
    edge : {"bottom", "top", "bulk"}
        Where the state lives (see the module notes for the rule).
    spin : {"up", "down"} or None
        ``"up"`` for ``sz > 0.25``, ``"down"`` for ``sz < -0.25``, else None.
    """

    k: float
    energy: float
    velocity: float
    y: float
    spread: float
    sz: float | None
    edge: str
    spin: str | None

    def to_dict(self) -> dict:
        """JSON-able dictionary of the mode (plain floats and strings)."""
        return {
            "k": float(self.k),
            "velocity": float(self.velocity),
            "y": float(self.y),
            "spread": float(self.spread),
            "sz": None if self.sz is None else float(self.sz),
            "spin": self.spin,
            "edge": self.edge,
            "energy": float(self.energy),
        }


class _Search:
    """Brackets and touching points of one sector at one Fermi energy.

    Interval decisions (``decide``), for band ``n`` on ``[a, b]`` of width
    ``w`` with end values ``f = E_n - E_F`` (beyond ``tol``) and velocities
    ``v``; ``V`` is the Lipschitz constant of the sector:

    * opposite signs and ``|f_a| + |f_b| >= V w``: exactly one root (three
      would need a variation above ``V w``): a bracket;
    * equal signs and ``|f_a| + |f_b| - 2 tol > V w``: the band cannot come
      within ``tol`` of ``E_F``: nothing;
    * otherwise the interval is halved until it is no wider than ``fine``;
      there the end velocities decide: opposite signs with both velocities
      pointing from one sign to the other make a bracket, equal signs with a
      turning point towards ``E_F`` (``s v_a < 0 < s v_b``) that could reach it
      are halved ``_LOCAL_DEPTH`` more times and settled at the extremum.
    """

    def __init__(self, sector: Block, ef: float, tol: float, h: float, near_gap: float = NEAR_GAP):
        self.sector = sector
        self.near_gap = near_gap
        self.ef = ef
        self.tol = tol
        self.lipschitz = sector.lipschitz
        self.fine = min(h, _FINE)
        self.brackets: list[tuple[int, float, float]] = []
        self.touch: list[tuple[int, float]] = []
        self.near: list[tuple[int, float, float]] = []  # (band, k, |E_n - E_F|) below NEAR_GAP

    def f(self, n, k):
        return self.sector.energy(n, k) - self.ef

    def fv(self, n, k):
        e, _, v = self.sector.state(n, k)
        return e - self.ef, v

    def decide(self, fa, va, fb, vb, width) -> str:
        """``"bracket"``, ``"none"`` or ``"split"`` for one band on one interval."""
        reach = self.lipschitz * width
        size = abs(fa) + abs(fb)
        if (fa > 0) != (fb > 0):
            if size >= reach:
                return "bracket"
            up = 1.0 if fb > 0 else -1.0
            if width <= self.fine * (1 + 1e-9) and va * up > 0 and vb * up > 0:
                return "bracket"
            return "split"
        if size - 2 * self.tol > reach:
            return "none"
        if width <= self.fine * (1 + 1e-9):
            side = 1.0 if fa > 0 else -1.0
            turning = side * va < 0 < side * vb
            if not (turning and min(abs(fa), abs(fb)) <= width * (abs(va) + abs(vb)) + self.tol):
                return "none"
        return "split"

    def resolve(self, n, a, fa, va, b, fb, vb, depth):
        """Collect the brackets of band ``n`` in ``[a, b]`` (ends beyond tol)."""
        action = self.decide(fa, va, fb, vb, b - a)
        if action == "none":
            return
        same = (fa > 0) == (fb > 0)
        if action == "bracket" or (depth == 0 and not same):
            self.brackets.append((n, a, b))
            return
        if depth == 0:
            self.extremum(n, a, b, 1.0 if fa > 0 else -1.0)
            return
        m = 0.5 * (a + b)
        fm, vm = self.fv(n, m)
        if abs(fm) <= self.tol:
            if not same:
                self.brackets.append((n, a, b))
            else:
                self.extremum(n, a, b, 1.0 if fa > 0 else -1.0)
            return
        self.resolve(n, a, fa, va, m, fm, vm, depth - 1)
        self.resolve(n, m, fm, vm, b, fb, vb, depth - 1)

    def extremum(self, n, a, b, side):
        """Settle ``[a, b]`` (same sign ``side`` at both ends) at the band's extremum."""
        res = minimize_scalar(
            lambda x: side * self.f(n, x), bounds=(a, b), method="bounded", options={"xatol": _XTOL}
        )
        g, km = float(res.fun), float(res.x)
        if g < -self.tol:
            self.brackets.append((n, a, km))
            self.brackets.append((n, km, b))
        elif g <= self.tol:
            self.touch.append((n, km))
        elif g < self.near_gap:
            self.near.append((n, km, g))


def _wrap(k: float) -> float:
    """Momentum in ``[-pi, pi)``."""
    w = (float(k) + math.pi) % _TWO_PI - math.pi
    return -math.pi if w >= math.pi else w


def _spin_label(sz):
    if sz is None:
        return None
    if sz > 0.25:
        return "up"
    if sz < -0.25:
        return "down"
    return None


def _band_matrices(lo, hi, energies, velocities, ef):
    """Per-band arrays over the points: ``E_n - E_F`` (+-inf outside the window) and ``v``."""
    n0, n1 = int(lo.min()), int(hi.max())
    bands = np.arange(n0, n1 + 1)[:, None]
    F = np.where(bands < lo[None, :], -np.inf, np.inf)
    V = np.full(F.shape, np.nan)
    for i in np.nonzero(hi >= lo)[0]:
        F[lo[i] - n0 : hi[i] - n0 + 1, i] = energies[i] - ef
        V[lo[i] - n0 : hi[i] - n0 + 1, i] = velocities[i]
    return n0, F, V


def _decisions(F, V, S, width, lipschitz, fine, tol):
    """Vectorised :meth:`_Search.decide` for all bands and intervals.

    Returns boolean arrays ``sure`` (a bracket with exactly one root) and
    ``split`` (undecided), shape (bands, intervals); the interval ``i`` runs
    from point ``i`` to point ``i + 1`` (cyclically).
    """
    Fb, Vb, Sb = (np.roll(x, -1, axis=1) for x in (F, V, S))
    nonzero = (S != 0) & (Sb != 0)
    size = np.abs(F) + np.abs(Fb)
    reach = lipschitz * width[None, :]
    is_fine = (width <= fine * (1 + 1e-9))[None, :]
    change = nonzero & (S != Sb)
    with np.errstate(invalid="ignore"):
        up = np.sign(Sb - S)
        sure = change & ((size >= reach) | (is_fine & (V * up > 0) & (Vb * up > 0)))
        same = nonzero & (S == Sb) & (size - 2 * tol <= reach)
        turning = (S * V < 0) & (S * Vb > 0)
        near = np.minimum(np.abs(F), np.abs(Fb)) <= width[None, :] * (np.abs(V) + np.abs(Vb)) + tol
        same &= ~is_fine | (turning & near)
    return sure, (change & ~sure) | same


def _search_sector(sector: Block, ef: float, k: np.ndarray, tol: float, near_gap: float = NEAR_GAP) -> _Search:
    """Scan a sector on the grid ``k`` and collect brackets and touching points.

    Intervals in which the Lipschitz bound lets a band reach ``E_F`` without
    deciding how are halved, with all states of the window computed at the
    new points, until they are no wider than ``_FINE``; the remaining
    undecided bands are then settled one by one (:meth:`_Search.resolve`).
    """
    h = _TWO_PI / len(k)
    search = _Search(sector, ef, tol, h, near_gap)
    half = _WINDOW_MARGIN * sector.lipschitz * h + 10 * tol
    window = (ef - half, ef + half)
    kk = np.asarray(k, dtype=float)
    lo, hi, energies, velocities = sector.scan(kk, *window)
    if np.all(hi < lo):
        return search
    while True:
        n0, F, V = _band_matrices(lo, hi, energies, velocities, ef)
        S = np.where(np.abs(F) <= tol, 0, np.sign(F)).astype(int)
        right = np.append(kk[1:], kk[0] + _TWO_PI)  # right ends of the intervals
        width = right - kk
        sure, split = _decisions(F, V, S, width, sector.lipschitz, search.fine, tol)
        refine = np.any(split, axis=0) & (width > search.fine * (1 + 1e-9))
        if not refine.any():
            break
        mid = kk[refine] + 0.5 * width[refine]
        lo2, hi2, e2, v2 = sector.scan(mid, *window)
        order = np.argsort(np.concatenate([kk, mid]), kind="stable")
        kk = np.concatenate([kk, mid])[order]
        lo = np.concatenate([lo, lo2])[order]
        hi = np.concatenate([hi, hi2])[order]
        energies = [(energies + e2)[j] for j in order]
        velocities = [(velocities + v2)[j] for j in order]

    # Grid points where a band passes within NEAR_GAP of E_F (beyond tol).
    close = np.isfinite(F) & (np.abs(F) > tol) & (np.abs(F) < near_gap)
    for b, i in zip(*np.nonzero(close)):
        search.near.append((n0 + b, kk[i], float(abs(F[b, i]))))
    for b, i in zip(*np.nonzero(sure)):
        search.brackets.append((n0 + b, kk[i], right[i]))
    for b, i in zip(*np.nonzero(split)):
        n = n0 + b
        j = (i + 1) % len(kk)
        fa, va, fb, vb = F[b, i], V[b, i], F[b, j], V[b, j]
        if not np.isfinite(fa):
            fa, va = search.fv(n, kk[i])
        if not np.isfinite(fb):
            fb, vb = search.fv(n, right[i])
        search.resolve(n, kk[i], fa, va, right[i], fb, vb, _LOCAL_DEPTH)

    # Runs of points within tol of E_F.
    m = len(kk)
    for b in np.nonzero(np.any(S == 0, axis=1))[0]:
        n = n0 + b
        row = S[b]
        if np.all(row == 0):
            search.touch.append((n, kk[int(np.argmin(np.abs(F[b])))]))
            continue
        nzi = np.nonzero(row)[0]
        for j, start in enumerate(nzi):
            stop = nzi[(j + 1) % len(nzi)]
            gap = (stop - start) % m or m
            if gap == 1:
                continue
            zeros = (start + np.arange(1, gap)) % m
            ka = kk[start]
            kb = kk[stop] + (_TWO_PI if stop <= start else 0.0)
            if gap == 2 and row[start] != row[stop]:
                search.brackets.append((n, ka, kb))
            elif gap == 2:
                search.extremum(n, ka, kb, float(row[start]))
            else:
                search.touch.append((n, kk[zeros[np.argmin(np.abs(F[b, zeros]))]]))
    return search


def find_crossings(
    ham: RibbonHamiltonian,
    fermi_energy: float,
    *,
    k_points: int = 400,
    tol: float = 1e-9,
    bulk_spread: float | None = None,
    near_gap: float = NEAR_GAP,
) -> tuple[list[EdgeMode], list[dict]]:
    """Every state of a ribbon at the Fermi energy, refined and measured.

    Parameters
    ----------
    ham : RibbonHamiltonian
        The ribbon (see :meth:`RibbonHamiltonian.from_kwant`).
    fermi_energy : float
        ``E_F`` in the energy unit of the Hamiltonian (t).
    k_points : int
        Points of the uniform periodic scan grid over the Brillouin zone
        (``k_grid(k_points)``, units of 1/a). Crossings hidden between grid
        points are found by interval halving (see the module notes), so a
        coarse grid still gives the right count, only more slowly.
    tol : float
        Energy tolerance in t: values with ``|E_n - E_F| <= tol`` count as
        touching ``E_F``.
    bulk_spread : float, optional
        Spread (lattice constants) above which a state counts as delocalised
        (``edge = "bulk"``); default a quarter of the ribbon width.
    near_gap : float
        A band passing closer than this (t) to E_F without crossing it is
        reported as touching (default 1e-4 t); it should be well below the
        distance from E_F to the bulk bands (a narrow Zeeman gap).

    Returns
    -------
    crossings : list of EdgeMode
        Ordered by spin sector and momentum.
    touching : list of dict
        Bands touching ``E_F`` within ``tol`` without crossing it,
        ``{"k", "energy", "y", "spin"}``.

    Raises
    ------
    TypeError
        If ``ham`` is not a :class:`RibbonHamiltonian`.
    ValueError
        For a non-finite ``fermi_energy``, ``k_points < 2``, a non-positive
        ``tol`` or ``bulk_spread``.

    Notes
    -----
    The root ``k`` is accurate to ``1e-12 / a`` and ``|E(k) - E_F|`` to about
    ``|velocity| * 1e-12`` t, far below ``tol``.
    """
    if not isinstance(ham, RibbonHamiltonian):
        raise TypeError(
            f"expected a RibbonHamiltonian, got {type(ham).__name__}; "
            "build one with RibbonHamiltonian.from_kwant(builder, params=...)"
        )
    fermi_energy = float(fermi_energy)
    if not math.isfinite(fermi_energy):
        raise ValueError(f"fermi_energy must be finite, got {fermi_energy}")
    if int(k_points) != k_points or k_points < 2:
        raise ValueError(f"k_points must be an integer >= 2, got {k_points!r}")
    if not (tol > 0 and math.isfinite(tol)):
        raise ValueError(f"tol must be a positive energy in units of t, got {tol!r}")
    if not near_gap > tol:
        raise ValueError(f"near_gap must exceed tol = {tol!r}, got {near_gap!r}")
    y0 = float(ham.position.min())
    width = float(ham.position.max()) - y0
    if bulk_spread is None:
        bulk_spread = width / 4
    elif not bulk_spread > 0:
        raise ValueError(f"bulk_spread must be a positive length in lattice constants, got {bulk_spread!r}")

    k = k_grid(int(k_points))
    crossings: list[EdgeMode] = []
    touching: list[dict] = []
    near: list[dict] = []
    for sector in spin_blocks(ham):
        search = _search_sector(sector, fermi_energy, k, tol, near_gap)
        roots = [(n, brentq(lambda x: sector.energy(n, x) - fermi_energy, a, b, xtol=_XTOL))
                 for n, a, b in sorted(set(search.brackets), key=lambda x: x[1])]
        found = [_measure(sector, n, root, y0, width, bulk_spread) for n, root in roots]
        crossings += sorted(found, key=lambda m: m.k)
        # Near misses away from the roots (a crossing passes close to E_F next
        # to its root); only the closest one of the sector is measured.
        spacing = 2 * _TWO_PI / len(k)
        misses = [(gap, n, kn) for n, kn, gap in search.near
                  if not any(rn == n and abs(_wrap(kn - rk)) < spacing for rn, rk in roots)]
        if misses:
            gap, n, kn = min(misses)
            mode = _measure(sector, n, kn, y0, width, bulk_spread)
            near.append({"k": mode.k, "energy": mode.energy, "y": mode.y, "spin": mode.spin, "gap": gap})
        seen = set()
        for n, kt in search.touch:
            key = (n, round(_wrap(kt), 6))
            if key in seen:
                continue
            seen.add(key)
            mode = _measure(sector, n, kt, y0, width, bulk_spread)
            touching.append({"k": mode.k, "energy": mode.energy, "y": mode.y, "spin": mode.spin})
    if near and not touching:  # an exact touch already makes the count unreliable
        closest = min(near, key=lambda t: t["gap"])
        touching.append({key: closest[key] for key in ("k", "energy", "y", "spin")} | {"gap": closest["gap"]})
    return crossings, touching


def _measure(sector: Block, n: int, k: float, y0: float, width: float, bulk_spread: float) -> EdgeMode:
    energy, prob, velocity = sector.state(n, k)
    prob = prob / prob.sum()
    pos = sector.ham.position - y0
    y = float(pos @ prob)
    spread = float(math.sqrt(max(float((pos * pos) @ prob) - y * y, 0.0)))
    sz = None if sector.ham.sz is None else float(sector.ham.sz @ prob)
    edge = "bottom" if y < width / 2 else "top"
    far = float(prob[pos > width / 2].sum() if edge == "bottom" else prob[pos < width / 2].sum())
    if spread >= bulk_spread or far > _FAR_WEIGHT:
        edge = "bulk"
    return EdgeMode(
        k=_wrap(k), energy=energy, velocity=velocity, y=y, spread=spread,
        sz=sz, edge=edge, spin=_spin_label(sz),
    )


