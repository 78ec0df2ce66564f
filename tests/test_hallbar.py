"""Six-terminal Hall bar: quantised R_xy and vanishing R_xx (topoedge.solvers.transport)."""

import warnings
from fractions import Fraction

import numpy as np
import pytest
import scipy.constants as const

with warnings.catch_warnings():
    warnings.simplefilter("ignore", RuntimeWarning)  # kwant: MUMPS absent, SciPy solver used
    import kwant  # noqa: F401

from topoedge.systems.bloch import BlochHamiltonian
from topoedge.models.square import bulk_builder, model_params
from topoedge.solvers.chern import chern_numbers
from topoedge.models.hallbar import hallbar_builder, hallbar_params
from topoedge.scenario.units import VON_KLITZING
from topoedge.solvers.transport import disorder_average, hall_resistances
from topoedge.models.profiles import EDGE_PROFILES

PHI = Fraction(1, 10)           # magnetic length sqrt(1 / (2 pi phi)) = 1.26 a
ZEEMAN = 0.1                    # units of t
GEOMETRY = dict(lead_width=24, probe_positions=(12, 32), probe_width=6)


def _gaps(spin, zeeman=0.0):
    bloch = BlochHamiltonian.from_kwant(bulk_builder(PHI, spin=spin),
                                        params=model_params(phi=PHI, zeeman=zeeman))
    return chern_numbers(bloch).gaps


@pytest.fixture(scope="module")
def spinless():
    return hallbar_builder(50, 24, spin=False, **GEOMETRY).finalized()


@pytest.fixture(scope="module")
def spinless_gaps():
    return _gaps(False)


def test_von_klitzing_constant():
    # Source: 2019 SI, h and e exact; R_K = h/e^2 = 25812.80745... ohm (CODATA, scipy.constants).
    assert VON_KLITZING == pytest.approx(const.h / const.e**2, rel=1e-15)
    assert VON_KLITZING == pytest.approx(25812.80745930, rel=1e-12)


def test_gauge_plaquette_phase(spinless):
    # Source: topoedge.models.square convention, counter-clockwise plaquette phase +2 pi phi
    # (Peierls substitution, Hofstadter PRB 14, 2239 (1976)); checked from the
    # finalized Hamiltonian in the bar, across the probe columns (where the gauge
    # is transformed) and at the corners.
    params = hallbar_params(spinless, dict(phi=float(PHI)))
    ham = spinless.hamiltonian_submatrix(params=params)
    index = {tuple(np.round(s.pos).astype(int)): i for i, s in enumerate(spinless.sites)}
    corners = [(10, 10), (0, 0), (48, 22), (11, 5), (12, 5), (17, 20), (31, 0), (37, 22)]
    for x, y in corners:
        a, b, c, d = (index[p] for p in [(x, y), (x + 1, y), (x + 1, y + 1), (x, y + 1)])
        # Hopping a -> b is the matrix element H[b, a] = -t exp(i theta_ba).
        loop = (-ham[b, a]) * (-ham[c, b]) * (-ham[d, c]) * (-ham[a, d])
        assert np.angle(loop) == pytest.approx(2 * np.pi * float(PHI), abs=1e-10)


def test_column_gauge_matches_kwant_magnetic_gauge():
    # Outside reference: kwant.physics.magnetic_gauge builds a lead-compatible
    # gauge by itself; the project's column gauge must give the same
    # conductance matrix (gauge invariance), with spin, Zeeman splitting, an
    # edge ramp and disorder, on a plateau and in a transition.
    ramp = EDGE_PROFILES["linear"]

    def potential(d):
        return ramp(np.asarray(d, dtype=float), width=3.0, height=1.0, table=())

    geometry = dict(lead_width=24, probe_positions=(8, 30), probe_width=10, spin=True, potential=potential)
    ours = hallbar_builder(48, 24, **geometry).finalized()
    theirs = hallbar_builder(48, 24, gauge="kwant", **geometry).finalized()
    assert "peierls" in theirs.parameters and "peierls" not in ours.parameters
    params = dict(phi=PHI, zeeman=ZEEMAN, disorder=0.4, seed=3)
    for energy in (-2.9, -2.5):
        a = hall_resistances(ours, energy, params)
        b = hall_resistances(theirs, energy, params)
        assert np.abs(a.conductance - b.conductance).max() < 1e-9
        assert a.r_xy == pytest.approx(b.r_xy, rel=1e-9, abs=1e-12)


def test_column_gauge_needs_free_end_columns():
    with pytest.raises(ValueError, match="touch the first or last column"):
        hallbar_builder(50, 24, spin=False, lead_width=24, probe_positions=(0, 32), probe_width=6)
    hallbar_builder(50, 24, spin=False, lead_width=24, probe_positions=(0, 32), probe_width=6, gauge="kwant")


@pytest.mark.parametrize("nu", [1, 2], ids=["nu1", "nu2"])
def test_clean_plateau_spinless(spinless, spinless_gaps, nu):
    # Source: Buttiker PRB 38, 9375 (1988): ideal edge channels give R_xy = h/(nu e^2), R_xx = 0;
    # nu = bulk Chern sum (TKNN, PRL 49, 405 (1982)) of the gap at E_F.
    gap = spinless_gaps[nu - 1]
    assert gap.chern == nu
    r = hall_resistances(spinless, gap.middle, dict(phi=float(PHI)))
    assert abs(r.r_xy) == pytest.approx(1 / nu, rel=1e-6)
    assert abs(r.r_xy_ohm) == pytest.approx(VON_KLITZING / nu, rel=1e-6)
    assert abs(r.r_xx) < 1e-6
    assert list(r.modes) == [nu] * 6


@pytest.mark.parametrize("nu", [1, 2], ids=["nu1", "nu2"])
def test_clean_plateau_zeeman_split(nu):
    # Source: Buttiker PRB 38, 9375 (1988); Zeeman-split lowest Landau level: spin up (shifted by
    # -zeeman/2) fills first, so nu = 1 in the Zeeman gap and nu = 2 above the level.
    gaps = _gaps(True, ZEEMAN)
    gap = gaps[nu - 1]
    assert gap.chern == nu
    fsyst = hallbar_builder(44, 20, spin=True, lead_width=20, probe_positions=(10, 28),
                            probe_width=6).finalized()
    r = hall_resistances(fsyst, gap.middle, dict(phi=float(PHI), zeeman=ZEEMAN))
    assert abs(r.r_xy) == pytest.approx(1 / nu, rel=1e-6)
    assert abs(r.r_xx) < 1e-6


def test_disorder_keeps_plateau(spinless, spinless_gaps):
    # Source: Buttiker PRB 38, 9375 (1988): no backscattering between separated edges; Anderson
    # disorder W = 0.5 t (PR 109, 1492 (1958)) well inside the nu = 2 gap (about 0.9 t wide).
    gap = spinless_gaps[1]
    avg = disorder_average(spinless, gap.middle, dict(phi=float(PHI), disorder=0.5), seeds=range(3))
    assert abs(avg.r_xy) == pytest.approx(0.5, rel=1e-3)
    assert abs(avg.r_xx) < 1e-3
    assert len(avg.samples) == 3 and avg.r_xy_sem >= 0


def test_disorder_seeds_differ_and_repeat(spinless):
    # Source: seeded numpy Generator: the same seed repeats, another seed changes the sample.
    params = dict(phi=float(PHI), disorder=1.0)
    e = -2.3
    r1 = hall_resistances(spinless, e, {**params, "seed": 1})
    r1b = hall_resistances(spinless, e, {**params, "seed": 1})
    r2 = hall_resistances(spinless, e, {**params, "seed": 2})
    assert r1.r_xx == r1b.r_xx
    assert r1.r_xx != r2.r_xx


def test_plateau_transition_has_longitudinal_resistance(spinless):
    # Source: Buttiker PRB 38, 9375 (1988): inside a (disorder-broadened) Landau level the bulk
    # conducts and backscatters, so R_xx > 0; measured 0.06 .. 0.24 h/e^2 at W = 1 t, seed 1.
    params = dict(phi=float(PHI), disorder=1.0, seed=1)
    rxx = [hall_resistances(spinless, e, params).r_xx for e in (-2.4, -2.3, -2.25)]
    assert max(abs(v) for v in rxx) > 1e-2


def test_field_reversal_flips_hall_sign(spinless, spinless_gaps):
    # Source: Onsager reciprocity, R_xy(B) = -R_xy(-B) for this probe pair (Buttiker PRL 57, 1761
    # (1986)); sign convention of topoedge.solvers.transport: phi > 0 gives R_xy < 0 with leads (1, 5).
    e = spinless_gaps[0].middle
    plus = hall_resistances(spinless, e, dict(phi=float(PHI)))
    minus = hall_resistances(spinless, e, dict(phi=-float(PHI)))
    assert plus.r_xy == pytest.approx(-1.0, rel=1e-6)
    assert minus.r_xy == pytest.approx(1.0, rel=1e-6)


def test_edge_potential_keeps_plateau(spinless_gaps):
    # Source: Buttiker PRB 38, 9375 (1988): a smooth confinement moves the edge channels but not
    # the quantisation; linear ramp of topoedge.models.profiles, 2 sites, height 1 t.
    def pot(d):
        return EDGE_PROFILES["linear"](d, width=2.0, height=1.0, table=())

    fsyst = hallbar_builder(50, 24, spin=False, potential=pot, **GEOMETRY).finalized()
    r = hall_resistances(fsyst, spinless_gaps[1].middle, dict(phi=float(PHI)))
    assert abs(r.r_xy) == pytest.approx(0.5, rel=1e-6)
    assert abs(r.r_xx) < 1e-6


def test_bar_narrower_than_potential():
    # Source: topoedge.models.profiles: the bulk must be flat between the two edge ramps.
    def pot(d):
        return EDGE_PROFILES["linear"](d, width=10.0, height=1.0, table=())

    with pytest.raises(ValueError, match="narrower than the edge potential"):
        hallbar_builder(50, 12, spin=False, lead_width=12, probe_positions=(10, 30),
                        probe_width=12, potential=pot)


def test_lead_wider_than_bar():
    # Source: geometry of the six-terminal bar (module docstring).
    with pytest.raises(ValueError, match="wider than the bar"):
        hallbar_builder(50, 20, spin=False, lead_width=24, probe_positions=(10, 30))


def test_probes_must_fit():
    # Source: geometry of the six-terminal bar (module docstring).
    with pytest.raises(ValueError, match="must fit in the bar"):
        hallbar_builder(50, 20, spin=False, lead_width=20, probe_positions=(10, 12), probe_width=6)


def test_energy_outside_lead_bands(spinless):
    # Source: Landauer-Buttiker: a lead without open channels makes G singular; square-lattice
    # bands lie in [-4t, 4t], so E_F = -4.5 t has no channel anywhere.
    with pytest.raises(ValueError, match="no open channel"):
        hall_resistances(spinless, -4.5, dict(phi=float(PHI)))


def test_missing_phi(spinless):
    # Source: topoedge.solvers.transport.hallbar_params contract.
    with pytest.raises(ValueError, match="must contain 'phi'"):
        hall_resistances(spinless, -2.0, dict(t=1.0))


# The 2/5 gap 1 is narrow (0.16 t): its edge states decay over several sites,
# so the bar must be larger for R_xx to fall below 1e-6 (measured: 7e-7 at
# 120 x 60, 1e-4 at 80 x 40).
@pytest.mark.parametrize("flux, gap, expected, size", [("2/5", 1, -2, (120, 60)), ("1/10", 2, 2, (48, 24))],
                         ids=["2/5-gap1", "1/10-gap2"])
def test_four_routes_agree_through_the_pipeline(flux, gap, expected, size):
    # Chern sum, edge chirality, Streda slope and Hall-bar transport give the
    # same integer (TKNN, PRL 49, 405 (1982); Buttiker, PRB 38, 9375 (1988));
    # the Hall bar to 1e-6 relative (R_K = h/e^2, CODATA via scipy.constants).
    from topoedge.scenario import parse_scenario
    from topoedge.workflows import run_scenario

    scenario = parse_scenario({
        "lattice": {"flux": flux}, "spin": {"enabled": False}, "ribbon": {"width": 80},
        "fermi": {"gap": gap}, "spectrum": {"k_points": 16}, "chern": {"refine": False},
        "hallbar": {"enabled": True, "length": size[0], "width": size[1]},
    })
    summary = run_scenario(scenario).summary.to_dict()
    routes = summary["hall"]["routes"]
    assert routes["chern"] == routes["edge"] == expected
    assert routes["streda"] == pytest.approx(expected, abs=1e-9)
    assert routes["hallbar"] == pytest.approx(expected, rel=1e-6)
    assert summary["hall"]["hallbar"]["r_xx"] == pytest.approx(0.0, abs=1e-6)
    assert summary["check"]["routes_agree"] is True


def test_hallbar_narrower_than_the_edge_ramps_is_refused():
    from topoedge.scenario import ConfigError, parse_scenario

    with pytest.raises(ConfigError, match=r"^hallbar\.width: got 12, not wider than the two edge ramps"):
        parse_scenario({"ribbon": {"edge": {"profile": "linear", "width": 8, "height": 1}},
                        "hallbar": {"enabled": True, "width": 12}})


def test_hallbar_command_scans_the_plateaus(tmp_path):
    # End to end: `topoedge hallbar` writes summary.json, hallbar.h5 and the
    # figure; on the plateaus R_xy = -h/(nu e^2) as the bulk Chern sum predicts
    # (von Klitzing constant h/e^2 from scipy.constants), R_xx ~ 0.
    import json
    import subprocess
    import sys

    config = tmp_path / "bar.toml"
    config.write_text('[lattice]\nflux = "1/10"\n[spin]\nenabled = false\n[ribbon]\nwidth = 60\n'
                      '[fermi]\ngap = 1\n[hallbar]\nlength = 48\nwidth = 24\n')
    out = tmp_path / "scan"
    proc = subprocess.run([sys.executable, "-m", "topoedge", "hallbar", str(config), "--energies=-3.2:-2.6:3",
                           "--out", str(out), "--json", "--quiet"], capture_output=True, text=True, cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    summary = json.loads(proc.stdout)
    assert {p.name for p in out.iterdir()} == {"summary.json", "hallbar.h5", "hallbar.csv", "hallbar.png"}
    assert summary["chern"] == [1, 1, 1]
    # E_F in the gap above one band at flux 1/10: filling factor 1/|p| = 1
    # (common practice, no source), the flux of every point given.
    assert summary["filling_bulk"] == [1.0, 1.0, 1.0] and summary["flux"] == ["1/10"] * 3
    for r_xy, r_xx in zip(summary["r_xy"], summary["r_xx"]):
        assert r_xy == pytest.approx(-1.0, rel=1e-6) and abs(r_xx) < 1e-6
    import csv

    rows = list(csv.DictReader((out / "hallbar.csv").open()))
    assert len(rows) == 3 and rows[0]["energy (t)"] == "-3.2" and rows[0]["status"] == "ok"
    assert float(rows[1]["r_xy (h/e^2)"]) == pytest.approx(-1.0, rel=1e-6)
    assert float(rows[1]["r_xy_ohm (ohm)"]) == pytest.approx(-const.physical_constants["von Klitzing constant"][0],
                                                             rel=1e-6)
    # The negative range without "=", and the printed table.
    again = subprocess.run([sys.executable, "-m", "topoedge", "hallbar", str(config), "--energies", "-3.2:-2.6:2",
                            "--out", str(tmp_path / "again")], capture_output=True, text=True, cwd=tmp_path)
    assert again.returncode == 0, again.stderr
    table = [line.split() for line in again.stdout.splitlines() if line.strip().startswith("-3.2000")]
    assert table and table[0][:4] == ["-3.2000", "1.00", "1", "-1.00000"]
    bad = subprocess.run([sys.executable, "-m", "topoedge", "hallbar", str(config), "--energies=1:0:3",
                          "--out", str(tmp_path / "bad")], capture_output=True, text=True, cwd=tmp_path)
    assert bad.returncode == 2 and bad.stderr.count("\n") == 1 and "expected LO:HI:N" in bad.stderr
    assert not (tmp_path / "bad").exists()


def test_per_spin_resistances_with_conserved_sz():
    # S_z is conserved (Zeeman only): each spin sector is a conductor of its
    # own. At nu = 1 only spin up carries an edge channel (R_xy = -h/e^2 for
    # it, no open spin-down channel); at nu = 2 each spin has R_xy = -h/e^2
    # and together -h/(2e^2) (Buttiker, PRB 38, 9375 (1988); CODATA h/e^2).
    fsyst = hallbar_builder(44, 20, lead_width=20, probe_positions=(8, 28), spin=True,
                            probe_width=6).finalized()
    params = dict(t=1.0, phi=0.1, zeeman=0.1, onsite=0.0)
    one = hall_resistances(fsyst, -3.42, params)
    assert one.by_spin["up"]["r_xy"] == pytest.approx(-1.0, rel=1e-9) and one.by_spin["down"] is None
    two = hall_resistances(fsyst, -2.8868, params)
    assert two.r_xy == pytest.approx(-0.5, rel=1e-9)
    for spin in ("up", "down"):
        assert two.by_spin[spin]["r_xy"] == pytest.approx(-1.0, rel=1e-9)
        assert abs(two.by_spin[spin]["r_xx"]) < 1e-9


def test_conductance_sum_rules_and_solvers_agree(spinless):
    # Current conservation and no current at equal voltages: every row and
    # column of the conductance matrix sums to zero (Buttiker, PRL 57, 1761
    # (1986)). Every solver available here gives the same matrix.
    from topoedge.solvers.transport import solvers, sum_rule_violation

    params = hallbar_params(spinless, dict(phi=PHI))
    matrices = {name: np.asarray(smatrix(spinless, -2.9, params=params).conductance_matrix())
                for name, smatrix in solvers().items()}
    assert "scipy" in matrices
    for g in matrices.values():
        assert sum_rule_violation(g) < 1e-9
        assert np.abs(g - matrices["scipy"]).max() < 1e-9
    broken = matrices["scipy"].copy()
    broken[1, 1] += 0.2
    assert sum_rule_violation(broken) == pytest.approx(0.2, rel=1e-6)


def test_disorder_average_keeps_per_spin_values():
    fsyst = hallbar_builder(44, 20, lead_width=20, probe_positions=(8, 28), spin=True,
                            probe_width=6).finalized()
    params = dict(t=1.0, phi=0.1, zeeman=0.1, onsite=0.0, disorder=0.3)
    avg = disorder_average(fsyst, -2.8868, params, seeds=[0, 1])
    # Each spin sector on its nu = 1 plateau (Buttiker, PRB 38, 9375 (1988)).
    for spin in ("up", "down"):
        assert avg.by_spin[spin]["r_xy"] == pytest.approx(-1.0, rel=1e-6)
        expected = np.mean([s.by_spin[spin]["r_xy"] for s in avg.samples])
        assert avg.by_spin[spin]["r_xy"] == expected


def test_run_reports_per_spin_hall_bar_values():
    from topoedge.scenario import parse_scenario
    from topoedge.workflows import run_scenario

    scenario = parse_scenario({
        "lattice": {"flux": "1/10"}, "spin": {"enabled": True, "zeeman": 0.1}, "ribbon": {"width": 60},
        "fermi": {"gap": 2}, "spectrum": {"k_points": 16}, "chern": {"refine": False},
        "hallbar": {"enabled": True, "length": 48, "width": 24},
    })
    summary = run_scenario(scenario).summary.to_dict()
    bar = summary["hall"]["hallbar"]
    # Spin Chern numbers (1, 1) below the gap: each spin sector alone has
    # sigma_xy = 1 e^2/h (R_xy = -h/e^2 with this module's sign).
    for spin in ("up", "down"):
        assert bar["by_spin"][spin]["sigma_xy"] == pytest.approx(1.0, rel=1e-6)
        assert summary["bulk"]["spin_chern_below_fermi"][spin] == 1


def _field_scenario(tmp_path):
    # GaAs with a coarse 8 nm lattice: flux about 1/13 per plaquette at 5 T, so
    # the bulk Chern numbers of every field are quick (l_B < 3a warns; fine here);
    # the field tolerance of 1 % is met with denominators up to 60.
    config = tmp_path / "field.toml"
    config.write_text('[material]\npreset = "gaas"\nlattice_constant_nm = 8.0\n'
                      '[field]\nb_tesla = 5.0\nfermi_mev = 10.0\nq_max = 60\ntolerance = 0.01\n'
                      '[ribbon]\nwidth = 60\n[hallbar]\nlength = 48\nwidth = 24\n')
    return config


def test_field_scan_follows_the_landau_levels_through_e_f(tmp_path):
    # At fixed E_F = 10 meV above the band bottom the spin-degenerate GaAs
    # levels leave E_F one after the other as B grows. Expected fillings from
    # the continuum levels hbar omega_c (n + 1/2) (Landau levels, common
    # practice; hbar omega_c = 1.728 meV/T for m* = 0.067 from CODATA,
    # ../shared/REFERENCES.md section 4) lowered by the lattice term (pi^2 t phi^2 / 2)(2n^2 + 2n + 1)
    # (derived for this project, see tests/test_spectrum.py), t = 8.89 meV:
    # 2 T: n = 2 at 8.1 meV, n = 3 at 11.0 meV -> 6; 3 T: n = 1 at 7.4 meV,
    # n = 2 at 11.8 meV -> 4; 8 T: n = 0 at 6.8 meV, n = 1 at 17 meV -> 2.
    # The field points along +z (B > 0): electrons have C = -nu and
    # R_xy = -1/sigma_xy = +h/(nu e^2) (Drude/Hall sign for negative carriers,
    # common practice). Hall bar and bulk Chern sum agree at every field.
    from topoedge.scenario import load_scenario
    from topoedge.workflows import hallbar_field_scan

    scan = hallbar_field_scan(load_scenario(_field_scenario(tmp_path)), [2.0, 3.0, 8.0], jobs=1)
    assert scan["fermi_mev"] == pytest.approx(10.0, rel=1e-9)
    assert scan["chern"] == [-6, -4, -2]
    for r_xy, c in zip(scan["r_xy"], scan["chern"]):
        assert r_xy == pytest.approx(-1.0 / c, rel=1e-6) and r_xy > 0
    for spin in ("up", "down"):
        assert scan[f"r_xy_{spin}"][-1] == pytest.approx(1.0, rel=1e-6)
    # every field within the tolerance of 1 %
    assert all(abs(b - u) / b <= 0.01 for b, u in zip(scan["b_tesla"], scan["b_lattice_tesla"]))


def test_hallbar_command_scans_the_field(tmp_path, capsys):
    # The field scan through the command line (the scenario resolved once and
    # handed down): the same plateaus as above at 3 T and 8 T, R_xy =
    # -1/sigma_xy = +h/(nu e^2) for electrons in B || +z, and the three files.
    import json

    from topoedge import cli

    out = tmp_path / "fields"
    assert cli.main(["hallbar", str(_field_scenario(tmp_path)), "--fields", "3:8:2", "--jobs", "1", "--out",
                     str(out), "--json", "--quiet"]) == 0
    printed = json.loads(capsys.readouterr().out)
    assert {p.name for p in out.iterdir()} == {"summary.json", "hallbar.h5", "hallbar.csv", "hallbar.png"}
    assert json.loads((out / "summary.json").read_text()) == printed
    assert printed["b_tesla"] == [3.0, 8.0] and printed["chern"] == [-4, -2]
    # the bulk filling factor at every field: r/|p| above r bands (|C| = nu here)
    assert printed["filling_bulk"] == [4.0, 2.0] and all("/" in f for f in printed["flux"])
    assert not list(tmp_path.glob(".hallbar-*.points"))     # the points folder is gone once written
    for r_xy, r_ohm, c in zip(printed["r_xy"], printed["r_xy_ohm"], printed["chern"]):
        assert r_xy == pytest.approx(-1.0 / c, rel=1e-6)
        assert r_ohm == pytest.approx(-const.h / (c * const.e**2), rel=1e-6)   # exact SI h and e


def test_field_scan_needs_physical_units_and_one_axis(tmp_path):
    import subprocess
    import sys

    lattice = tmp_path / "lattice.toml"
    lattice.write_text('[lattice]\nflux = "1/10"\n[spin]\nenabled = false\n[ribbon]\nwidth = 60\n')
    cases = [
        ([str(lattice), "--fields", "1:2:3"], "hallbar --fields: the scenario has no [field] section"),
        ([str(_field_scenario(tmp_path)), "--fields", "1:2:3", "--energies", "0:1:3"],
         "got both --energies and --fields"),
        ([str(_field_scenario(tmp_path)), "--fields=-1:2:3"], "expected a range of one sign"),
    ]
    for args, message in cases:
        out = tmp_path / "never"
        proc = subprocess.run([sys.executable, "-m", "topoedge", "hallbar", *args, "--out", str(out)],
                              capture_output=True, text=True, cwd=tmp_path)
        assert proc.returncode == 2 and proc.stderr.count("\n") == 1 and message in proc.stderr, proc.stderr
        assert not out.exists()
