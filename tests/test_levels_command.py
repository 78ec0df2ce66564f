"""`topoedge levels`: the scenario's point, files, physical units and bad input."""

from __future__ import annotations

import json
import math
import subprocess
import sys

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
    assert cli.main(["levels", "gaas-levels", "--out", "out", "--quiet"]) == 0
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


def test_a_lattice_scenario_takes_its_coulomb_strength():
    # E_C = U_C a / l_B with l_B = a / sqrt(2 pi phi), hbar omega_c = 4 pi phi t (the lattice's continuum
    # limit, common practice).
    result = levels_run(load_scenario("nu2-spin-order"))
    phi = 1 / 40
    assert result.point.coulomb == pytest.approx(0.4 * math.sqrt(2 * math.pi * phi) / (4 * math.pi * phi), rel=1e-12)
    assert result.point.zeeman == pytest.approx(0.02 / (4 * math.pi * phi), rel=1e-12)
    assert result.point.filling == 2 and result.fields is None
    assert result.sets[result.ground].label == "0up,0down"


def test_a_large_zeeman_splitting_warns():
    model = resolve(load_scenario("nu2-spin-order", ["spin.zeeman=0.4"]))
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
])
def test_bad_input_is_one_line_before_anything_is_written(tmp_path, config, override, message):
    sets = [item for o in ((override,) if isinstance(override, str) else override) for item in ("--set", o)]
    proc = _cli(config, "--out", tmp_path / "out", *sets, cwd=tmp_path)
    assert proc.returncode == 2 and proc.stdout == "", proc.stderr
    assert len(proc.stderr.splitlines()) == 1 and message in proc.stderr, proc.stderr
    assert not (tmp_path / "out").exists()
