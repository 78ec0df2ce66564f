"""Files of ``topoedge levels``: summary.json, levels.h5, transitions.csv, gaps.csv and figures, written atomically."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

from ..util.atomic import write_folder, write_json

__all__ = ["LEVELS_FILES", "levels_files", "write_levels", "format_levels"]

#: Files of a levels results folder (gaps.csv and gaps.png only for physical scenarios).
LEVELS_FILES = ("summary.json", "levels.h5", "candidates.csv", "transitions.csv", "gaps.csv", "level_order.png",
                "gaps.png")


def levels_files(result) -> tuple[str, ...]:
    """The files this result writes."""
    return tuple(name for name in LEVELS_FILES if result.fields is not None or not name.startswith("gaps"))


def _candidates_csv(result) -> str:
    """Every candidate set at the scenario's point: energy, polarisation, ground state or not."""
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    p = result.point
    lat = result.lattice
    writer.writerow(["filled levels", "energy per flux quantum (hbar omega_c)", "above the ground state (hbar omega_c)",
                     "polarisation (N_up - N_down)/N", "ground state", "exchange per flux quantum (E_C)"]
                    + (["lattice: above its ground state (hbar omega_c)", "lattice: interaction per flux quantum (E_C)",
                        "lattice: ground state", "lattice: iterations", "lattice: converged"] if lat else []))
    best = float(result.sets[result.ground].energy(p.coulomb, p.zeeman))
    for i, s in enumerate(result.sets):
        e = float(s.energy(p.coulomb, p.zeeman))
        row = [s.label, f"{e:.12g}", f"{e - best:.12g}", f"{s.polarisation:.6g}", int(i == result.ground),
               f"{s.exchange:.12g}"]
        if lat:
            row += [f"{lat.point_energies[i] - lat.point_energies[lat.ground]:.12g}", f"{lat.point_interaction[i]:.12g}",
                    int(i == lat.ground), lat.point_iterations[i], int(lat.point_converged[i])]
        writer.writerow(row)
    return buffer.getvalue()


def _transitions_csv(result) -> str:
    """The first-order transitions of the diagram: along E_C / hbar omega_c at every Zeeman ratio."""
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow(["Delta_Z / hbar omega_c", "E_C / hbar omega_c", "before", "after"])
    for z, row in zip(result.zeeman_axis, result.lines):
        for where, i, j in row:
            writer.writerow([f"{z:.12g}", f"{where:.12g}", result.sets[i].label, result.sets[j].label])
    return buffer.getvalue()


def _gaps_csv(result) -> str:
    """Activation gaps against B at every filling, with the bare cyclotron and Zeeman energies."""
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow(["B (T)", "hbar omega_c (meV)", "Delta_Z (meV)"] + [
        f"gap nu={nu + 1} (meV)" for nu in range(result.field_gaps.shape[0])] + [
        f"kind nu={nu + 1}" for nu in range(result.field_gaps.shape[0])] + [
        f"filled levels nu={nu + 1}" for nu in range(result.field_gaps.shape[0])])
    for j, b in enumerate(result.fields):
        writer.writerow([f"{b:.12g}", f"{result.cyclotron_mev[j]:.12g}", f"{result.zeeman_mev[j]:.12g}"]
                        + [f"{g:.12g}" for g in result.field_gaps[:, j]]
                        + [kinds[j] for kinds in result.field_kinds] + [sets[j] for sets in result.field_sets])
    return buffer.getvalue()


def _write_h5(path: Path, result) -> None:
    import h5py

    with h5py.File(path, "w") as f:
        f.attrs["summary_json"] = json.dumps(result.to_dict(), default=str)
        f.attrs["units"] = ("coulomb = E_C / hbar omega_c, zeeman = Delta_Z / hbar omega_c; energies in hbar "
                            "omega_c; gaps in meV; fields in T")
        f.create_dataset("coulomb", data=result.coulomb_axis)
        f.create_dataset("zeeman", data=result.zeeman_axis)
        f.create_dataset("ground_state", data=result.diagram)
        f["ground_state"].attrs["sets"] = json.dumps([s.label for s in result.sets])
        f.create_dataset("exchange_integrals", data=result.exchange)
        if result.lattice is not None:
            lat = result.lattice
            f.create_dataset("lattice/coulomb", data=lat.lambdas)
            f.create_dataset("lattice/energies", data=lat.energies)
            f.create_dataset("lattice/ground_state", data=lat.diagram)
            f.create_dataset("lattice/iterations", data=lat.iterations)
            f["lattice"].attrs["units"] = ("energies per flux quantum in hbar omega_c at zero Zeeman, one row per "
                                           "candidate (ground_state attrs sets); ground_state over zeeman x coulomb")
            f["lattice"].attrs["flux"] = str(lat.flux)
        if result.fields is not None:
            f.create_dataset("fields", data=result.fields)
            f.create_dataset("gaps_mev", data=result.field_gaps)
            f.create_dataset("cyclotron_mev", data=result.cyclotron_mev)
            f.create_dataset("zeeman_mev", data=result.zeeman_mev)


def write_levels(out: Path, result, figures: dict, *, force: bool = False) -> Path:
    """Write the results folder atomically (see :func:`levels_files`); ``figures``: name -> writer."""
    files = {"summary.json": write_json(result.to_dict()),
             "levels.h5": lambda path: _write_h5(path, result),
             "candidates.csv": lambda path: path.write_text(_candidates_csv(result)),
             "transitions.csv": lambda path: path.write_text(_transitions_csv(result))}
    if result.fields is not None:
        files["gaps.csv"] = lambda path: path.write_text(_gaps_csv(result))
    return write_folder(out, {**files, **figures}, force=force)


def format_levels(result, out: Path) -> str:
    """The text report of a levels run."""
    p = result.point
    d = result.to_dict()
    mev = p.cyclotron_mev
    best = result.sets[result.ground]
    top, bottom = result.gap_levels
    lines = [f"topoedge levels: {result.scenario.title or 'scenario'}",
             f"  filling      nu = {p.filling}" + (f" (the density gives {p.filling_exact:.3f})"
                                                    if p.filling_exact is not None else ""),
             f"  interaction  E_C / hbar omega_c = {p.coulomb:.4g} (from {p.source})"
             + (f", gate at {p.gate:.3g} l_B" if p.gate is not None else ""),
             f"  Zeeman       Delta_Z / hbar omega_c = {p.zeeman:.4g}"
             + (f"; hbar omega_c = {mev:.4g} meV" if mev else ""),
             f"  ground state {best.name}  (polarisation {best.polarisation:+.3g})",
             f"  gap          {result.gap:.4f} hbar omega_c" + (f" = {result.gap * mev:.4g} meV" if mev else "")
             + f", {result.gap_kind}: {top} -> {bottom}",
             "  candidates   (energy per flux quantum above the ground state, hbar omega_c)"]
    for c in d["candidates"]:
        lines.append(f"               {c['levels']:<28s} {c['energy'] - d['ground_state']['energy']:9.4f}")
    if d["transitions"]:
        for t in d["transitions"]:
            lines.append(f"  transition   at E_C / hbar omega_c = {t['coulomb_ratio']:.4f}: {t['before']} -> "
                         f"{t['after']} (Delta_Z / hbar omega_c = {p.zeeman:.3g})")
    else:
        lines.append(f"  transition   none up to E_C / hbar omega_c = {result.along[-1][1]:.3g}")
    if result.fields is not None:
        af = d["against_field"]
        lines.append(f"  against B    {result.fields[0]:.3g} .. {result.fields[-1]:.3g} T, fillings 1 .. "
                     f"{result.field_gaps.shape[0]}; {len(af['transitions'])} transitions")
        for t in af["transitions"]:
            lines.append(f"               nu = {t['filling']}: {t['before']} -> {t['after']} at B = "
                         f"{t['b_tesla']:.4g} T")
    lat = result.lattice
    if lat is not None:
        ld = d["lattice"]
        lines.append(f"  lattice      flux {lat.flux}, grid {lat.grid[0]} x {lat.grid[1]}, U_C = {lat.coulomb_t:.4g} t: "
                     f"{result.sets[lat.ground].name} (levels found {ld['filled_levels_found']}), gap "
                     f"{lat.gap:.4f} hbar omega_c" + (f" = {ld['gap_mev']:.4g} meV" if ld["gap_mev"] else ""))
        lines.append("               interaction per flux quantum (E_C): lattice / continuum; iterations")
        for c in ld["candidates"]:
            lines.append(f"               {c['levels']:<28s} {c['interaction_ec']:8.4f} / {c['continuum_interaction_ec']:8.4f}"
                         f"   {c['iterations']}{'' if c['converged'] else ' (not converged)'}")
        for f in ld["random_starts"]:
            lines.append(f"               random start {f['seed']} (spins free): "
                         + (f"{f['levels_found'] or '-'} (bands up {f['bands_per_spin']['up']:.3g}, down "
                            f"{f['bands_per_spin']['down']:.3g}), {f['above_ground']:+.4f} hbar omega_c above the "
                            f"lowest candidate, {f['iterations']} iterations" if f["converged"]
                            else f"not converged in {f['iterations']} iterations"))
        for t in ld["transitions"]:
            lines.append(f"               transition at E_C / hbar omega_c = {t['coulomb_ratio']:.4f}: {t['before']} -> "
                         f"{t['after']}")
        lines.append(f"               {lat.lambdas.size} strengths x {len(result.sets)} candidates in {lat.seconds:.1f} s"
                     + ("" if ld["samples"]["all_converged"] else "; some did not converge")
                     + f" (at most {ld['samples']['most_iterations']} iterations)")
    elif result.lattice_note:
        lines.append(f"  lattice      skipped: {result.lattice_note}")
    for w in result.warnings:
        lines.append(f"  warning      {w}")
    lines.append(f"  time         {result.seconds:.2f} s")
    lines.append(f"  results      {out}/ ({', '.join(levels_files(result))})")
    return "\n".join(lines)
