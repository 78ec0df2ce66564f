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
from ..models.lattices import lattice
from ..util.atomic import atomic_file, write_folder, write_json

if TYPE_CHECKING:  # the writers only read a RunResult; importing it would load kwant
    from ..workflows import RunResult

__all__ = ["RestartFileError", "read_restart", "write_restart", "write_hartree_fock_h5", "write_run",
           "format_summary"]






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
        f.attrs["summary_json"] = json.dumps(result.summary.get("interaction"), sort_keys=True)
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
    if result.spectrum is not None:
        files["spectrum.h5"] = lambda path: write_spectrum_h5(path, result)
    if result.interacting is not None:
        files["hartree_fock.h5"] = lambda path: write_hartree_fock_h5(path, result)
        files["restart.h5"] = lambda path: write_restart(path, result.interacting.states(), result.interacting.model)
    return write_folder(out, {**files, **figures}, force=force)


def format_summary(summary: dict) -> str:
    """Short human-readable summary of a run."""
    if "model" not in summary:  # a self-consistent run in which no start converged
        lines = [f"topoedge {summary['topoedge_version']}: {summary.get('title') or 'scenario'}"
                 + (f" ({summary['source']})" if summary.get("source") else "")]
        lines += [f"  warning      {w}" for w in summary.get("warnings", [])]
        lines += _interaction_lines(summary)
        lines.append(f"  time         {summary['seconds']:.2f} s")
        return "\n".join(lines)
    m, s = summary["model"], summary["spectrum"]
    lines = [
        f"topoedge {summary['topoedge_version']}: {summary.get('title') or 'scenario'}"
        + (f" ({summary['source']})" if summary.get("source") else ""),
    ]
    entry = lattice(m.get("lattice", "square"))
    honeycomb = entry.length_unit == "a_cc"
    lines.append(f"  lattice      {entry.describe(m)}")
    if m["magnetic_length_a"] is not None and honeycomb:
        lines.append(
            f"  scales       l_B = {m['magnetic_length_a']:.3f} a_cc, "
            f"E_1 = sqrt(2) hbar v_F / l_B = {m['landau_level_1_t']:.4f} t (Dirac limit)"
        )
    elif m["magnetic_length_a"] is not None and not summary.get("units"):
        lines.append(
            f"  scales       l_B = {m['magnetic_length_a']:.3f} a, "
            f"hbar*omega_c = {m['cyclotron_energy_t']:.4f} t (effective-mass limit)"
        )
    spin = f"spin 1/2, Zeeman {m['zeeman_t']:g} t" if m["spin"] else "spinless"
    if entry.orbitals_per_site > 1:
        spin = "spinless (the two orbitals of a site are not spin)"
    if m.get("rashba_t"):
        spin += f", Rashba {m['rashba_t']:g} t (S_z not conserved: total Chern numbers only)"
    lines.append(f"  spin         {spin}")
    potential = "max Hartree potential" if summary.get("interaction") else "max edge potential"
    across = (f"{m['ribbon_width_sites']} {m['orientation']} "
              + ("chains" if m["orientation"] == "zigzag" else "dimer lines")) if honeycomb else \
        f"{m['ribbon_width_sites']} sites"
    lines.append(
        f"  ribbon       W = {across}, edge '{m['edge_profile']}', "
        f"{potential} {m['edge_potential_max_t']:.4g} t"
    )
    window = f", window [{s['window'][0]:.4g}, {s['window'][1]:.4g}] t" if s["window"] else ""
    lines.append(
        f"  spectrum     {s['k_points']} k points, {s['states']} states, solver {s['solver']}{window}"
    )
    if s["energy_min"] is not None:
        lines.append(f"               energies {s['energy_min']:.5f} .. {s['energy_max']:.5f} t")
    lines += _units_lines(summary)
    lines += [f"  warning      {w}" for w in summary.get("warnings", [])]
    lines += _topology_lines(summary)
    lines += _interaction_lines(summary)
    lines.append(f"  time         {summary['seconds']:.2f} s")
    return "\n".join(lines)


def _modes_text(order: list[dict]) -> str:
    return ", ".join(f"{m['spin'] or '?'} {m['direction']} at {m['distance_a']:.1f} a ({m['distance_lB']:.2f} l_B)"
                     for m in order) or "none"


def _interaction_lines(summary: dict) -> list[str]:
    """The self-consistent part: strengths, starts, neutrality, edge order, scan."""
    i = summary.get("interaction")
    if not i:
        return []
    gate = f"gate at {i['gate_distance_a']:g} a" if i["gate_distance_a"] is not None else "no gate"
    bg = i["background"]
    temperature = "T = 0" if not i["temperature_t"] else f"k_B T = {i['temperature_t']:g} t"
    lines = [
        f"  interaction  U_C = {i['coulomb_t']:.4g} t (E_C = U_C/l_B = {i['coulomb_energy_t']:.4f} t = "
        f"{i['coulomb_over_cyclotron']:.2f} hbar*omega_c), on-site {i['onsite_t']:.4g} t, {gate}",
        f"  background   {bg['profile']}, w = {bg['width_a']:g} a = {bg['width_lB']:.2f} l_B, setback "
        f"{bg['setback_a']:g} a, filling {i['filling']:g} ({bg['density_per_site']:.5g} per site); "
        f"N_k = {i['k_points']}, {temperature}, "
        f"{i['mixing']} mixing, tol {i['tol']:g}",
    ]
    for n, r in enumerate(i["starts"]):
        state = (f"converged in {r['iterations']} iterations" if r["converged"]
                 else f"NOT converged after {r['iterations']} iterations")
        mark = "  <- lowest" if r["start"] == i["best_start"] else ""
        again = " (restarted)" if r["restarted"] else ""
        lines.append(f"  {'starts' if n == 0 else '':12s} {r['start'] + again:24s} E = {r['energy_t']:.10f} t per "
                     f"cell, {state}{mark}")
    if not i["converged"]:
        lines.append(f"  warning      {i['message']}")
        return lines
    lines.append(f"  neutrality   electrons - background = {i['neutrality_error']:.1e} per cell; V_H at the "
                 f"centre {i['hartree_centre_t']:.2e} t ({100 * i['hartree_centre_over_coulomb_energy']:.2f} % of E_C)")
    half = i["half_filling_distance_a"]

    def at(v):
        return "-" if v is None else f"{v:.2f} a"

    lines.append(f"  filling      centre: up {i['filling_centre']['up']:.4f}, down {i['filling_centre']['down']:.4f}; "
                 f"half of the centre value reached at up {at(half['up'])}, down {at(half['down'])}, "
                 f"background {at(half['background'])} from the boundary")
    lines.append(f"  edge order   bottom: {_modes_text(i['bottom']['order'])}")
    lines.append(f"               top:    {_modes_text(i['top']['order'])}")
    if i.get("scan"):
        lines.append("  scan         w (a)  w/l_B  best start    bottom edge net/pairs, modes from the boundary inwards")
        for row in i["scan"]:
            if not row["converged"]:
                lines.append(f"               {row['width_a']:5.1f}  {row['width_lB']:5.2f}  no start converged")
                continue
            b = row["bottom"]
            gap = "" if row["in_gap"] else "  (E_F not in a gap: " + str(row["edges_message"]) + ")"
            lines.append(f"               {row['width_a']:5.1f}  {row['width_lB']:5.2f}  {row['best_start']:12s}  "
                         f"{b['net']:+d}/{b['counter_pairs']}  {_modes_text(b['order'])}{gap}")
        rec = i.get("reconstruction")
        if rec and rec["found"]:
            below = ("" if rec["widest_without_a"] is None else
                     f"; none at w = {rec['widest_without_a']:g} a ({rec['widest_without_lB']:.2f} l_B)")
            lines.append(f"  reconstruction first counter-propagating pair at w = {rec['first_with_pair_a']:g} a "
                         f"({rec['first_with_pair_lB']:.2f} l_B){below}")
        elif rec:
            lines.append(f"  reconstruction no counter-propagating pair up to w = {rec['widest_without_a']:g} a "
                         f"({rec['widest_without_lB']:.2f} l_B)")
    return lines


def _units_lines(summary: dict) -> list[str]:
    """Quantities derived from [material] and [field], with units, at the field asked for."""
    u = summary.get("units")
    if not u:
        return []
    a = u["lattice_constant_nm"]
    how = ("chosen: flux exactly 1/q" if u["lattice_constant_auto"] else "given")
    lines = [
        f"  field        B = {u['b_tesla']:g} T along {u['field_direction']} (asked for); lattice flux {u['flux']} "
        f"per plaquette = {u['b_lattice_tesla']:.6g} T ("
        + ("exactly" if abs(u["b_relative_error"]) < 1e-12 else
           f"{100 * u['b_relative_error']:+.3f} %, tolerance {100 * u['tolerance']:g} %") + ")",
        f"  material     a = {a:.4g} nm ({how}), t = hbar^2/(2 m* a^2) = {u['hopping_mev']:.4f} meV",
        f"  scales       l_B = {u['magnetic_length_nm']:.3f} nm = {u['magnetic_length_a']:.2f} a, "
        f"hbar*omega_c = {u['cyclotron_mev']:.4f} meV, |g| mu_B B = {u['zeeman_mev']:.4f} meV, "
        f"e^2/(4 pi eps0 eps_r l_B) = {u['coulomb_mev']:.3f} meV",
    ]
    if u["filling"] is not None:
        lines.append(f"  filling      nu = n h/(e B) = {u['filling']:.4f} at {u['b_tesla']:g} T")
    if u["fermi_t"] is not None:
        lines.append(f"  Fermi level  E_F = {summary['config']['field']['fermi_mev']:g} meV above the "
                     f"band bottom = {u['fermi_t']:.6f} t")
    return lines


def _signed(n: int) -> str:
    return f"{n:+d}" if n else "0"


def _edge_line(name: str, edge: dict) -> str:
    modes = ", ".join(
        (f"{m['spin']} " if m["spin"] else "") + ("+x" if m["velocity"] > 0 else "-x")
        + f" (y={m['y']:.1f})"
        for m in edge["modes"]
    ) or "none"
    spins = "  ".join(f"{s} {_signed(v['net'])}/{v['counter_pairs']}" for s, v in edge["by_spin"].items())
    return f"  {name:7s}{_signed(edge['net']):>5s} {edge['counter_pairs']:>6d}   {spins:22s} {modes}"


def _subspace_note(sub: dict | None) -> str:
    if not sub:
        return ""
    if sub["agree"]:
        return (f" (the occupied subspace as a whole on {sub['grid'][0]}x{sub['grid'][1]}: the same, "
                f"smallest link {sub['link_min']:.2f})")
    return (f" (the occupied subspace as a whole on {sub['grid'][0]}x{sub['grid'][1]}: C = {sub['chern']}: "
            "DIFFERENT, refine chern.grid)")


def _topology_lines(summary: dict) -> list[str]:
    """Bulk gap, Chern sum, edge modes, Hall response and the check."""
    b, f, e, h, c = (summary[key] for key in ("bulk", "fermi", "edges", "hall", "check"))
    lo, hi = f["gap_window"]
    window = f"{'-inf' if lo is None else f'{lo:.5f}'} .. {'inf' if hi is None else f'{hi:.5f}'} t"
    spin = ""
    if b["spin_chern_below_fermi"]:
        spin = " (" + ", ".join(f"spin {s} {v}" for s, v in b["spin_chern_below_fermi"].items()) + ")"
    conv = ""
    if b["refined_grid"]:
        conv = (f"; {b['refined_grid'][0]}x{b['refined_grid'][1]}: "
                + ("same Chern numbers" if b["converged"] else "DIFFERENT Chern numbers, refine the grid"))
    ph = summary.get("physical")
    solver = ""
    if b.get("solver") == "landau":
        solver = (f"Landau-level solver, the lowest {b['bands_computed']} of {b['bands_total']} bands "
                  "(the rest lie above E_F); ")
    elif b.get("solver"):
        solver = "dense solver (every band); "
    lines = [
        f"  bulk         {solver}{len(b['bands'])} bands, {len(b['gaps'])} open gaps on a "
        f"{b['grid'][0]}x{b['grid'][1]} grid{conv}",
        f"  Fermi energy {f['energy']:.5f} t in the gap above {f['gap_below']} bands "
        + (f"({window})" if "note" not in f else "(self-consistent: mid-way between the highest occupied "
           "and the lowest empty level)"),
        f"  Chern sum    C = {b['chern_below_fermi']}{spin}" + _subspace_note(b.get("subspace")),
        "  edge      net  pairs   net/pairs by spin      modes from the boundary inwards",
        _edge_line("bottom", e["bottom"]),
        _edge_line("top", e["top"]),
    ]
    if e["message"]:
        lines.append(f"  warning      {e['message']}")
    if ph:
        lo_m, hi_m = ph["gap_mev"]
        gap_text = ", ".join("-inf" if x is None else f"{x:.4f}" for x in (lo_m, hi_m))
        lines.insert(2, f"               = {ph['fermi_energy_mev']:.4f} meV above the band bottom "
                        f"(gap {gap_text} meV)")
        for name in ("bottom", "top"):
            modes = e[name]["modes"]
            if not modes:
                continue
            shown = modes if len(modes) <= 6 else modes[:4]
            text = "; ".join(
                (f"{m['spin']} " if m["spin"] else "") + ("+x" if m["velocity"] > 0 else "-x")
                + f" {m['depth_nm']:.1f} nm ({m['depth_lb']:.2f} l_B) inside, v = {m['velocity_m_s']:.3g} m/s"
                + ("" if m.get("drift_m_s") is None else f" (E x B drift {m['drift_m_s']:.3g} m/s)")
                for m in shown)
            if len(shown) < len(modes):
                text += f"; ... {len(modes) - len(shown)} more (summary.json)"
            lines.append(f"  {name + ' modes':12s} {text}")
    if h["r_xy_ohm"] is None:
        r_xy = "infinite (C = 0)"
    elif ph:
        r_xy = f"{h['r_xy_ohm'] / 1e3:.6f} kOhm"
    else:
        r_xy = f"{h['r_xy_ohm']:.3f} ohm"
    lines.append(f"  Hall         sigma_xy = {h['sigma_xy']} e^2/h, R_xy = -1/sigma_xy = {r_xy}")
    r = h["routes"]
    streda = ("n/a" if r["streda"] is None
              else f"{r['streda']:.6f} (off integer by {r['streda_deviation']:.1e})")
    hallbar = ("" if r["hallbar"] is None
               else f", Hall bar {r['hallbar']:.6f} (off integer by {r['hallbar_deviation']:.1e})")
    lines.append(f"  routes       Chern {r['chern']}, edge {r['edge']}, Streda {streda}{hallbar}; "
                 f"agree: {'yes' if c['routes_agree'] else 'NO'}")
    if h.get("streda_error"):
        lines.append(f"               Streda: {h['streda_error']}")
    if h.get("hallbar"):
        hb = h["hallbar"]
        lines.append(f"  Hall bar     {hb['length']}x{hb['width']} sites, W_dis = {hb['disorder']:g} t, "
                     f"{hb['seeds']} seed(s): R_xy = {hb['r_xy']:.8f} h/e^2 ({hb['r_xy_ohm']:.3f} ohm), "
                     f"R_xx = {hb['r_xx']:.2e} h/e^2")
        if hb.get("by_spin"):
            parts = []
            for name, value in hb["by_spin"].items():
                parts.append(f"{name}: no open channel in some lead" if value is None else
                             f"{name}: R_xy = {value['r_xy']:.6f}, R_xx = {value['r_xx']:.1e} h/e^2")
            lines.append(f"               per spin  {'; '.join(parts)}")
    if h.get("hallbar_error"):
        lines.append(f"               Hall bar: {h['hallbar_error']}")
    agree = "yes" if c["bulk_edge_agree"] else "NO"
    if c["spin_resolved_agree"] is not None:
        agree += f" (per spin: {'yes' if c['spin_resolved_agree'] else 'NO'})"
    lines.append(f"  bulk-edge    agree: {agree}; {c['convention']}")
    if c.get("reason"):
        lines.append(f"  because      {c['reason']}")
    return lines
