"""Results folders: ``summary.json``, ``spectrum.h5`` and figures.

A results folder is written into a temporary sibling folder and renamed into
place only when every file is complete, so an interrupted or failed run never
leaves a half-written folder under the requested name. An existing folder is
replaced only when asked to (``force=True``).

``spectrum.h5`` layout (all energies in ``t``, lengths in lattice constants):

``/k``                  (Nk,) momenta along the ribbon, 1/a
``/energy``             (Nk, M) sorted eigenvalues, NaN-padded
``/velocity``           (Nk, M) dE/dk (Hellmann-Feynman), t*a
``/y_mean``, ``/y_spread``  (Nk, M) mean position across and its spread
``/sz``                 (Nk, M) <S_z>, NaN for spinless models
``/count``              (Nk,) valid states per momentum
``/potential``          (W,) edge potential of every row
``/config``             group: one attribute per key path of the resolved scenario
root attributes         ``topoedge_version``, ``scenario_json`` (the resolved
                        scenario), ``solver``, ``window`` (absent for all states)
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from collections.abc import Callable
from pathlib import Path

import h5py
import numpy as np

from typing import TYPE_CHECKING

from . import __version__

if TYPE_CHECKING:  # the writers only read a RunResult; importing it would load kwant
    from .pipeline import RunResult

__all__ = ["ResultsExistError", "check_destination", "write_run", "format_summary"]


class ResultsExistError(FileExistsError):
    """The results folder exists and overwriting was not requested."""


def check_destination(out: Path, *, force: bool) -> None:
    """Refuse an existing results folder unless ``force``; call before computing."""
    if out.exists() and not force:
        raise ResultsExistError(
            f"results folder '{out}' already exists; choose another --out or pass --force to replace it"
        )
    if out.exists() and not out.is_dir():
        raise ResultsExistError(f"'{out}' exists and is not a folder; choose another --out")


def _flatten(prefix: str, data: dict) -> dict:
    flat = {}
    for key, value in data.items():
        path = f"{prefix}.{key}" if prefix else key
        if isinstance(value, dict):
            flat.update(_flatten(path, value))
        else:
            flat[path] = value
    return flat


def write_spectrum_h5(path: Path, result: RunResult) -> None:
    """Write the spectrum, observables and resolved configuration to HDF5."""
    spec = result.spectrum
    config = result.scenario.to_dict()
    with h5py.File(path, "w") as f:
        for name in ("k", "energy", "velocity", "y_mean", "y_spread", "sz", "count"):
            value = getattr(spec, name)
            if value is not None:
                f.create_dataset(name, data=value, compression="gzip", compression_opts=4)
        f.create_dataset("potential", data=result.potential)
        f.attrs["topoedge_version"] = __version__
        f.attrs["scenario_json"] = json.dumps(config, sort_keys=True)
        f.attrs["solver"] = spec.solver
        if spec.window is not None:
            f.attrs["window"] = np.asarray(spec.window)
        group = f.create_group("config")
        for key, value in _flatten("", config).items():
            group.attrs[key] = json.dumps(value) if isinstance(value, (list, tuple)) else value


def write_run(
    out: Path,
    result: RunResult,
    figures: dict[str, Callable[[Path], None]],
    *,
    force: bool = False,
) -> Path:
    """Write a complete results folder atomically.

    Parameters
    ----------
    out : Path
        Final folder name.
    result : RunResult
    figures : dict
        File name -> function that writes that figure to a given path.
    force : bool
        Replace an existing folder.

    Returns
    -------
    Path
        ``out``.
    """
    out = Path(out)
    check_destination(out, force=force)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.partial-", dir=out.parent))
    try:
        # mkdtemp creates the folder 0700; give it the permissions of a plain mkdir.
        umask = os.umask(0)
        os.umask(umask)
        tmp.chmod(0o777 & ~umask)
        (tmp / "summary.json").write_text(json.dumps(result.summary, indent=2, sort_keys=False) + "\n")
        write_spectrum_h5(tmp / "spectrum.h5", result)
        for name, draw in figures.items():
            draw(tmp / name)
        if out.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{out.name}.old-", dir=out.parent))
            os.replace(out, old / out.name)
            try:
                os.replace(tmp, out)
            except BaseException:
                os.replace(old / out.name, out)  # put the earlier results back
                old.rmdir()
                raise
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return out


def format_summary(summary: dict) -> str:
    """Short human-readable summary of a run."""
    m, s = summary["model"], summary["spectrum"]
    lines = [
        f"topoedge {summary['topoedge_version']}: {summary.get('title') or 'scenario'}"
        + (f" ({summary['source']})" if summary.get("source") else ""),
        f"  lattice      square, flux {m['flux']} flux quanta per plaquette (energies in units of t)",
    ]
    if m["magnetic_length_a"] is not None:
        lines.append(
            f"  scales       l_B = {m['magnetic_length_a']:.3f} a, "
            f"hbar*omega_c = {m['cyclotron_energy_t']:.4f} t (effective-mass limit)"
        )
    spin = f"spin 1/2, Zeeman {m['zeeman_t']:g} t" if m["spin"] else "spinless"
    lines.append(f"  spin         {spin}")
    lines.append(
        f"  ribbon       W = {m['ribbon_width_sites']} sites, edge '{m['edge_profile']}', "
        f"max edge potential {m['edge_potential_max_t']:.4g} t"
    )
    window = f", window [{s['window'][0]:.4g}, {s['window'][1]:.4g}] t" if s["window"] else ""
    lines.append(
        f"  spectrum     {s['k_points']} k points, {s['states']} states, solver {s['solver']}{window}"
    )
    if s["energy_min"] is not None:
        lines.append(f"               energies {s['energy_min']:.5f} .. {s['energy_max']:.5f} t")
    lines.append(f"  Fermi energy {summary['fermi']['energy']:.5f} t")
    lines.append(f"  time         {summary['seconds']:.2f} s")
    return "\n".join(lines)
