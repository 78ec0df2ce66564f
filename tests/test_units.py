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

from topoedge.models.square import model_params, ribbon_builder
from topoedge.scenario import ConfigError, lattice_scenario, load_scenario, parse_scenario
from topoedge.systems.ribbon import RibbonHamiltonian
from topoedge.solvers.spectrum import ribbon_spectrum
from topoedge.scenario.units import cyclotron_mev, hopping_mev, magnetic_length_nm, zeeman_mev

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
    # nu = n h / (e B) = 2.4e15 m^-2 * h / (e * 5 T) = 1.985, at the field asked for.
    s = parse_scenario(GAAS)
    lattice, derived = lattice_scenario(s)
    assert derived.filling == pytest.approx(2.4e15 * const.h / (const.e * 5.0), rel=1e-12)
    assert abs(derived.filling - 1.985) < 1e-3
    # The flux of simplest form within the default tolerance 0.1 %: -2/135
    # (negative: B along +z for electrons, topoedge.scenario.units).
    assert lattice.lattice.flux == Fraction(-2, 135)
    assert lattice.fermi.gap == 4 and lattice.fermi.energy is None   # nu = 2 levels of 2 sub-bands
    b_lattice = 2 / 135 * (const.h / const.e) / (3.5e-9) ** 2
    assert derived.b_lattice_tesla == pytest.approx(b_lattice, rel=1e-12)
    assert derived.b_relative_error == pytest.approx(b_lattice / 5.0 - 1, rel=1e-9)
    assert abs(derived.b_relative_error) <= 1e-3
    # Every scale is that of the field asked for: l_B(5 T) = 25.6556 nm / sqrt(5).
    assert derived.magnetic_length_nm == pytest.approx(25.6556 / math.sqrt(5), rel=1e-5)
    # GaAs g < 0 puts spin up (along B, +z) lower: positive Zeeman splitting in t.
    assert derived.zeeman_t == pytest.approx(zeeman_mev(-0.44, 5.0) / derived.hopping_mev, rel=1e-12)
    assert derived.zeeman_t > 0
    assert derived.warnings == ()


def test_density_puts_fermi_energy_above_whole_landau_levels_when_p_exceeds_one():
    # At flux -2/135 every lattice Landau level is p = 2 Hofstadter sub-bands
    # (Hofstadter, Phys. Rev. B 14, 2239 (1976)), so filling 2 is the gap above
    # 4 bands, where the Chern sum is -2 (TKNN: 4 = 135 s - 2 t has t = -2,
    # s = 0; Phys. Rev. Lett. 49, 405 (1982)).
    from topoedge.workflows import bulk_chern, fermi_level

    s = parse_scenario({**GAAS, "chern": {"refine": False}})
    lattice, d = lattice_scenario(s)
    assert lattice.lattice.flux == Fraction(-2, 135)
    assert lattice.fermi.gap == 4
    chern, _, _ = bulk_chern(lattice)
    ef, gap = fermi_level(lattice, chern)
    assert gap.chern == -2 and gap.below == 4
    # E_F lies between the spin-split lowest level and the next one (meV above the band bottom).
    hw = cyclotron_mev(0.067, 5.0)
    assert 0.5 * hw < (ef + 4.0) * d.hopping_mev < 1.5 * hw


def test_lattice_landau_levels_of_the_gaas_scenario():
    # The lowest two spin-averaged lattice Landau levels above the band bottom
    # -4t match the continuum hbar omega_c (n + 1/2) at the field asked for
    # within 2 % (textbook; the lattice field differs by 0.03 %).
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
    hw = cyclotron_mev(0.067, d.b_tesla)
    for n, e in enumerate(mean):
        above = (e + 4.0) * d.hopping_mev
        assert above == pytest.approx(hw * (n + 0.5), rel=0.02)
    # The Zeeman splitting of each level is |g| mu_B B exactly (S_z conserved).
    assert (levels[1] - levels[0]) * d.hopping_mev == pytest.approx(zeeman_mev(-0.44, d.b_tesla), rel=1e-6)


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
    lattice, d = lattice_scenario(load_scenario("topoedge/data/scenarios/gaas-5T.toml"))
    assert lattice.lattice.flux == Fraction(-2, 135) and d.magnetic_length_a > 3
    assert abs(d.b_relative_error) <= 1e-3


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


# ------------------------------------------------ the field asked for is the field computed


def test_simplest_fraction_has_the_smallest_denominator_in_the_interval():
    # Brute force over denominators (definition of the simplest rational in
    # an interval; the continued-fraction algorithm is textbook).
    from topoedge.scenario.units import simplest_fraction

    rng = np.random.default_rng(3)
    for x in rng.uniform(1e-4, 0.6, 40):
        lo, hi = Fraction(x * (1 - 1e-3)), Fraction(x * (1 + 1e-3))
        f = simplest_fraction(lo, hi)
        assert lo <= f <= hi
        brute = next(q for q in range(1, 100_000) if math.floor(hi * q) >= math.ceil(lo * q))
        assert f.denominator == brute


@pytest.mark.parametrize("b, a", [(0.5, 3.5), (1.0, 3.5), (2.0, 3.5), (5.0, 3.5), (10.0, 2.5), (-3.0, 4.0)])
def test_lattice_field_is_within_the_tolerance(b, a):
    from topoedge.scenario.units import derive

    d = derive(effective_mass=0.067, g_factor=-0.44, permittivity=12.9, lattice_constant_nm=a, b_tesla=b)
    assert abs(d.b_lattice_tesla / b - 1) <= 1e-3 and abs(d.b_relative_error) <= 1e-3
    # flux = -B a^2 / (h/e) within the tolerance (B along +z, electrons: topoedge.scenario.units)
    exact = -b * (a * 1e-9) ** 2 / (const.h / const.e)
    assert float(d.flux) == pytest.approx(exact, rel=1e-3)
    assert np.sign(float(d.flux)) == -np.sign(b)
    # scales at the field asked for (CODATA through scipy.constants)
    assert d.magnetic_length_nm == pytest.approx(math.sqrt(const.hbar / (const.e * abs(b))) * 1e9, rel=1e-12)
    assert d.cyclotron_mev == pytest.approx(const.hbar * const.e * abs(b) / (0.067 * const.m_e) / (1e-3 * const.e),
                                            rel=1e-12)


def test_tolerance_that_cannot_be_met_is_refused_in_one_line():
    data = {"material": GAAS["material"], "field": {"b_tesla": 1.0, "density_cm2": 1e11, "q_max": 100}}
    with pytest.raises(ConfigError, match=r"^field\.tolerance: the field 1 T is not reached within 0\.001 .* "
                                          r"expected field\.q_max >= 675") as info:
        parse_scenario(data)
    assert "\n" not in str(info.value)
    # A looser tolerance or a larger q_max is accepted.
    parse_scenario({**data, "field": {**data["field"], "q_max": 675}})
    with pytest.raises(ConfigError, match=r"^field\.tolerance: got 0\.05; expected a relative tolerance"):
        parse_scenario({**data, "field": {**data["field"], "tolerance": 0.05}})


@pytest.mark.parametrize("b, density", [(0.5, 1e11), (1.0, 1e11), (2.0, 3e11), (10.0, 5e11)])
def test_automatic_lattice_constant_gives_flux_exactly_one_over_q(b, density):
    # a = sqrt((h/e) / (q B)) makes B a^2 / (h/e) = 1/q exactly; q >= 57 puts
    # a <= l_B / 3 (l_B^2 = hbar / (e B) = (h/e) / (2 pi B): a / l_B = sqrt(2 pi / q)).
    from topoedge.scenario.units import lattice_level_error

    s = parse_scenario({"material": {"preset": "gaas", "lattice_constant_nm": "auto"},
                        "field": {"b_tesla": b, "density_cm2": density}})
    lattice, d = lattice_scenario(s)
    q = lattice.lattice.flux.denominator
    assert lattice.lattice.flux == Fraction(-1, q) and q >= 57
    assert d.b_relative_error == pytest.approx(0.0, abs=1e-12)
    a = d.lattice_constant_nm * 1e-9
    assert b * a**2 / (const.h / const.e) == pytest.approx(1 / q, rel=1e-12)
    assert d.lattice_constant_nm <= d.magnetic_length_nm / 3 and d.lattice_constant_auto
    # The first level above E_F is within 1 % of the continuum (leading lattice term,
    # ../shared/REFERENCES.md section 4); the level index from the filling (spin-resolved).
    nu = round(d.filling)
    assert lattice_level_error(nu // 2, 1 / q) <= 0.01
    assert d.warnings == ()


def test_coarse_lattice_above_the_magnetic_length_is_refused_and_one_third_warns():
    with pytest.raises(ConfigError, match=r"^material\.lattice_constant_nm: got 30\.0, not below the magnetic "
                                          r"length 25\.656 nm .* or 'auto'"):
        parse_scenario({"material": {"preset": "gaas", "lattice_constant_nm": 30.0}, "field": {"b_tesla": 1.0}})
    _, d = lattice_scenario(parse_scenario({"material": {"preset": "gaas", "lattice_constant_nm": 10.0},
                                            "field": {"b_tesla": 1.0, "tolerance": 0.01}}))
    assert any("lattice_constant_nm <= 8.552 or 'auto'" in w for w in d.warnings)
    with pytest.raises(ConfigError, match=r"^material\.lattice_constant_nm: got 'autom'; expected a length "
                                          r"> 0 in nm or \"auto\""):
        parse_scenario({"material": {"preset": "gaas", "lattice_constant_nm": "autom"}, "field": {"b_tesla": 1.0}})


def test_one_field_direction_for_orbital_and_zeeman_terms():
    # B along +z (b_tesla > 0), electrons: counter-clockwise plaquette phase
    # -2 pi B a^2/(h/e) (Peierls phase -(e/hbar) int A.dl; REFERENCES.md
    # section 14), Zeeman (1/2) g mu_B B sigma_z with g < 0 puts spin up lower.
    # Reversing B reverses both.
    up, d_up = lattice_scenario(parse_scenario({**GAAS, "field": {"b_tesla": 5.0, "density_cm2": 2.4e11}}))
    dn, d_dn = lattice_scenario(parse_scenario({**GAAS, "field": {"b_tesla": -5.0, "density_cm2": 2.4e11}}))
    assert up.lattice.flux < 0 < dn.lattice.flux and up.lattice.flux == -dn.lattice.flux
    assert up.spin.zeeman > 0 > dn.spin.zeeman and up.spin.zeeman == -dn.spin.zeeman
    assert d_up.to_dict()["field_direction"] == "+z" and d_dn.to_dict()["field_direction"] == "-z"
