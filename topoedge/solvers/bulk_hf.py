"""Self-consistent Hartree-Fock of the bulk in a field: the magnetic cell on a momentum torus (solver stage).

The square lattice at flux ``p/q`` with S_z conserved has the ``1 x q``
magnetic cell of :class:`topoedge.systems.harper.HarperCell` (rows
``y = 0 .. q-1``, Bloch convention ``H(k)[a, b] = sum_R exp(i k.R)
<0, a|H|R, b>``, ``k1 = k_x a``, ``k2 = k_y q a``). On the grid
``k1 = 2 pi j / N1``, ``k2 = 2 pi l / N2`` the cells form a torus of
``N1 x (q N2)`` sites. The Hartree-Fock Hamiltonian of spin ``s`` is

    H_s(k) = H0_s(k) + V_H + F_s(k),

with the same lattice interaction as the ribbon
(:class:`topoedge.solvers.coulomb.Interaction`: ``U_C / r``, ``V(0) = U_0``,
optionally a metal gate) and a uniform neutralising background of the mean
electron density.

Exchange. With the density matrix ``rho_s(R)[a, b] = <0, a|rho_s|R, b> =
(1/N) sum_k exp(-i k.R) P_s(k)[a, b]`` (``P_s(k)`` the occupied projector),
``F_s(R)[a, b] = -V(r) rho_s(R)[a, b]`` with ``r`` the separation of the
two sites taken as the nearest image on the torus, and ``F_s(k) = sum_R
exp(i k.R) F_s(R)``: two FFTs over the grid and an elementwise product. The
density matrix of filled Landau levels decays like a Gaussian on the scale
of the magnetic length ``l_B = a / sqrt(2 pi |phi|)``, so the nearest-image
sum converges once the torus is several ``l_B`` wide in both directions
(:func:`smallest_grid`: six magnetic lengths).

Hartree. A state with the symmetry of the magnetic cell has a density
``n(y)`` that depends on the row only (uniform along x). Its deviation from
the background ``dn(y)`` sums to zero over the cell, so the Hartree potential
is the line kernel of :func:`topoedge.solvers.coulomb.line_kernel` summed over
the periodic images of the rows (``+- M`` cells, symmetric, the dipole terms
cancelling): ``V_H(y) = sum_y' sum_m K(y - y' + m q) dn(y')``. With a uniform
density it vanishes, and the exchange decides.

Occupations. The filled set is fixed per spin: ``bands[s]`` bands of spin
``s`` at every momentum (``n_s`` Landau levels of ``|p|`` bands each), the
lowest Hartree-Fock bands of that spin: a filled-level candidate of the
level ordering (:mod:`topoedge.solvers.landau_exchange`). Every candidate is
an insulator, so its self-consistent solution is reached from its own
non-interacting start; several candidates are compared by their energies.

Energy per magnetic cell: ``E = sum_s (1/N) sum_k tr P_s (H0_s + (V_H + F_s)/2)``;
per flux quantum it is ``E / |p|``.

References
----------
.. [1] G. F. Giuliani and G. Vignale, *Quantum Theory of the Electron Liquid*
   (Cambridge University Press, 2005): Hartree-Fock of filled Landau levels.
.. [2] D. R. Hofstadter, Phys. Rev. B 14, 2239 (1976) (the lattice in a field).
.. [3] P. Pulay, Chem. Phys. Lett. 73, 393 (1980) (the mixing).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..systems.harper import HarperCell
from ..util.threads import eigh_stack
from .coulomb import Interaction, line_kernel
from .mixing import Pulay

__all__ = ["BulkHartreeFock", "BulkHFResult", "smallest_grid", "HARTREE_IMAGES"]

#: Periodic images of the rows (each side) in the Hartree sum.
HARTREE_IMAGES = 200


def smallest_grid(flux, lengths: float = 6.0) -> tuple[int, int]:
    """The smallest even grid ``(N1, N2)`` whose torus is ``lengths`` magnetic lengths wide both ways.

    ``N1 >= lengths l_B / a`` cells along x; ``q N2 >= lengths l_B / a`` rows
    along y (``N2 = 1`` once the cell itself is wide enough).
    """
    from fractions import Fraction

    flux = Fraction(flux)
    lb = math.sqrt(1.0 / (2 * math.pi * abs(float(flux))))
    n1 = max(4, math.ceil(lengths * lb))
    n1 += n1 % 2
    n2 = max(1, math.ceil(lengths * lb / flux.denominator))
    return n1, n2


@dataclass(frozen=True, eq=False)
class BulkHFResult:
    """A self-consistent bulk state with a fixed number of bands per spin.

    Energies in t per magnetic cell unless named ``*_per_flux`` (per flux
    quantum: divided by ``|p|``).
    """

    bands: dict                  # spin -> occupied bands per momentum
    converged: bool
    iterations: int
    message: str
    energy: float                # total, per cell
    kinetic: float               # tr P H0, per cell
    hartree: float
    exchange: float
    flux_quanta: int             # |p|
    residual: float
    levels: dict                 # spin -> weight of each non-interacting Landau level (n = 0, 1, ...)
    density: np.ndarray          # (q,) electrons per site, both spins
    band_energies: dict          # spin -> (N1, N2, q) Hartree-Fock bands
    projectors: dict = field(default_factory=dict, repr=False)   # spin -> (N1, N2, q, q), for warm starts
    occupied: dict = field(default_factory=dict, repr=False)     # spin -> (N1, N2, q) bool, the filled bands
    history: dict = field(default_factory=dict)

    @property
    def energy_per_flux(self) -> float:
        return self.energy / self.flux_quanta

    @property
    def interaction_per_flux(self) -> float:
        """Hartree plus exchange energy per flux quantum (t)."""
        return (self.hartree + self.exchange) / self.flux_quanta

    @property
    def gap(self) -> float:
        """Lowest empty minus highest filled Hartree-Fock level over both spins and all momenta (t)."""
        filled = max(e[self.occupied[s]].max() for s, e in self.band_energies.items() if self.occupied[s].any())
        empty = min(e[~self.occupied[s]].min() for s, e in self.band_energies.items() if not self.occupied[s].all())
        return float(empty - filled)

    def filled_levels(self) -> tuple[tuple[int, str], ...]:
        """The non-interacting Landau levels ``(n, spin)`` the state fills (weight above 1/2)."""
        return tuple(sorted(((n, s) for s, w in self.levels.items() for n, x in enumerate(w) if x > 0.5),
                            key=lambda level: (level[0], level[1] != "up")))


class BulkHartreeFock:
    """Hartree-Fock of the square lattice's magnetic cell on a momentum torus (module notes).

    Parameters
    ----------
    cell : HarperCell
        The lattice (flux ``p/q``, on-site energy, Zeeman splitting); spinful.
    interaction : Interaction
        ``U_C``, ``U_0`` and the gate, units of t and a.
    grid : (int, int)
        ``(N1, N2)`` momenta along ``k1`` and ``k2``.
    """

    def __init__(self, cell: HarperCell, interaction: Interaction, grid: tuple[int, int]):
        if not cell.spin:
            raise ValueError("the bulk Hartree-Fock needs both spins (spin.enabled = true)")
        n1, n2 = int(grid[0]), int(grid[1])
        if n1 < 1 or n2 < 1:
            raise ValueError(f"momentum grid: got {grid}; expected two positive integers")
        self.cell, self.interaction = cell, interaction
        self.q, self.p = cell.q, abs(cell.p)
        self.grid = (n1, n2)
        self.n = n1 * n2
        k1 = 2 * np.pi * np.arange(n1) / n1
        k2 = 2 * np.pi * np.arange(n2) / n2
        self.h0 = {}
        for spin, shift in cell.sectors():
            self.h0[spin] = np.stack([np.stack([cell.dense(a, b, shift) for b in k2]) for a in k1])
        q = self.q
        # separations of site b of cell R from site a of cell 0, nearest image on the N1 x (q N2) torus
        x = np.arange(n1)
        x = np.where(x <= n1 / 2, x, x - n1).astype(float)
        rows = q * np.arange(n2)[:, None, None] + np.arange(q)[None, None, :] - np.arange(q)[None, :, None]
        span = q * n2
        rows = np.mod(rows + span // 2, span) - span // 2
        self.pair = interaction.potential(x[:, None, None, None], rows[None, :, :, :].astype(float))
        # the periodic line kernel of the rows (Hartree), symmetric images
        offsets = np.arange(-(q - 1), q)
        images = np.arange(-HARTREE_IMAGES, HARTREE_IMAGES + 1)
        kernel = line_kernel((offsets[:, None] + q * images[None, :]).astype(float), interaction).sum(axis=1)
        self.hartree_kernel = kernel[(np.arange(q)[:, None] - np.arange(q)[None, :]) + (q - 1)]
        self.levels0 = {spin: eigh_stack(h)[1] for spin, h in self.h0.items()}   # non-interacting bands

    def scaled(self, factor: float) -> "BulkHartreeFock":
        """The same lattice with the whole interaction (``U_C``, ``U_0``) times ``factor`` (> 0), built
        without recomputing the kernels (both are linear in the interaction at a fixed gate distance)."""
        if not factor > 0:
            raise ValueError(f"interaction factor: got {factor!r}; expected > 0")
        other = object.__new__(BulkHartreeFock)
        other.__dict__.update(self.__dict__)
        i = self.interaction
        other.interaction = Interaction(i.coulomb * factor, i.onsite * factor, i.gate_distance)
        other.pair = self.pair * factor
        other.hartree_kernel = self.hartree_kernel * factor
        return other

    # ---------------------------------------------------------------- pieces
    def real_space(self, projector: np.ndarray) -> np.ndarray:
        """``rho(R)`` from ``P(k)`` (both ``(N1, N2, q, q)``)."""
        return np.fft.fft2(projector, axes=(0, 1)) / self.n

    def fock(self, rho_r: np.ndarray) -> np.ndarray:
        """``F(k)`` of a real-space density matrix."""
        return np.fft.ifft2(-self.pair * rho_r, axes=(0, 1)) * self.n

    def density(self, projectors: dict) -> np.ndarray:
        """Electrons per site on each row, both spins."""
        return sum(np.einsum("ijaa->a", p).real for p in projectors.values()) / self.n

    def hartree(self, density: np.ndarray) -> np.ndarray:
        """``V_H(y)`` of the density's deviation from its mean (the background)."""
        return self.hartree_kernel @ (density - density.mean())

    def occupy(self, h: dict, bands) -> tuple[dict, dict, dict]:
        """Projectors, band energies and filled-band masks of the occupation rule.

        ``bands`` a dict: the lowest ``bands[s]`` bands of each spin at every
        momentum; an int: the lowest ``bands`` of both spins together at every
        momentum (the spins free to share them).
        """
        solved = {spin: eigh_stack(hs) for spin, hs in h.items()}
        if isinstance(bands, dict):
            masks = {spin: np.broadcast_to(np.arange(self.q) < bands[spin], w.shape)
                     for spin, (w, _) in solved.items()}
        else:
            both = np.sort(np.concatenate([w for w, _ in solved.values()], axis=-1), axis=-1)
            level = both[..., bands - 1:bands] if bands > 0 else np.full(both.shape[:-1] + (1,), -np.inf)
            masks = {spin: w <= level for spin, (w, _) in solved.items()}
        projectors = {spin: (v * masks[spin][..., None, :]) @ np.conj(np.swapaxes(v, -1, -2))
                      for spin, (_, v) in solved.items()}
        return projectors, {spin: w for spin, (w, _) in solved.items()}, masks

    def hamiltonian(self, projectors: dict) -> tuple[dict, np.ndarray, dict]:
        """``H_s(k)``, ``V_H`` and ``F_s(k)`` of a set of projectors."""
        vh = self.hartree(self.density(projectors))
        f = {spin: self.fock(self.real_space(p)) for spin, p in projectors.items()}
        h = {spin: self.h0[spin] + np.diag(vh)[None, None] + f[spin] for spin in self.h0}
        return h, vh, f

    def energies(self, projectors: dict, vh: np.ndarray, f: dict) -> tuple[float, float, float]:
        """Kinetic, Hartree and exchange energy per magnetic cell (t)."""
        kinetic = sum(np.einsum("ijab,ijba->", p, self.h0[s]).real for s, p in projectors.items()) / self.n
        density = self.density(projectors)
        hartree = 0.5 * float(vh @ (density - density.mean()))
        exchange = 0.5 * sum(np.einsum("ijab,ijba->", p, f[s]).real for s, p in projectors.items()) / self.n
        return float(kinetic), hartree, float(exchange)

    def level_weights(self, projectors: dict) -> dict:
        """Weight of each non-interacting Landau level (``|p|`` bands) in the occupied states, per spin."""
        out = {}
        for spin, p in projectors.items():
            v = self.levels0[spin]
            diag = (np.conj(v) * (p @ v)).real.sum(axis=(0, 1, 2)) / self.n          # <v_n|P|v_n> per band
            count = diag.size // self.p
            out[spin] = tuple(float(x) for x in diag[:count * self.p].reshape(count, self.p).mean(axis=1))
        return out

    # ------------------------------------------------------------------ loop
    def solve(self, bands, *, start: str | dict = "levels", seed: int = 0, tol: float = 1e-8,
              max_iter: int = 1000, history: int = 6, alpha: float = 0.5, patience: int = 12) -> BulkHFResult:
        """Iterate to self-consistency with ``bands[s]`` occupied bands of spin ``s``.

        Parameters
        ----------
        bands : dict or int
            ``{"up": m_up, "down": m_down}`` bands per momentum (a candidate
            of the level ordering), or the total number of bands per momentum
            with the spins free to share them (the aufbau over both spins at
            every momentum, from a ``random`` start: which candidate, if any,
            the loop finds by itself).
        start : {"levels", "random"} or dict
            The non-interacting bands, those of a Hamiltonian with a random
            Hermitian term of strength 0.3 t per momentum and (free spins) a
            random spin splitting of up to 0.3 t (seed ``seed``), or the
            projectors of an earlier solution (:attr:`BulkHFResult.projectors`,
            e.g. at a nearby interaction strength).
        tol : float
            Converged when the largest change of the projectors is below it.
        history, alpha
            Pulay depth and mixing weight of the residual.
        patience : int
            Iterations without halving the smallest residual after which the
            loop descends in energy by optimal damping (the line from ``P``
            to the aufbau projectors of its Hamiltonian, the step that
            minimises the energy there: E. Cances and C. Le Bris,
            Int. J. Quantum Chem. 79, 82 (2000)), back to DIIS once the
            residual has fallen tenfold.

        Returns
        -------
        BulkHFResult
        """
        free = not isinstance(bands, dict)
        if free and not (isinstance(bands, (int, np.integer)) and 0 <= bands <= 2 * self.q):
            raise ValueError(f"bands: got {bands!r}; expected 0 .. {2 * self.q} bands per momentum, or a dict "
                             "of bands per spin")
        if not free and (set(bands) != set(self.h0) or any(not 0 <= m <= self.q for m in bands.values())):
            raise ValueError(f"bands per spin: got {bands}; expected 0 .. {self.q} bands for each of "
                             f"{sorted(self.h0)}")
        h = self.h0
        if isinstance(start, dict) and free:
            raise ValueError("start: projectors need bands per spin; expected 'levels' or 'random' with free spins")
        if isinstance(start, dict):
            if set(start) != set(self.h0) or any(np.shape(start[s]) != self.h0[s].shape for s in start):
                raise ValueError("start: projectors of another lattice or grid; expected those of this solver")
            if any(abs(np.einsum("ijaa->", start[s]).real / self.n - bands[s]) > 1e-6 for s in start):
                raise ValueError(f"start: projectors with other band counts than {bands}")
        elif start == "random":
            rng = np.random.default_rng(seed)
            h = {}
            split = rng.uniform(-0.3, 0.3) if free else 0.0
            for sign, (spin, h0) in zip((-1, 1), sorted(self.h0.items())):
                noise = rng.normal(size=h0.shape) + 1j * rng.normal(size=h0.shape)
                h[spin] = h0 + 0.15 * (noise + np.conj(np.swapaxes(noise, -1, -2))) + sign * split * np.eye(self.q)
        elif start != "levels":
            raise ValueError(f"start: got {start!r}; expected 'levels' or 'random'")
        projectors = dict(start) if isinstance(start, dict) else self.occupy(h, bands)[0]
        spins = sorted(projectors)
        pack = lambda ps: np.stack([ps[s] for s in spins])            # noqa: E731
        unpack = lambda x: {s: x[i] for i, s in enumerate(spins)}     # noqa: E731
        pulay = Pulay(history)
        residuals, totals, events = [], [], []
        x = pack(projectors)
        converged = False
        best, descent = (np.inf, 0), False
        for it in range(1, max_iter + 1):
            current = unpack(x)
            hk, vh, f = self.hamiltonian(current)
            totals.append(sum(self.energies(current, vh, f)))
            out, band_energies, _ = self.occupy(hk, bands)
            r = pack(out) - x
            residual = float(np.abs(r).max())
            residuals.append(residual)
            if residual < tol:
                converged, x = True, pack(out)
                break
            if residual < 0.5 * best[0]:
                best = (residual, it)
            if not descent and it - best[1] >= patience:
                descent, stalled = True, residual
                events.append((it, "stalled: energy descent by optimal damping"))
            elif descent and residual < 0.1 * stalled:
                descent, best = False, (residual, it)
                pulay = Pulay(history)
                events.append((it, "back to DIIS"))
            if descent:
                # the energy on the line P + l (P_out - P) is quadratic in l (Hartree and Fock are linear in P)
                _, vh_out, f_out = self.hamiltonian(out)
                slope = sum(np.einsum("ijab,ijba->", out[s] - current[s], hk[s]).real for s in spins) / self.n
                dn = self.density(out) - self.density(current)
                curvature = (sum(np.einsum("ijab,ijba->", out[s] - current[s], f_out[s] - f[s]).real
                                 for s in spins) / self.n + float((dn - dn.mean()) @ (vh_out - vh)))
                step = 1.0 if curvature <= 0 else float(np.clip(-slope / curvature, 0.05, 1.0))
                x = x + step * r
                continue
            x = pulay.step(x, r, alpha)
        final = unpack(x)
        hk, vh, f = self.hamiltonian(final)
        _, band_energies, masks = self.occupy(hk, bands)
        kinetic, hartree, exchange = self.energies(final, vh, f)
        held = {spin: float(np.einsum("ijaa->", final[spin]).real / self.n) for spin in final}
        message = (f"converged in {it} iterations (max |dP| = {residuals[-1]:.1e} < {tol:g})" if converged
                   else f"not converged after {max_iter} iterations: max |dP| = {residuals[-1]:.1e}")
        return BulkHFResult(bands=dict(bands) if not free else held, converged=converged, iterations=it, message=message,
                            energy=kinetic + hartree + exchange, kinetic=kinetic, hartree=hartree,
                            exchange=exchange, flux_quanta=self.p, residual=residuals[-1],
                            levels=self.level_weights(final), density=self.density(final),
                            band_energies=band_energies, projectors=final, occupied=masks,
                            history={"residual": residuals, "energy": totals, "events": events})
