"""Files of ``topoedge disorder``: summary.json, disorder.h5, disorder.csv and figures, written atomically."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import numpy as np

from ..util.atomic import write_folder, write_json

__all__ = ["DISORDER_FILES", "write_disorder", "disorder_csv", "format_disorder"]

#: Files of a disorder results folder.
DISORDER_FILES = ("summary.json", "disorder.h5", "disorder.csv", "sigma_xy.csv", "marker_map.png", "sigma_xy.png",
                  "robustness.png")


def disorder_csv(result) -> str:
    """One row per (strength, seed): the marker averaged over the region, sigma_xy at E_F, the Hall bar.

    Physical scenarios get the strength in meV as a second column; the Hall
    bar's R_xy and R_xx (h/e^2) are empty where it was not solved.
    """
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    mev = result.units.hopping_mev if result.units is not None else None
    bar = result.hallbar_r_xy is not None
    writer.writerow(["strength (t)"] + (["strength (meV)"] if mev else []) +
                    ["seed", "marker (region mean)", "sigma_xy at E_F (e^2/h)"] +
                    (["hall bar R_xy (h/e^2)", "hall bar R_xx (h/e^2)"] if bar else []))
    for i, w in enumerate(result.strengths):
        for seed in range(result.seeds):
            row = [f"{w:.12g}"] + ([f"{w * mev:.12g}"] if mev else []) + [
                seed, f"{result.marker[i, seed]:.12g}", f"{result.sigma_fermi[i, seed]:.12g}"]
            if bar:
                row += [_number(result.hallbar_r_xy[i, seed]), _number(result.hallbar_r_xx[i, seed])]
            writer.writerow(row)
    return buffer.getvalue()


def _number(value: float) -> str:
    return f"{value:.12g}" if np.isfinite(value) else ""


def _sigma_csv(result) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    mev = result.units.hopping_mev if result.units is not None else None
    writer.writerow(["energy (t)"] + (["energy above the band bottom (meV)"] if mev else []) +
                    [f"sigma_xy W={w:g} t (e^2/h, seed mean)" for w in result.strengths])
    mean = result.sigma.mean(axis=1)
    for j, e in enumerate(result.energies):
        writer.writerow([f"{e:.12g}"] + ([f"{(e - result.energy_zero) * mev:.12g}"] if mev else []) +
                        [f"{v:.12g}" for v in mean[:, j]])
    return buffer.getvalue()


def _write_h5(path: Path, result) -> None:
    import h5py

    with h5py.File(path, "w") as f:
        f.attrs["summary_json"] = json.dumps(result.to_dict(), default=str)
        f.attrs["units"] = "energies and strengths in t; sigma_xy in e^2/h; positions in the lattice length unit"
        f.create_dataset("positions", data=result.positions)
        f.create_dataset("map/sites", data=result.map_sites)
        f.create_dataset("map/marker", data=result.map_marker)
        f["map"].attrs["strength_t"] = result.map_strength
        f.create_dataset("strengths", data=result.strengths)
        f.create_dataset("energies", data=result.energies)
        f.create_dataset("marker", data=result.marker)
        f.create_dataset("sigma_xy", data=result.sigma)
        f.create_dataset("sigma_xy_fermi", data=result.sigma_fermi)
        if result.hallbar_r_xy is not None:
            f.create_dataset("hallbar/r_xy", data=result.hallbar_r_xy)
            f.create_dataset("hallbar/r_xx", data=result.hallbar_r_xx)
            f["hallbar"].attrs["units"] = "h/e^2; NaN where the bar could not be solved"
            f["hallbar"].attrs["size_sites"] = np.asarray(result.hallbar_size)


def write_disorder(out: Path, result, figures: dict, *, force: bool = False) -> Path:
    """Write the results folder atomically (see :data:`DISORDER_FILES`); ``figures``: name -> writer."""
    files = {"summary.json": write_json(result.to_dict()),
             "disorder.h5": lambda path: _write_h5(path, result),
             "disorder.csv": lambda path: path.write_text(disorder_csv(result)),
             "sigma_xy.csv": lambda path: path.write_text(_sigma_csv(result))}
    return write_folder(out, {**files, **figures}, force=force)


def format_disorder(result, out: Path) -> str:
    """The text report of a disorder run."""
    d = result.to_dict()
    mev = result.units.hopping_mev if result.units is not None else None
    phys = d["physical"]
    lines = [f"topoedge disorder: {result.scenario.title or 'scenario'}"]
    if phys:
        lines.append(f"  units        t = {mev:.4g} meV, a = {phys['a_nm']:.4g} nm; E_F = "
                     f"{phys['fermi_energy_mev']:.4g} meV above the band bottom; flake {phys['flake_side_nm']:.4g} nm "
                     "on a side")
    lines += [f"  clean bulk   E_F = {result.fermi_energy:.5f} t in the gap above {result.gap.below} "
             f"band{'s' if result.gap.below != 1 else ''} ({result.gap.energy_min:.4g} .. {result.gap.energy_max:.4g} t), "
             f"C = {result.chern}",
             f"  flake        {d['flake']['side']} x {d['flake']['side']}: {result.flake_sites} sites, central "
             f"{result.region_sites} for the averages; {result.moments} moments (resolution "
             f"{result.resolution:.3g} t), {result.vectors} random vectors",
             f"  map          marker at W = {result.map_strength:.4g} t"
             + (f" ({result.map_strength * mev:.4g} meV)" if mev else "") + f" ({result.map_method}): central mean "
             f"{d['map']['region_mean']:.4f}" if d["map"]["region_mean"] is not None else "  map          -",
             "  W (t)   " + ("  W (meV)" if mev else "") + "   marker (mean +- spread)   sigma_xy(E_F) (e^2/h)" +
             ("   Hall bar sigma_xy   <R_xx> (h/e^2)" if d["hallbar"] else "")]
    for i, w in enumerate(result.strengths):
        line = (f"  {w:7.3g} " + (f"  {w * mev:7.3g}" if mev else "") +
                f"   {d['marker_mean'][i]:8.4f} +- {d['marker_spread'][i]:.4f}"
                f"      {d['sigma_fermi_mean'][i]:8.4f} +- {d['sigma_fermi_spread'][i]:.4f}")
        if d["hallbar"]:
            sig, rxx = d["hallbar"]["sigma_xy"][i], d["hallbar"]["r_xx_mean"][i]
            line += "   " + ("      -" if sig is None else f"{sig:13.4f}") + "       " + (
                "-" if rxx is None else f"{rxx:.4f}")
        lines.append(line)
    if d["hallbar"]:
        h = d["hallbar"]
        lines.append(f"  Hall bar     {h['length']} x {h['width']} sites at E_F, the same strengths and seeds"
                     + (f"; {h['unsolved']} realisations unsolved (a closed lead)" if h["unsolved"] else ""))
    broken = d["plateau_broken_at"]
    for name in ("marker", "sigma_xy", "hallbar"):
        if name == "hallbar" and not d["hallbar"]:
            continue
        at = broken[name]
        where = f"W = {at:g} t" + (f" ({at * mev:.3g} meV)" if mev else "") if at is not None else None
        lines.append(f"  plateau      {name.replace('hallbar', 'Hall bar')}: " + (
            f"leaves C = {result.chern} at {where}" if where
            else f"stays at C = {result.chern} up to W = {result.strengths.max():g} t"))
    lines.append(f"  time         {result.seconds:.1f} s")
    lines.append(f"  results      {out}/ ({', '.join(DISORDER_FILES)})")
    return "\n".join(lines)
