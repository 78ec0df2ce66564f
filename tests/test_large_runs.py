"""Wide ribbons, memory estimates, progress lines and physical outputs.

Sources:
- kwant.physics.Bands (reference library): the spectrum of a sparse-stored
  wide ribbon equals kwant's at the same momenta.
- CODATA constants (scipy.constants): hbar, e, h for the physical outputs
  (velocities v = (1/hbar) dE/dk, R_K = h/e^2).
- The rest checks the project's own contracts (one-line refusals, nothing
  written, log lines) and carries no physics reference.
"""

from __future__ import annotations

import io
import json
import subprocess
import sys
import time

import h5py
import numpy as np
import pytest
import scipy.constants as const

from topoedge.models.square import model_params, ribbon_builder
from topoedge.systems.ribbon import RibbonHamiltonian
from topoedge.solvers.spectrum import ribbon_spectrum


def test_sparse_wide_ribbon_has_the_kwant_spectrum():
    import kwant

    builder = ribbon_builder(700, spin=True)
    params = model_params(phi=-1 / 150, zeeman=0.01)
    sparse = RibbonHamiltonian.from_kwant(builder, params=params)
    assert sparse.sparse and sparse.size == 1400
    dense = RibbonHamiltonian.from_kwant(builder, params=params, sparse=False)
    k = np.array([-2.0, -0.3, 0.0, 0.7])
    window = (-4.0, -3.7)
    ours = ribbon_spectrum(sparse, k, window=window)
    assert ours.solver == "tridiagonal+tridiagonal(shifted copy)"
    reference = ribbon_spectrum(dense, k, window=window)
    np.testing.assert_allclose(ours.energy, reference.energy, atol=1e-12)
    bands = kwant.physics.Bands(builder.finalized(), params=params)
    for i, kk in enumerate(k):
        e = bands(kk)
        e = e[(e >= window[0]) & (e <= window[1])]
        np.testing.assert_allclose(ours.energy[i, : ours.count[i]], e, atol=1e-10)


def _cli(*args, cwd):
    return subprocess.run([sys.executable, "-m", "topoedge", *map(str, args)], capture_output=True, text=True,
                          cwd=cwd)


@pytest.mark.parametrize("override, needle", [
    ("ribbon.width=100000000", "needs about"),
    ("spectrum.k_points=1000000000", "the ribbon spectrum (1000000000 momenta"),
    ("chern.grid=[100,10000000]", "the Landau-level bulk solver (10000000 momenta k2"),
    ('chern.solver="dense"', "the dense bulk solver"),
], ids=["ribbon", "k-points", "k2-grid", "dense-at-q=205"])
def test_sizes_beyond_the_memory_are_refused_up_front(tmp_path, override, needle):
    config = tmp_path / "gaas.toml"
    config.write_text('[material]\npreset = "gaas"\nlattice_constant_nm = "auto"\n'
                      '[field]\nb_tesla = 1.0\ndensity_cm2 = 1e11\n')
    start = time.perf_counter()
    proc = _cli("run", config, "--set", override, "--out", tmp_path / "out", cwd=tmp_path)
    assert proc.returncode == 2, proc.stderr
    lines = [line for line in proc.stderr.splitlines() if not line.startswith("topoedge | ")]
    assert len(lines) == 1 and lines[0].startswith("topoedge: error: ") and needle in lines[0], proc.stderr
    assert "of memory available here; expected" in lines[0] and "Traceback" not in proc.stderr
    assert not (tmp_path / "out").exists() and sorted(p.name for p in tmp_path.iterdir()) == ["gaas.toml"]
    assert time.perf_counter() - start < 60   # refused before anything heavy


def test_forced_landau_solver_on_another_lattice_is_a_configuration_error(tmp_path):
    proc = _cli("run", "--set", "lattice.kind=honeycomb", "--set", "chern.solver=landau",
                "--out", tmp_path / "out", cwd=tmp_path)
    assert proc.returncode == 2 and "chern.solver: got 'landau' with lattice.kind = 'honeycomb'" in proc.stderr


def test_progress_log_lines():
    from topoedge.util.progress import Progress

    stream = io.StringIO()
    progress = Progress("log", stream=stream, every=0.05, min_seconds=0.0)
    with progress.stage("bulk: something", 4) as stage:
        for _ in range(4):
            time.sleep(0.04)
            stage.update()
    with pytest.raises(RuntimeError):
        with progress.stage("ribbon: failing"):
            raise RuntimeError("boom")
    lines = stream.getvalue().splitlines()
    assert all(line.startswith("topoedge | ") for line in lines)
    assert any("bulk: something: " in line and "/4 (" in line and "elapsed" in line for line in lines), lines
    assert any(line.startswith("topoedge | bulk: something: done in") for line in lines)
    assert lines[-1].startswith("topoedge | ribbon: failing: stopped after")
    # quick stages print nothing by default (at least 1 s)
    quiet = io.StringIO()
    with Progress("log", stream=quiet).stage("fast"):
        pass
    assert quiet.getvalue() == ""


def test_batch_run_writes_stage_lines_to_stderr(tmp_path):
    proc = _cli("run", "topoedge/data/scenarios/gaas-5T.toml", "--out", tmp_path / "out", cwd=".")
    assert proc.returncode == 0, proc.stderr
    # stderr is a pipe here: no bar, only `topoedge | ...` lines (stages of a second or more)
    assert "\r" not in proc.stderr
    assert all(line.startswith("topoedge | ") for line in proc.stderr.splitlines())


def test_physical_outputs_in_the_scenario_units(tmp_path):
    proc = _cli("run", "topoedge/data/scenarios/gaas-5T.toml", "--out", tmp_path / "out", "--quiet", cwd=".")
    assert proc.returncode == 0, proc.stderr
    summary = json.loads((tmp_path / "out" / "summary.json").read_text())
    units, ph = summary["units"], summary["physical"]
    a, t = units["lattice_constant_nm"], units["hopping_mev"]
    assert ph["fermi_energy_mev"] == pytest.approx((summary["fermi"]["energy"] + 4.0) * t, rel=1e-12)
    assert ph["gap_mev"][0] < ph["fermi_energy_mev"] < ph["gap_mev"][1]
    # E_F between the lowest and the next Landau level: hbar omega_c / 2 < E_F < 3 hbar omega_c / 2
    assert 0.5 * ph["cyclotron_mev"] < ph["fermi_energy_mev"] < 1.5 * ph["cyclotron_mev"]
    assert ph["r_xy_ohm"] == pytest.approx(const.h / const.e**2 / 2, rel=1e-12)
    v_unit = t * 1e-3 * const.e * a * 1e-9 / const.hbar           # (1/hbar) dE/dk, CODATA
    for mode in summary["edges"]["bottom"]["modes"]:
        assert mode["velocity_m_s"] == pytest.approx(mode["velocity"] * v_unit, rel=1e-12)
        assert mode["y_nm"] == pytest.approx(mode["y"] * a, rel=1e-12)
        assert mode["depth_lb"] == pytest.approx(mode["y"] * a / ph["magnetic_length_nm"], rel=1e-12)
    with h5py.File(tmp_path / "out" / "spectrum.h5", "r") as f:
        assert f["energy"].attrs["unit"] == "t" and f["k"].attrs["unit"] == "1/a"
        g = f["physical"]
        np.testing.assert_allclose(g["k_per_nm"][()], f["k"][()] / a, rtol=1e-12)
        np.testing.assert_allclose(g["energy_mev"][()], (f["energy"][()] + 4.0) * t, rtol=1e-12, equal_nan=True)
        assert g["energy_mev"].attrs["unit"] == "meV above the band bottom"
        assert g.attrs["b_tesla"] == 5.0 and g.attrs["field_direction"] == "+z"
        assert g["edge_modes/velocity_m_s"].shape == f["edge_modes/velocity"].shape
