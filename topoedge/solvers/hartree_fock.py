"""Self-consistent Hartree-Fock for a ribbon with conserved S_z (solver stage).

The ribbon is translation invariant along ``x`` (period 1) with ``W`` orbitals
per spin in a cell at the coordinates ``y`` across it (one site per row on the
square lattice). The Bloch Hamiltonian of spin ``s`` is

    H_s(k) = H0_s(k) + V_H + F_s(k),

with ``H0`` the non-interacting ribbon (:class:`topoedge.systems.ribbon.RibbonHamiltonian`,
convention ``H(k) = h0 + h1 exp(-ik) + h.c.``), the Hartree potential ``V_H``
(diagonal, the same for both spins) and the exchange (Fock) term ``F_s``
(non-local across the ribbon and along it).

Interaction. ``V(r) = U_C / r`` between orbitals a distance ``r`` apart (in
lattice constants; ``U_C = e^2 / (4 pi eps0 eps_r a)`` in units of ``t``)
and ``V(0) = U_0`` on site. A metal gate at distance ``d`` adds the image
charge: ``V(r) = U_C (1/r - 1/sqrt(r^2 + 4 d^2))``.

Background. A positive background of ``n_b(y)`` charges per site
(:func:`background_density`) neutralises the electrons; the confinement of
the electrons is its electrostatic potential, nothing else.

Hartree term. The electron density ``n(y)`` (both spins) and the background
are uniform along ``x``, so the Hartree potential is that of line charges:
``V_H(y) = sum_y' K(y - y') [n(y') - n_b(y')]`` with the line kernel
``K(y) = sum_x V(x, y)``. For the bare Coulomb interaction the sum diverges
like ``2 U_C ln L`` for every ``y``; the divergent part multiplies the total
charge ``sum_y (n - n_b)``, which vanishes for a neutral system, and is
dropped: ``K(y) = V(0, y) + 2 U_C (gamma + S(y) - ln 2)`` with Euler's
``gamma`` and the convergent ``S(y) = sum_{x >= 1} (1/sqrt(x^2 + y^2) - 1/x)``
(:func:`line_kernel`). The electron number is held at the background charge,
so the dropped constant never acts.

Exchange term. With the one-body density matrix ``G_s(D)[y, y'] = <c+_{x-D, y'}
c_{x, y}> = (1/N_k) sum_k exp(i k D) P_s(k)[y, y']`` (``P_s(k)`` the occupied
projector at ``k`` on the grid ``k_j = 2 pi j / N_k``), the Fock operator is
``F_s(D)[y, y'] = -V(D, y - y') G_s(D)[y, y']`` and ``F_s(k) = sum_D F_s(D)
exp(-i k D)``: two FFTs along ``k`` and one elementwise product, cost
``O(N_k log N_k W^2)`` per spin, no loop over ``k``. The ``N_k`` cells form a
ring; the separations ``D`` are taken as the nearest images,
``-N_k/2 < D <= N_k/2``.

Self-consistency. The variable is the real-space density matrix ``G_s(D)``
(its independent half, ``D = 0 .. N_k/2``); the residual is ``G_out - G_in``.
Linear mixing or Pulay/Anderson (DIIS) mixing over the last residuals, kept
in single precision without the iterates
(:class:`topoedge.solvers.mixing.LeanAnderson`), with energy descent by
optimal damping where the extrapolation stalls (:meth:`HartreeFockRibbon.solve`);
converged when the largest element of the residual is below ``tol``. Occupations at zero temperature (the lowest
``N`` states over both spins and all ``k``; a fractional last level shares
its charge) or Fermi-Dirac at ``temperature``, with the electron number
fixed to the background charge.

References
----------
.. [1] G. F. Giuliani and G. Vignale, *Quantum Theory of the Electron Liquid*
   (Cambridge University Press, 2005): Hartree-Fock theory, exchange in the
   lowest Landau level.
.. [2] P. Pulay, "Convergence acceleration of iterative sequences. The case
   of SCF iteration", Chem. Phys. Lett. 73, 393 (1980).
.. [3] D. G. Anderson, "Iterative procedures for nonlinear integral
   equations", J. ACM 12, 547 (1965).
.. [4] C. de C. Chamon and X. G. Wen, "Sharp and smooth boundaries of quantum
   Hall liquids", Phys. Rev. B 49, 8227 (1994).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..util.threads import eigh_stack

__all__ = ["HartreeFockRibbon", "HFResult", "START_STATES"]

#: Starting states of the self-consistent loop (see :meth:`HartreeFockRibbon.initial`).
START_STATES = ("unpolarised", "polarised", "edge", "random")
from .coulomb import Interaction, line_kernel, pair_kernel


@dataclass(frozen=True, eq=False)
class HFResult:
    """One self-consistent (or stopped) Hartree-Fock solution.

    Attributes
    ----------
    start : str
        Starting state.
    converged : bool
    iterations : int
    message : str
    energies : (2, N_k, W) ndarray
        Bands of spin up (0) and down (1) on ``k``, sorted, units of ``t``.
    k : (N_k,) ndarray
        ``2 pi j / N_k``.
    density : (2, W) ndarray
        Electrons per site of each spin on each row.
    background : (W,) ndarray
    hartree : (W,) ndarray
        ``V_H``, units of ``t``.
    fock : (2, N_k, W, W) ndarray
        ``F_s(k)``, units of ``t``.
    density_matrix : (2, N_k, W, W) ndarray
        ``G_s(D)`` in FFT order of ``D`` (the state to restart from).
    mu : float
        Chemical potential (the highest occupied level at zero temperature).
    energy : float
        Hartree-Fock energy per cell, units of ``t``.
    history : dict
        ``residual``, ``energy`` per iteration.
    """

    start: str
    converged: bool
    iterations: int
    message: str
    energies: np.ndarray
    k: np.ndarray
    density: np.ndarray
    background: np.ndarray
    hartree: np.ndarray
    fock: np.ndarray
    density_matrix: np.ndarray
    mu: float
    energy: float
    history: dict = field(default_factory=dict)

    @property
    def electrons(self) -> float:
        """Electrons per cell (both spins)."""
        return float(self.density.sum())


def _why_not(energies: list, descent: bool) -> str:
    """Why a loop stopped short, from its energies: still descending slowly, or oscillating."""
    last = np.asarray(energies[-20:])
    if descent and last.size > 2 and np.all(np.diff(last) <= 1e-12):
        return (f"the energy still falls ({(last[0] - last[-1]) / (last.size - 1):.1e} t per cell per "
                "iteration in energy descent): a slow mode, such as a spin domain wall drifting; more "
                "iterations (interaction.max_iter) let it settle")
    spread = float(last.max() - last.min()) if last.size else 0.0
    return (f"the energy oscillates within {spread:.1e} t per cell"
            + (" even in energy descent" if descent else "") + ": states of nearly equal energy compete")


class HartreeFockRibbon:
    """Hartree-Fock problem of a spinful ribbon with conserved S_z.

    Parameters
    ----------
    up, down : RibbonHamiltonian
        Non-interacting blocks of spin up and down (same orbitals, positions
        ``position`` across the ribbon in lattice constants), e.g. from
        :meth:`RibbonHamiltonian.block` with the indices of
        :meth:`RibbonHamiltonian.spin_blocks`.
    background : (W,) array_like
        Positive background charge per site on each orbital's row.
    interaction : Interaction
    k_points : int
        ``N_k`` momenta ``2 pi j / N_k`` (even, >= 4).
    temperature : float
        Smearing temperature ``k_B T``, units of ``t`` (0: zero temperature).

    References
    ----------
    .. [1] G. F. Giuliani and G. Vignale, *Quantum Theory of the Electron
       Liquid* (CUP, 2005), Hartree-Fock approximation.
    """

    def __init__(self, up, down, background, interaction: Interaction, *, k_points: int,
                 temperature: float = 0.0):
        if up.size != down.size or not np.allclose(up.position, down.position):
            raise ValueError("the spin-up and spin-down blocks must have the same orbitals and positions")
        self.width = up.size
        self.y = np.asarray(up.position, dtype=float)
        self.background = np.asarray(background, dtype=float)
        if self.background.shape != (self.width,) or np.any(self.background < 0):
            raise ValueError(f"background must be {self.width} charges per site >= 0, "
                             f"got shape {self.background.shape}")
        if int(k_points) < 4 or int(k_points) % 2:
            raise ValueError(f"k_points: got {k_points}; expected an even number >= 4")
        if temperature < 0:
            raise ValueError(f"temperature: got {temperature!r}; expected >= 0 (t)")
        if up.far or down.far:
            raise ValueError("the non-interacting blocks must couple nearest cells only (no far hoppings)")
        self.blocks = (up, down)
        self.nk = int(k_points)
        self.k = 2 * np.pi * np.arange(self.nk) / self.nk
        self.h0 = np.stack([up.bloch(self.k), down.bloch(self.k)])  # (2, Nk, W, W)
        self.interaction = interaction
        self.kernel = line_kernel(self.y[:, None] - self.y[None, :], interaction)  # (W, W)
        self.pair = pair_kernel(self.y, self.nk, interaction)  # (Nk, W, W)
        self.temperature = float(temperature)
        self.electrons = float(self.background.sum())
        if self.electrons > 2 * self.width:
            raise ValueError(f"background of {self.electrons:.4g} charges per cell exceeds the "
                             f"{2 * self.width} states of a cell")

    # ------------------------------------------------------------ pieces
    def hartree(self, density: np.ndarray) -> np.ndarray:
        """``V_H(y)`` of the electron density per spin ``(2, W)``, units of ``t``."""
        return self.kernel @ (density.sum(axis=0) - self.background)

    def fock(self, g: np.ndarray) -> np.ndarray:
        """``F_s(k)`` from the real-space density matrix ``G_s(D)`` (FFT order)."""
        return np.fft.fft(-self.pair[None] * g, axis=1)

    def density_of(self, g: np.ndarray) -> np.ndarray:
        """Electrons per site of each spin, ``(2, W)``, from ``G_s(D = 0)``."""
        return np.real(np.diagonal(g[:, 0], axis1=-2, axis2=-1))

    def hamiltonian(self, g: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """``H_s(k)``, ``V_H`` and ``F_s(k)`` for the density matrix ``g``."""
        vh = self.hartree(self.density_of(g))
        f = self.fock(g)
        h = self.h0 + f
        idx = np.arange(self.width)
        h[..., idx, idx] += vh
        return h, vh, f

    def occupations(self, energies: np.ndarray) -> tuple[np.ndarray, float]:
        """Occupations of all levels (same shape) with the electron number fixed; and mu."""
        flat = np.sort(energies.ravel())
        total = self.electrons * self.nk
        if self.temperature == 0:
            full = int(np.floor(total + 1e-9))
            mu = flat[min(full, flat.size - 1)]
            occ = (energies < mu).astype(float)
            # Levels at mu (degenerate within 1e-10 t) share the remaining charge.
            at = np.abs(energies - mu) <= 1e-10
            occ[at] = 0.0
            rest = total - occ.sum()
            if at.any():
                occ[at] = np.clip(rest / at.sum(), 0.0, 1.0)
            return occ, float(mu)
        from scipy.optimize import brentq
        from scipy.special import expit

        t = self.temperature

        def excess(mu):
            return expit(-(energies - mu) / t).sum() - total

        lo, hi = flat[0] - 50 * t - 1, flat[-1] + 50 * t + 1
        mu = brentq(excess, lo, hi, xtol=1e-14, rtol=1e-15)
        return expit(-(energies - mu) / t), float(mu)

    def solve_fixed(self, h: np.ndarray):
        """Diagonalise ``h`` and return energies, vectors, occupations, mu, new ``G``."""
        w, v = eigh_stack(h)
        occ, mu = self.occupations(w)
        # Levels come sorted at every k: only the first m columns carry charge.
        m = int(np.max(np.nonzero(occ.max(axis=(0, 1)) > 0)[0], initial=-1)) + 1
        vo = v[..., :m]
        p = (vo * occ[..., None, :m]) @ np.swapaxes(vo.conj(), -1, -2)
        g = np.fft.ifft(p, axis=1)
        return w, v, occ, mu, g

    def energy(self, g: np.ndarray, vh: np.ndarray, f: np.ndarray) -> float:
        """Hartree-Fock energy per cell (units of ``t``) of the density matrix ``g``."""
        p = np.fft.fft(g, axis=1)
        kinetic = np.real(np.einsum("skij,skji->", p, self.h0)) / self.nk
        exchange = 0.5 * np.real(np.einsum("skij,skji->", p, f)) / self.nk
        charge = self.density_of(g).sum(axis=0) - self.background
        return float(kinetic + 0.5 * charge @ vh + exchange)

    def effective(self, result: HFResult):
        """The self-consistent Hamiltonian as a spinful ribbon at any momentum.

        The Fock term of the density matrix ``G_s(D)`` is a hopping into the
        cell ``D`` ahead for ``0 < D < N_k/2`` (half of it at ``D = N_k/2``,
        the ring's farthest cell), added to the non-interacting ``h0``,
        ``h1`` with the Hartree potential on the diagonal. On the grid
        ``2 pi j / N_k`` its Bloch matrices equal ``H_s(k)`` of the loop;
        between grid points it is the Fourier interpolation. Orbitals are
        ordered spin up block, spin down block, with ``sz`` = +-1/2.

        Returns
        -------
        RibbonHamiltonian
            With ``far`` hoppings, for :func:`topoedge.solvers.spectrum.ribbon_spectrum`
            and :func:`topoedge.solvers.edges.count_edge_modes`.
        """
        from ..systems.ribbon import RibbonHamiltonian

        f_real = -self.pair[None] * result.density_matrix  # (2, Nk, W, W): F_s(D) in FFT order
        half = self.nk // 2
        w = self.width
        n = 2 * w

        def spinful(parts):
            out = np.zeros((n, n), dtype=complex)
            out[:w, :w], out[w:, w:] = parts
            return out

        idx = np.arange(w)
        h0 = []
        h1 = []
        for s, block in enumerate(self.blocks):
            m = block.h0 + f_real[s, 0]
            m[idx, idx] += result.hartree
            h0.append(m)
            h1.append(block.h1 + f_real[s, 1])
        far = [spinful((f_real[0, d], f_real[1, d])) for d in range(2, half)]
        far.append(spinful((f_real[0, half], f_real[1, half])) / 2)
        h0 = spinful(h0)
        h0 = (h0 + h0.conj().T) / 2  # Hermitian to rounding
        position = np.concatenate([self.y, self.y])
        sz = np.concatenate([np.full(w, 0.5), np.full(w, -0.5)])
        return RibbonHamiltonian(h0=h0, h1=spinful(h1), position=position, sz=sz, far=tuple(far))

    # ------------------------------------------------------------ starts
    def initial(self, start: str, *, seed: int = 0, edge_rows: float | None = None) -> np.ndarray:
        """A local, neutral starting density matrix ``G_s(D)``.

        Every start has the background charge on every row (so its Hartree
        potential vanishes) and no coherence between rows:
        ``unpolarised`` splits it equally between the spins, ``polarised``
        puts it in spin up (as far as one spin can hold it: at most one
        electron per site), ``edge`` polarises the rows within ``edge_rows``
        of a boundary and leaves the rest unpolarised, ``random`` splits each
        row at random (seeded).
        """
        if start not in START_STATES:
            raise ValueError(f"start: got {start!r}; expected one of {', '.join(START_STATES)}")
        nb = self.background
        if start == "unpolarised":
            frac = np.full(self.width, 0.5)
        elif start == "polarised":
            frac = np.ones(self.width)
        elif start == "edge":
            rows = edge_rows if edge_rows is not None else self.width / 6
            d = np.minimum(np.arange(self.width), self.width - 1 - np.arange(self.width))
            frac = np.where(d < rows, 1.0, 0.5)
        else:
            frac = np.random.default_rng(seed).uniform(0.0, 1.0, self.width)
        up = np.minimum(frac * nb, 1.0)
        down = np.minimum(nb - up, 1.0)
        g = np.zeros((2, self.nk, self.width, self.width), dtype=complex)
        idx = np.arange(self.width)
        g[0, 0, idx, idx] = up
        g[1, 0, idx, idx] = down
        return g

    # ------------------------------------------------------------ loop
    def pack(self, g: np.ndarray) -> np.ndarray:
        """The independent half of ``G_s(D)``: ``D = 0 .. N_k/2`` (``G(-D) = G(D)^dagger``)."""
        return g[:, :self.nk // 2 + 1]

    def unpack(self, x: np.ndarray) -> np.ndarray:
        """``G_s(D)`` for every ``D`` (FFT order) from its half :meth:`pack`."""
        half = self.nk // 2
        g = np.empty((2, self.nk, self.width, self.width), dtype=complex)
        g[:, :half + 1] = x
        g[:, half + 1:] = np.conj(np.swapaxes(x[:, 1:half][:, ::-1], -1, -2))
        return g

    def solve(self, start: str | np.ndarray = "unpolarised", *, mixing: str = "diis", alpha: float = 0.3,
              history: int = 8, tol: float = 1e-6, max_iter: int = 1000, seed: int = 0,
              patience: int = 12, callback=None) -> HFResult:
        """Iterate to self-consistency.

        Parameters
        ----------
        start : str or (2, N_k, W, W) ndarray
            A name of :data:`START_STATES` or a density matrix ``G_s(D)``
            (e.g. :attr:`HFResult.density_matrix` of a stopped run).
        mixing : {"diis", "linear"}
            Pulay/Anderson extrapolation over the last ``history`` residuals
            (:class:`topoedge.solvers.mixing.LeanAnderson`: the residuals in
            single precision, the iterates never stored), or plain linear
            mixing ``G <- G + alpha (G_out - G)``.
        alpha : float
            Mixing weight of the new residual (0 < alpha <= 1).
        history : int
            DIIS depth.
        tol : float
            Converged when ``max |G_out - G_in| < tol``.
        max_iter : int
        seed : int
            Seed of the ``random`` start.
        patience : int
            Iterations without halving the smallest residual after which the
            extrapolation gives way to energy descent (see Notes).
        callback : callable, optional
            Called as ``callback(iteration, residual, energy, g)`` after each step.

        Returns
        -------
        HFResult
            Not converged after ``max_iter`` iterations: ``converged`` is
            False and ``message`` says so (with the smallest residual
            reached and whether the energy descent was on); the last state
            is kept. ``history["events"]`` lists the switches between
            extrapolation and descent with their iterations.

        Notes
        -----
        Energy descent (optimal damping): near level crossings the
        extrapolation can oscillate between states. When the residual has
        not halved for ``patience`` iterations, every step moves along the
        line from the current density matrix ``G`` to the aufbau one
        ``G_out`` of its Hamiltonian, ``G + l (G_out - G)``, by the ``l`` in
        [0, 1] that minimises the Hartree-Fock energy on that line (a
        quadratic in ``l``, known from the Fock and Hartree terms of both
        ends, which are linear in ``G``: no extra Fock build). The energy
        of the iterates then never rises. Once the residual has fallen
        tenfold the extrapolation resumes with a fresh history.

        References
        ----------
        .. [1] P. Pulay, Chem. Phys. Lett. 73, 393 (1980).
        .. [2] E. Cances and C. Le Bris, "Can we outperform the DIIS approach
           for electronic structure calculations?", Int. J. Quantum Chem.
           79, 82 (2000) (optimal damping; from memory).
        """
        from .mixing import LeanAnderson

        if mixing not in ("diis", "linear"):
            raise ValueError(f"mixing: got {mixing!r}; expected 'diis' or 'linear'")
        if not 0 < alpha <= 1:
            raise ValueError(f"alpha: got {alpha!r}; expected 0 < alpha <= 1")
        name = start if isinstance(start, str) else "restart"
        g = self.initial(start, seed=seed) if isinstance(start, str) else np.array(start, dtype=complex)
        if g.shape != (2, self.nk, self.width, self.width):
            raise ValueError(f"start density matrix: got shape {g.shape}; expected "
                             f"{(2, self.nk, self.width, self.width)}")
        held = float(self.density_of(g).sum())
        if abs(held - self.electrons) > 1e-6 * max(1.0, self.electrons):
            raise ValueError(f"start density matrix: holds {held:.6g} electrons per cell against a background "
                             f"of {self.electrons:.6g}; expected a neutral state (the same background)")
        mixer = LeanAnderson(history)
        residuals, energies, events = [], [], []
        converged = False
        descent = False                      # DIIS first; optimal damping (energy descent) once it stalls
        x = np.array(self.pack(g))
        best = {"residual": np.inf, "at": 0}
        idx = np.arange(self.width)
        h, vh, f = self.hamiltonian(g)
        for it in range(1, max_iter + 1):
            energies.append(self.energy(g, vh, f))
            w, _, _, mu, g_out = self.solve_fixed(h)
            r = self.pack(g_out) - x
            res = float(np.abs(r).max())
            residuals.append(res)
            if callback is not None:
                callback(it, res, energies[-1], g)
            if res < tol:
                converged = True
                g = g_out
                break
            if res < 0.5 * best["residual"]:
                best.update(residual=res, at=it)
            if not descent and it - best["at"] >= patience and mixing == "diis":
                descent, stalled_at = True, res
                events.append((it, "stalled: energy descent by optimal damping"))
            elif descent and res < 0.1 * stalled_at:
                descent = False          # close enough for the extrapolation again
                best.update(residual=res, at=it)
                mixer.reset()
                events.append((it, "back to DIIS"))
            if descent:
                # the line g + l (g_out - g): the energy is quadratic in l; take its minimum in [0, 1]
                f_out = self.fock(g_out)
                vh_out = self.hartree(self.density_of(g_out))
                dp = np.fft.fft(g_out - g, axis=1)
                slope = np.real(np.einsum("skij,skji->", dp, h)) / self.nk
                dn = (self.density_of(g_out) - self.density_of(g)).sum(axis=0)
                curvature = np.real(np.einsum("skij,skji->", dp, f_out - f)) / self.nk + float(dn @ (vh_out - vh))
                step = 1.0 if curvature <= 0 else float(np.clip(-slope / curvature, 0.0, 1.0))
                if step == 0.0:
                    step = 0.05          # at a stationary point of the line that is not self-consistent
                g = g + step * (g_out - g)
                f = f + step * (f_out - f)
                vh = vh + step * (vh_out - vh)
                h = self.h0 + f
                h[..., idx, idx] += vh
                x = self.pack(g)
                continue
            x = mixer.step(x, r, alpha) if mixing == "diis" else x + alpha * r
            g = self.unpack(x)
            h, vh, f = self.hamiltonian(g)
        h, vh, f = self.hamiltonian(g if converged else self.unpack(x))
        g = g if converged else self.unpack(x)
        w, _, _, mu, _ = self.solve_fixed(h)
        message = (f"converged in {it} iterations (max |dG| = {residuals[-1]:.2e} < {tol:g})" if converged else
                   f"not converged after {max_iter} iterations: max |dG| = {residuals[-1]:.2e}, smallest "
                   f"{min(residuals):.2e} (tolerance {tol:g}); " + _why_not(energies, descent)
                   + "; continue from density_matrix")
        return HFResult(
            start=name, converged=converged, iterations=it, message=message, energies=w, k=self.k,
            density=self.density_of(g), background=self.background, hartree=vh, fock=f,
            density_matrix=g, mu=mu, energy=self.energy(g, vh, f),
            history={"residual": residuals, "energy": energies, "events": events},
        )

    def solve_all(self, starts=START_STATES, **options) -> tuple[HFResult | None, tuple[HFResult, ...]]:
        """Solve from several starting states; keep the lowest converged energy.

        Parameters
        ----------
        starts : sequence of str
            Names from :data:`START_STATES`.
        **options
            Passed to :meth:`solve`.

        Returns
        -------
        best : HFResult or None
            The converged solution of lowest Hartree-Fock energy (None if no
            start converged).
        results : tuple of HFResult
            Every run, in the order of ``starts`` (converged or not), to be
            reported with their energies.
        """
        results = tuple(self.solve(start, **options) for start in starts)
        converged = [r for r in results if r.converged]
        best = min(converged, key=lambda r: r.energy) if converged else None
        return best, results
