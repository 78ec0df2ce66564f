"""Interrupted commands: killed at a random moment, the same command again gives the uninterrupted result.

SIGKILL leaves no chance to clean up: the next command into the same place
removes the temporaries of dead processes, and the scans (``hallbar``,
``butterfly``) take the points finished before the kill from their points
folder instead of computing them again.
"""

from __future__ import annotations

import json
import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from topoedge import cli
from topoedge.util.atomic import remove_stale, temp_prefix
from topoedge.util.points import PointStore

TINY = ('title = "tiny"\n[lattice]\nflux = "1/10"\n[spin]\nenabled = true\nzeeman = 0.1\n'
        '[ribbon]\nwidth = 40\n[ribbon.edge]\nprofile = "linear"\nwidth = 4.0\nheight = 1.0\n'
        '[spectrum]\nk_points = 41\n[chern]\ngrid = [12, 12]\nrefine = false\n[fermi]\ngap = 2\n'
        '[hallbar]\nlength = 48\nwidth = 24\n')


def _dead_pid() -> int:
    """A process id that no process has now."""
    for pid in range(4_000_000, 3_000_000, -7919):
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            return pid
        except PermissionError:
            continue
    raise RuntimeError("no free process id found")


def _kill_after(args: list[str], cwd: Path, ready, limit: float = 120.0) -> None:
    """Start ``topoedge ARGS`` in its own process group and SIGKILL the group once ``ready()`` or at a random moment."""
    proc = subprocess.Popen([sys.executable, "-m", "topoedge", *args], cwd=cwd, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, start_new_session=True)
    try:
        deadline = time.monotonic() + limit
        while time.monotonic() < deadline and proc.poll() is None and not ready():
            time.sleep(0.02)
        time.sleep(random.uniform(0.0, 0.3))
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()


def _without_times(summary: dict) -> dict:
    return {k: v for k, v in summary.items() if k not in ("seconds", "worker_seconds", "jobs", "source")}


def test_stale_temporaries_of_dead_processes_are_removed(tmp_path):
    dead = _dead_pid()
    stale_dir = tmp_path / f".run.partial-{dead}-abc"
    stale_dir.mkdir()
    (stale_dir / "summary.json").write_text("{}")
    stale_file = tmp_path / f".table.csv.partial-{dead}-xyz"
    stale_file.write_text("x")
    mine = tmp_path / f"{temp_prefix('other')}live"
    mine.mkdir()
    keep = tmp_path / ".not-ours.partial-abc"        # not a name this project writes
    keep.write_text("x")
    assert sorted(p.name for p in remove_stale(tmp_path)) == sorted([stale_dir.name, stale_file.name])
    assert {p.name for p in tmp_path.iterdir()} == {mine.name, keep.name}


def test_run_killed_while_writing_leaves_nothing_after_the_next_run(tmp_path):
    # A folder left half-written by a killed run (its process is gone) is
    # removed by the next run into the same place, which writes its own.
    (tmp_path / "tiny.toml").write_text(TINY)
    (tmp_path / "results").mkdir()
    left = tmp_path / "results" / f".tiny-old.partial-{_dead_pid()}-q1w2e3"
    left.mkdir()
    (left / "spectrum.h5").write_bytes(b"half")
    assert cli.main(["run", str(tmp_path / "tiny.toml"), "--out", str(tmp_path / "results" / "tiny"),
                     "--quiet"]) == 0
    assert sorted(p.name for p in (tmp_path / "results").iterdir()) == ["tiny"]


@pytest.mark.slow
def test_run_killed_at_a_random_moment_then_run_again(tmp_path):
    (tmp_path / "tiny.toml").write_text(TINY)
    out = tmp_path / "results" / "tiny"
    for _ in range(3):
        _kill_after(["run", "tiny.toml", "--out", str(out)], tmp_path, ready=lambda: False, limit=random.uniform(1, 4))
        if out.exists():
            break
    again = subprocess.run([sys.executable, "-m", "topoedge", "run", "tiny.toml", "--out", str(out), "--json"]
                           + (["--force"] if out.exists() else []), cwd=tmp_path, capture_output=True, text=True)
    assert again.returncode == 0, again.stderr
    direct = subprocess.run([sys.executable, "-m", "topoedge", "run", "tiny.toml", "--out", str(tmp_path / "d"),
                             "--json"], cwd=tmp_path, capture_output=True, text=True)
    a, b = json.loads(again.stdout), json.loads(direct.stdout)
    assert a["bulk"] == b["bulk"] and a["edges"] == b["edges"] and a["hall"] == b["hall"]
    assert sorted(p.name for p in (tmp_path / "results").iterdir()) == ["tiny"]


def _count_calls(monkeypatch, module, name):
    calls = []
    original = getattr(module, name)

    def counting(*args, **kwargs):
        calls.append(args)
        return original(*args, **kwargs)

    monkeypatch.setattr(module, name, counting)
    return calls


@pytest.mark.slow
def test_butterfly_killed_then_resumed_computes_each_flux_once(tmp_path, monkeypatch):
    import topoedge.workflows.butterfly as bf

    out = tmp_path / "results" / "bf"
    points = lambda: list(tmp_path.glob("results/.butterfly-*.points/*.pkl"))      # noqa: E731
    _kill_after(["butterfly", "--q-max", "14", "--jobs", "1", "--out", str(out)], tmp_path,
                ready=lambda: len(points()) >= 5)
    done = len(points())
    assert 5 <= done and not out.exists(), "the butterfly was not killed part-way"
    calls = _count_calls(monkeypatch, bf, "flux_spectrum")
    monkeypatch.chdir(tmp_path)
    assert cli.main(["butterfly", "--q-max", "14", "--jobs", "1", "--out", str(out), "--quiet"]) == 0
    total = len([f for f in bf.butterfly_fluxes(14) if f <= 0.5])
    assert len(calls) == total - done                    # no flux computed twice
    assert not points() and not list(tmp_path.glob("results/.*"))   # nothing left behind
    direct = tmp_path / "direct"
    assert cli.main(["butterfly", "--q-max", "14", "--jobs", "1", "--out", str(direct), "--quiet"]) == 0
    a = json.loads((out / "summary.json").read_text())
    b = json.loads((direct / "summary.json").read_text())
    assert _without_times(a) == _without_times(b)


@pytest.mark.slow
def test_hallbar_scan_killed_then_resumed_solves_each_point_once(tmp_path, monkeypatch):
    import importlib

    hs = importlib.import_module("topoedge.workflows.hallbar_scan")   # the module, not the function of that name

    (tmp_path / "tiny.toml").write_text(TINY)
    out = tmp_path / "results" / "hb"
    args = ["hallbar", "tiny.toml", "--energies", "-3.4:-2.6:9", "--out", str(out)]
    points = lambda: list(tmp_path.glob("results/.hallbar-energy-*.points/*.pkl"))     # noqa: E731
    _kill_after(args, tmp_path, ready=lambda: len(points()) >= 3)
    done = len(points())
    assert 3 <= done < 9 and not out.exists(), "the scan was not killed part-way"
    calls = _count_calls(monkeypatch, hs, "_hall_point")
    monkeypatch.chdir(tmp_path)
    assert cli.main([*args, "--quiet"]) == 0
    assert len(calls) == 9 - done
    assert not points() and not list(tmp_path.glob("results/.*"))
    direct = tmp_path / "direct"
    assert cli.main([*args[:-1], str(direct), "--quiet"]) == 0
    a = json.loads((out / "summary.json").read_text())
    b = json.loads((direct / "summary.json").read_text())
    assert a == b
    assert (out / "hallbar.csv").read_text() == (direct / "hallbar.csv").read_text()


def test_point_store_keeps_points_atomically(tmp_path):
    store = PointStore(tmp_path / ".scan.points")
    assert store.load("a") is None and store.count() == 0
    store.save("a", {"x": [1.0, float("nan")]})
    again = PointStore(tmp_path / ".scan.points")
    value = again.load("a")
    assert value["x"][0] == 1.0 and value["x"][1] != value["x"][1] and again.reused == 1
    again.clear()
    assert not (tmp_path / ".scan.points").exists()
    assert PointStore(None).load("a") is None
