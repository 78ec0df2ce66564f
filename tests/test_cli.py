"""End-to-end tests of the ``topoedge`` command line and of results folders.

Most checks run the real command in a subprocess (``python -m topoedge``), so
exit statuses and the two output streams are exactly what a user sees; each
costs about 1.5 s (mostly the kwant import), so there are few of them and the
scenario is tiny. Cheaper variations call `topoedge.cli.main` in-process.
"""

from __future__ import annotations

import copy
import json
import os
import re
import stat
import subprocess
import sys
from pathlib import Path

import h5py
import numpy as np
import pytest

import topoedge
from topoedge import cli
from topoedge.scenario import DEFAULT_SCENARIO, load_scenario, parse_scenario
from topoedge.workflows import run_scenario
from topoedge.outputs.results import write_run
from topoedge.util.atomic import ResultsExistError

CONFIGS = sorted((Path(__file__).resolve().parent.parent / "topoedge" / "data" / "scenarios").glob("*.toml"))

# A ribbon small enough to run in a fraction of a second: W = 30 sites,
# flux 1/10 (l_B = 1.26 a, so W is about 24 magnetic lengths), 21 momenta.
# The lowest Landau level is split by the Zeeman term into spin up at
# -3.47 t and spin down at -3.37 t; the next level starts at -2.40 t (from a
# run of this scenario). E_F = -3.0 t sits in that bulk gap (filling 2: Chern
# sum 2, one spin-up and one spin-down mode per edge), so only edge modes
# cross it; `test_run_spectrum_matches_direct_computation` checks this.
TINY = {
    "title": "tiny test ribbon",
    "lattice": {"flux": "1/10", "onsite": 0.0},
    "spin": {"enabled": True, "zeeman": 0.1},
    "ribbon": {"width": 30, "edge": {"profile": "linear", "width": 4.0, "height": 1.0}},
    "spectrum": {"k_points": 21, "solver": "auto"},
    "fermi": {"energy": -3.0},
}
TINY_GAP = (-3.37, -2.40)
# Inside the lowest bulk band of TINY: spin up, -3.47005 .. -3.46990 t (from
# a run of this scenario on its default 20 x 20 grid).
TINY_IN_BAND = -3.47
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
FIGURES = {"ribbon_spectrum.png", "bulk_bands.png"}
TABLES = {"edge_modes.csv", "bulk_bands.csv", "bulk_gaps.csv", "hall_routes.csv"}
RUN_FILES = {"summary.json", "spectrum.h5"} | FIGURES | TABLES
H5_DATASETS = {"k", "energy", "velocity", "y_mean", "y_spread", "sz", "count", "potential"}
H5_GROUPS = {"bulk", "edge_modes", "config"}


# ---------------------------------------------------------------- helpers


def to_toml(data: dict, prefix: str = "") -> str:
    """TOML text of nested dicts of strings, numbers and booleans.

    A JSON scalar (``"1/10"``, ``4.0``, ``true``) is also a TOML scalar.
    """
    lines = [f"{k} = {json.dumps(v)}" for k, v in data.items() if not isinstance(v, dict)]
    for name, table in data.items():
        if isinstance(table, dict):
            path = f"{prefix}.{name}" if prefix else name
            lines += ["", f"[{path}]", to_toml(table, path)]
    return "\n".join(lines)


def with_value(path: str, value) -> dict:
    """A copy of TINY with the dotted key ``path`` set to ``value``."""
    data = copy.deepcopy(TINY)
    *sections, name = path.split(".")
    table = data
    for section in sections:
        table = table[section]
    table[name] = value
    return data


def write_config(folder: Path, data: dict | None = None, name: str = "tiny.toml") -> Path:
    path = folder / name
    path.write_text(to_toml(TINY if data is None else data) + "\n")
    return path


def topoedge_cli(*args, cwd: Path) -> subprocess.CompletedProcess:
    """Run ``python -m topoedge ARGS`` in ``cwd`` and capture both streams."""
    return subprocess.run(
        [sys.executable, "-m", "topoedge", *map(str, args)],
        cwd=cwd, capture_output=True, text=True, timeout=300,
    )


def strict_json(text: str):
    """Parse JSON as the standard defines it (no NaN or Infinity)."""
    def reject(constant):
        raise ValueError(f"{constant} is not valid JSON")

    return json.loads(text, parse_constant=reject)


def leading_json(text: str):
    """The JSON document that starts at the first line beginning with '{'."""
    match = re.search(r"^\{", text, flags=re.MULTILINE)
    assert match, f"no JSON document on stdout:\n{text}"
    document, _ = json.JSONDecoder().raw_decode(text, match.start())
    return document


def listing(root: Path) -> list[str]:
    """Every file and folder under ``root``, relative, sorted."""
    return sorted(str(p.relative_to(root)) for p in root.rglob("*"))


def assert_one_error_line(stderr: str, *needles: str) -> str:
    """stderr is exactly one ``topoedge: error:`` line containing ``needles``.

    Progress lines of stages that finished before the error was found
    (``topoedge | ...``, written when stderr is not a terminal) are not messages.
    """
    lines = [line for line in stderr.splitlines() if not line.startswith("topoedge | ")]
    assert len(lines) == 1, f"expected one line on stderr, got:\n{stderr}"
    assert lines[0].startswith("topoedge: error: "), lines[0]
    assert "Traceback" not in stderr
    for needle in needles:
        assert needle in lines[0], f"{needle!r} not in {lines[0]!r}"
    return lines[0]


def no_temporaries(folder: Path) -> list[str]:
    return [p.name for p in folder.iterdir() if ".partial-" in p.name or ".old-" in p.name]


@pytest.fixture
def tiny_config(tmp_path):
    return write_config(tmp_path)


@pytest.fixture(scope="module")
def tiny_result():
    """The computed (not written) result of the tiny scenario."""
    return run_scenario(parse_scenario(TINY))


@pytest.fixture(autouse=True)
def _close_figures():
    # Figures left open by a failing figure callback would pile up in-process.
    yield
    import matplotlib.pyplot as plt

    plt.close("all")


# ------------------------------------------------- 1. one complete run


@pytest.fixture(scope="module")
def cli_run(tmp_path_factory):
    """``topoedge run tiny.toml --out out`` once, in a subprocess."""
    folder = tmp_path_factory.mktemp("run")
    config = write_config(folder)
    proc = topoedge_cli("run", config.name, "--out", "out", cwd=folder)
    return proc, folder / "out", config


def test_run_exits_0_and_prints_summary(cli_run):
    proc, out, _ = cli_run
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    assert "tiny test ribbon" in proc.stdout
    assert "flux 1/10" in proc.stdout
    assert "W = 30 sites" in proc.stdout
    assert "21 k points" in proc.stdout
    assert "Fermi energy -3.00000 t in the gap above 2 bands" in proc.stdout
    assert "C = 2 (spin up 1, spin down 1)" in proc.stdout
    assert "sigma_xy = 2 e^2/h" in proc.stdout
    assert "agree: yes (per spin: yes)" in proc.stdout
    assert f"{out.name}/" in proc.stdout
    assert "bulk_bands.png" in proc.stdout
    assert {p.name for p in out.iterdir()} == RUN_FILES
    assert no_temporaries(out.parent) == []


def test_run_summary_json(cli_run):
    _, out, config = cli_run
    summary = strict_json((out / "summary.json").read_text())
    assert summary["topoedge_version"] == topoedge.__version__
    assert summary["fermi"]["energy"] == -3.0
    assert summary["config"] == load_scenario(config).to_dict()
    assert parse_scenario(summary["config"]) == parse_scenario(TINY)
    assert summary["spectrum"]["k_points"] == 21
    assert summary["spectrum"]["states"] == 21 * 2 * 30  # all states, no window
    assert summary["model"]["flux"] == "1/10"


def test_run_summary_topology(cli_run):
    # Filling 2 of the Zeeman-split lowest Landau level: Chern sum 2, one
    # spin-up and one spin-down mode per edge, bottom along +x, top along -x
    # (the bulk-edge convention of topoedge.workflows.run).
    _, out, _ = cli_run
    summary = strict_json((out / "summary.json").read_text())
    bulk, fermi, edges = summary["bulk"], summary["fermi"], summary["edges"]
    assert len(bulk["bands"]) == 20  # 10 bands per spin at flux 1/10
    assert [b["spin"] for b in bulk["bands"][:2]] == ["up", "down"]
    lower, upper = bulk["bands"][1]["energy_max"], bulk["bands"][2]["energy_min"]
    assert lower < -3.0 < upper
    assert lower == pytest.approx(TINY_GAP[0], abs=0.01) and upper == pytest.approx(TINY_GAP[1], abs=0.01)
    assert bulk["chern_below_fermi"] == 2
    assert bulk["spin_chern_below_fermi"] == {"up": 1, "down": 1}
    assert fermi["gap_below"] == 2 and fermi["from_gap"] is None
    assert fermi["gap_window"][0] < -3.0 < fermi["gap_window"][1]
    for side, sign in (("bottom", 1), ("top", -1)):
        edge = edges[side]
        assert edge["net"] == 2 * sign and edge["counter_pairs"] == 0
        assert edge["by_spin"] == {"up": {"net": sign, "counter_pairs": 0},
                                   "down": {"net": sign, "counter_pairs": 0}}
        assert sorted(m["spin"] for m in edge["modes"]) == ["down", "up"]
        assert all(np.sign(m["velocity"]) == sign for m in edge["modes"])
    assert all(m["y"] < 10 for m in edges["bottom"]["modes"])
    assert all(m["y"] > 19 for m in edges["top"]["modes"])
    assert edges["bulk"] == [] and edges["in_gap"] is True
    assert summary["hall"]["sigma_xy"] == 2
    # R_xy = -1/sigma_xy = -h / (2 e^2) with the exact SI values of h and e
    # (CODATA 2018): a positive lattice flux is a field along -z for electrons.
    assert summary["hall"]["r_xy_ohm"] == pytest.approx(-25812.80745930 / 2, rel=1e-12)
    assert summary["check"]["bulk_edge_agree"] is True
    assert summary["check"]["spin_resolved_agree"] is True


def test_run_spectrum_h5(cli_run):
    _, out, config = cli_run
    summary = strict_json((out / "summary.json").read_text())
    with h5py.File(out / "spectrum.h5", "r") as f:
        assert H5_DATASETS <= set(f.keys())
        assert all(isinstance(f[name], h5py.Group) for name in H5_GROUPS)
        assert set(f.keys()) == H5_DATASETS | H5_GROUPS
        assert f.attrs["topoedge_version"] == topoedge.__version__
        assert f.attrs["fermi_energy"] == -3.0
        stored = parse_scenario(json.loads(f.attrs["scenario_json"]))
        assert f["k"].shape == (21,)
        assert f["energy"].shape == (21, 60)  # 30 sites x 2 spins
        for name in ("velocity", "y_mean", "y_spread", "sz"):
            assert f[name].shape == (21, 60), name
        assert f["count"][()].tolist() == [60] * 21
        assert f["potential"].shape == (30,)
        assert f["config"].attrs["lattice.flux"] == "1/10"
        bulk = f["bulk"]
        bands = summary["bulk"]["bands"]
        np.testing.assert_array_equal(
            bulk["band_energy_range"][()], [[b["energy_min"], b["energy_max"]] for b in bands])
        chern = bulk["band_chern"][()]
        assert [None if np.isnan(c) else int(c) for c in chern] == [b["chern"] for b in bands]
        assert bulk["band_spin"][()].tolist() == [{"up": 1, "down": -1}[b["spin"]] for b in bands]
        gaps = summary["bulk"]["gaps"]
        assert bulk["gap_below"][()].tolist() == [g["below"] for g in gaps]
        assert bulk["gap_chern"][()].tolist() == [g["chern"] for g in gaps]
        assert bulk.attrs["grid"].tolist() == summary["bulk"]["grid"]
        assert {"path_distance", "path_energy_up", "path_energy_down"} <= set(bulk.keys())
        modes = f["edge_modes"]
        # 0 = bottom, 1 = top: two modes on each edge, moving along +x and -x.
        assert modes["edge"][()].tolist() == [0, 0, 1, 1]
        assert np.all(np.sign(modes["velocity"][()]) == [1, 1, -1, -1])
        np.testing.assert_allclose(modes["energy"][()], -3.0, atol=1e-9)
        np.testing.assert_allclose(np.sort(modes["sz"][()]), [-0.5, -0.5, 0.5, 0.5], atol=1e-9)
        for name in ("k", "y", "spread"):
            assert modes[name].shape == (4,), name
    assert stored == load_scenario(config)
    assert stored == parse_scenario(TINY)


@pytest.mark.parametrize("name", sorted(FIGURES))
def test_run_figure_png(cli_run, name):
    _, out, _ = cli_run
    data = (out / name).read_bytes()
    assert data[:8] == PNG_MAGIC
    # An empty 7x5 inch canvas at 150 dpi compresses to a few kB; the bands,
    # axes and labels make it tens of kB.
    assert len(data) > 10_000


def test_run_spectrum_matches_direct_computation(cli_run):
    _, out, config = cli_run
    result = run_scenario(load_scenario(config))
    direct = result.spectrum
    with h5py.File(out / "spectrum.h5", "r") as f:
        k, energy, y_mean = f["k"][()], f["energy"][()], f["y_mean"][()]
        mode_k = f["edge_modes"]["k"][()]
    # Same code, same LAPACK calls: the two should agree to the last bit or
    # so. 1e-12 t (about 1e4 ulp at |E| ~ 4 t) allows for a different
    # instruction path in another process and is still ten orders of
    # magnitude below the level spacings of this ribbon (~0.1 t).
    np.testing.assert_array_equal(k, direct.k)
    np.testing.assert_allclose(energy, direct.energy, rtol=0, atol=1e-12)
    # The fixture's premise: E_F lies in a bulk gap, so no state in the
    # middle third of the ribbon is within 0.3 t of it.
    bulk = (y_mean > 10) & (y_mean < 19)
    assert np.abs(energy[bulk] - TINY["fermi"]["energy"]).min() > 0.3
    assert not np.any((energy[bulk] > TINY_GAP[0] + 0.01) & (energy[bulk] < TINY_GAP[1] - 0.01))
    # The edge modes: same crossings (Brent roots to 1e-12 / a) in both processes.
    direct_k = [m.k for side in (result.edges.bottom, result.edges.top) for m in side.modes]
    np.testing.assert_allclose(mode_k, direct_k, rtol=0, atol=1e-9)


# ------------------------------------------------- 2. --json and --quiet


def test_json_quiet_prints_only_json(tmp_path, tiny_config):
    proc = topoedge_cli("run", tiny_config.name, "--out", "out", "--json", "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    printed = strict_json(proc.stdout)  # the whole of stdout is one document
    assert printed == strict_json((tmp_path / "out" / "summary.json").read_text())
    assert printed["fermi"]["energy"] == -3.0


def test_json_starts_stdout_with_the_summary(tmp_path, tiny_config, capsys):
    out = tmp_path / "out"
    assert cli.main(["run", str(tiny_config), "--out", str(out), "--json"]) == 0
    stdout = capsys.readouterr().out
    printed, _ = json.JSONDecoder().raw_decode(stdout)
    assert printed == strict_json((out / "summary.json").read_text())


def test_quiet_prints_nothing(tmp_path, tiny_config):
    proc = topoedge_cli("run", tiny_config.name, "--out", "out", "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout == ""
    assert {p.name for p in (tmp_path / "out").iterdir()} == RUN_FILES


# ------------------------------------------------- 3. --set


def test_set_changes_the_resolved_config(tmp_path, tiny_config, capsys):
    out = tmp_path / "out"
    argv = ["run", str(tiny_config), "--out", str(out), "--quiet",
            "--set", "ribbon.edge.width=2",
            "--set", "lattice.flux=1/8",           # bare string, not TOML
            "--set", "spectrum.k_points=5",
            "--set", 'title="renamed"']
    assert cli.main(argv) == 0
    assert capsys.readouterr().out == ""
    config = strict_json((out / "summary.json").read_text())["config"]
    expected = copy.deepcopy(TINY)
    expected["ribbon"]["edge"]["width"] = 2.0
    expected["lattice"]["flux"] = "1/8"
    expected["spectrum"]["k_points"] = 5
    expected["title"] = "renamed"
    assert config == parse_scenario(expected).to_dict()
    with h5py.File(out / "spectrum.h5", "r") as f:
        assert parse_scenario(json.loads(f.attrs["scenario_json"])) == parse_scenario(expected)
        assert f["k"].shape == (5,)


# ------------------------------------------------- 4. existing folders


def test_existing_folder_is_refused(tmp_path, tiny_config):
    out = tmp_path / "out"
    out.mkdir()
    (out / "marker.txt").write_text("keep me")
    before = listing(tmp_path)
    proc = topoedge_cli("run", tiny_config.name, "--out", "out", cwd=tmp_path)
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert_one_error_line(proc.stderr, "out", "already exists", "--force")
    assert listing(tmp_path) == before
    assert (out / "marker.txt").read_text() == "keep me"


def test_force_replaces_existing_folder(tmp_path, tiny_config):
    out = tmp_path / "out"
    out.mkdir()
    (out / "marker.txt").write_text("old run")
    assert cli.main(["run", str(tiny_config), "--out", str(out), "--force", "--quiet"]) == 0
    assert {p.name for p in out.iterdir()} == RUN_FILES
    assert no_temporaries(tmp_path) == []
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out", tiny_config.name]


def test_force_on_a_file_is_refused(tmp_path, tiny_config, capsys):
    out = tmp_path / "out"
    out.write_text("not a folder")
    assert cli.main(["run", str(tiny_config), "--out", str(out), "--force"]) == 2
    assert_one_error_line(capsys.readouterr().err, "not a folder")
    assert out.read_text() == "not a folder"


# ------------------------------------------------- 5. bad input

# id -> (scenario data or raw TOML text or None, extra arguments, words the
# one-line message must contain). None means: no config file is written.
BAD_INPUT = {
    "unknown key": (with_value("ribbon.edge.widht", 4.0), [],
                    ["ribbon.edge.widht", "did you mean 'ribbon.edge.width'"]),
    "wrong type": (with_value("ribbon.width", "thirty"), [], ["ribbon.width", "'thirty'"]),
    "flux q = 0": (with_value("lattice.flux", "1/0"), [], ["lattice.flux", "'1/0'"]),
    "flux not coprime": (with_value("lattice.flux", "2/6"), [],
                         ["lattice.flux", "coprime", "'1/3'"]),
    "ramp wider than half": (with_value("ribbon.edge.width", 16.0), [],
                             ["ribbon.edge.width", "half the ribbon"]),
    "negative ramp": (with_value("ribbon.edge.width", -1.0), [], ["ribbon.edge.width", "-1.0"]),
    "--set without =": (TINY, ["--set", "ribbon.width"], ["--set", "ribbon.width"]),
    "--set unknown path": (TINY, ["--set", "ribbon.edge.hight=1"],
                           ["ribbon.edge.hight", "did you mean 'ribbon.edge.height'"]),
    "missing config": (None, [], ["tiny.toml", "not found"]),
    "fermi.gap = 0": (TINY, ["--set", "fermi.gap=0"], ["fermi.gap", "got 0", ">= 1"]),
    # E_F must lie in an open bulk gap: refused after the bulk calculation,
    # before anything is written.
    "E_F in a bulk band": (TINY, ["--set", f"fermi.energy={TINY_IN_BAND}"],
                           [f"E_F = {TINY_IN_BAND} t", "inside bulk band 0, spin up", "open gaps"]),
    # Flux 1/4: the two centre bands touch at E = 0 (TKNN: the centre gap of
    # even q is closed), so the gap above 2 bands does not exist.
    "closed gap": (TINY, ["--set", "lattice.flux=1/4", "--set", "spin.enabled=false",
                          "--set", "spin.zeeman=0", "--set", "fermi.gap=2"],
                   ["fermi.gap = 2", "gap above band 1 is closed", "open gaps near it: 1 (", ", 3 ("]),
    "TOML syntax error": ('title = "x"\n[lattice\nflux = "1/10"\n', [],
                          ["tiny.toml", "invalid TOML", "line 2"]),
}


@pytest.mark.parametrize(("data", "extra", "needles"), BAD_INPUT.values(), ids=BAD_INPUT.keys())
def test_bad_input_writes_nothing(tmp_path, data, extra, needles):
    if isinstance(data, str):
        (tmp_path / "tiny.toml").write_text(data)
    elif data is not None:
        write_config(tmp_path, data)
    (tmp_path / "runs").mkdir()  # parent of --out, must stay empty
    before = listing(tmp_path)
    proc = topoedge_cli("run", "tiny.toml", "--out", "runs/out", *extra, cwd=tmp_path)
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert_one_error_line(proc.stderr, *needles)
    assert listing(tmp_path) == before  # no out folder, no results/, no temporaries


@pytest.mark.parametrize(
    ("overrides", "needles"),
    [(["lattice.flux=2/6"], ["lattice.flux", "coprime"]),
     (["lattice.flx=1/3"], ["lattice.flx", "did you mean 'lattice.flux'"]),
     (["ribbon.width=3.0"], ["ribbon.width", "without a decimal point"])],
    ids=["not coprime", "misspelt key", "float for int"],
)
def test_bad_override_in_process(tmp_path, tiny_config, capsys, overrides, needles):
    before = listing(tmp_path)
    argv = ["run", str(tiny_config), "--out", str(tmp_path / "out")]
    for item in overrides:
        argv += ["--set", item]
    assert cli.main(argv) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert_one_error_line(captured.err, *needles)
    assert listing(tmp_path) == before


# ------------------------------------------------- 6. default results folder


def test_default_out_is_a_new_dated_folder(tmp_path, tiny_config, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert cli.main(["run", tiny_config.name, "--quiet"]) == 0
    (first,) = (tmp_path / "results").iterdir()
    assert re.fullmatch(r"tiny-\d{8}-\d{6}(-\d+)?", first.name), first.name
    first_summary = (first / "summary.json").read_bytes()

    assert cli.main(["run", tiny_config.name, "--quiet"]) == 0
    folders = sorted((tmp_path / "results").iterdir())
    assert len(folders) == 2
    (second,) = [f for f in folders if f != first]
    assert re.fullmatch(r"tiny-\d{8}-\d{6}(-\d+)?", second.name), second.name
    assert (first / "summary.json").read_bytes() == first_summary
    assert {p.name for p in second.iterdir()} == RUN_FILES


# ------------------------------------------------- 7. failures while writing


def _failing_figure(path: Path) -> None:
    path.write_bytes(b"half a figure")
    raise RuntimeError("figure failed")


def test_write_run_failing_figure_leaves_nothing(tmp_path, tiny_result):
    out = tmp_path / "runs" / "out"
    with pytest.raises(RuntimeError, match="figure failed"):
        write_run(out, tiny_result, {"ribbon_spectrum.png": _failing_figure})
    assert not out.exists()
    assert listing(tmp_path / "runs") == []  # the parent may be created, but stays empty


def test_write_run_failing_figure_keeps_previous_folder(tmp_path, tiny_result):
    out = tmp_path / "out"
    out.mkdir()
    (out / "marker.txt").write_text("previous run")
    with pytest.raises(RuntimeError, match="figure failed"):
        write_run(out, tiny_result, {"ribbon_spectrum.png": _failing_figure}, force=True)
    assert listing(out) == ["marker.txt"]
    assert no_temporaries(tmp_path) == []


def test_write_run_refuses_existing_folder(tmp_path, tiny_result):
    out = tmp_path / "out"
    out.mkdir()
    with pytest.raises(ResultsExistError, match="--force"):
        write_run(out, tiny_result, {})
    assert listing(tmp_path) == ["out"]


@pytest.mark.skipif(os.name != "posix", reason="POSIX permission bits")
def test_write_run_folder_has_plain_mkdir_permissions(tmp_path, tiny_result):
    # The folder is first made with mkdtemp (mode 0700); once in place it must
    # be as readable as any folder the user creates (0777 minus the umask).
    umask = os.umask(0o022)
    try:
        out = write_run(tmp_path / "out", tiny_result, {})
    finally:
        os.umask(umask)
    assert stat.S_IMODE(out.stat().st_mode) == 0o755


@pytest.mark.parametrize("plot", ["plot_ribbon_spectrum", "plot_bulk_bands"])
def test_cli_failing_figure_leaves_nothing(tmp_path, tiny_config, monkeypatch, plot):
    def broken_plot(*args, **kwargs):
        raise RuntimeError("plotting failed")

    module = {"plot_ribbon_spectrum": "ribbon", "plot_bulk_bands": "bulk"}[plot]
    monkeypatch.setattr(f"topoedge.plotting.{module}.{plot}", broken_plot)
    before = listing(tmp_path)
    with pytest.raises(RuntimeError, match="plotting failed"):
        cli.main(["run", str(tiny_config), "--out", str(tmp_path / "out"), "--quiet"])
    assert listing(tmp_path) == before


def test_cli_interrupt_while_writing_leaves_nothing(tmp_path, tiny_config, monkeypatch, capsys):
    def interrupted_plot(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr("topoedge.plotting.ribbon.plot_ribbon_spectrum", interrupted_plot)
    before = listing(tmp_path)
    try:
        status = cli.main(["run", str(tiny_config), "--out", str(tmp_path / "out"), "--quiet"])
    except KeyboardInterrupt:  # must not reach pytest, which would stop the session
        pytest.fail("KeyboardInterrupt escaped topoedge.cli.main")
    assert status == 130
    assert "nothing was written" in capsys.readouterr().err
    assert listing(tmp_path) == before


# ------------------------------------------------- 8. bench


@pytest.mark.slow
def test_bench_json(tmp_path):
    scenario = write_config(tmp_path)
    (tmp_path / "sweep.toml").write_text(
        f'scenario = "{scenario.name}"\n\n[[axis]]\nkey = "spin.zeeman"\nvalues = [0.0, 0.1]\n')
    (tmp_path / "gaas.toml").write_text('[material]\npreset = "gaas"\nlattice_constant_nm = "auto"\n'
                                        '[field]\nb_tesla = 1.0\ndensity_cm2 = 1e11\n'
                                        '[ribbon]\nwidth = 70\n[spectrum]\nk_points = 21\n')
    proc = topoedge_cli("bench", "--width", 20, "--k-points", 5, "--chern-q", 6, "--bars", "80x40",
                        "--hf-size", "40x16", "--sweep", "sweep.toml", "--landau-q", "48,60",
                        "--gaas", "gaas.toml", "--marker-flakes", "24:12,16", "--json", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    full = leading_json(proc.stdout)
    assert full.keys() == {"ribbon", "chern", "landau", "gaas", "hallbar", "hf", "mixing", "sweep", "marker",
                           "levels"}
    assert full["marker"]["dense"]["largest_difference"] < 1e-2
    # the mixing holds one half iterate (D = 0 .. 8 of N_k = 16: 9/16 of G) and 8 single-precision
    # residuals of it (9/32 each) instead of 8 full pairs (16 arrays): counted from the array sizes,
    # measured as the bytes the mixers hold
    assert full["mixing"]["ratio_full_over_lean"] == pytest.approx(16 / (9 / 16 + 8 * 9 / 32), rel=1e-9)
    levels = full["levels"]
    assert levels["all_converged"] and levels["points"] == 20 and len(levels["lattice_transitions"]) == 1
    landau = full["landau"]
    # dense at 12, 24, 48 (measured), Landau-level solver at those and at 60;
    # the lowest four gaps have t_r = r at flux 1/q (TKNN, PRL 49, 405 (1982)).
    assert [row["q"] for row in landau["rows"]] == [12, 24, 48, 60]
    assert all(row["tknn"] for row in landau["rows"])
    assert [row["dense"] for row in landau["rows"]] == ["measured"] * 3 + ["extrapolated"]
    assert all(row["dense_gaps_equal"] for row in landau["rows"][:3])
    assert all(row["peak_rss_mb"] > 0 for row in landau["rows"])
    gaas = full["gaas"]["rows"]
    assert [row["b_tesla"] for row in gaas] == [1.0, 10.0]
    assert all(row["routes_agree"] and row["bulk_edge_agree"] for row in gaas)
    assert [row["chern"] for row in gaas] == [-4, -2]   # nu = 4.1 and 2.1, field along +z
    sweep = full["sweep"]
    assert sweep["points"] == 2 and sweep["failed"] == 0 and sweep["tables_identical"] is True
    assert set(sweep["seconds"]) == {"1", "2"} and sweep["ratio"] > 0
    hf = full["hf"]
    # Both mixings reach the same self-consistent state (rounding of the
    # energy ~1e-12 t; 1e-8 t catches a different state).
    assert hf["runs"]["diis"]["converged"] and hf["runs"]["linear"]["converged"]
    assert hf["energy_difference_t"] < 1e-8
    report = full["ribbon"]
    assert {"ratios", "seconds", "max_energy_difference_t"} <= report.keys()
    assert report["width_per_spin"] == 20 and report["k_points"] == 5
    # Both sides diagonalise the same 40x40 Bloch Hamiltonians with LAPACK;
    # they differ only by rounding, ~ 1e-14 t for |E| <= 5 t (eps ~ 2.2e-16
    # times the norm times a modest factor). 1e-10 t leaves ample room while
    # catching any real mismatch (level spacings here are >= 1e-3 t).
    assert report["max_energy_difference_t"]["all"] < 1e-10
    chern = full["chern"]
    assert chern["flux"] == "1/6" and chern["bands"] == 6
    assert chern["tknn_agree"] is True and chern["refined_agree"] is True
    bar = full["hallbar"]["sizes"]
    assert [(b["length"], b["width"]) for b in bar] == [(80, 40)]
    # Every solver's conductance matrix obeys current conservation and equals
    # SciPy's (unitarity of the S-matrix; rounding ~1e-14 e^2/h).
    assert "scipy_sparse" in bar[0]["seconds"]
    assert all(v < 1e-9 for v in bar[0]["max_conductance_difference"].values())
    assert listing(tmp_path) == ["gaas.toml", "sweep.toml", "tiny.toml"]  # bench writes no files of its own


def test_bench_rejects_bad_hf_size(tmp_path):
    proc = topoedge_cli("bench", "--parts", "hf", "--hf-size", "40x15", cwd=tmp_path)
    assert proc.returncode == 2 and proc.stdout == ""
    assert_one_error_line(proc.stderr, "--hf-size", "multiple of 4")


def test_bench_rejects_bad_bar_sizes(tmp_path):
    proc = topoedge_cli("bench", "--parts", "hallbar", "--bars", "40by20", cwd=tmp_path)
    assert proc.returncode == 2 and proc.stdout == ""
    assert_one_error_line(proc.stderr, "--bars", "LENGTHxWIDTH")


def test_bench_rejects_narrow_ribbon(tmp_path):
    proc = topoedge_cli("bench", "--width", 1, cwd=tmp_path)
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert_one_error_line(proc.stderr, "--width 1", "2 <= width <= 5000")


# ------------------------------------------------- 9. argument errors


@pytest.mark.parametrize(
    "argv", [[], ["--bogus"], ["run", "--bogus"]], ids=["no subcommand", "unknown option",
                                                         "unknown run option"],
)
def test_argument_errors_exit_2(tmp_path, argv):
    proc = topoedge_cli(*argv, cwd=tmp_path)
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert_one_error_line(proc.stderr)
    assert listing(tmp_path) == []


def test_argument_error_in_process(capsys):
    with pytest.raises(SystemExit) as exc:
        cli.main(["bench", "--width", "wide"])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    assert len(err.splitlines()) == 1 and "--width" in err


def test_version(capsys):
    with pytest.raises(SystemExit) as exc:
        cli.main(["--version"])
    assert exc.value.code == 0
    assert capsys.readouterr().out.strip() == f"topoedge {topoedge.__version__}"


# ------------------------------------------------- 10. shipped scenarios


def test_shipped_scenarios_exist():
    assert DEFAULT_SCENARIO in [path.resolve() for path in CONFIGS]


@pytest.mark.parametrize("path", CONFIGS, ids=[path.name for path in CONFIGS])
def test_shipped_scenario_loads(path):
    scenario = load_scenario(path)
    assert scenario.source == str(path)
    assert parse_scenario(scenario.to_dict()) == scenario
