"""The text report of a run: what ``topoedge run`` prints (results stage).

It reads the typed records of :mod:`topoedge.workflows.records` and
:mod:`topoedge.workflows.interacting_records`; ``summary.json`` holds the
same results in full.
"""

from __future__ import annotations

from fractions import Fraction

from typing import TYPE_CHECKING

from ..models.lattices import lattice
from ..util.text import count

if TYPE_CHECKING:  # the report only reads records
    from ..workflows.interacting_records import InteractionInfo, OrderedMode
    from ..workflows.records import RunSummary, UnconvergedSummary

__all__ = ["format_summary"]


def _title(summary) -> str:
    return (f"topoedge {summary.topoedge_version}: {summary.title or 'scenario'}"
            + (f" ({summary.source})" if summary.source else ""))


def format_summary(summary: RunSummary | UnconvergedSummary) -> str:
    """Short human-readable summary of a run."""
    if not summary.converged:   # a self-consistent run in which no start converged
        lines = [_title(summary)]
        lines += [f"  warning      {w}" for w in summary.warnings]
        lines += _interaction_lines(summary.interaction)
        lines.append(f"  time         {summary.seconds:.2f} s")
        return "\n".join(lines)
    m, s = summary.model, summary.spectrum
    lines = [_title(summary)]
    entry = lattice(m.lattice)
    honeycomb = entry.length_unit == "a_cc"
    lines.append(f"  lattice      {entry.describe(m.to_dict())}")
    scales = m.scales
    limit = entry.continuum_flux_max
    beyond = limit is not None and abs(Fraction(m.flux)) > limit
    if m.magnetic_length_a is not None and honeycomb:
        lines.append(
            f"  scales       l_B = {m.magnetic_length_a:.3f} a_cc, "
            f"E_1 = sqrt(2) hbar v_F / l_B = {scales['landau_level_1_t']:.4f} t "
            + ("(Dirac limit; not the lattice levels at this flux, see the warning)" if beyond else "(Dirac limit)")
        )
    elif m.magnetic_length_a is not None and not summary.units:
        lines.append(
            f"  scales       l_B = {m.magnetic_length_a:.3f} a, "
            f"hbar*omega_c = {scales['cyclotron_energy_t']:.4f} t "
            + ("(effective-mass limit; not the lattice levels at this flux, see the warning)" if beyond
               else "(effective-mass limit)")
        )
    spin = f"spin 1/2, Zeeman {m.zeeman_t:g} t" if m.spin else "spinless"
    if entry.orbitals_per_site > 1:
        spin = "spinless (the two orbitals of a site are not spin)"
    if m.rashba_t:
        spin += f", Rashba {m.rashba_t:g} t (S_z not conserved: total Chern numbers only)"
    lines.append(f"  spin         {spin}")
    potential = "max Hartree potential" if summary.interaction else "max edge potential"
    orientation = m.lattice_keys.get("orientation")
    across = (f"{m.ribbon_width_sites} {orientation} "
              + ("chains" if orientation == "zigzag" else "dimer lines")) if honeycomb else \
        f"{m.ribbon_width_sites} sites"
    lines.append(
        f"  ribbon       W = {across}, edge '{m.edge_profile}', "
        f"{potential} {m.edge_potential_max_t:.4g} t"
    )
    window = f", window [{s.window[0]:.4g}, {s.window[1]:.4g}] t" if s.window else ""
    lines.append(f"  spectrum     {s.k_points} k points, {s.states} states, solver {s.solver}{window}")
    if s.energy_min is not None:
        lines.append(f"               energies {s.energy_min:.5f} .. {s.energy_max:.5f} t")
    lines += _units_lines(summary)
    lines += [f"  warning      {w}" for w in summary.warnings]
    lines += _topology_lines(summary)
    lines += _interaction_lines(summary.interaction)
    lines.append(f"  time         {summary.seconds:.2f} s")
    return "\n".join(lines)


def _modes_text(order: tuple[OrderedMode, ...]) -> str:
    return ", ".join(f"{m.spin or '?'} {m.direction} at {m.distance_a:.1f} a ({m.distance_lB:.2f} l_B)"
                     for m in order) or "none"


def _interaction_lines(i: InteractionInfo | None) -> list[str]:
    """The self-consistent part: strengths, starts, neutrality, edge order, scan."""
    if not i:
        return []
    gate = f"gate at {i.gate_distance_a:g} a" if i.gate_distance_a is not None else "no gate"
    bg = i.background
    temperature = "T = 0" if not i.temperature_t else f"k_B T = {i.temperature_t:g} t"
    lines = [
        f"  interaction  U_C = {i.coulomb_t:.4g} t (E_C = U_C/l_B = {i.coulomb_energy_t:.4f} t = "
        f"{i.coulomb_over_cyclotron:.2f} hbar*omega_c), on-site {i.onsite_t:.4g} t, {gate}",
        f"  background   {bg.profile}, w = {bg.width_a:g} a = {bg.width_lB:.2f} l_B, setback "
        f"{bg.setback_a:g} a, filling {i.filling:g} ({bg.density_per_site:.5g} per site); "
        f"N_k = {i.main.k_points}, {temperature}, "
        f"{i.mixing} mixing, tol {i.tol:g}",
    ]
    main = i.main
    for n, r in enumerate(main.starts):
        state = (f"converged in {r.iterations} iterations" if r.converged
                 else f"NOT converged after {r.iterations} iterations")
        mark = "  <- lowest" if r.start == main.best_start else ""
        again = " (restarted)" if r.restarted else ""
        lines.append(f"  {'starts' if n == 0 else '':12s} {r.start + again:24s} E = {r.energy_t:.10f} t per "
                     f"cell, {state}{mark}")
    if not main.converged:
        lines.append(f"  warning      {main.message}")
        return lines
    lines.append(f"  neutrality   electrons - background = {i.neutrality_error:.1e} per cell; V_H at the "
                 f"centre {i.hartree_centre_t:.2e} t ({100 * i.hartree_centre_over_coulomb_energy:.2f} % of E_C)")
    half = i.half_filling_distance_a

    def at(v):
        return "-" if v is None else f"{v:.2f} a"

    lines.append(f"  filling      centre: up {i.filling_centre['up']:.4f}, down {i.filling_centre['down']:.4f}; "
                 f"half of the centre value reached at up {at(half['up'])}, down {at(half['down'])}, "
                 f"background {at(half['background'])} from the boundary")
    link = i.bulk_link
    if link and "bulk_levels" in link:
        lines.append(f"  bulk         the centre fills {link['centre_levels']}; the lattice bulk Hartree-Fock at the "
                     f"same parameters fills {link['bulk_levels']}" + ("" if link["agree"] else "  <- they differ"))
    lines.append(f"  edge order   bottom: {_modes_text(main.bottom.order)}")
    lines.append(f"               top:    {_modes_text(main.top.order)}")
    if i.scan:
        lines.append("  scan         w (a)  w/l_B  best start    bottom edge net/pairs, modes from the boundary inwards")
        for row in i.scan:
            if not row.converged:
                lines.append(f"               {row.width_a:5.1f}  {row.width_lB:5.2f}  no start converged")
                continue
            b = row.bottom
            gap = "" if row.in_gap else "  (E_F not in a gap: " + str(row.edges_message) + ")"
            lines.append(f"               {row.width_a:5.1f}  {row.width_lB:5.2f}  {row.best_start:12s}  "
                         f"{b.net:+d}/{b.counter_pairs}  {_modes_text(b.order)}{gap}")
        rec = i.reconstruction
        if rec and rec.found:
            below = ("" if rec.widest_without_a is None else
                     f"; none at w = {rec.widest_without_a:g} a ({rec.widest_without_lB:.2f} l_B)")
            lines.append(f"  reconstruction first counter-propagating pair at w = {rec.first_with_pair_a:g} a "
                         f"({rec.first_with_pair_lB:.2f} l_B){below}")
        elif rec:
            lines.append(f"  reconstruction no counter-propagating pair up to w = {rec.widest_without_a:g} a "
                         f"({rec.widest_without_lB:.2f} l_B)")
    return lines


def _units_lines(summary: RunSummary) -> list[str]:
    """Quantities derived from [material] and [field], with units, at the field asked for."""
    u = summary.units
    if not u:
        return []
    a = u.lattice_constant_nm
    how = ("chosen: flux exactly 1/q" if u.lattice_constant_auto else "given")
    flux = f"{u.flux.numerator}/{u.flux.denominator}"
    lines = [
        f"  field        B = {u.b_tesla:g} T along {u.field_direction} (asked for); lattice flux {flux} "
        f"per plaquette = {u.b_lattice_tesla:.6g} T ("
        + ("exactly" if abs(u.b_relative_error) < 1e-12 else
           f"{100 * u.b_relative_error:+.3f} %, tolerance {100 * u.tolerance:g} %") + ")",
        f"  material     a = {a:.4g} nm ({how}), t = hbar^2/(2 m* a^2) = {u.hopping_mev:.4f} meV",
        f"  scales       l_B = {u.magnetic_length_nm:.3f} nm = {u.magnetic_length_a:.2f} a, "
        f"hbar*omega_c = {u.cyclotron_mev:.4f} meV, |g| mu_B B = {u.zeeman_mev:.4f} meV, "
        f"e^2/(4 pi eps0 eps_r l_B) = {u.coulomb_mev:.3f} meV",
    ]
    if u.filling is not None:
        lines.append(f"  filling      nu = n h/(e B) = {u.filling:.4f} at {u.b_tesla:g} T")
    if u.fermi_t is not None:
        lines.append(f"  Fermi level  E_F = {summary.config.field.fermi_mev:g} meV above the "
                     f"band bottom = {u.fermi_t:.6f} t")
    return lines


def _signed(n: int) -> str:
    return f"{n:+d}" if n else "0"


def _edge_line(name: str, edge) -> str:
    modes = ", ".join(
        (f"{m.spin} " if m.spin else "") + ("+x" if m.velocity > 0 else "-x") + f" (y={m.y:.1f})"
        for m in edge.modes
    ) or "none"
    spins = "  ".join(f"{s} {_signed(v['net'])}/{v['counter_pairs']}" for s, v in edge.by_spin.items())
    return f"  {name:7s}{_signed(edge.net):>5s} {edge.counter_pairs:>6d}   {spins:22s} {modes}"


def _subspace_note(bulk) -> str:
    sub = bulk.subspace
    if not sub:
        return ""
    if bulk.subspace_agree:
        return (f" (the occupied subspace as a whole on {sub.grid[0]}x{sub.grid[1]}: the same, "
                f"smallest link {sub.link_min:.2f})")
    return (f" (the occupied subspace as a whole on {sub.grid[0]}x{sub.grid[1]}: C = {sub.chern}: "
            "DIFFERENT, refine chern.grid)")


def _physical_mode_lines(summary: RunSummary) -> list[str]:
    lines = []
    for name in ("bottom", "top"):
        modes = getattr(summary.edges, name).modes
        extras = summary.physical.edges[name]
        if not modes:
            continue
        shown = list(zip(modes, extras))
        shown = shown if len(shown) <= 6 else shown[:4]
        text = "; ".join(
            (f"{m.spin} " if m.spin else "") + ("+x" if m.velocity > 0 else "-x")
            + f" {x.depth_nm:.1f} nm ({x.depth_lb:.2f} l_B) inside, v = {x.velocity_m_s:.3g} m/s"
            + ("" if x.drift_m_s is None else f" (E x B drift {x.drift_m_s:.3g} m/s)")
            for m, x in shown)
        if len(shown) < len(modes):
            text += f"; ... {len(modes) - len(shown)} more (summary.json)"
        lines.append(f"  {name + ' modes':12s} {text}")
    return lines


def _hall_lines(summary: RunSummary) -> list[str]:
    h, c = summary.hall, summary.check
    if h.r_xy_ohm is None:
        r_xy = "infinite (C = 0)"
    elif summary.physical:
        r_xy = f"{h.r_xy_ohm / 1e3:.6f} kOhm"
    else:
        r_xy = f"{h.r_xy_ohm:.3f} ohm"
    lines = [f"  Hall         sigma_xy = {h.sigma_xy} e^2/h, R_xy = -1/sigma_xy = {r_xy}"]
    r = h.routes
    streda = "n/a" if r.streda is None else f"{r.streda:.6f} (off integer by {r.streda_deviation:.1e})"
    hallbar = "" if r.hallbar is None else f", Hall bar {r.hallbar:.6f} (off integer by {r.hallbar_deviation:.1e})"
    lines.append(f"  routes       Chern {r.chern}, edge {r.edge}, Streda {streda}{hallbar}; "
                 f"agree: {'yes' if c.routes_agree else 'NO'}")
    if h.streda_error:
        lines.append(f"               Streda: {h.streda_error}")
    if h.hallbar:
        hb = h.hallbar
        lines.append(f"  Hall bar     {hb.length}x{hb.width} sites, W_dis = {hb.disorder:g} t, "
                     f"{hb.seeds} seed(s): R_xy = {hb.r_xy:.8f} h/e^2 ({hb.r_xy_ohm:.3f} ohm), "
                     f"R_xx = {hb.r_xx:.2e} h/e^2")
        if hb.by_spin:
            parts = []
            for name, value in hb.by_spin.items():
                parts.append(f"{name}: no open channel in some lead" if value is None else
                             f"{name}: R_xy = {value['r_xy']:.6f}, R_xx = {value['r_xx']:.1e} h/e^2")
            lines.append(f"               per spin  {'; '.join(parts)}")
    if h.hallbar_error:
        lines.append(f"               Hall bar: {h.hallbar_error}")
    return lines


def _topology_lines(summary: RunSummary) -> list[str]:
    """Bulk gap, Chern sum, edge modes, Hall response and the check."""
    b, f, e, c = summary.bulk, summary.fermi, summary.edges, summary.check
    lo, hi = f.gap_window
    window = f"{'-inf' if lo is None else f'{lo:.5f}'} .. {'inf' if hi is None else f'{hi:.5f}'} t"
    spin = ""
    if b.spin_chern_below_fermi:
        spin = " (" + ", ".join(f"spin {s} {v}" for s, v in b.spin_chern_below_fermi.items()) + ")"
    conv = ""
    if b.refined is not None:
        conv = (f"; {b.refined.grid[0]}x{b.refined.grid[1]}: "
                + ("same Chern numbers" if b.converged else "DIFFERENT Chern numbers, refine the grid"))
    solver = ""
    if b.chern.solver == "landau":
        solver = (f"Landau-level solver, the lowest {len(b.chern.bands)} of {b.chern.total_bands} bands "
                  "(the rest lie above E_F); ")
    elif b.chern.solver:
        solver = "dense solver (every band); "
    lines = [
        f"  bulk         {solver}{count(len(b.chern.bands), 'band')}, {count(len(b.chern.gaps), 'open gap')} on a "
        f"{b.chern.grid[0]}x{b.chern.grid[1]} grid{conv}",
        f"  Fermi energy {f.energy:.5f} t in the gap above {count(f.gap_below, 'band')} "
        + (f"({window})" if f.note is None else "(self-consistent: mid-way between the highest occupied "
           "and the lowest empty level)"),
        f"  Chern sum    C = {b.chern_below_fermi}{spin}" + _subspace_note(b),
        "  edge      net  pairs   net/pairs by spin      modes from the boundary inwards",
        _edge_line("bottom", e.bottom),
        _edge_line("top", e.top),
    ]
    if e.message:
        lines.append(f"  warning      {e.message}")
    ph = summary.physical
    if ph:
        gap_text = ", ".join("-inf" if x is None else f"{x:.4f}" for x in ph.gap_mev)
        lines.insert(2, f"               = {ph.fermi_energy_mev:.4f} meV above the band bottom "
                        f"(gap {gap_text} meV)")
        lines += _physical_mode_lines(summary)
    lines += _hall_lines(summary)
    agree = "yes" if c.bulk_edge_agree else "NO"
    if c.spin_resolved_agree is not None:
        agree += f" (per spin: {'yes' if c.spin_resolved_agree else 'NO'})"
    lines.append(f"  bulk-edge    agree: {agree}; {c.convention}")
    if c.reason:
        lines.append(f"  because      {c.reason}")
    return lines
