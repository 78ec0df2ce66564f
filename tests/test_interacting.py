"""Self-consistent runs from scenarios (topoedge.workflows.interacting and ``topoedge run`` with [interaction])."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np
import pytest
import scipy.constants as sc

from test_cli import to_toml  # the tests' TOML writer (tests/ is on sys.path under pytest)
from topoedge.scenario import ConfigError, lattice_scenario, parse_scenario
from topoedge.workflows.interacting import CELL_AVERAGE, choose_k_points, interaction_of, run_interacting

ROOT = Path(__file__).resolve().parent.parent

# nu = 1 at flux 1/40 (l_B = 2.52 a) on 60 rows: U_C = 0.4 t (E_C = 0.16 t,
# about hbar omega_c / 2), Zeeman 0.02 t, background ramp 4 rows behind a
# 2-row setback. A self-consistent start converges in about 10 iterations of
# 0.05 s.
NU1 = {
    "title": "nu = 1 test ribbon",
    "lattice": {"flux": "1/40"},
    "spin": {"enabled": True, "zeeman": 0.02},
    "ribbon": {"width": 60},
    "spectrum": {"k_points": 61},
    "edges": {"k_points": 200},
    "chern": {"refine": False},
    "fermi": {"gap": 1},
    "interaction": {"coulomb": 0.4, "background": {"width": 4.0, "setback": 2.0}},
}


def _scenario(**changes):
    data = json.loads(json.dumps(NU1))
    for path, value in changes.items():
        *sections, key = path.split("__")
        table = data
        for name in sections:
            table = table.setdefault(name, {})
        table[key] = value
    return parse_scenario(data)


def _write(tmp_path, data, name="nu1.toml"):
    path = tmp_path / name
    path.write_text(to_toml(data) + "\n")
    return path


# ------------------------------------------------------------- configuration


def test_interaction_section_turns_the_self_consistent_run_on():
    s = _scenario()
    assert s.interaction.enabled and s.interaction.coulomb == 0.4
    assert parse_scenario(s.to_dict()) == s
    off = parse_scenario({**NU1, "interaction": {**NU1["interaction"], "enabled": False}})
    assert not off.interaction.enabled


@pytest.mark.parametrize("change, message", [
    ({"interaction__coulomb": -0.1}, r"^interaction\.coulomb: got -0\.1; expected a strength >= 0 in t$"),
    ({"interaction__gate_distance": 0.0}, r"^interaction\.gate_distance: got 0\.0; expected a distance > 0"),
    ({"interaction__onsite": -1.0}, r"^interaction\.onsite: got -1\.0; expected an energy >= 0 in t$"),
    ({"interaction__background__setback": 30.0},
     r"^interaction\.background\.setback: got 30\.0, which leaves no background .* nothing can neutralise"),
    ({"fermi__energy": -3.9, "fermi__gap": None}, r"^fermi\.energy: given with \[interaction\]"),
    ({"fermi__gap": None}, r"^fermi\.gap: missing with \[interaction\]"),
    ({"spin__enabled": False, "spin__zeeman": 0}, r"^spin\.enabled: false with \[interaction\]"),
    ({"ribbon__edge": {"profile": "linear", "width": 4.0, "height": 1.0}},
     r"^ribbon\.edge\.profile: got 'linear' with \[interaction\]"),
    ({"interaction__starts": ["polarised", "polarized"]}, r"did you mean 'polarised'\?"),
    ({"interaction__starts": []}, r"^interaction\.starts: got \[\] \(array\); expected a non-empty array"),
    ({"interaction__scan_widths": [4, 40]}, r"^interaction\.scan_widths: got 40\.0, wider than half the ribbon"),
    ({"interaction__k_points": 31}, r"^interaction\.k_points: got 31; expected an even integer >= 4$"),
    ({"interaction__alpha": 0}, r"^interaction\.alpha: got 0\.0; expected a weight with 0 < alpha <= 1$"),
], ids=["negative strength", "gate at zero", "negative on-site", "no background (not neutral)",
        "fixed E_F", "no filling", "spinless", "hand-made edge potential", "unknown start", "no start",
        "scan width", "odd momenta", "zero mixing"])
def test_bad_interaction_input_is_refused(change, message):
    data = json.loads(json.dumps(NU1))
    for path, value in change.items():
        *sections, key = path.split("__")
        table = data
        for name in sections:
            table = table[name]
        if value is None:
            table.pop(key)
        else:
            table[key] = value
    with pytest.raises(ConfigError, match=message):
        parse_scenario(data)


def test_coulomb_strength_from_the_material_is_e2_over_eps_a():
    # U_C = e^2 / (4 pi eps0 eps_r a) in units of t = hbar^2 / (2 m* a^2)
    # (the lattice discretisation of the effective-mass Hamiltonian, common
    # practice), from CODATA constants (scipy.constants) for GaAs
    # (m* = 0.067, eps_r = 12.9: ../shared/REFERENCES.md, section 11).
    s = parse_scenario({"material": {"preset": "gaas", "lattice_constant_nm": 5.0},
                        "field": {"b_tesla": 3.0, "density_cm2": 1.45e11}, "ribbon": {"width": 80},
                        "interaction": {"background": {"width": 4.0}}})
    model, units = lattice_scenario(s)
    inter = interaction_of(model, units)
    a = 5e-9
    t = sc.hbar**2 / (2 * 0.067 * sc.m_e * a**2)
    u_c = sc.e**2 / (4 * np.pi * sc.epsilon_0 * 12.9 * a)
    assert inter.coulomb == pytest.approx(u_c / t, rel=1e-9)
    assert inter.onsite == pytest.approx(CELL_AVERAGE * u_c / t, rel=1e-9)
    # nu = n h / (e B) = 2.0 at this density: two filled spin bands per flux quantum.
    assert model.fermi.gap == 2 * abs(model.lattice.flux.numerator)
    with pytest.raises(ConfigError, match=r"^interaction\.coulomb: given together with \[material\]"):
        parse_scenario({**s.to_dict(), "interaction": {"coulomb": 0.3}})


def test_momenta_hold_a_whole_number_of_electrons():
    # 1.8 electrons per cell: N_k must be a multiple of 5; the least even one >= 32 (> 12 l_B = 30.3).
    assert choose_k_points(1.8, 2.523) == (40, None)
    assert choose_k_points(1.8, 3.6) == (50, None)   # 12 l_B = 43.2
    nk, warning = choose_k_points(1.8, 2.523, given=32)
    assert nk == 32 and "not a whole number" in warning and "interaction.k_points = 40" in warning
    assert choose_k_points(1.8, 2.523, given=40) == (40, None)
    assert choose_k_points(1.8, 2.523, given=32, temperature=0.01) == (32, None)
    nk, warning = choose_k_points(1 / 1031, 2.0)
    assert nk == 32 and "no even number of momenta" in warning


# ------------------------------------------------------------ self-consistency


@pytest.fixture(scope="module")
def nu1_run():
    return run_interacting(_scenario())


def test_self_consistent_run_is_neutral_and_keeps_one_mode_per_edge(nu1_run):
    # Neutral to rounding (the occupations hold the electron number at the
    # background charge); a quantum-Hall ferromagnet inside (spin-up level
    # full, spin down empty); one spin-up mode per edge with net chirality
    # +1 / -1 = the Chern number of the filled level (sharp-ish edge:
    # Chamon and Wen, PRB 49, 8227 (1994)).
    s = nu1_run.summary.to_dict()
    i = s["interaction"]
    assert abs(i["neutrality_error"]) < 1e-9
    assert i["filling_centre"]["up"] == pytest.approx(1.0, abs=2e-3)
    assert i["filling_centre"]["down"] == pytest.approx(0.0, abs=1e-9)
    # 1.3 electrons per cell (52 rows of 1/40): the least multiple of 10 >= 32 momenta.
    assert i["background_per_cell"] == pytest.approx(1.3) and i["k_points"] == 40
    assert s["check"]["bulk_edge_agree"] and s["check"]["spin_resolved_agree"]
    assert i["chirality_equals_chern"] and s["bulk"]["chern_below_fermi"] == 1
    assert [(m["spin"], m["direction"]) for m in i["bottom"]["order"]] == [("up", "+x")]
    assert [(m["spin"], m["direction"]) for m in i["top"]["order"]] == [("up", "-x")]
    # Every start is reported with its energy; the kept one is the lowest.
    energies = {r["start"]: r["energy_t"] for r in i["starts"]}
    assert set(energies) == {"polarised", "edge", "unpolarised"}
    assert all(r["converged"] for r in i["starts"])
    assert energies[i["best_start"]] == pytest.approx(min(energies.values()), abs=1e-9)
    # The mode sits where the electron density falls to half its bulk value.
    mode = i["bottom"]["order"][0]["distance_a"]
    assert abs(mode - i["half_filling_distance_a"]["up"]) < 1.0
    # The centre beside the lattice bulk Hartree-Fock at the same parameters: both fill 0up (the
    # quantum-Hall ferromagnet; Kallin and Halperin, PRB 30, 5655 (1984)).
    link = i["bulk_link"]
    assert link["centre_levels"] == link["bulk_levels"] == "0up" and link["agree"]
    assert all(c["converged"] for c in link["candidates"])


def test_edge_modes_of_the_run_are_those_of_the_self_consistent_bands(nu1_run):
    run = nu1_run.interacting
    best = run.main.best
    levels = np.sort(best.energies.ravel())
    filled = round(best.electrons * run.main.k_points)
    assert levels[filled - 1] < nu1_run.fermi_energy < levels[filled]
    assert nu1_run.spectrum.solver == "dense" and nu1_run.hamiltonian.far


def test_results_folder_of_a_self_consistent_run(tmp_path, nu1_run):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from topoedge.outputs.results import read_restart, write_run

    from topoedge.cli.run import interacting_figures

    figures = interacting_figures(nu1_run)

    def saver(make):
        def save(path):
            fig = make(nu1_run)
            fig.savefig(path, dpi=60)
            plt.close(fig)
        return save

    out = write_run(tmp_path / "out", nu1_run, {k: saver(v) for k, v in figures.items()})
    assert {p.name for p in out.iterdir()} == {"summary.json", "spectrum.h5", "hartree_fock.h5", "restart.h5",
                                              "hartree_fock.png", "edge_modes.csv", "bulk_bands.csv",
                                              "bulk_gaps.csv", "hall_routes.csv"}
    with h5py.File(out / "hartree_fock.h5") as f:
        group = f["w=4"]
        best = group.attrs["best_start"]
        assert np.allclose(group[best]["density"][()], nu1_run.interacting.main.best.density)
        assert np.allclose(group["background"][()], nu1_run.interacting.main.background)
        assert group[best].attrs["converged"]
        assert len(group[best]["residual"]) == group[best].attrs["iterations"]
    states, model = read_restart(out / "restart.h5")
    assert model == nu1_run.interacting.model
    # Only the kept state of a converged width is stored.
    assert list(states) == [f"w=4/{best}"]
    assert np.abs(states[f"w=4/{best}"] - nu1_run.interacting.main.best.density_matrix).max() < 1e-14


# ------------------------------------------------------------------ restarts


def _run(args, **kw):
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.run([sys.executable, "-m", "topoedge", "run", *args], capture_output=True, text=True, env=env,
                          cwd=kw.pop("cwd", None), **kw)


@pytest.mark.slow
def test_unconverged_run_continues_from_its_restart_file(tmp_path):
    config = _write(tmp_path, {**NU1, "interaction": {**NU1["interaction"], "starts": ["random"]}})
    direct = _run([str(config), "--out", str(tmp_path / "direct"), "--json"])
    assert direct.returncode == 0, direct.stderr
    stopped = _run([str(config), "--out", str(tmp_path / "stopped"), "--set", "interaction.max_iter=3"])
    assert stopped.returncode == 1
    assert "not converged for background width(s) 4 a" in stopped.stderr
    assert "--restart" in stopped.stderr and "interaction.max_iter=3" in stopped.stderr
    assert "NOT converged after 3 iterations" in stopped.stdout
    resumed = _run([str(config), "--out", str(tmp_path / "resumed"), "--json",
                    "--restart", str(tmp_path / "stopped" / "restart.h5")])
    assert resumed.returncode == 0, resumed.stderr
    a = json.loads(direct.stdout)["interaction"]
    b = json.loads(resumed.stdout)["interaction"]
    assert b["starts"][0]["restarted"] and not a["starts"][0]["restarted"]
    assert b["energy_t"] == pytest.approx(a["energy_t"], abs=1e-10)
    assert b["bottom"]["order"][0]["distance_a"] == pytest.approx(a["bottom"]["order"][0]["distance_a"], abs=1e-5)


@pytest.mark.slow
def test_killed_run_restarts_from_its_checkpoint(tmp_path):
    # The run is killed with SIGKILL (no clean-up) while it iterates, after
    # its first checkpoint. Continuing from the checkpoint (with the default
    # DIIS mixing) gives the solution of an uninterrupted run.
    data = {**NU1, "interaction": {**NU1["interaction"], "starts": ["polarised"]}}
    config = _write(tmp_path, data)
    out = tmp_path / "killed"
    checkpoint = tmp_path / "killed.checkpoint.h5"
    # Slow linear mixing and a checkpoint after every iteration: killed part-way.
    proc = subprocess.Popen([sys.executable, "-m", "topoedge", "run", str(config), "--out", str(out),
                             "--set", "interaction.mixing=linear", "--set", "interaction.alpha=0.02",
                             "--set", "interaction.max_iter=100000", "--checkpoint-every", "0"],
                            env={**os.environ, "PYTHONPATH": str(ROOT)}, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    try:
        deadline = time.monotonic() + 300
        while not checkpoint.exists() and time.monotonic() < deadline and proc.poll() is None:
            time.sleep(0.2)
        assert checkpoint.exists(), "no checkpoint was written"
    finally:
        proc.send_signal(signal.SIGKILL)
        proc.wait()
    assert not out.exists()  # nothing half-written under the results name
    # The command again (the solver keys may change) continues from the checkpoint by itself.
    resumed = _run([str(config), "--out", str(out), "--json"])
    assert resumed.returncode == 0, resumed.stderr
    assert not list(tmp_path.glob(".*partial*"))
    assert not checkpoint.exists()  # its states are now in the folder's restart.h5
    direct = _run([str(config), "--out", str(tmp_path / "direct"), "--json"])
    a = json.loads(direct.stdout)["interaction"]
    b = json.loads(resumed.stdout)["interaction"]
    assert any(r["restarted"] for r in b["starts"])
    assert b["energy_t"] == pytest.approx(a["energy_t"], abs=1e-9)


def test_restart_for_another_model_is_refused(tmp_path, nu1_run):
    from topoedge.outputs.results import write_restart

    config = _write(tmp_path, NU1)
    restart = tmp_path / "restart.h5"
    write_restart(restart, nu1_run.interacting.states(), nu1_run.interacting.model)
    other = _run([str(config), "--out", str(tmp_path / "o"), "--set", "interaction.coulomb=0.3",
                  "--restart", str(restart)])
    assert other.returncode == 2 and not (tmp_path / "o").exists()
    assert other.stderr.count("\n") == 1
    assert "restart file: made for a different model (coulomb_t: file 0.4, scenario 0.3; onsite_t: " in other.stderr
    junk = tmp_path / "junk.h5"
    junk.write_text("not hdf5")
    bad = _run([str(config), "--out", str(tmp_path / "o"), "--restart", str(junk)])
    assert bad.returncode == 2 and "is not a topoedge restart file" in bad.stderr


# ------------------------------------------------------ edge structure scans


@pytest.mark.slow
def test_width_scan_reports_spin_order_and_reconstruction(tmp_path):
    # nu = 2 (both spins of the lowest level filled) on 60 rows, background
    # widths 0 and 12 rows: the spin-up mode (the lower Zeeman level) is the
    # outermost one, and the spin-down mode moves inwards as the edge gets
    # smoother (exchange-split, spontaneously polarised nu = 2 edge:
    # Dempsey, Gelfand and Halperin, PRL 70, 3639 (1993), from memory).
    s = _scenario(fermi__gap=2, interaction__scan_widths=[0.0, 12.0], interaction__starts=["polarised", "edge"])
    result = run_interacting(s)
    i = result.summary.to_dict()["interaction"]
    rows = {row["width_a"]: row for row in i["scan"]}
    assert set(rows) == {0.0, 12.0}
    for row in rows.values():
        assert row["in_gap"] and row["bottom"]["net"] == 2 and row["outermost_spin"] == {"bottom": "up",
                                                                                          "top": "up"}
        assert [m["spin"] for m in row["bottom"]["order"]] == ["up", "down"]
    def separation(row):
        up, down = row["bottom"]["order"]
        return down["distance_a"] - up["distance_a"]

    assert separation(rows[12.0]) > separation(rows[0.0]) + 2.0
    assert i["reconstruction"] == {"found": False, "widest_without_a": 12.0,
                                   "widest_without_lB": pytest.approx(12.0 / i["magnetic_length_a"])}
    from topoedge.outputs.report import format_summary

    text = format_summary(result.summary)
    assert "scan         w (a)" in text and "no counter-propagating pair up to w = 12 a" in text


@pytest.mark.slow
def test_gated_self_consistent_run(tmp_path):
    # A metal gate 5 a away (2 l_B) screens the interaction: the run still
    # converges to a neutral nu = 1 ferromagnet with one mode per edge, and
    # the summary names the gate.
    from topoedge.outputs.report import format_summary

    result = run_interacting(_scenario(interaction__gate_distance=5.0, interaction__starts=["polarised"]))
    i = result.summary.to_dict()["interaction"]
    assert i["gate_distance_a"] == 5.0 and i["converged"]
    assert abs(i["neutrality_error"]) < 1e-9 and i["chirality_equals_chern"]
    assert "gate at 5 a" in format_summary(result.summary)


@pytest.mark.slow
def test_nu2_edge_polarises_beyond_a_smoothness_threshold_with_tiny_zeeman():
    # Hartree-Fock nu = 2 edge (Dempsey, Gelfand and Halperin, PRL 70, 3639
    # (1993), from memory; ../shared/REFERENCES.md section 9): with a
    # negligible Zeeman splitting (0.002 t = 1.3 % of E_C) a steep edge keeps
    # the spin-up and spin-down modes together, and beyond a smoothness
    # threshold the edge polarises spontaneously: the two modes separate
    # abruptly by more than l_B. Measured on 80 rows with 80 and 120 momenta:
    # w = 4 rows, separation 0.37 and 0.01 rows (the unpolarised start lower
    # by 7e-4 and 4e-4 t per cell); w = 8 rows, 4.1 and 4.2 rows = 1.6 l_B
    # (the polarised start lower by 9e-4 and 7e-4 t per cell). With 40
    # momenta the w = 8 edge still comes out unpolarised (the grid is too
    # coarse for this near-degenerate competition), hence 80 here.
    s = _scenario(fermi__gap=2, spin__zeeman=0.002, ribbon__width=80, interaction__k_points=80,
                  interaction__starts=["polarised", "unpolarised"], interaction__scan_widths=[4.0, 8.0])
    i = run_interacting(s).summary.to_dict()["interaction"]
    rows = {row["width_a"]: row for row in i["scan"]}
    lb = i["magnetic_length_a"]

    def separation(row):
        (up,) = [m for m in row["bottom"]["order"] if m["spin"] == "up"]
        (down,) = [m for m in row["bottom"]["order"] if m["spin"] == "down"]
        return abs(down["distance_a"] - up["distance_a"]) / lb

    assert separation(rows[4.0]) < 0.3
    assert separation(rows[8.0]) > 1.0
    assert rows[4.0]["best_start"] == "unpolarised" and rows[8.0]["best_start"] == "polarised"


@pytest.mark.slow
def test_smearing_temperature_accepts_any_grid():
    # With k_B T > 0 the occupations are Fermi-Dirac at the chemical
    # potential that holds the electron number: an N_k with a fractional
    # number of electrons (1.3 x 32 = 41.6) is then fine and not warned
    # about; the run stays neutral and E_F is the chemical potential.
    result = run_interacting(_scenario(interaction__temperature=0.002, interaction__k_points=32,
                                       interaction__starts=["polarised"]))
    i = result.summary.to_dict()["interaction"]
    assert i["converged"] and i["k_points"] == 32 and not result.summary.warnings
    assert abs(i["neutrality_error"]) < 1e-9
    assert result.fermi_energy == pytest.approx(result.interacting.main.best.mu)
    zero = run_interacting(_scenario(interaction__k_points=32, interaction__starts=["polarised"]))
    assert any("not a whole number" in w and "interaction.k_points = 40" in w for w in zero.summary.warnings)


@pytest.mark.slow
def test_near_degenerate_starts_are_warned_about():
    # nu = 2, tiny Zeeman, w = 8 rows on 40 momenta: the polarised and
    # unpolarised starts end in different states 4e-4 t per cell apart (the
    # grid decides between them; see the test above), which the run says.
    from topoedge.outputs.report import format_summary

    s = _scenario(fermi__gap=2, spin__zeeman=0.002, ribbon__width=80, interaction__k_points=40,
                  interaction__starts=["polarised", "unpolarised"],
                  interaction__background={"width": 8.0, "setback": 2.0})
    result = run_interacting(s)
    (warning,) = result.summary.warnings
    assert "ends in a different state only" in warning and "larger interaction.k_points" in warning
    assert warning.startswith("background width 8: ") and f"warning      {warning}" in format_summary(result.summary)
