"""`topoedge disorder`: files, summary, resumability and bad input."""

from __future__ import annotations

import json
import subprocess
import sys
import warnings

import numpy as np
import pytest

from topoedge import cli
from topoedge.outputs.disorder import DISORDER_FILES

warnings.filterwarnings("ignore", message="MUMPS is not available")

SMALL = ('title = "tiny disorder"\n[lattice]\nflux = "1/5"\n[spin]\nenabled = false\n[fermi]\ngap = 1\n'
         '[chern]\ngrid = [16, 16]\nrefine = false\n'
         '[disorder]\nflake = 16\nstrength = 0.5\nstrengths = [0.0, 0.5, 12.0]\nseeds = 1\nregion = 0.5\n'
         'vectors = 4\nenergies = 9\n')


def _cli(*args, cwd):
    return subprocess.run([sys.executable, "-m", "topoedge", "disorder", *map(str, args)], cwd=cwd,
                          capture_output=True, text=True, timeout=600)


def test_command_writes_the_folder_and_finds_the_plateau(tmp_path, monkeypatch):
    # Flux 1/5, gap above the lowest band: C = 1 (TKNN, PRL 49, 405 (1982));
    # weak disorder keeps it, W = 12 t (beyond the whole band set) does not.
    (tmp_path / "tiny.toml").write_text(SMALL)
    monkeypatch.chdir(tmp_path)
    assert cli.main(["disorder", "tiny.toml", "--out", "out", "--quiet"]) == 0
    out = tmp_path / "out"
    assert {p.name for p in out.iterdir()} == set(DISORDER_FILES)
    summary = json.loads((out / "summary.json").read_text())
    assert summary["fermi"]["chern"] == 1 and summary["strengths"] == [0.0, 0.5, 12.0]
    assert summary["marker_mean"][0] == pytest.approx(1.0, abs=0.03)
    assert summary["marker_mean"][1] == pytest.approx(1.0, abs=0.05)
    assert summary["plateau_broken_at"]["marker"] == 12.0
    assert summary["sigma_fermi_mean"][0] == pytest.approx(1.0, abs=0.15)
    # The Hall bar of [hallbar] at E_F, the third view: clean and weakly disordered
    # it is on the plateau, -1/R_xy = C and R_xx = 0 (Landauer-Buttiker in a
    # quantum-Hall gap: M. Buttiker, PRL 57, 1761 (1986)); at W = 12 t it is off.
    bar = summary["hallbar"]
    assert bar["sigma_xy"][0] == pytest.approx(1.0, abs=1e-6) and abs(bar["r_xx_mean"][0]) < 1e-6
    assert bar["sigma_xy"][1] == pytest.approx(1.0, abs=1e-3)
    assert summary["plateau_broken_at"]["hallbar"] == 12.0
    rows = (out / "disorder.csv").read_text().splitlines()
    assert rows[0].startswith("strength (t),seed") and rows[0].endswith("hall bar R_xx (h/e^2)") and len(rows) == 4
    assert not list(tmp_path.glob(".disorder-*.points"))
    for name in ("marker_map.png", "sigma_xy.png", "robustness.png"):
        assert (out / name).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_resumes_from_finished_points(tmp_path, monkeypatch):
    import importlib

    from topoedge.scenario import parse_scenario
    from topoedge.util.points import PointStore
    from topoedge.workflows.disorder import disorder_run

    import tomllib

    scenario = parse_scenario(tomllib.loads(SMALL))
    store = PointStore(tmp_path / ".points")
    first = disorder_run(scenario, store=store)
    kubo = importlib.import_module("topoedge.workflows.disorder")
    calls = []
    original = kubo.hall_conductivity_kpm
    monkeypatch.setattr(kubo, "hall_conductivity_kpm", lambda *a, **k: calls.append(1) or original(*a, **k))
    again = disorder_run(scenario, store=PointStore(tmp_path / ".points"))
    assert calls == [] and np.array_equal(first.marker, again.marker)


@pytest.mark.parametrize("override, message", [
    ("disorder.flake=4", "disorder.flake: got 4; expected an integer side >= 8"),
    ("lattice.flux=1/40", "disorder.flake: got 16 at l_B = 2.52 a; expected at least 21"),
    ("disorder.strengths=[-1.0]", "disorder.strengths: got -1.0 in the array"),
    ("disorder.strengths=[]", "disorder.strengths: empty"),
    ("disorder.moments=9", "disorder.moments: got 9; their resolution"),
    ("disorder.region=0", "disorder.region: got 0"),
    ("disorder.unit=meV", "disorder.unit: got 'meV' without field.b_tesla"),
    ("disorder.unit=eV", "disorder.unit: got 'eV'; expected one of 't', 'meV'"),
])
def test_bad_input_is_refused_in_one_line_before_anything_is_written(tmp_path, override, message):
    (tmp_path / "tiny.toml").write_text(SMALL)
    proc = _cli("tiny.toml", "--out", tmp_path / "out", "--set", override, cwd=tmp_path)
    assert proc.returncode == 2 and proc.stdout == ""
    lines = [line for line in proc.stderr.splitlines() if not line.startswith("topoedge |")]
    assert len(lines) == 1 and message in lines[0], proc.stderr
    assert not (tmp_path / "out").exists()


def test_a_sweep_can_run_the_disorder_command_per_point(tmp_path):
    # command = "disorder": every point is `topoedge disorder` at its one
    # disorder.strength; the table holds the marker and sigma_xy at E_F.
    # Flux 1/5, gap above one band: C = 1 (TKNN), kept at W = 0.5 t, lost at 12 t.
    from topoedge.workflows.sweep import gather, parse_sweep, run_sweep

    import tomllib

    base = tomllib.loads(SMALL)
    data = {"title": "tiny robustness", "command": "disorder", "scenario": base,
            "axis": [{"key": "disorder.strength", "values": [0.5, 12.0]}],
            "plot": {"quantities": ["disorder_marker", "disorder_sigma_xy"]}}
    sweep = parse_sweep(data)
    assert sweep.command == "disorder" and sweep.to_dict()["command"] == "disorder"
    stats = run_sweep(sweep, tmp_path / "out", jobs=1)
    assert stats["computed"] == 2 and stats["failed"] == 0
    rows = {r["disorder.strength"]: r for r in gather(sweep, tmp_path / "out")}
    assert rows[0.5]["disorder_marker"] == pytest.approx(1.0, abs=0.05) and rows[0.5]["chern"] == 1
    assert abs(rows[12.0]["disorder_marker"] - 1.0) > 0.3
    with pytest.raises(Exception, match="command: got 'walk'; expected one of 'run', 'disorder'"):
        parse_sweep({**data, "command": "walk"})


def test_the_shipped_robustness_sweep_is_valid():
    from topoedge.workflows.sweep import load_sweep

    sweep = load_sweep("disorder-robustness")
    assert sweep.command == "disorder" and len(sweep.points()) == 24


def test_strengths_in_mev_are_converted_once_with_the_field():
    # disorder.unit = "meV" with [material] and [field]: the strengths in t are
    # the meV values over t = hbar^2 / (2 m* a^2) (common practice; the hopping
    # of the discretised effective-mass model, constants from scipy.constants).
    import scipy.constants as const

    from topoedge.scenario import load_scenario, resolve

    scenario = load_scenario("gaas-5T", ["disorder.unit=meV", "disorder.strengths=[0.0, 2.0, 8.0]",
                                         "disorder.strength=4.0"])
    model = resolve(scenario)
    a = model.units.lattice_constant_nm * 1e-9
    t_mev = const.hbar ** 2 / (2 * 0.067 * const.m_e * a ** 2) / const.e * 1e3     # GaAs m* = 0.067 m_e
    assert model.units.hopping_mev == pytest.approx(t_mev, rel=1e-3)
    got = model.scenario.disorder
    assert got.unit == "t" and got.strength == pytest.approx(4.0 / t_mev, rel=1e-3)
    assert got.strengths == pytest.approx((0.0, 2.0 / t_mev, 8.0 / t_mev), rel=1e-3)
    assert model.given.disorder.unit == "meV"
