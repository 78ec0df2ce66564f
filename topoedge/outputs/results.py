"""Results folders: ``summary.json``, ``spectrum.h5`` and figures.

A results folder is written into a temporary sibling folder and renamed into
place only when every file is complete, so an interrupted or failed run never
leaves a half-written folder under the requested name. An existing folder is
replaced only when asked to (``force=True``).

``spectrum.h5`` layout (all energies in ``t``, lengths in lattice constants;
every dataset carries its ``unit`` attribute):

``/k``                  (Nk,) momenta along the ribbon, 1/a
``/energy``             (Nk, M) sorted eigenvalues, NaN-padded
``/velocity``           (Nk, M) dE/dk (Hellmann-Feynman), t*a
``/y_mean``, ``/y_spread``  (Nk, M) mean position across and its spread
``/sz``                 (Nk, M) <S_z>, NaN for spinless models
``/count``              (Nk,) valid states per momentum
``/potential``          (W,) edge potential of every row (one per site position across on the honeycomb lattice)
``/bulk``               bulk bands (energy ranges, Chern numbers, spin +1/-1/0),
                        gaps (bands below, energy range, Chern sum) and the
                        bands along Gamma-X-M-Gamma (``path_*``)
``/units``              (with ``field.b_tesla``) attributes: t in meV, a in nm,
                        the flux, B asked for and the lattice field with its
                        relative error, Zeeman, l_B, hbar*omega_c, Coulomb
                        energy, E_F, filling (at the field asked for)
``/physical``           (with ``field.b_tesla``) the same spectrum in the
                        scenario's units: ``k_per_nm``, ``energy_mev`` (above
                        the band bottom), ``velocity_m_s``, ``y_mean_nm``,
                        ``y_spread_nm``, ``potential_mev``, ``fermi_energy_mev``
                        and ``edge_modes/`` (``k_per_nm``, ``y_nm``, ``y_lb``,
                        ``velocity_m_s``); attributes ``b_tesla``, ``r_xy_ohm``
``/edge_modes``         one entry per crossing of E_F: k, energy, velocity,
                        y, spread, sz and edge (0 bottom, 1 top, 2 bulk)
``/config``             group: one attribute per key path of the resolved scenario
root attributes         ``topoedge_version``, ``scenario_json`` (the resolved
                        scenario), ``solver``, ``fermi_energy``, ``window``
                        (absent for all states)
"""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import h5py
import numpy as np

from typing import TYPE_CHECKING

from .. import __version__
from ..util.atomic import atomic_file, write_folder, write_json
from ..util.jsonio import dumps, plain_json

if TYPE_CHECKING:  # the writers only read a RunResult; importing it would load kwant
    from ..workflows import RunResult

__all__ = ["RestartFileError", "read_restart", "write_restart", "write_hartree_fock_h5", "write_run"]


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
        bulk = f.create_group("bulk")
        bands = result.chern.bands
        bulk.create_dataset("band_energy_range", data=np.array([[b.energy_min, b.energy_max] for b in bands]))
        bulk.create_dataset("band_chern", data=np.array([b.chern if b.chern is not None else np.nan
                                                         for b in bands], dtype=float))
        bulk.create_dataset("band_spin", data=np.array([{"up": 1, "down": -1}.get(b.spin, 0) for b in bands]))
        gaps = result.chern.gaps
        bulk.create_dataset("gap_below", data=np.array([g.below for g in gaps], dtype=int))
        bulk.create_dataset("gap_energy_range", data=np.array([[g.energy_min, g.energy_max] for g in gaps]).reshape(-1, 2))
        bulk.create_dataset("gap_chern", data=np.array([g.chern for g in gaps], dtype=int))
        bulk.attrs["grid"] = np.asarray(result.chern.grid)
        path = result.bulk_path
        bulk.create_dataset("path_distance", data=path["distance"])
        for spin, energies in path["energies"].items():
            bulk.create_dataset(f"path_energy_{spin or 'all'}", data=energies)
        modes = f.create_group("edge_modes")
        rows = [(m, side) for side in ("bottom", "top") for m in getattr(result.edges, side).modes]
        rows += [(m, "bulk") for m in result.edges.bulk]
        for name in ("k", "energy", "velocity", "y", "spread"):
            modes.create_dataset(name, data=np.array([getattr(m, name) for m, _ in rows], dtype=float))
        modes.create_dataset("sz", data=np.array([np.nan if m.sz is None else m.sz for m, _ in rows]))
        modes.create_dataset("edge", data=np.array([{"bottom": 0, "top": 1, "bulk": 2}[s] for _, s in rows], dtype=int))
        modes.attrs["edge_codes"] = "0 = bottom, 1 = top, 2 = bulk"
        f.attrs["fermi_energy"] = result.fermi_energy
        _unit_attrs(f, modes)
        if result.units is not None:
            units = f.create_group("units")
            for key, value in result.units.to_dict().items():
                units.attrs[key] = json.dumps(value) if value is None or isinstance(value, list) else value
            _write_physical(f.create_group("physical"), result)
        f.attrs["topoedge_version"] = __version__
        f.attrs["scenario_json"] = json.dumps(config, sort_keys=True)
        f.attrs["solver"] = spec.solver
        if spec.window is not None:
            f.attrs["window"] = np.asarray(spec.window)
        group = f.create_group("config")
        for key, value in _flatten("", config).items():
            group.attrs[key] = json.dumps(value) if isinstance(value, (list, tuple)) else value


_LATTICE_UNITS = {"k": "1/a", "energy": "t", "velocity": "t a (hbar = 1)", "y_mean": "a", "y_spread": "a",
                  "sz": "hbar", "count": "-", "potential": "t", "y": "a", "spread": "a"}


def _unit_attrs(f, modes) -> None:
    """A ``unit`` attribute on every dataset in lattice units."""
    for group in (f, modes):
        for name, dataset in group.items():
            if isinstance(dataset, h5py.Dataset) and name in _LATTICE_UNITS:
                dataset.attrs["unit"] = _LATTICE_UNITS[name]


def _write_physical(group, result: RunResult) -> None:
    """The spectrum and the edge modes in the units of a physical scenario (``/physical``)."""
    import scipy.constants as const

    units, spec = result.units, result.spectrum
    a_nm, t_mev = units.lattice_constant_nm, units.hopping_mev
    bottom = -4.0 + result.scenario.lattice.onsite
    v_unit = t_mev * 1e-3 * const.e * a_nm * 1e-9 / const.hbar
    data = {
        "k_per_nm": (spec.k / a_nm, "1/nm"),
        "energy_mev": ((spec.energy - bottom) * t_mev, "meV above the band bottom"),
        "fermi_energy_mev": (np.float64((result.fermi_energy - bottom) * t_mev), "meV above the band bottom"),
        "potential_mev": (np.asarray(result.potential) * t_mev, "meV"),
    }
    if spec.velocity is not None:
        data["velocity_m_s"] = (spec.velocity * v_unit, "m/s")
        data["y_mean_nm"] = (spec.y_mean * a_nm, "nm from the bottom row")
        data["y_spread_nm"] = (spec.y_spread * a_nm, "nm")
    rows = [m for side in ("bottom", "top") for m in getattr(result.edges, side).modes] + list(result.edges.bulk)
    data["edge_modes/k_per_nm"] = (np.array([m.k / a_nm for m in rows]), "1/nm")
    data["edge_modes/y_nm"] = (np.array([m.y * a_nm for m in rows]), "nm from the bottom row")
    data["edge_modes/y_lb"] = (np.array([m.y * a_nm / units.magnetic_length_nm for m in rows]), "l_B")
    data["edge_modes/velocity_m_s"] = (np.array([m.velocity * v_unit for m in rows]), "m/s")
    for name, (value, unit) in data.items():
        dataset = group.create_dataset(name, data=value)
        dataset.attrs["unit"] = unit
    c = result.gap.chern
    group.attrs["b_tesla"] = units.b_tesla
    group.attrs["b_lattice_tesla"] = units.b_lattice_tesla
    group.attrs["magnetic_length_nm"] = units.magnetic_length_nm
    group.attrs["lattice_constant_nm"] = a_nm
    group.attrs["r_xy_ohm"] = -const.h / (c * const.e**2) if c else np.nan
    group.attrs["field_direction"] = "+z" if units.b_tesla > 0 else "-z"


def write_hartree_fock_h5(path: Path, result: RunResult) -> None:
    """Write the self-consistent solutions of an interacting run to HDF5.

    Layout: one group per background width ``w=<w>`` (the main width and the
    scan) with ``background``, ``y`` (rows), ``k`` and attributes ``width_a``,
    ``k_points``, ``best_start`` (empty when none converged); in it one group
    per start with ``density`` (2, W: spin up, down), ``hartree`` (W, t),
    ``energies`` (2, N_k, W, t), ``residual`` and ``energy`` per iteration and
    attributes ``converged``, ``iterations``, ``energy_t``, ``mu_t``,
    ``message``. Root attributes: ``model_json`` (what defines the problem),
    ``summary_json`` (the ``interaction`` block of the summary).
    """
    run = result.interacting
    with h5py.File(path, "w") as f:
        f.attrs["topoedge_version"] = __version__
        f.attrs["model_json"] = json.dumps(run.model, sort_keys=True)
        f.attrs["summary_json"] = dumps(result.summary.interaction, sort_keys=True)
        f.attrs["units"] = "energies in t, positions in lattice constants, densities in electrons per site"
        for sc in (run.main, *run.scan):
            name = f"w={sc.width:g}"
            if name in f:
                continue
            group = f.create_group(name)
            group.attrs["width_a"] = sc.width
            group.attrs["k_points"] = sc.k_points
            group.attrs["best_start"] = sc.best.start if sc.best is not None else ""
            group.create_dataset("background", data=sc.background)
            group.create_dataset("y", data=np.arange(sc.background.size, dtype=float))
            for hf in sc.runs:
                g = group.create_group(hf.start)
                g.create_dataset("density", data=hf.density)
                g.create_dataset("hartree", data=hf.hartree)
                g.create_dataset("energies", data=hf.energies, compression="gzip", compression_opts=4)
                g.create_dataset("k", data=hf.k)
                g.create_dataset("residual", data=np.asarray(hf.history.get("residual", []), dtype=float))
                g.create_dataset("energy", data=np.asarray(hf.history.get("energy", []), dtype=float))
                g.attrs.update(converged=hf.converged, iterations=hf.iterations, energy_t=hf.energy,
                               mu_t=hf.mu, message=hf.message, restarted=hf.start in sc.restarted)


class RestartFileError(ValueError):
    """A restart file that cannot be used; ``str(err)`` is one line."""


def write_restart(path: Path, states: dict, model: dict) -> None:
    """Store self-consistent states atomically (a temporary file renamed into place).

    ``states`` maps a state key ``"w=<w>/<start>"`` to ``{"density_matrix",
    "converged", "iterations"}``; ``model`` is what defines the problem
    (:func:`topoedge.workflows.interacting.model_key`). Layout: ``/states/w=<w>/<start>``
    datasets ``G_s(D)`` (2, N_k, W, W) with attributes ``converged`` and
    ``iterations``; root attributes ``model_json`` and ``topoedge_version``.
    """
    with atomic_file(path) as tmp, h5py.File(tmp, "w") as f:
        f.attrs["topoedge_version"] = __version__
        f.attrs["model_json"] = json.dumps(model, sort_keys=True)
        group = f.create_group("states")
        for key, state in states.items():
            g = np.array(state["density_matrix"], dtype=complex)
            g[np.abs(g) < 1e-15] = 0  # rounding noise; lets the zeros compress
            d = group.create_dataset(key, data=g, compression="gzip", compression_opts=4, shuffle=True)
            d.attrs["converged"] = bool(state["converged"])
            d.attrs["iterations"] = int(state["iterations"])


def read_restart(path: Path) -> tuple[dict, dict]:
    """The states (key -> density matrix) and the model of a restart file.

    Raises
    ------
    RestartFileError
        When the file is missing, unreadable or not a restart file.
    """
    path = Path(path)
    if not path.is_file():
        raise RestartFileError(f"--restart: {str(path)!r} not found; expected a restart.h5 of a results "
                               "folder or the .checkpoint.h5 of an interrupted run")
    try:
        with h5py.File(path, "r") as f:
            model = json.loads(f.attrs["model_json"])
            states = {}

            def visit(name, obj):
                if isinstance(obj, h5py.Dataset):
                    states[name] = obj[()]

            f["states"].visititems(visit)
    except (OSError, KeyError, ValueError) as err:
        raise RestartFileError(f"--restart: {str(path)!r} is not a topoedge restart file ({err}); expected "
                               "a restart.h5 of a results folder or the .checkpoint.h5 of an interrupted run"
                               ) from None
    return states, model


def write_run(
    out: Path,
    result: RunResult,
    figures: dict[str, Callable[[Path], None]],
    *,
    force: bool = False,
) -> Path:
    """Write the results folder of ``run`` atomically (see :func:`write_folder`).

    Parameters
    ----------
    out : Path
        Final folder name.
    result : RunResult
    figures : dict
        File name -> function that writes that figure to a given path.
    force : bool
        Replace an existing folder.
    """
    files = {"summary.json": write_json(result.summary)}
    from .tables import run_tables

    for name, text in run_tables(plain_json(result.summary.to_dict())).items():
        files[name] = lambda path, text=text: path.write_text(text)
    if result.spectrum is not None:
        files["spectrum.h5"] = lambda path: write_spectrum_h5(path, result)
    if result.interacting is not None:
        files["hartree_fock.h5"] = lambda path: write_hartree_fock_h5(path, result)
        files["restart.h5"] = lambda path: write_restart(path, result.interacting.states(), result.interacting.model)
    return write_folder(out, {**files, **figures}, force=force)
