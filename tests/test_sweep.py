"""Parameter sweeps (topoedge.workflows.sweep and ``topoedge sweep``)."""

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

from test_cli import to_toml  # the tests' TOML writer (tests/ is on sys.path under pytest)
from topoedge.outputs.tables import write_table
from topoedge.plotting.sweep import sweep_figures
from topoedge.workflows.sweep import QUANTITIES, SweepError, gather, load_sweep, parse_sweep, point_key, run_sweep

ROOT = Path(__file__).resolve().parent.parent

# A ribbon that runs in a fraction of a second: W = 30, flux 1/10 (l_B =
# 1.26 a), 21 momenta, a 12 x 12 Chern grid (enough for the lowest gaps of
# flat Landau levels), E_F in the gap above the two lowest bands (nu = 2).
BASE = {
    "title": "tiny sweep ribbon",
    "lattice": {"flux": "1/10"},
    "spin": {"enabled": True, "zeeman": 0.1},
    "ribbon": {"width": 30, "edge": {"profile": "linear", "width": 4.0, "height": 1.0}},
    "spectrum": {"k_points": 21},
    "edges": {"k_points": 100},
    "chern": {"grid": [12, 12], "refine": False},
    "fermi": {"gap": 2},
}
SWEEP = {
    "title": "tiny sweep",
    "scenario": BASE,
    "axis": [{"key": "ribbon.edge.width", "values": [0.0, 4.0, 8.0]},
             {"key": "spin.zeeman", "values": [0.0, 0.2, 0.4]}],
}


def _sweep_toml(data: dict) -> str:
    """TOML text of a sweep: top-level keys, [scenario] tables, [[axis]] blocks, [plot]."""
    lines = [f"{k} = {json.dumps(v)}" for k, v in data.items() if k in ("title", "mode")]
    if isinstance(data.get("scenario"), str):
        lines.append(f"scenario = {json.dumps(data['scenario'])}")
    for axis in data.get("axis", []):
        lines += ["", "[[axis]]"] + [f"{k} = {json.dumps(v)}" for k, v in axis.items()]
    if "plot" in data:
        lines += ["", "[plot]", to_toml(data["plot"])]
    if isinstance(data.get("scenario"), dict):
        lines += ["", "[scenario]", to_toml(data["scenario"], "scenario")]
    return "\n".join(lines) + "\n"


def _sweep_file(tmp_path, data=SWEEP, name="tiny-sweep.toml"):
    path = tmp_path / name
    path.write_text(_sweep_toml(data))
    return path


def _cli(*args, **kw):
    return subprocess.run([sys.executable, "-m", "topoedge", "sweep", *map(str, args)], capture_output=True,
                          text=True, timeout=600, **kw)


# ----------------------------------------------------------------- validation


def _with(change: dict) -> dict:
    data = json.loads(json.dumps(SWEEP))
    for key, value in change.items():
        if key.startswith("axis0."):
            data["axis"][0][key[6:]] = value
        else:
            data[key] = value
    return data


@pytest.mark.parametrize("change, message", [
    ({"axis0.key": "ribbon.edge.widht"}, r"^axis\[0\]\.key|ribbon\.edge\.widht: unknown key; did you mean "
                                         r"'ribbon\.edge\.width'\?"),
    ({"axis0.values": []}, r"^axis\[0\] \(ribbon\.edge\.width\): empty; expected at least one value$"),
    ({"axis0.values": [0.0, "wide"]}, r"^axis\[0\] value 1: ribbon\.edge\.width: got 'wide' \(string\); "
                                      r"expected a width >= 0"),
    ({"axis0.values": [0.0, True]}, r"^axis\[0\] value 1: ribbon\.edge\.width: got true \(boolean\)"),
    ({"mode": "zip", "axis0.values": [0.0, 4.0]}, r"^axis: zipped axes have different lengths"),
    ({"mode": "spiral"}, r"^mode: got 'spiral'; expected 'grid'"),
    ({"plot": {"quantities": ["colour"]}}, r"^plot\.quantities: got 'colour'; expected names from"),
    ({"axes": []}, r"^axes: unknown key; expected the sweep keys"),
    ({"scenario": "no-such-file.toml"}, r"^scenario: '.*no-such-file\.toml' not found"),
    ({"scenario": {"ribbon": {"widht": 3}}}, r"^scenario: ribbon\.widht: unknown key"),
    ({"axis": []}, r"^axis: missing; expected at least one \[\[axis\]\]"),
], ids=["unknown key path", "empty axis", "string for a float", "boolean for a float", "zip lengths",
        "unknown mode", "unknown quantity", "unknown top key", "missing base file", "bad base scenario",
        "no axis"])
def test_malformed_sweep_is_refused(change, message):
    with pytest.raises(SweepError, match=message):
        parse_sweep(_with(change))


def test_malformed_sweep_file_is_refused_before_any_point_runs(tmp_path):
    path = _sweep_file(tmp_path, _with({"axis0.values": [0.0, "wide"]}))
    proc = _cli(path, "--out", tmp_path / "out", cwd=tmp_path)
    assert proc.returncode == 2 and proc.stdout == ""
    assert proc.stderr.count("\n") == 1 and "axis[0] value 1: ribbon.edge.width: got 'wide'" in proc.stderr
    assert not (tmp_path / "out").exists()


def test_sweep_file_round_trip(tmp_path):
    assert load_sweep(_sweep_file(tmp_path)).to_dict() == parse_sweep(SWEEP).to_dict()


def test_axes_from_linspace_and_range_and_zip():
    data = {"scenario": BASE, "mode": "zip",
            "axis": [{"key": "spin.zeeman", "linspace": [0.0, 0.2, 3]},
                     {"key": "ribbon.width", "range": [30, 36, 2]},
                     {"key": "lattice.flux", "values": ["1/10", "1/12", "1/14"]}]}
    sweep = parse_sweep(data)
    points = sweep.points()
    assert [p["axes"] for p in points] == [
        {"spin.zeeman": 0.0, "ribbon.width": 30, "lattice.flux": "1/10"},
        {"spin.zeeman": 0.1, "ribbon.width": 32, "lattice.flux": "1/12"},
        {"spin.zeeman": 0.2, "ribbon.width": 34, "lattice.flux": "1/14"}]
    assert points[1]["config"]["ribbon"]["width"] == 32 and points[1]["config"]["lattice"]["flux"] == "1/12"
    # Equal scenarios written differently are the same point.
    assert point_key({**BASE, "spin": {"enabled": True, "zeeman": 0.1}}) == point_key(
        {**BASE, "spin": {"zeeman": 0.1}})
    assert point_key(points[0]["config"]) != point_key(points[1]["config"])


# ------------------------------------------------------------- running points


@pytest.fixture(scope="module")
def local_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("local") / "sweep"
    sweep = parse_sweep(SWEEP)
    stats = run_sweep(sweep, out, executor="local", jobs=2)
    rows = gather(sweep, out)
    write_table(sweep, rows, out)
    return sweep, out, stats, rows


def test_sweep_points_are_the_runs_of_their_scenarios(local_run):
    from topoedge.scenario import parse_scenario
    from topoedge.workflows import run_scenario

    sweep, out, stats, rows = local_run
    assert stats == {**stats, "total": 9, "skipped": 0, "computed": 9, "failed": 0}
    assert all(r["status"] == "ok" for r in rows)
    point = sweep.points()[4]
    direct = run_scenario(parse_scenario(point["config"])).summary.to_dict()
    row = rows[4]
    assert row["chern"] == direct["bulk"]["chern_below_fermi"] == 2
    assert row["bottom_net"] == direct["edges"]["bottom"]["net"]
    assert row["outermost_spin_bottom"] == direct["edges"]["bottom"]["modes"][0]["spin"]
    # Zeeman splittings up to 0.4 t stay far below the level spacing at flux
    # 1/10 (hbar omega_c = 4 pi t phi = 1.26 t less the lattice correction,
    # ../shared/REFERENCES.md section 4): the two filled bands are the two
    # spins of the lowest level, one spin-up band.
    assert {r["chern_up"] for r in rows} == {1}
    with h5py.File(out / "table.h5") as f:
        assert json.loads(f.attrs["axes"]) == ["ribbon.edge.width", "spin.zeeman"]
        assert np.array_equal(f["spin.zeeman"][()], [r["spin.zeeman"] for r in rows])
        assert np.array_equal(f["chern"][()], [2.0] * 9)
        assert [s.decode() for s in f["status"][()]] == ["ok"] * 9
    header = (out / "table.csv").read_text().splitlines()[0].split(",")
    assert header[:5] == ["key", "ribbon.edge.width", "spin.zeeman", "status", "error"]
    assert set(header[5:]) == set(QUANTITIES)


@pytest.mark.slow
def test_dask_cluster_gives_the_same_table(local_run, tmp_path):
    # The same sweep on a dask.distributed LocalCluster on the loopback
    # address, reached through its scheduler address as a remote cluster
    # would be.
    from dask.distributed import LocalCluster

    sweep, out, _, _ = local_run
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=None) as cluster:
        stats = run_sweep(sweep, tmp_path / "dask", executor="dask", scheduler=cluster.scheduler_address)
    assert stats["computed"] == 9 and stats["failed"] == 0
    write_table(sweep, gather(sweep, tmp_path / "dask"), tmp_path / "dask")
    assert (tmp_path / "dask" / "table.csv").read_text() == (out / "table.csv").read_text()


def test_a_point_with_a_bad_value_fails_alone(tmp_path):
    # E_F inside the lowest bulk band (a GapClosedError) and an edge ramp
    # wider than half the ribbon (a ConfigError of that point): recorded as
    # failed with their one-line errors; the other points complete, and a
    # second run does not retry them unless asked.
    data = {"scenario": {**BASE, "fermi": {"energy": -3.0}},
            "axis": [{"key": "fermi.energy", "values": [-3.0, -3.47]},
                     {"key": "ribbon.edge.width", "values": [4.0, 16.0]}]}
    sweep = parse_sweep(data)
    stats = run_sweep(sweep, tmp_path, jobs=2)
    rows = {(r["fermi.energy"], r["ribbon.edge.width"]): r for r in gather(sweep, tmp_path)}
    assert stats["failed"] == 3 and rows[(-3.0, 4.0)]["status"] == "ok"
    band = rows[(-3.47, 4.0)]
    assert band["status"] == "failed" and band["error"].startswith("GapClosedError: ")
    wide = rows[(-3.0, 16.0)]
    assert wide["status"] == "failed"
    assert wide["error"].startswith("ConfigError: ribbon.edge.width: got 16.0, wider than half the ribbon")
    assert "\n" not in band["error"] + wide["error"]
    again = run_sweep(sweep, tmp_path, jobs=1)
    assert again["skipped"] == 4 and again["computed"] == 0
    retried = run_sweep(sweep, tmp_path, jobs=1, retry_failed=True)
    assert retried["skipped"] == 1 and retried["computed"] == 3 and retried["failed"] == 3


@pytest.mark.slow
def test_killed_sweep_resumes_without_recomputing(tmp_path):
    # The whole process group (the command and its worker) is sent SIGKILL
    # once two points are written; running the same command again computes
    # only the rest, leaves the finished files untouched and every point is
    # there once.
    data = {**SWEEP, "axis": [{"key": "ribbon.edge.width", "values": [0.0, 2.0, 4.0, 6.0, 8.0, 10.0]},
                              {"key": "spin.zeeman", "values": [0.0, 0.2]}]}
    path = _sweep_file(tmp_path, data)
    out = tmp_path / "out"
    proc = subprocess.Popen([sys.executable, "-m", "topoedge", "sweep", str(path), "--out", str(out),
                             "--jobs", "1"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)
    try:
        deadline = time.monotonic() + 300
        while time.monotonic() < deadline and proc.poll() is None:
            if len(list((out / "points").glob("*.json"))) >= 2:
                break
            time.sleep(0.05)
    finally:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
    finished = {p.name: (p.read_bytes(), p.stat().st_mtime_ns) for p in (out / "points").glob("*.json")}
    assert 2 <= len(finished) < 12, "the sweep was not killed part-way"
    assert not (out / "table.csv").exists()
    rerun = _cli(path, "--out", out, "--json", cwd=tmp_path)
    assert rerun.returncode == 0, rerun.stderr
    report = json.loads(rerun.stdout)
    assert report["skipped"] == len(finished) and report["computed"] == 12 - len(finished)
    files = {p.name: (p.read_bytes(), p.stat().st_mtime_ns) for p in (out / "points").glob("*.json")}
    assert len(files) == 12 and all(files[name] == value for name, value in finished.items())
    assert not list((out / "points").glob(".*"))  # no partial file left
    rows = (out / "table.csv").read_text().splitlines()[1:]
    assert len(rows) == 12 and len({r.split(",")[0] for r in rows}) == 12
    assert all(",ok," in r for r in rows)
    keys = {point_key(p["config"]) for p in load_sweep(path).points()}
    assert {name[:-5] for name in files} == keys


def test_sweep_figures(local_run, tmp_path):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    sweep, _, _, rows = local_run
    figures = sweep_figures(sweep, rows)
    assert set(figures) == {f"map-{q}" for q in sweep.quantities}
    ax = figures["map-chern"].axes[0]
    legend = ax.get_legend()
    assert [t.get_text() for t in legend.get_texts()][0] == "2"
    assert ax.get_xlabel() == "ribbon.edge.width (a)" and ax.get_ylabel() == "spin.zeeman (t)"
    for fig in figures.values():
        plt.close(fig)
    line = parse_sweep({**SWEEP, "axis": SWEEP["axis"][:1]})
    lines = sweep_figures(line, [r for r in rows if r["spin.zeeman"] == 0.0])
    assert set(lines) == {"lines"}
    plt.close(lines["lines"])


@pytest.mark.slow
def test_honeycomb_sweep_over_edge_orientations(tmp_path):
    # A sweep over a word-valued key (ribbon.orientation) on the honeycomb
    # lattice: both edges carry the bulk Chern sum (+-1, +-3 near E = 0, the
    # half-integer sequence; Hatsugai, Fukui, Aoki, PRB 74, 205414 (2006),
    # from memory) and the map labels its cells with the words.
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    data = {"scenario": {"lattice": {"kind": "honeycomb", "flux": "1/16"}, "spin": {"enabled": False},
                         "ribbon": {"width": 40}, "spectrum": {"k_points": 16}, "chern": {"refine": False}},
            "axis": [{"key": "fermi.energy", "values": [-0.25, 0.25, 0.87]},
                     {"key": "ribbon.orientation", "values": ["zigzag", "armchair"]}]}
    sweep = parse_sweep(data)
    run_sweep(sweep, tmp_path / "out", jobs=1)
    rows = gather(sweep, tmp_path / "out")
    assert [(r["fermi.energy"], r["ribbon.orientation"], r["chern"], r["bottom_net"]) for r in rows] == [
        (e, o, c, c) for e, c in ((-0.25, -1), (0.25, 1), (0.87, 3)) for o in ("zigzag", "armchair")]
    figures = sweep_figures(sweep, rows)
    ax = figures["map-chern"].axes[0]
    assert [t.get_text() for t in ax.get_yticklabels()] == ["zigzag", "armchair"]
    for fig in figures.values():
        plt.close(fig)


def test_command_writes_table_and_figures(tmp_path):
    data = {**SWEEP, "axis": [{"key": "spin.zeeman", "values": [0.0, 0.2]}],
            "plot": {"quantities": ["bottom_pairs", "outermost_spin_bottom"]}}
    path = _sweep_file(tmp_path, data)
    proc = _cli(path, "--out", tmp_path / "out", "--jobs", "1", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "2: 0 finished before, 2 computed now (0 failed)" in proc.stdout
    names = {p.name for p in (tmp_path / "out").iterdir()}
    assert names == {"points", "sweep.json", "table.h5", "table.csv", "lines.png", "lines.pdf"}
    assert (tmp_path / "out" / "lines.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert (tmp_path / "out" / "lines.pdf").read_bytes()[:5] == b"%PDF-"


@pytest.mark.parametrize("path", sorted((ROOT / "topoedge" / "data" / "sweeps").glob("*.toml")),
                         ids=lambda p: p.name)
def test_shipped_sweeps_load(path):
    sweep = load_sweep(path)
    assert sweep.points() and sweep.title


def test_every_quantity_is_documented():
    # The outputs page lists the columns of the sweep table (docs/outputs.rst, "Sweeps").
    outputs = (ROOT / "docs" / "outputs.rst").read_text()
    section = outputs[outputs.index(".. _sweep-outputs:"):outputs.index(".. _butterfly-outputs:")]
    for name in QUANTITIES:
        assert f"``{name}``" in section, name


def test_command_with_failed_points_exits_3_after_writing_the_rest(tmp_path):
    # An edge ramp wider than half the ribbon fails at that point only; the
    # table holds both points and the exit status says that some failed.
    data = {**SWEEP, "axis": [{"key": "ribbon.edge.width", "values": [2.0, 16.0]}],
            "plot": {"quantities": ["bottom_net"]}}
    path = _sweep_file(tmp_path, data)
    proc = _cli(path, "--out", tmp_path / "out", "--jobs", "1", cwd=tmp_path)
    assert proc.returncode == 3, proc.stderr
    assert "1 of 2 points failed (exit status 3)" in proc.stdout
    table = (tmp_path / "out" / "table.csv").read_text()
    assert table.count("\n") == 3 and "failed" in table and ",ok," in table


def test_command_set_changes_the_base_scenario_and_refuses_an_axis(tmp_path):
    data = {**SWEEP, "axis": [{"key": "spin.zeeman", "values": [0.0, 0.2]}],
            "plot": {"quantities": ["bottom_net"]}}
    path = _sweep_file(tmp_path, data)
    sweep = load_sweep(path, ["ribbon.edge.width=3"])
    assert sweep.base["ribbon"]["edge"]["width"] == 3
    assert load_sweep(path).base["ribbon"]["edge"]["width"] != 3
    proc = _cli(path, "--out", tmp_path / "out", "--set", "spin.zeeman=0.1", cwd=tmp_path)
    assert proc.returncode == 2 and proc.stdout == ""
    assert proc.stderr.count("\n") == 1
    assert "--set 'spin.zeeman=0.1': spin.zeeman is an axis of this sweep" in proc.stderr
    assert not (tmp_path / "out").exists()


def test_sweep_whose_point_does_not_fit_is_refused_before_any_point_runs(tmp_path):
    # Every point's memory is estimated as `topoedge run` estimates it: a
    # billion momenta (21 TB of states) cannot fit on any machine.
    data = {**SWEEP, "axis": [{"key": "spectrum.k_points", "values": [21, 1_000_000_000]}]}
    path = _sweep_file(tmp_path, data)
    proc = _cli(path, "--out", tmp_path / "out", cwd=tmp_path)
    assert proc.returncode == 2 and proc.stdout == "" and proc.stderr.count("\n") == 1
    assert "sweep point spectrum.k_points = 1000000000: the ribbon spectrum" in proc.stderr
    assert not (tmp_path / "out").exists()
