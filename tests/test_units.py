"""Physical units against CODATA constants and handbook values.

Sources:
- CODATA 2018 constants through scipy.constants (hbar, e, h, m_e, mu_B, eps0).
- Magnetic length l_B = sqrt(hbar / (e B)) = 25.6556 nm at 1 T, cyclotron
  energy hbar e B / m* = 1.72788 meV/T for m* = 0.067 m_e, Zeeman splitting
  |g| mu_B B = 0.025469 meV/T for |g| = 0.44: recomputed from CODATA for this
  project (values also listed in handbooks of semiconductor physics).
- GaAs parameters m* = 0.067, g = -0.44, eps_r = 12.9: handbook values
  (Vurgaftman, Meyer, Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), from memory).
- Filling factor nu = n h / (e B) and the Landau levels hbar omega_c (n + 1/2)
  of a two-dimensional electron gas: textbook.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
import scipy.constants as const

from topoedge.builders import model_params, ribbon_builder
from topoedge.config import ConfigError, lattice_scenario, load_scenario, parse_scenario
from topoedge.hamiltonian import RibbonHamiltonian
from topoedge.spectrum import ribbon_spectrum
from topoedge.units import cyclotron_mev, hopping_mev, magnetic_length_nm, zeeman_mev

GAAS = {"material": {"preset": "gaas", "lattice_constant_nm": 3.5},
        "field": {"b_tesla": 5.0, "density_cm2": 2.4e11}}


def test_magnetic_length_at_one_tesla():
    # l_B = sqrt(hbar / (e B)) = 25.66 nm at 1 T (CODATA); scales as B^-1/2.
    assert magnetic_length_nm(1.0) == pytest.approx(25.66, rel=1e-3)
    assert magnetic_length_nm(4.0) == pytest.approx(25.6556 / 2, rel=1e-4)


def test_cyclotron_and_zeeman_energies_per_tesla():
    # hbar omega_c = 1.728 meV/T for m* = 0.067 m_e; |g| mu_B = 0.0255 meV/T
    # for |g| = 0.44 (handbook values computed from CODATA constants).
    assert cyclotron_mev(0.067, 1.0) == pytest.approx(1.728, rel=5e-3)
    assert zeeman_mev(-0.44, 1.0) == pytest.approx(0.0255, rel=5e-3)
    assert zeeman_mev(-0.44, 3.0) == pytest.approx(3 * zeeman_mev(0.44, 1.0), rel=1e-12)


def test_hopping_reproduces_the_effective_mass():
    # t = hbar^2 / (2 m* a^2): the lattice cyclotron energy 4 pi t phi equals
    # hbar e B / m* exactly when phi = B a^2 / (h/e).
    a, m, b = 3.0, 0.067, 2.0
    phi = b * (a * 1e-9) ** 2 / (const.h / const.e)
    assert 4 * math.pi * hopping_mev(m, a) * phi == pytest.approx(cyclotron_mev(m, b), rel=1e-12)


def test_gaas_at_5_tesla_has_filling_two():
    # nu = n h / (e B) = 2.4e15 m^-2 * h / (e * 5 T) = 1.985.
    s = parse_scenario(GAAS)
    lattice, derived = lattice_scenario(s)
    # The model describes the field of the rational flux (0.7 % below 5 T).
    assert derived.filling == pytest.approx(2.4e15 * const.h / (const.e * derived.b_used_tesla), rel=1e-12)
    assert abs(2.4e15 * const.h / (const.e * 5.0) - 1.985) < 1e-3 and abs(derived.filling - 2) < 0.02
    assert lattice.fermi.gap == 2 and lattice.fermi.energy is None
    # Rational flux: nearest p/q with q <= field.q_max, the field error reported.
    assert lattice.lattice.flux.denominator <= s.field.q_max
    b_used = float(lattice.lattice.flux) * (const.h / const.e) / (3.5e-9) ** 2
    assert derived.b_used_tesla == pytest.approx(b_used, rel=1e-12)
    assert derived.b_relative_error == pytest.approx(b_used / 5.0 - 1, rel=1e-9)
    # GaAs g < 0 puts spin up (along B) lower: positive Zeeman splitting in t.
    assert derived.zeeman_t == pytest.approx(zeeman_mev(-0.44, derived.b_used_tesla) / derived.hopping_mev,
                                             rel=1e-12)
    assert derived.warnings == ()


def test_density_puts_fermi_energy_above_whole_landau_levels_when_p_exceeds_one():
    # With q_max = 200 the GaAs field 5 T rounds to flux 2/135: every lattice
    # Landau level is p = 2 Hofstadter sub-bands (Hofstadter, Phys. Rev. B 14,
    # 2239 (1976)), so filling 2 is the gap above 4 bands, where the Chern sum
    # is 2 (TKNN: 4 = 135 s + 2 t has t = 2, s = 0; Phys. Rev. Lett. 49, 405 (1982)).
    from topoedge.pipeline import bulk_chern, fermi_level

    s = parse_scenario({**GAAS, "field": {**GAAS["field"], "q_max": 200}, "chern": {"grid": [270, 8],
                                                                                   "refine": False}})
    lattice, d = lattice_scenario(s)
    assert lattice.lattice.flux == Fraction(2, 135)
    assert lattice.fermi.gap == 4
    chern, _, _ = bulk_chern(lattice)
    ef, gap = fermi_level(lattice, chern)
    assert gap.chern == 2 and gap.below == 4
    # E_F lies between the spin-split lowest level and the next one (meV above the band bottom).
    hw = cyclotron_mev(0.067, d.b_used_tesla)
    assert 0.5 * hw < (ef + 4.0) * d.hopping_mev < 1.5 * hw


def test_lattice_landau_levels_of_the_gaas_scenario():
    # The lowest two spin-averaged lattice Landau levels above the band bottom
    # -4t match the continuum hbar omega_c (n + 1/2) within 2 % (textbook),
    # using the field the rational flux corresponds to.
    lattice, d = lattice_scenario(parse_scenario(GAAS))
    q = lattice.lattice.flux.denominator
    width = 4 * q
    params = model_params(phi=lattice.lattice.flux, zeeman=lattice.spin.zeeman)
    ham = RibbonHamiltonian.from_kwant(ribbon_builder(width, spin=True), params=params)
    spec = ribbon_spectrum(ham, [0.0])
    bulk = np.abs(spec.y_mean[0] - width / 2) < width / 4
    energies = np.sort(spec.energy[0][bulk])
    levels = []
    for e in energies:
        if not levels or e - levels[-1] > 1e-6:
            levels.append(e)
    # spin up and spin down of n = 0, then of n = 1
    mean = [(levels[0] + levels[1]) / 2, (levels[2] + levels[3]) / 2]
    hw = cyclotron_mev(0.067, d.b_used_tesla)
    for n, e in enumerate(mean):
        above = (e + 4.0) * d.hopping_mev
        assert above == pytest.approx(hw * (n + 0.5), rel=0.02)
    # The Zeeman splitting of each level is |g| mu_B B exactly (S_z conserved).
    assert (levels[1] - levels[0]) * d.hopping_mev == pytest.approx(zeeman_mev(-0.44, d.b_used_tesla), rel=1e-6)


def test_fermi_energy_in_mev_is_measured_from_the_band_bottom():
    s = parse_scenario({"material": GAAS["material"], "field": {"b_tesla": 5.0, "fermi_mev": 8.0}})
    lattice, d = lattice_scenario(s)
    assert lattice.fermi.energy == pytest.approx(-4.0 + 8.0 / d.hopping_mev, rel=1e-12)


def test_coarse_lattice_warns_and_says_how_to_fix_it():
    s = parse_scenario({"material": {"preset": "gaas", "lattice_constant_nm": 6.0},
                        "field": {"b_tesla": 5.0}})
    _, d = lattice_scenario(s)
    assert len(d.warnings) == 1 and "lattice_constant_nm <= 3.825" in d.warnings[0]


def test_shipped_gaas_scenario_loads():
    lattice, d = lattice_scenario(load_scenario("configs/gaas-5T.toml"))
    assert lattice.lattice.flux.denominator == 68 and d.magnetic_length_a > 3


@pytest.mark.parametrize(
    "data, message",
    [
        ({"material": GAAS["material"], "field": {"b_tesla": 5.0, "density_cm2": 0.0}},
         r"^field\.density_cm2: got 0\.0, which gives no electrons"),
        ({"material": GAAS["material"], "field": {"b_tesla": 5.0, "density_cm2": 1e9}},
         r"^field\.density_cm2: got 1000000000\.0, filling factor 0\.008"),
        ({"material": {"preset": "gaas", "lattice_constant_nm": 20.0}, "field": {"b_tesla": 5.0}},
         r"^material\.lattice_constant_nm: got 20\.0, not below the magnetic length 11\.474 nm"),
        ({"material": GAAS["material"], "field": {"b_tesla": 0.0, "density_cm2": 2e11}},
         r"^field\.b_tesla: got 0; expected a non-zero field"),
        ({"material": {"lattice_constant_nm": 3.0}, "field": {"b_tesla": 1.0}},
         r"^material\.effective_mass: missing, but field\.b_tesla needs it"),
        ({"material": {"preset": "gaz"}, "field": {"b_tesla": 1.0}},
         r"^material\.preset: got 'gaz'; expected one of 'gaas'"),
        ({"field": {"density_cm2": 2e11}}, r"^field\.density_cm2: given without field\.b_tesla"),
        ({"material": GAAS["material"], "field": {"b_tesla": 5.0}, "lattice": {"flux": "1/40"}},
         r"^lattice\.flux: given together with field\.b_tesla"),
        ({"material": GAAS["material"], "field": {"b_tesla": 5.0, "fermi_mev": 4.0},
          "fermi": {"energy": -3.9}}, r"^fermi\.energy: given together with field\.fermi_mev"),
        ({"material": GAAS["material"], "field": {"b_tesla": 5.0, "fermi_mev": 4.0, "density_cm2": 2e11}},
         r"^field\.density_cm2: got 200000000000\.0 together with field\.fermi_mev"),
        ({"material": {"effective_mass": -0.1}}, r"^material\.effective_mass: got -0\.1; expected a mass > 0"),
    ],
    ids=["no-electrons", "less-than-half-filled", "lattice-constant-above-l_B", "zero-field",
         "missing-mass", "unknown-preset", "density-without-field", "flux-and-field",
         "energy-and-fermi-mev", "fermi-mev-and-density", "negative-mass"],
)
def test_bad_physical_input_is_one_clear_line(data, message):
    with pytest.raises(ConfigError, match=message) as info:
        parse_scenario(data)
    assert "\n" not in str(info.value)


def test_preset_keys_are_overridable_one_by_one():
    s = parse_scenario({"material": {"preset": "gaas", "g_factor": 2.0, "lattice_constant_nm": 3.0}})
    assert (s.material.effective_mass, s.material.g_factor, s.material.permittivity) == (0.067, 2.0, 12.9)
