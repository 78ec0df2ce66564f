"""Self-consistent Hartree-Fock on the ribbon (topoedge.solvers.hartree_fock)."""

from fractions import Fraction

import numpy as np
import pytest

from topoedge.models.square import model_params, ribbon_builder
from topoedge.systems.ribbon import RibbonHamiltonian
from topoedge.solvers.coulomb import Interaction, background_density, line_kernel, pair_kernel
from topoedge.solvers.hartree_fock import HartreeFockRibbon

#: On-site value of 1/r averaged over a unit square around the site,
#: 4 ln(1 + sqrt 2) (elementary integral, derived for this project; the
#: lattice stand-in for r -> 0).
CELL_AVERAGE = 4 * np.log(1 + np.sqrt(2))
#: Exchange self-energy of a filled lowest Landau level, in e^2/(eps l_B):
#: -sqrt(pi/2) (G. F. Giuliani and G. Vignale, Quantum Theory of the Electron
#: Liquid (CUP 2005), Hartree-Fock in the lowest Landau level; also Kallin and
#: Halperin, PRB 30, 5655 (1984)). Both citations are from memory; the value
#: itself is the exchange integral X_00 = sqrt(pi/2), recomputed by quadrature
#: in ../shared/REFERENCES.md (section 8).
X00 = np.sqrt(np.pi / 2)


def _blocks(width, phi, zeeman):
    ham = RibbonHamiltonian.from_kwant(ribbon_builder(width, spin=True),
                                       params=model_params(phi=phi, zeeman=zeeman))
    return [ham.block(i) for i in ham.spin_blocks()]


def _filled_lowest_level(q, coulomb=0.1, zeeman=0.05, gate=None):
    """Exchange of a filled spin-up lowest Landau level, measured in the bulk of a wide ribbon.

    Returns (exchange of the occupied spin, exchange of the empty spin, spin
    gap of the bulk lowest level), all in units of E_C = U_C / l_B. ``gate``:
    distance of a metal gate in units of l_B (None: no gate).
    """
    phi = Fraction(1, q)
    lb = np.sqrt(q / (2 * np.pi))          # l_B in lattice constants
    width = int(12 * lb) + 20
    up, down = _blocks(width, phi, zeeman)
    inter = Interaction(coulomb=coulomb, onsite=coulomb * CELL_AVERAGE,
                        gate_distance=None if gate is None else gate * lb)
    hf = HartreeFockRibbon(up, down, background_density(width, float(phi), 0.0), inter,
                           k_points=2 * int(6 * lb))
    w, v = np.linalg.eigh(hf.h0)
    # Occupy the flat (bulk) part of the spin-up lowest level only.
    occ = np.zeros_like(w)
    occ[0] = w[0] < w[0].min() + 1e-3
    g = np.fft.ifft(np.einsum("sknm,skm,skjm->sknj", v, occ, v.conj()), axis=1)
    f = hf.fock(g)
    y_mean = np.einsum("skim,i,skim->skm", v.conj(), hf.y, v).real
    bulk = np.abs(y_mean - hf.y.mean()) < width / 8
    ex = np.einsum("skim,skij,skjm->skm", v.conj(), f, v).real
    lowest = bulk & (w < w.min(axis=(1, 2), keepdims=True) + 1e-3)
    ec = coulomb / lb
    x_up = ex[0][lowest[0]].mean() / ec
    x_down = ex[1][lowest[1]].mean() / ec
    gap = ((w[1] + ex[1])[lowest[1]].mean() - (w[0] + ex[0])[lowest[0]].mean()) / ec
    return x_up, x_down, gap, zeeman / ec


def test_exchange_self_energy_of_the_filled_lowest_level_approaches_the_continuum():
    # -sqrt(pi/2) e^2/(eps l_B) (Giuliani & Vignale; Kallin & Halperin). On
    # the lattice the magnetic length must be several lattice constants: at
    # l_B = 2.5, 3.6, 5.0 a (flux 1/40, 1/80, 1/160) the deviation is 1.8 %,
    # 1.3 %, 0.9 % (measured) and must shrink as the flux is lowered; 2.5 %
    # is the bound at the coarsest flux.
    deviations = []
    for q in (40, 80, 160):
        x_up, x_down, _, _ = _filled_lowest_level(q)
        deviations.append(abs(x_up + X00) / X00)
        assert x_up == pytest.approx(-X00, rel=0.025)
        assert abs(x_down) < 1e-12          # no spin-down electrons: no exchange
    assert deviations[0] > deviations[1] > deviations[2]


def test_exchange_enhanced_spin_gap_at_filling_one():
    # Spin gap at nu = 1: Delta_Z + sqrt(pi/2) e^2/(eps l_B) (Hartree-Fock,
    # Giuliani & Vignale; Ando & Uemura, JPSJ 37, 1044 (1974); citations from
    # memory, formula as in ../shared/REFERENCES.md section 8); the Hartree
    # potential is the same for both spins and drops out. Flux 1/80 (l_B = 3.6 a).
    _, _, gap, zeeman = _filled_lowest_level(80)
    assert gap == pytest.approx(zeeman + X00, rel=0.02)


def test_gate_reduces_the_exchange_as_the_screened_continuum_does():
    # With a metal gate at distance d the interaction is V(q) = 2 pi e^2 (1 -
    # exp(-2 q d)) / (eps q) (a charge and its image: J. D. Jackson,
    # Classical Electrodynamics, 3rd ed. (Wiley 1999), ch. 2, and the 2D
    # Fourier transform of 1/r, 2 pi / q; citation from memory), and the
    # exchange self-energy of a filled lowest
    # Landau level, -int d^2q/(2 pi)^2 V(q) exp(-q^2 l_B^2 / 2), becomes
    # -sqrt(pi/2) E_C [1 - exp(2 d^2) erfc(sqrt(2) d)] (d in l_B; the
    # integral int_0^inf exp(-2 d q - q^2/2) dq = sqrt(pi/2) exp(2 d^2)
    # erfc(sqrt(2) d), derived for this project). The lattice error is a
    # short-distance effect, the same with and without the gate
    # (measured: within 1e-3 E_C), so the deviation shrinks with the flux as
    # for the bare interaction; spin gap Delta_Z + the same exchange.
    from scipy.special import erfc

    d = 1.0
    screened = X00 * (1 - np.exp(2 * d * d) * erfc(np.sqrt(2) * d))
    deviations = []
    for q in (80, 160):
        x_up, x_down, gap, zeeman = _filled_lowest_level(q, gate=d)
        bare, _, _, _ = _filled_lowest_level(q)
        deviations.append(abs(x_up + screened) / screened)
        assert x_up == pytest.approx(-screened, rel=0.025)
        assert abs((x_up + screened) - (bare + X00)) < 1e-3
        assert gap == pytest.approx(zeeman + screened, rel=0.025)
    assert deviations[0] > deviations[1]


def test_gated_line_kernel_is_a_line_charge_and_its_image():
    # A line of charges per unit length and its image line at distance
    # rho = sqrt(y^2 + 4 d^2): 2 U_C ln(rho / y) (line charges and images,
    # Jackson, Classical Electrodynamics, ch. 1-2; citation from memory). On
    # the lattice the charges are points one lattice
    # constant apart: by Poisson summation (the Fourier transform of
    # 1/sqrt(x^2 + y^2) along x is 2 K_0(|k| y), Gradshteyn and Ryzhik
    # 3.754.2, from memory) the sum adds 4 U_C [K_0(2 pi y) - K_0(2 pi rho)]
    # plus terms of order K_0(4 pi y), below 1e-10 for y >= 2.
    from scipy.special import k0

    u = 0.3
    y = np.arange(2.0, 31.0)
    for d in (1.5, 5.0, 20.0):
        rho = np.sqrt(y**2 + 4 * d**2)
        expected = 2 * u * np.log(rho / y) + 4 * u * (k0(2 * np.pi * y) - k0(2 * np.pi * rho))
        kernel = line_kernel(y, Interaction(coulomb=u, onsite=1.0, gate_distance=d))
        assert np.abs(kernel - expected).max() < 1e-9
    # Far from the gate the screened interaction is a dipole: U_C 2 d^2 / r^3
    # (1 - 3 d^2 / r^2 + ...).
    gated = Interaction(coulomb=u, onsite=1.0, gate_distance=1.5)
    r = np.array([30.0, 60.0, 120.0])
    ratio = gated.potential(r, 0.0) / (u * 2 * 1.5**2 / r**3)
    assert np.abs(ratio - (1 - 3 * 1.5**2 / r**2)).max() < 1e-4


def test_line_kernel_differences_match_direct_sums():
    # The divergent constant drops out of differences: K(y1) - K(y2) equals
    # the convergent sum over x of V(x, y1) - V(x, y2) (elementary; summed
    # directly to |x| = 2e6, tail below 1e-12).
    inter = Interaction(coulomb=1.0, onsite=CELL_AVERAGE)
    x = np.arange(-2_000_000, 2_000_001, dtype=float)
    for y1, y2 in [(0.0, 1.0), (1.0, 7.0), (3.0, 40.0)]:
        direct = np.sum(inter.potential(x, y1) - inter.potential(x, y2))
        assert line_kernel(y1, inter) - line_kernel(y2, inter) == pytest.approx(direct, abs=1e-9)
    # With a gate the sum converges by itself: compare K itself.
    gated = Interaction(coulomb=1.0, onsite=CELL_AVERAGE, gate_distance=5.0)
    for y in (0.0, 2.0, 9.0):
        assert line_kernel(y, gated) == pytest.approx(np.sum(gated.potential(x, y)), abs=1e-9)


def test_fock_term_by_fft_equals_the_real_space_sum():
    # F[(x, y), (x', y')] = -V(x - x', y - y') <c+_{x'y'} c_{xy}> on a ring of
    # N_k cells, built element by element, against the two-FFT evaluation
    # (definition of the exchange term; no outside value).
    rng = np.random.default_rng(1)
    width, nk = 4, 6
    up, down = _blocks(width, Fraction(1, 3), 0.1)
    inter = Interaction(coulomb=0.3, onsite=0.8)
    hf = HartreeFockRibbon(up, down, np.full(width, 0.4), inter, k_points=nk)
    a = rng.normal(size=(2, nk, width, width)) + 1j * rng.normal(size=(2, nk, width, width))
    p = a @ np.swapaxes(a.conj(), -1, -2) / 10          # Hermitian "projector" per k
    g = np.fft.ifft(p, axis=1)
    fock_k = hf.fock(g)
    cells = np.arange(nk)
    ky = hf.k
    for s in range(2):
        # Real-space density matrix of the ring and the Fock operator.
        big_g = np.zeros((nk, width, nk, width), complex)
        for x in cells:
            for xp in cells:
                big_g[x, :, xp, :] = np.einsum("k,kij->ij", np.exp(1j * ky * (x - xp)), p[s]) / nk
        big_f = np.zeros_like(big_g)
        d = np.arange(nk)
        for x in cells:
            for xp in cells:
                dist = (x - xp) % nk
                dist = dist if dist <= nk / 2 else dist - nk
                v = inter.potential(dist, hf.y[:, None] - hf.y[None, :])
                big_f[x, :, xp, :] = -v * big_g[x, :, xp, :]
        # Bloch transform: F(k) = sum_D F[x, x - D] exp(-i k D).
        for j, k in enumerate(ky):
            fk = sum(big_f[0, :, (-dd) % nk, :] * np.exp(-1j * k * dd) for dd in d)
            assert np.abs(fk - fock_k[s, j]).max() < 1e-12


def _nu_one(width=60, q=40, ramp=4.0, coulomb=0.1, k_points=32):
    phi = Fraction(1, q)
    up, down = _blocks(width, phi, 0.02)
    background = background_density(width, float(phi), ramp, setback=2)
    inter = Interaction(coulomb=coulomb, onsite=coulomb * CELL_AVERAGE)
    return HartreeFockRibbon(up, down, background, inter, k_points=k_points), phi


def test_self_consistent_filling_one_is_neutral_and_polarised():
    # Total electron number = background charge (the constraint of the
    # occupations, to rounding); deep inside, a neutral quantum-Hall
    # ferromagnet: spin up filled (n_up = phi per site), no spin down, and
    # the Hartree potential close to zero (well below E_C = U_C / l_B; the
    # edges' dipoles leave 0.4 % of E_C at the centre of this 60-row ribbon).
    hf, phi = _nu_one()
    result = hf.solve("unpolarised", mixing="diis", tol=1e-7)
    assert result.converged, result.message
    assert result.electrons == pytest.approx(hf.electrons, abs=1e-9)
    centre = hf.width // 2
    assert result.density[0, centre] == pytest.approx(float(phi), rel=1e-3)
    assert result.density[1, centre] == pytest.approx(0.0, abs=1e-6)
    e_c = hf.interaction.coulomb / np.sqrt(phi.denominator / (2 * np.pi))
    assert abs(result.hartree[centre]) < 0.01 * e_c


def test_diis_and_linear_mixing_reach_the_same_state():
    hf, _ = _nu_one()
    a = hf.solve("polarised", mixing="diis", tol=1e-8)
    b = hf.solve("polarised", mixing="linear", alpha=0.3, tol=1e-8)
    assert a.converged and b.converged
    assert a.energy == pytest.approx(b.energy, abs=1e-10)
    assert np.abs(a.density - b.density).max() < 1e-7
    assert a.iterations < b.iterations


def test_stopped_run_restarts_to_the_same_solution():
    hf, _ = _nu_one()
    full = hf.solve("random", seed=4, tol=1e-8)
    stopped = hf.solve("random", seed=4, tol=1e-8, max_iter=2)
    assert not stopped.converged and "not converged after 2 iterations" in stopped.message
    resumed = hf.solve(stopped.density_matrix, tol=1e-8)
    assert resumed.converged and resumed.start == "restart"
    assert resumed.energy == pytest.approx(full.energy, abs=1e-10)


@pytest.mark.parametrize("kwargs, message", [
    (dict(coulomb=-0.1, onsite=0.0), "interaction strength U_C: got -0.1"),
    (dict(coulomb=0.1, onsite=-1.0), "on-site interaction U_0: got -1.0"),
    (dict(coulomb=0.1, onsite=0.3, gate_distance=0.0), "gate distance: got 0.0"),
], ids=["negative strength", "negative on-site", "zero gate distance"])
def test_bad_interaction_is_refused(kwargs, message):
    with pytest.raises(ValueError, match=message):
        Interaction(**kwargs)


def test_background_profiles():
    # Linear fall over w rows from the boundary (the definition), sharp edge for w = 0.
    nb = background_density(20, 0.05, 4.0)
    assert nb[0] == pytest.approx(0.05 * 0.5 / 4) and nb[3] == pytest.approx(0.05 * 3.5 / 4)
    assert np.all(nb[4:16] == 0.05) and np.allclose(nb, nb[::-1])
    assert np.all(background_density(20, 0.05, 0.0) == 0.05)
    with pytest.raises(ValueError, match="background density: got 0"):
        background_density(20, 0, 1.0)


def test_pair_kernel_uses_nearest_images():
    inter = Interaction(coulomb=1.0, onsite=2.0)
    v = pair_kernel(np.array([0.0, 3.0]), 8, inter)
    assert v[0, 0, 0] == 2.0 and v[0, 0, 1] == pytest.approx(1 / 3)
    assert v[1, 0, 0] == pytest.approx(1.0) and v[7, 0, 0] == pytest.approx(1.0)
    assert v[4, 0, 0] == pytest.approx(1 / 4)


def test_effective_hamiltonian_reproduces_the_self_consistent_bands():
    # The self-consistent Hamiltonian as a ribbon with far hoppings equals the
    # loop's H_s(k) on its momentum grid (Fourier series, to rounding), and
    # its spectrum from the ribbon solvers gives the same bands.
    from topoedge.solvers.spectrum import ribbon_spectrum

    hf, _ = _nu_one(width=40)
    result = hf.solve("polarised", tol=1e-9)
    eff = hf.effective(result)
    h, _, _ = hf.hamiltonian(result.density_matrix)
    bloch = eff.bloch(hf.k)
    w = hf.width
    assert np.abs(bloch[:, :w, :w] - h[0]).max() < 1e-12
    assert np.abs(bloch[:, w:, w:] - h[1]).max() < 1e-12
    assert np.abs(bloch[:, :w, w:]).max() == 0
    spec = ribbon_spectrum(eff, hf.k)
    both = np.sort(np.concatenate([result.energies[0], result.energies[1]], axis=1), axis=1)
    assert np.abs(np.sort(spec.energy, axis=1) - both).max() < 1e-9


def test_self_consistent_edge_of_filling_one_has_one_mode_per_edge():
    # A sharp background edge at nu = 1 with the Coulomb energy of the order
    # of the cyclotron energy (U_C = 0.4 t: E_C = 0.16 t, hbar omega_c =
    # 0.157 t) keeps a single chiral spin-up mode per edge (Chamon and Wen,
    # PRB 49, 8227 (1994): the sharp nu = 1 edge is stable); net chirality
    # +1 / -1 = the Chern number of the filled level.
    from topoedge.solvers.edges import count_edge_modes

    # 40 momenta make the electrons per grid (1.4 per cell x 40) an integer,
    # so the last level is full and E_F lies between it and the next one.
    hf, _ = _nu_one(width=60, ramp=0.0, k_points=40, coulomb=0.4)
    result = hf.solve("polarised", tol=1e-9)
    levels = np.sort(result.energies.ravel())
    filled = round(hf.electrons * hf.nk)
    assert abs(filled - hf.electrons * hf.nk) < 1e-9
    fermi = 0.5 * (levels[filled - 1] + levels[filled])
    edges = count_edge_modes(hf.effective(result), fermi, k_points=200)
    assert edges.in_gap, edges.message
    assert edges.bottom.net == 1 and edges.top.net == -1
    assert edges.bottom.counter_pairs == 0 and edges.top.counter_pairs == 0
    assert edges.bottom.by_spin["up"]["net"] == 1 and edges.bottom.by_spin["down"]["net"] == 0


def test_far_hoppings_velocity_is_the_derivative_of_the_bloch_matrix():
    # dH/dk against a central finite difference (step 1e-5: error ~1e-10 t).
    rng = np.random.default_rng(7)
    n = 5

    def rand():
        return rng.normal(size=(n, n)) + 1j * rng.normal(size=(n, n))

    h0 = rand()
    ham = RibbonHamiltonian(h0=h0 + h0.conj().T, h1=rand(), position=np.arange(n, dtype=float),
                            far=(rand(), rand()))
    for k in (0.0, 0.7, 2.9):
        numeric = (ham.bloch(k + 1e-5) - ham.bloch(k - 1e-5)) / 2e-5
        assert np.abs(ham.velocity(k) - numeric).max() < 1e-8
    assert ham.bandwidth() == n - 1


def _edge_of_filling_one(ramp):
    """Lowest-energy solution (polarised or edge start) of a 100-row nu = 1 ribbon and its edge count."""
    from topoedge.solvers.edges import count_edge_modes

    hf, _ = _nu_one(width=100, ramp=ramp, k_points=40, coulomb=0.4)
    best, runs = hf.solve_all(("polarised", "edge"), tol=1e-7)
    assert best is not None and len(runs) == 2
    levels = np.sort(best.energies.ravel())
    filled = round(hf.electrons * hf.nk)
    assert abs(filled - hf.electrons * hf.nk) < 1e-9   # the grid holds an integer number of electrons
    edges = count_edge_modes(hf.effective(best), 0.5 * (levels[filled - 1] + levels[filled]), k_points=300)
    return best, runs, edges


@pytest.mark.slow
def test_smooth_background_edge_reconstructs_at_filling_one():
    # Edge reconstruction of a nu = 1 edge (Chamon and Wen, PRB 49, 8227
    # (1994)): a smooth enough background makes the Hartree-Fock edge detach
    # a strip of electrons, adding a counter-propagating pair of spin-up
    # modes while the net chirality stays the Chern number 1. With
    # E_C ~ hbar omega_c (U_C = 0.4 t at flux 1/40, l_B = 2.52 a) a ramp of
    # 8 rows (3.2 l_B) keeps one mode per edge and a ramp of 30 rows
    # (11.9 l_B) reconstructs (measured here: no pair up to 24 rows = 9.5 l_B).
    _, _, narrow = _edge_of_filling_one(8.0)
    assert narrow.in_gap and narrow.bottom.net == 1 and narrow.bottom.counter_pairs == 0
    best, runs, wide = _edge_of_filling_one(30.0)
    assert wide.in_gap, wide.message
    assert wide.bottom.net == 1 and wide.top.net == -1
    assert wide.bottom.counter_pairs >= 1 and wide.top.counter_pairs >= 1
    assert wide.bottom.by_spin["up"]["net"] == 1
    # The solutions from the two starts differ; the lower energy is kept.
    assert best.energy == min(r.energy for r in runs if r.converged)


def test_hartree_fock_figure_draws_the_profiles_of_the_result():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from topoedge.plotting import hartree_fock_figure

    hf, phi = _nu_one(width=40)
    result = hf.solve("polarised")
    fig = hartree_fock_figure(result, flux=float(phi), title="test")
    try:
        dens, bands, pot, hist = fig.axes[:4]
        lines = {line.get_label(): line.get_ydata() for line in dens.get_lines()}
        assert np.allclose(lines["spin up"], result.density[0] / float(phi))
        assert np.allclose(lines["background $n_b/\\phi$"], result.background / float(phi))
        assert np.allclose(pot.get_lines()[0].get_ydata(), result.hartree)
        assert np.allclose(hist.get_lines()[0].get_ydata(), result.history["residual"])
    finally:
        plt.close(fig)


def test_lean_mixing_stores_residuals_only_and_converges_like_pulay():
    # A linear fixed point x = A x + b (contraction, solution known): both mixers reach it, and the lean one
    # holds one iterate plus `depth` single-precision residuals (a quarter of a double-precision pair each).
    from topoedge.solvers.mixing import LeanAnderson, Pulay

    rng = np.random.default_rng(3)
    n = 400
    a = rng.normal(size=(n, n)) / np.sqrt(n) * 0.9
    b = rng.normal(size=n) + 1j * rng.normal(size=n)
    exact = np.linalg.solve(np.eye(n) - a, b)
    for mixer in (Pulay(6), LeanAnderson(6)):
        x = np.zeros(n, dtype=complex)
        for it in range(200):
            r = a @ x + b - x
            if np.abs(r).max() < 1e-9:
                break
            x = mixer.step(x, r, 0.5)
        assert np.abs(x - exact).max() < 1e-8, type(mixer).__name__
    lean = LeanAnderson(6)
    x = np.zeros(n, dtype=complex)
    for _ in range(6):
        x = lean.step(x, a @ x + b - x, 0.5)
    assert lean.nbytes == n * 16 + 6 * n * 8


def test_the_mixing_variable_is_the_independent_half_of_the_density_matrix():
    # G(-D) = G(D)^dagger (the density matrix is Hermitian), so G for D = 0 .. N_k/2 holds all of it.
    up, down = _blocks(24, Fraction(1, 8), 0.05)
    hf = HartreeFockRibbon(up, down, background_density(24, 1 / 8, 3.0), Interaction(0.2, 0.7), k_points=16)
    h, _, _ = hf.hamiltonian(hf.initial("polarised"))
    g = hf.solve_fixed(h)[-1]
    assert np.abs(hf.unpack(hf.pack(g)) - g).max() < 1e-12
    assert hf.pack(g).shape == (2, 9, 24, 24)


def test_a_start_that_used_to_stall_converges_by_energy_descent():
    # nu = 2 at flux 1/40, 80 rows, E_C / hbar omega_c = 4, the 'edge' start: plain DIIS oscillated
    # (residual 7.5e-4 after 300 iterations); the loop switches to optimal damping (E. Cances and C. Le Bris,
    # Int. J. Quantum Chem. 79, 82 (2000), cited from memory) when the residual stops halving, and back to
    # DIIS near the end.
    import math

    lb, hw = math.sqrt(40 / (2 * math.pi)), 4 * math.pi / 40
    up, down = _blocks(80, Fraction(1, 40), 0.02)
    inter = Interaction(4.0 * lb * hw, 4.0 * lb * hw * CELL_AVERAGE)
    hf = HartreeFockRibbon(up, down, background_density(80, 2 / 40, 8.0, setback=2.0), inter, k_points=40)
    result = hf.solve("edge", tol=1e-7, max_iter=300)
    assert result.converged, result.message
    events = [text for _, text in result.history["events"]]
    assert any("optimal damping" in text for text in events)
    # descent never raises the energy of the relaxed iterates it takes: the converged energy is below
    # the energy where the descent began
    began = next(i for i, text in result.history["events"] if "optimal damping" in text)
    assert result.energy <= result.history["energy"][began - 1] + 1e-9
