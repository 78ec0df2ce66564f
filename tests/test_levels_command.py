"""`topoedge levels`: the scenario's point, files, physical units and bad input."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
import scipy.constants as const

from topoedge import cli
from topoedge.scenario import load_scenario, resolve
from topoedge.workflows.levels import levels_run

ROOT = math.sqrt(math.pi / 2)


def _cli(*args, cwd):
    return subprocess.run([sys.executable, "-m", "topoedge", "levels", *map(str, args)], cwd=cwd,
                          capture_output=True, text=True, timeout=300)


def test_the_shipped_gaas_scenario(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    # the lattice part (about a minute at flux 1/131) is test_the_shipped_scenario_on_the_lattice's
    assert cli.main(["levels", "gaas-levels", "--out", "out", "--quiet", "--set", "levels.lattice=false"]) == 0
    files = {p.name for p in (tmp_path / "out").iterdir()}
    assert files == {"summary.json", "levels.h5", "candidates.csv", "transitions.csv", "gaps.csv",
                     "level_order.png", "gaps.png"}
    d = json.loads((tmp_path / "out" / "summary.json").read_text())
    # E_C / hbar omega_c = (e^2 / (4 pi eps0 eps_r l_B)) / (hbar e B / m*) from CODATA constants
    # (scipy.constants) and the GaAs handbook values m* = 0.067 m_e, eps_r = 12.9, g = -0.44.
    b = 3.0
    l_b = math.sqrt(const.hbar / (const.e * b))
    e_c = const.e ** 2 / (4 * math.pi * const.epsilon_0 * 12.9 * l_b)
    hw = const.hbar * const.e * b / (0.067 * const.m_e)
    assert d["coulomb_ratio"] == pytest.approx(e_c / hw, rel=1e-9)
    # GaAs, eps_r = 12.9: E_C = 4.3509 meV sqrt(B/T) (../shared/REFERENCES.md section 8)
    assert d["coulomb_ratio"] * hw / const.e * 1e3 == pytest.approx(4.3509 * math.sqrt(b), rel=1e-4)
    assert d["zeeman_ratio"] == pytest.approx(0.44 * const.physical_constants["Bohr magneton"][0] * b / hw, rel=1e-6)
    assert d["filling"] == 3 and d["filling_exact"] == pytest.approx(2.2e15 * const.h / (const.e * b), rel=1e-9)
    assert d["ground_state"]["levels"] == "0up,0down,1up"
    # the nu = 3 gap of that state is the spin flip of n = 1: Delta_Z + X_11 E_C, X_11 = 3 sqrt(pi/2) / 4
    # (Landau-level exchange; see tests/test_landau_exchange.py)
    assert d["gap"]["kind"] == "spin"
    assert d["gap"]["value"] == pytest.approx(d["zeeman_ratio"] + 0.75 * ROOT * d["coulomb_ratio"], rel=1e-12)
    assert d["gap"]["mev"] == pytest.approx(d["gap"]["value"] * hw / const.e * 1e3, rel=1e-6)
    # nu = 1 against B: Delta_Z + sqrt(pi/2) E_C (Kallin and Halperin, PRB 30, 5655 (1984)) while E_C < hbar omega_c
    af = d["against_field"]
    for j, field in enumerate(af["fields_t"]):
        ratio = d["coulomb_ratio"] * math.sqrt(b / field)
        if ratio < 0.9:
            expected = af["zeeman_mev"][j] + ROOT * ratio * af["cyclotron_mev"][j]
            assert af["gaps_mev"]["1"][j] == pytest.approx(expected, rel=1e-9)
    # the nu = 2 transition against B lies where E_C / hbar omega_c = 8 / (3 sqrt(pi/2)) - (correction of
    # the Zeeman term) : E_C / hbar omega_c falls as B^(-1/2), so at B = B0 (lambda0 / lambda*)^2.
    (t2,) = [t for t in af["transitions"] if t["filling"] == 2]
    lam_star = (1 - d["zeeman_ratio"]) * 8 / (3 * ROOT)       # polarised set gains Delta_Z, loses hbar omega_c
    assert t2["b_tesla"] == pytest.approx(b * (d["coulomb_ratio"] / lam_star) ** 2, rel=1e-5)
    assert (t2["before"], t2["after"]) == ("0up,1up", "0up,0down")


def test_the_lattice_part_agrees_with_the_continuum_at_flux_1_40():
    # nu = 3 at flux 1/40: every candidate solved on the lattice; the lattice fills the same levels as the
    # continuum, its interaction energies lie within 3 % of -(1/2) sum X_nm (REFERENCES.md sections 8, 15)
    # and its transition within 5 % of 256 / (81 sqrt(pi/2)) (worked out from the closed forms).
    model = resolve(load_scenario("nu2-spin-order", ["levels.filling=3", "spin.zeeman=0.0",
                                                     "levels.lattice_points=6"]))
    result = levels_run(model)
    lat = result.to_dict()["lattice"]
    assert lat["ground_state"] == result.sets[result.ground].label == "0up,0down,1up"
    assert lat["filled_levels_found"] == "0up,0down,1up"
    for c in lat["candidates"]:
        assert c["converged"] and abs(c["interaction_ec"] / c["continuum_interaction_ec"] - 1) < 0.03
    (t,) = lat["transitions"]
    assert (t["before"], t["after"]) == ("0up,0down,1up", "0up,1up,2up")
    assert t["coulomb_ratio"] == pytest.approx(256 / (81 * ROOT), rel=0.05)
    assert lat["samples"]["all_converged"] and not result.warnings
    # two random starts with free spins, reported beside the candidates, none below the lowest
    assert len(lat["random_starts"]) == 2
    assert all(f["converged"] and f["above_ground"] >= -1e-9 for f in lat["random_starts"])


@pytest.mark.slow
def test_the_shipped_scenario_on_the_lattice(tmp_path, monkeypatch):
    # GaAs at 3 T on the automatic lattice (flux -1/131): the lattice fills 0up, 0down, 1up like the
    # continuum, with the spin gap of n = 1 within 5 % of Delta_Z + (3/4) sqrt(pi/2) E_C.
    monkeypatch.chdir(tmp_path)
    assert cli.main(["levels", "gaas-levels", "--out", "out", "--quiet"]) == 0
    d = json.loads((tmp_path / "out" / "summary.json").read_text())
    lat = d["lattice"]
    assert lat["ground_state"] == d["ground_state"]["levels"] == "0up,0down,1up"
    assert lat["gap"] == pytest.approx(d["zeeman_ratio"] + 0.75 * ROOT * d["coulomb_ratio"], rel=0.05)
    assert all(c["converged"] for c in lat["candidates"]) and lat["samples"]["all_converged"]


def test_a_lattice_scenario_takes_its_coulomb_strength():
    # E_C = U_C a / l_B with l_B = a / sqrt(2 pi phi), hbar omega_c = 4 pi phi t (the lattice's continuum
    # limit, common practice).
    result = levels_run(load_scenario("nu2-spin-order", ["levels.lattice=false"]))
    phi = 1 / 40
    assert result.point.coulomb == pytest.approx(0.4 * math.sqrt(2 * math.pi * phi) / (4 * math.pi * phi), rel=1e-12)
    assert result.point.zeeman == pytest.approx(0.02 / (4 * math.pi * phi), rel=1e-12)
    assert result.point.filling == 2 and result.fields is None
    assert result.sets[result.ground].label == "0up,0down"


def test_a_large_zeeman_splitting_warns():
    model = resolve(load_scenario("nu2-spin-order", ["spin.zeeman=0.4", "levels.lattice=false"]))
    result = levels_run(model)
    assert any("larger than the cyclotron gap" in w for w in result.warnings)


@pytest.mark.parametrize("config, override, message", [
    ("gaas-levels", "levels.filling=0", "levels.filling: got 0; expected an integer filling 1 <= nu <= 12"),
    ("gaas-levels", "levels.filling=2.5", "levels.filling: got 2.5"),
    ("gaas-levels", "levels.fields=[5.0, 1.0]", "levels.fields: got [5.0, 1.0]"),
    ("gaas-levels", "levels.coulomb_max=0", "levels.coulomb_max: got 0"),
    ("nu2-spin-order", "interaction.coulomb=0", "E_C / hbar omega_c = 0; expected an interaction > 0"),
    ("nu2-spin-order", "levels.filling=13", "levels.filling: got 13; expected an integer filling 1 <= nu <= 12"),
    # flux 1/8: four Landau-like levels per spin below the band centre
    ("nu2-spin-order", ("lattice.flux=1/8", "levels.filling=9"),
     "levels.filling: got 9; expected a positive integer filling <= 8"),
    ("haldane", "title=x", "lattice.kind: got 'haldane', a zero-field model"),
    ("default", "title=x", "interaction.coulomb: unset and no [material] with [field]"),
    ("nu2-spin-order", "levels.grid=[4, 1]", "levels.grid: got [4, 1] at l_B = 2.52 a and flux 1/40"),
    ("nu2-spin-order", "levels.grid=[0, 1]", "levels.grid: got [0, 1]; expected an empty array or two integers"),
])
def test_bad_input_is_one_line_before_anything_is_written(tmp_path, config, override, message):
    sets = [item for o in ((override,) if isinstance(override, str) else override) for item in ("--set", o)]
    proc = _cli(config, "--out", tmp_path / "out", *sets, cwd=tmp_path)
    assert proc.returncode == 2 and proc.stdout == "", proc.stderr
    assert len(proc.stderr.splitlines()) == 1 and message in proc.stderr, proc.stderr
    assert not (tmp_path / "out").exists()


def test_a_sweep_can_run_the_levels_command_per_point(tmp_path):
    # command = "levels": every point is `topoedge levels` at its own interaction strength; at flux 1/20
    # and nu = 3 the lattice fills {0up, 0down, 1up} at E_C / hbar omega_c = 0.5 and {0up, 1up, 2up} at 3.5
    # (either side of the transition near 2.5: 256 / (81 sqrt(pi/2)) in the continuum).
    from topoedge.workflows.sweep import gather, load_sweep, parse_sweep, run_sweep

    shipped = load_sweep("levels-nu3")
    assert shipped.command == "levels" and len(shipped.points()) == 45
    data = {"title": "two points", "command": "levels", "scenario": shipped.to_dict()["scenario"],
            "axis": [{"key": "interaction.coulomb", "values": [0.56, 3.92]}],
            "plot": {"quantities": ["levels_lattice_ground"]}}
    sweep = parse_sweep(data)
    stats = run_sweep(sweep, tmp_path / "out", jobs=1)
    assert stats["computed"] == 2 and stats["failed"] == 0
    rows = {r["interaction.coulomb"]: r for r in gather(sweep, tmp_path / "out")}
    assert rows[0.56]["levels_lattice_ground"] == rows[0.56]["levels_ground"] == "0up,0down,1up"
    assert rows[3.92]["levels_lattice_ground"] == rows[3.92]["levels_ground"] == "0up,1up,2up"
    assert rows[0.56]["levels_coulomb_ratio"] == pytest.approx(0.56 / (math.sqrt(20 / (2 * math.pi)) * 4 * math.pi / 20))
    assert rows[3.92]["levels_agree"] and rows[3.92]["levels_lattice_converged"]


def test_the_lattice_part_resumes_from_its_finished_solutions(tmp_path, monkeypatch):
    # Every lattice solution (the point, each interaction strength, each transition, each random start) is
    # kept the moment it is found: the same run again solves nothing, and with some of them removed (an
    # interrupted run) it solves only those, to the same result.
    from topoedge.solvers import bulk_hf
    from topoedge.util.points import PointStore

    model = resolve(load_scenario("nu2-spin-order", ["levels.filling=2", "levels.lattice_points=4"]))
    first = levels_run(model, store=PointStore(tmp_path / "points"))
    files = sorted((tmp_path / "points").glob("*.pkl"))
    assert len(files) == 1 + 4 + len(first.lattice.transitions) + 2
    calls = []
    original = bulk_hf.BulkHartreeFock.solve
    monkeypatch.setattr(bulk_hf.BulkHartreeFock, "solve", lambda self, *a, **k: calls.append(1) or original(self, *a, **k))
    again = levels_run(model, store=PointStore(tmp_path / "points"))
    assert calls == [] and again.to_dict()["lattice"]["candidates"] == first.to_dict()["lattice"]["candidates"]
    for f in files:
        if f.name.startswith("lambda"):
            f.unlink()
            break
    third = levels_run(model, store=PointStore(tmp_path / "points"))
    assert len(calls) == len(first.sets)               # one interaction strength: every candidate once
    assert np.allclose(third.lattice.energies, first.lattice.energies, atol=1e-9)
