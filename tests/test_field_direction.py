"""One field direction for every term, and real samples at the field asked for.

Sources:
- Time reversal of the whole Hamiltonian (orbital + Zeeman + Rashba) maps
  the field B to -B and the momentum k to -k: E_n(k; B) = E_n(-k; -B)
  (../shared/REFERENCES.md section 14; Kramers' theorem, textbook).
- E x B drift of a guiding centre, v = E x B / B^2 for any charge; for
  electrons in the confining potential U(y) of the bottom edge (U falling
  into the sample) and B along +z the drift is along -x (textbook).
- Hall resistance rho_xy = -sigma_xy / (sigma_xx^2 + sigma_xy^2) =
  -1/sigma_xy on a plateau (REFERENCES.md section S); electrons in B || +z
  have sigma_xy = -nu e^2/h (Drude sign of negative carriers, textbook), so
  R_xy = +R_K/nu, R_K = h/e^2 from scipy.constants (CODATA, exact since 2019).
- Filling factor nu = n h / (e B) at the field asked for (textbook, CODATA).
- GaAs m* = 0.067, g = -0.44, eps_r = 12.9 (REFERENCES.md section 11).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.constants as const

from topoedge.scenario import lattice_scenario, parse_scenario
from topoedge.workflows import build_ribbon, run_scenario
from topoedge.solvers.spectrum import ribbon_spectrum

R_K = const.h / const.e**2


def _physical(b, **extra):
    # An InAs-like electron gas (m* = 0.023, g = -14.9: strong Zeeman term)
    # with a Rashba term, in a field of either sign.
    data = {"material": {"effective_mass": 0.023, "g_factor": -14.9, "permittivity": 15.0,
                         "lattice_constant_nm": 5.0},
            "field": {"b_tesla": b, "fermi_mev": 10.0, "tolerance": 0.01},
            "spin": {"rashba": 0.08}, "ribbon": {"width": 40}, "chern": {"refine": False}}
    data.update(extra)
    return parse_scenario(data)


def test_time_reversal_of_a_rashba_ribbon_driven_from_the_field_section():
    k = np.linspace(-np.pi, np.pi, 41)[:-1] + 0.013
    spectra = {}
    for b in (2.0, -2.0):
        model, units = lattice_scenario(_physical(b))
        assert model.spin.rashba != 0 and abs(model.spin.zeeman) > 0.02  # Zeeman visible against Rashba
        ham, _ = build_ribbon(model)
        assert ham.spin_blocks() is None  # Rashba mixes the spins
        spectra[b] = (ribbon_spectrum(ham, k).energy, ribbon_spectrum(ham, -k).energy)
    plus_k, _ = spectra[2.0]
    _, minus_k_reversed = spectra[-2.0]
    np.testing.assert_allclose(plus_k, minus_k_reversed, atol=1e-10)
    # The relation is not trivially true: the spectrum at +B is not even in k.
    assert np.abs(plus_k - spectra[2.0][1]).max() > 1e-3


def test_a_zeeman_term_of_the_other_direction_breaks_the_reversal():
    # Flipping only the Zeeman sign (orbital phases of one direction, Zeeman of
    # the other: the inconsistency this convention removes) changes the spectrum.
    from dataclasses import replace

    k = np.linspace(-np.pi, np.pi, 21)[:-1] + 0.013
    model, _ = lattice_scenario(_physical(2.0))
    wrong = replace(model, spin=replace(model.spin, zeeman=-model.spin.zeeman))
    e_right = ribbon_spectrum(build_ribbon(model)[0], k).energy
    e_wrong = ribbon_spectrum(build_ribbon(wrong)[0], k).energy
    assert np.abs(e_right - e_wrong).max() > 1e-3


GAAS = {"material": {"preset": "gaas", "lattice_constant_nm": 3.5},
        "ribbon": {"width": 160, "edge": {"profile": "linear", "width": 10.0, "height": 0.5}},
        "spectrum": {"k_points": 61}, "chern": {"refine": False}}


@pytest.fixture(scope="module", params=[5.0, -5.0], ids=["B=+5T", "B=-5T"])
def gaas_run(request):
    b = request.param
    data = {**GAAS, "field": {"b_tesla": b, "density_cm2": 2.4e11},
            "hallbar": {"enabled": True, "length": 80, "width": 40}}
    return b, run_scenario(parse_scenario(data))


def test_chern_sum_drift_and_zeeman_follow_the_field_direction(gaas_run):
    b, result = gaas_run
    s = result.summary.to_dict()
    sign = np.sign(b)
    assert s["bulk"]["chern_below_fermi"] == -2 * sign
    # spin along B lower for g < 0: spin up (+z) for B > 0, spin down for B < 0
    assert s["bulk"]["bands"][0]["spin"] == ("up" if b > 0 else "down")
    modes = s["edges"]["bottom"]["modes"]
    assert len(modes) == 2
    for m in modes:
        assert np.sign(m["velocity"]) == -sign           # E x B drift of electrons: -x for B || +z
        assert np.sign(m["drift_m_s"]) == -sign
        # The mode moves at the drift speed of the ramp to within a factor 2.
        assert 0.5 < m["velocity_m_s"] / m["drift_m_s"] < 2.0


def test_every_hall_resistance_output_has_one_sign(gaas_run):
    b, result = gaas_run
    s = result.summary.to_dict()
    expected = 2 * np.sign(b)     # R_xy / (R_K / 2): + for B || +z (electrons)
    assert s["hall"]["r_xy_ohm"] == pytest.approx(expected * R_K / 4, rel=1e-12)
    assert s["physical"]["r_xy_ohm"] == pytest.approx(s["hall"]["r_xy_ohm"], rel=1e-15)
    bar = s["hall"]["hallbar"]
    assert bar["r_xy"] == pytest.approx(expected / 4, rel=1e-6)             # h/e^2
    assert bar["r_xy_ohm"] == pytest.approx(s["hall"]["r_xy_ohm"], rel=1e-6)
    assert s["hall"]["routes"]["hallbar"] == pytest.approx(s["hall"]["sigma_xy"], abs=1e-6)


# ------------------------------------------------------- real samples, real fields

# (B in T, n in cm^-2, integer filling n h / (e B) rounded); a = 3.5 nm, default tolerance 0.1 %.
SAMPLES = [(0.5, 1.0e11, 8), (2.0, 2.0e11, 4), (10.0, 5.0e11, 2)]


@pytest.mark.parametrize("b, density, nu", SAMPLES, ids=[f"{b}T-{n:.0e}" for b, n, _ in SAMPLES])
def test_gaas_sample_at_the_field_asked_for(b, density, nu):
    width = 220 if b < 1 else 160
    data = {**GAAS, "ribbon": {**GAAS["ribbon"], "width": width},
            "field": {"b_tesla": b, "density_cm2": density}}
    result = run_scenario(parse_scenario(data))
    s = result.summary.to_dict()
    u = s["units"]
    # the field computed is the field asked for, to 0.1 %
    assert u["b_tesla"] == b and abs(u["b_lattice_tesla"] / b - 1) <= 1e-3
    # filling factor at the field asked for (CODATA)
    assert u["filling"] == pytest.approx(density * 1e4 * const.h / (const.e * b), rel=1e-12)
    assert round(u["filling"]) == nu
    # bulk Chern sum, both edges and the Streda route agree: C = -nu (B || +z)
    assert s["bulk"]["chern_below_fermi"] == -nu
    assert s["edges"]["bottom"]["net"] == -nu and s["edges"]["top"]["net"] == nu
    assert s["edges"]["in_gap"] and s["check"]["bulk_edge_agree"] and s["check"]["routes_agree"]
    assert s["hall"]["routes"]["streda"] == pytest.approx(-nu, abs=1e-6)
    assert s["physical"]["r_xy_ohm"] == pytest.approx(R_K / nu, rel=1e-12)
    assert s["bulk"]["solver"] == "landau"
