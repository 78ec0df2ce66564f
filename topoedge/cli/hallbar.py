"""`topoedge hallbar`: the Hall bar of a scenario over E_F or over B, into a results folder."""

from __future__ import annotations

import json
from pathlib import Path
from ..scenario import resolve, DEFAULT_SCENARIO, ConfigError, load_scenario
from .common import default_out, require_support, say, scan_range



def cmd_hallbar(args) -> int:
    """Scan of the Hall bar over E_F or B into a results folder (summary, HDF5, figure)."""
    import numpy as np

    if args.energies is not None and args.fields is not None:
        raise ConfigError("hallbar: got both --energies and --fields; expected one scan axis")
    window = scan_range(args.energies, "--energies", "t")
    fields = scan_range(args.fields, "--fields", "tesla")
    scenario = load_scenario(args.config, args.overrides)
    require_support(scenario, "hallbar")
    if fields is not None:
        if scenario.field.b_tesla is None:
            raise ConfigError("hallbar --fields: the scenario has no [field] section; expected a scenario "
                              "in physical units ([material] and [field], e.g. the shipped gaas-5T)")
        if args.jobs is not None and args.jobs < 1:
            raise ConfigError(f"hallbar --jobs: got {args.jobs}; expected at least 1 worker")
        if fields[0] * fields[1] <= 0:
            raise ConfigError(f"hallbar --fields: got {args.fields!r}; expected a range of one sign without 0 T")
    out = args.out if args.out is not None else default_out(f"hallbar-{Path(args.config or DEFAULT_SCENARIO).stem}")
    from ..util.atomic import check_destination, write_folder, write_json

    check_destination(out, force=args.force)
    from ..workflows import bulk_chern, fermi_level, hallbar_field_scan, hallbar_scan, replace_chern_refine

    resolved = resolve(scenario)            # once; the workflows receive the model
    model = resolved.scenario
    from ..util.progress import Progress, progress_mode

    progress = Progress(progress_mode(quiet=args.quiet))
    if fields is not None:
        try:
            scan = hallbar_field_scan(resolved, np.linspace(*fields), jobs=args.jobs, progress=progress)
        except ValueError as err:
            raise ConfigError(f"hallbar --fields: {err}") from None
        axis, units = "b_tesla", ("B in tesla along +z for B > 0 (b_lattice_tesla: the field of the lattice flux, "
                                  "within field.tolerance); E_F fixed "
                                  "(fermi_t in t, fermi_mev above the band bottom)")
    else:
        if window is None:
            chern, _, _ = bulk_chern(replace_chern_refine(model))
            ef, _ = fermi_level(model, chern)
            bottom = min(b.energy_min for b in chern.bands)
            window = (bottom, ef + 1.5 * (ef - bottom), 41)
        scan = hallbar_scan(resolved, np.linspace(*window), progress=progress)
        axis, units = "energy", "E_F in t"
    from ..scenario.units import VON_KLITZING

    for key in ("r_xy", "r_xx"):  # the same resistances in ohm (R_K = h/e^2, CODATA)
        scan[f"{key}_ohm"] = [None if v is None or v != v else v * VON_KLITZING for v in scan[key]]
    summary = {"title": scenario.title, "source": scenario.source, "config": scenario.to_dict(),
               "units": f"{units}; r_xy, r_xx in h/e^2 (per spin: r_xy_up, ...), r_xy_ohm, r_xx_ohm in ohm; "
                        "R_xy = -1/sigma_xy; r_xy_bulk = -1/C from the bulk Chern sum", **scan}
    summary = json.loads(json.dumps(summary).replace("NaN", "null"))

    import matplotlib

    matplotlib.use("Agg")
    import h5py
    import matplotlib.pyplot as plt

    from ..plotting import hallbar_figure

    where = (f"flux {model.lattice.flux}" if fields is None
             else f"E_F = {scan['fermi_mev']:.3f} meV above the band bottom")

    def figure(path: Path) -> None:
        fig = hallbar_figure(scan, axis=axis, title=f"{scenario.title or 'Hall bar'}: {model.hallbar.length}x"
                             f"{model.hallbar.width} sites, {where}")
        try:
            fig.savefig(path, dpi=150)
        finally:
            plt.close(fig)

    def h5(path: Path) -> None:
        with h5py.File(path, "w") as f:
            for key, value in scan.items():
                if key == "errors" or not isinstance(value, list):
                    continue
                if key == "flux":
                    f.create_dataset(key, data=np.array(value, dtype="S"))
                else:
                    f.create_dataset(key, data=np.array([np.nan if v is None else v for v in value], dtype=float))
            for key in ("fermi_t", "fermi_mev"):
                if key in scan:
                    f.attrs[key] = scan[key]
            f.attrs["scenario_json"] = json.dumps(scenario.to_dict(), sort_keys=True)
            f.attrs["units"] = summary["units"]

    write_folder(out, {"summary.json": write_json(summary), "hallbar.h5": h5, "hallbar.png": figure}, force=args.force)
    if args.json:
        print(json.dumps(summary, indent=2))
    xs = scan[axis]
    ok = sum(1 for r in scan["r_xy"] if r == r)
    what = "Fermi energies" if fields is None else "fields"
    unit = "t" if fields is None else "T"
    say(args, f"topoedge hallbar: {len(xs)} {what} from {xs[0]:.4f} to {xs[-1]:.4f} {unit}"
               + ("" if fields is None else f" at {where}")
               + f", {ok} solved, {len(scan['errors'])} without open channels in every lead")
    say(args, f"  results      {out}/ (summary.json, hallbar.h5, hallbar.png)")
    return 0


