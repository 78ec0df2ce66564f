"""Hartree-Fock energies of filled Landau levels in the continuum: the level ordering at integer filling.

A two-dimensional electron gas in a perpendicular field, the Landau levels
``(n, s)`` (orbital index ``n``, spin ``s`` = "up" or "down") either filled
or empty, the Coulomb interaction ``V(q) = 2 pi e^2 / (4 pi eps0 eps_r q)``
(optionally screened by a metal gate at distance ``d``:
``V(q) (1 - exp(-2 q d))``) and a uniform neutralising background. The
Hartree energy of the uniform density cancels against the background, so the
exchange decides which levels are filled. Per flux quantum (per state of one
level), in units of ``hbar omega_c`` with ``lambda = E_C / hbar omega_c``
(``E_C = e^2 / (4 pi eps0 eps_r l_B)``) and ``z = Delta_Z / hbar omega_c``::

    E(S) = sum_{(n,s) in S} [n + 1/2 - s z / 2] - (lambda / 2) sum_{(n,s),(m,s) in S} X_nm

with ``s = +1`` for spin up (the lower one for ``Delta_Z > 0``: the
project's convention shifts spin up by ``-Delta_Z / 2``) and the exchange
integrals (units of ``E_C``; ``x = q l_B``, ``u = x^2 / 2``, ``n >= m``)::

    X_nm = int_0^inf dx (m! / n!) u^(n-m) exp(-u) [L_m^(n-m)(u)]^2      (times (1 - exp(-2 x d / l_B)))

The integrand is ``exp(-x^2/2)`` times a polynomial in ``x^2``, so without a
gate ``X_nm`` is ``sqrt(pi/2)`` times a rational number, found exactly here
(``X_00 = sqrt(pi/2)``, ``X_01 = sqrt(pi/2) / 2``, ``X_11 = 3 sqrt(pi/2) / 4``);
with a gate it is a quadrature. The Hartree-Fock quasiparticle energy of a
level is ``n + 1/2 - s z / 2 - lambda sum_{(m,s) in S} X_nm``; the activation
gap a transport experiment measures is the lowest empty level minus the
highest filled one (a particle and a hole far apart), which at ``nu = 1`` is
``Delta_Z + sqrt(pi/2) E_C``.

``E(S)`` is linear in ``lambda`` and in ``z``: the ground state over a line
of ``lambda`` (or ``z``) is the lower envelope of straight lines, and the
first-order transitions between filled sets are its corners, found exactly.

Landau-level mixing (virtual transitions to empty levels) is left out, as in
the Hartree-Fock treatment of filled levels.

References
----------
.. [1] C. Kallin and B. I. Halperin, "Excitations from a filled Landau level
   in the two-dimensional electron gas", Phys. Rev. B 30, 5655 (1984).
.. [2] G. F. Giuliani and J. J. Quinn, "Spin-polarization instability in a
   tilted magnetic field of a two-dimensional electron gas with filled
   Landau levels", Phys. Rev. B 31, 6228 (1985).
.. [3] G. F. Giuliani and G. Vignale, Quantum Theory of the Electron Liquid
   (Cambridge University Press, 2005), the Landau-level form factors.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache

import numpy as np

__all__ = ["Level", "exchange_integral", "exchange_rational", "exchange_matrix", "FilledSet", "candidate_sets",
           "ground_state", "lowest_set", "lower_envelope", "transitions", "SPINS"]

#: Spins of a level and their sign s in the Zeeman term -s Delta_Z / 2 (spin up lower for Delta_Z > 0).
SPINS = {"up": 1, "down": -1}
SQRT_PI_2 = math.sqrt(math.pi / 2)


@dataclass(frozen=True, order=True)
class Level:
    """One spin-split Landau level: orbital index ``n`` >= 0 and spin ``"up"`` or ``"down"``."""

    n: int
    spin: str

    def __str__(self) -> str:
        return f"{self.n}{'↑' if self.spin == 'up' else '↓'}"

    @property
    def label(self) -> str:
        """ASCII name, e.g. ``0up``."""
        return f"{self.n}{self.spin}"


def _laguerre(m: int, alpha: int) -> list[Fraction]:
    """Coefficients c_k of the generalised Laguerre polynomial L_m^alpha(u) = sum_k c_k u^k (exact)."""
    return [Fraction((-1) ** k * math.comb(m + alpha, m - k), math.factorial(k)) for k in range(m + 1)]


@lru_cache(maxsize=None)
def exchange_rational(n: int, m: int) -> Fraction:
    """``X_nm / (E_C sqrt(pi/2))`` without a gate, exactly (a rational number).

    The integrand is ``exp(-x^2/2)`` times a polynomial in ``u = x^2/2``; with
    ``int_0^inf x^(2j) exp(-x^2/2) dx = sqrt(pi/2) (2j-1)!!`` each power
    ``u^j`` contributes ``(2j-1)!! / 2^j``.
    """
    if n < 0 or m < 0:
        raise ValueError(f"Landau level indices: got ({n}, {m}); expected integers >= 0")
    n, m = max(n, m), min(n, m)
    alpha = n - m
    lag = _laguerre(m, alpha)
    square = [Fraction(0)] * (2 * m + 1)
    for i, a in enumerate(lag):
        for j, b in enumerate(lag):
            square[i + j] += a * b
    prefactor = Fraction(math.factorial(m), math.factorial(n))
    total = Fraction(0)
    for k, c in enumerate(square):
        j = k + alpha                                           # power of u
        double_factorial = math.prod(range(2 * j - 1, 0, -2)) if j > 0 else 1
        total += c * Fraction(double_factorial, 2 ** j)
    return prefactor * total


def _integrand(x, n: int, m: int, gate: float | None):
    from scipy.special import eval_genlaguerre

    n, m = max(n, m), min(n, m)
    u = x * x / 2
    value = math.factorial(m) / math.factorial(n) * u ** (n - m) * np.exp(-u) * eval_genlaguerre(m, n - m, u) ** 2
    if gate is not None:
        value = value * -np.expm1(-2.0 * x * gate)
    return value


def exchange_integral(n: int, m: int, *, gate: float | None = None, quadrature: bool = False) -> float:
    """Exchange integral ``X_nm`` of Landau levels n and m, in units of ``E_C``.

    Parameters
    ----------
    n, m : int
        Orbital indices (>= 0).
    gate : float, optional
        Distance of a metal gate in magnetic lengths ``l_B`` (> 0); the
        interaction is then ``V(q) (1 - exp(-2 q d))`` (an image charge).
    quadrature : bool
        Integrate numerically (scipy.integrate.quad) even without a gate.

    Returns
    -------
    float
        ``X_nm`` (E_C).
    """
    if gate is None and not quadrature:
        return float(exchange_rational(n, m)) * SQRT_PI_2
    if gate is not None and not gate > 0:
        raise ValueError(f"gate distance: got {gate!r}; expected a distance > 0 in magnetic lengths")
    from scipy.integrate import quad

    value, _ = quad(_integrand, 0.0, np.inf, args=(n, m, gate), epsabs=1e-13, epsrel=1e-12, limit=200)
    return float(value)


def exchange_matrix(levels: int, *, gate: float | None = None) -> np.ndarray:
    """``X[n, m]`` for ``n, m < levels`` (E_C)."""
    x = np.empty((levels, levels))
    for n in range(levels):
        for m in range(n + 1):
            x[n, m] = x[m, n] = exchange_integral(n, m, gate=gate)
    return x


@dataclass(frozen=True)
class FilledSet:
    """A set of filled levels and its Hartree-Fock energy as a plane in (lambda, z).

    ``energy(lambda, z) = kinetic + zeeman * z + exchange * lambda`` per flux
    quantum, units of ``hbar omega_c``.
    """

    levels: tuple[Level, ...]
    kinetic: float           # sum (n + 1/2)
    zeeman: float            # -(1/2) sum s
    exchange: float          # -(1/2) sum_{same spin} X_nm

    @property
    def name(self) -> str:
        return " ".join(str(level) for level in self.levels)

    @property
    def label(self) -> str:
        """ASCII name, e.g. ``0up,0down``."""
        return ",".join(level.label for level in self.levels)

    @property
    def per_spin(self) -> dict[str, int]:
        """Filled levels of each spin, ``{"up": n_up, "down": n_down}``."""
        return {spin: sum(level.spin == spin for level in self.levels) for spin in SPINS}

    @property
    def polarisation(self) -> float:
        """(N_up - N_down) / (N_up + N_down)."""
        s = [SPINS[level.spin] for level in self.levels]
        return float(sum(s)) / len(s)

    def energy(self, coulomb, zeeman=0.0):
        """Energy per flux quantum (hbar omega_c) at ``lambda = E_C / hbar omega_c`` and ``z``."""
        return self.kinetic + self.zeeman * np.asarray(zeeman) + self.exchange * np.asarray(coulomb)

    def quasiparticles(self, coulomb: float, zeeman: float, x: np.ndarray) -> dict[Level, float]:
        """Hartree-Fock energy (hbar omega_c) of every level up to ``len(x)`` orbitals, filled or not."""
        out = {}
        for n in range(len(x)):
            for spin, s in SPINS.items():
                exchange = sum(x[n, level.n] for level in self.levels if level.spin == spin)
                out[Level(n, spin)] = n + 0.5 - s * zeeman / 2 - coulomb * exchange
        return out

    def gap(self, coulomb: float, zeeman: float, x: np.ndarray) -> tuple[float, str, Level, Level]:
        """Activation gap (hbar omega_c): lowest empty minus highest filled level, its kind and the two levels.

        The kind is ``"spin"`` when the two levels share their orbital index
        (a spin flip), ``"cyclotron"`` when they do not (with or without a
        spin flip; the two levels say which).
        """
        energies = self.quasiparticles(coulomb, zeeman, x)
        filled = set(self.levels)
        top = max(filled, key=lambda level: energies[level])
        bottom = min((level for level in energies if level not in filled), key=lambda level: energies[level])
        kind = "spin" if top.n == bottom.n else "cyclotron"
        return energies[bottom] - energies[top], kind, top, bottom


def candidate_sets(filling: int, x: np.ndarray) -> list[FilledSet]:
    """Every set of ``filling`` levels whose orbitals are below ``len(x)`` (``x``: the exchange matrix).

    Only sets that fill each spin's levels from n = 0 upwards without holes
    are kept: a hole below a filled level of the same spin costs kinetic
    energy and loses exchange (``X_nm`` falls with ``|n - m|`` and with n),
    so it is never the ground state. That leaves ``filling + 1`` sets.
    """
    if filling < 1:
        raise ValueError(f"filling factor: got {filling}; expected a positive integer")
    if filling > 2 * len(x):
        raise ValueError(f"filling factor: got {filling}; expected at most {2 * len(x)} for {len(x)} orbitals")
    sets = []
    for up in range(filling + 1):
        down = filling - up
        if up > len(x) or down > len(x):
            continue
        levels = tuple(sorted([Level(n, "up") for n in range(up)] + [Level(n, "down") for n in range(down)],
                              key=lambda level: (level.n, -SPINS[level.spin])))
        same = [(a, b) for a, b in itertools.product(levels, levels) if a.spin == b.spin]
        sets.append(FilledSet(levels=levels, kinetic=sum(level.n + 0.5 for level in levels),
                              zeeman=-0.5 * (up - down),
                              exchange=-0.5 * sum(x[a.n, b.n] for a, b in same)))
    return sets


def lowest_set(sets: list[FilledSet], energies, *, decimals: int | None = None) -> np.ndarray:
    """Index into ``sets`` of the lowest of ``energies`` (first axis: the sets; any other axes).

    Ties (zero Zeeman: the two polarisations alike) go to the set polarised
    along spin up; ``decimals`` rounds the energies first, for energies that
    tie only to rounding (self-consistent ones).
    """
    order = np.argsort([-s.polarisation for s in sets], kind="stable")
    values = np.asarray(energies)[order]
    return order[np.argmin(values if decimals is None else np.round(values, decimals), axis=0)]


def ground_state(sets: list[FilledSet], coulomb, zeeman=0.0) -> np.ndarray:
    """Index into ``sets`` of the lowest energy at each (broadcast) ``coulomb``, ``zeeman``."""
    shape = np.broadcast(coulomb, zeeman).shape
    return lowest_set(sets, np.stack([s.energy(coulomb, zeeman) * np.ones(shape) for s in sets]))


def lower_envelope(sets: list[FilledSet], lo: float, hi: float, *, zeeman: float = 0.0,
                   coulomb: float | None = None) -> list[tuple[float, float, int]]:
    """The ground state along a line, as exact pieces ``(start, end, index)``.

    Along ``lambda`` in [lo, hi] at fixed ``zeeman`` (``coulomb`` None), or
    along ``z`` in [lo, hi] at fixed ``coulomb``. Every energy is a straight
    line there, so the ground state changes only where two lines cross.
    """
    if coulomb is None:
        intercept = [s.kinetic + s.zeeman * zeeman for s in sets]
        slope = [s.exchange for s in sets]
    else:
        intercept = [s.kinetic + s.exchange * coulomb for s in sets]
        slope = [s.zeeman for s in sets]
    pieces = []
    at = lo
    while at < hi:
        values = [a + b * at for a, b in zip(intercept, slope)]
        low = min(values)
        # the lowest line at `at` (ties: the one that stays lowest, the smallest slope; then the one
        # polarised along spin up, the lower spin for Delta_Z > 0)
        best = min((i for i, v in enumerate(values) if v - low <= 1e-12 * max(1.0, abs(low))),
                   key=lambda i: (slope[i], -sets[i].polarisation))
        end = hi
        for i, (a, b) in enumerate(zip(intercept, slope)):
            if b < slope[best] - 1e-15:
                cross = (intercept[best] - a) / (b - slope[best])
                if at < cross < end:
                    end = cross
        pieces.append((at, end, best))
        at = end
    return pieces


def transitions(sets: list[FilledSet], lo: float, hi: float, **line) -> list[tuple[float, int, int]]:
    """First-order transitions along a line (see :func:`lower_envelope`): ``(where, before, after)``."""
    pieces = lower_envelope(sets, lo, hi, **line)
    return [(a[1], a[2], b[2]) for a, b in zip(pieces, pieces[1:])]
