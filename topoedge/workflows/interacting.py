"""Self-consistent runs: a scenario with ``[interaction]`` to Hartree-Fock results.

No files and no printing (the command line and :mod:`topoedge.outputs.results` do
that). ``run_interacting`` chains:

1. bulk: the non-interacting Chern numbers of the scenario's lattice
   (:func:`topoedge.workflows.run.bulk_chern`); ``fermi.gap = r`` fixes the bulk
   filling, ``r`` bands of ``1/q`` states per site each, so the background
   density is ``n_b = r / q`` per site (filling ``nu = n_b / phi``);
2. the self-consistent problem: the spin blocks of the ribbon without edge
   potential, the background of width ``w`` (:func:`background_of`), the
   interaction (:func:`interaction_of`), ``N_k`` (:func:`choose_k_points`);
3. every starting state solved, the lowest converged Hartree-Fock energy kept
   (:func:`solve_width`); its Hamiltonian as a ribbon
   (:meth:`topoedge.solvers.hartree_fock.HartreeFockRibbon.effective`), whose spectrum
   and edge modes come from the same solvers as the non-interacting ribbon;
4. the same for every width of ``interaction.scan_widths`` (the edge
   structure against the smoothness of the edge);
5. the summary of :func:`topoedge.workflows.run.summarize` with an
   ``interaction`` block: strengths and scales, every start with its energy,
   the neutrality, the order of the edge modes from each boundary inwards,
   the spin-resolved density, the scan and the reconstruction threshold.

A self-consistent state is identified by the key ``"w=<width>/<start>"``;
``restart`` maps such keys to density matrices ``G_s(D)`` to continue from,
and ``checkpoint(states)`` receives the latest state of every key while the
loop runs (the command line stores them in a restart file).

The bulk-edge check compares the net chirality of the interacting edges with
the Chern sum of the ``r`` filled bulk bands: exchange in a uniform bulk at
integer filling only shifts the filled levels, and while the bulk gap stays
open the Chern sum is that of the non-interacting bands.

References
----------
.. [1] C. de C. Chamon and X. G. Wen, "Sharp and smooth boundaries of quantum
   Hall liquids", Phys. Rev. B 49, 8227 (1994).
.. [2] G. F. Giuliani and G. Vignale, *Quantum Theory of the Electron Liquid*
   (Cambridge University Press, 2005).
"""

from __future__ import annotations

import math
import time
from dataclasses import replace
from fractions import Fraction

import numpy as np

from ..models.square import model_params, ribbon_builder
from ..scenario import Model, Scenario, resolve
from ..scenario.units import Derived
from ..solvers.coulomb import Interaction, background_density
from ..solvers.edges import count_edge_modes
from ..solvers.hartree_fock import HartreeFockRibbon, HFResult
from ..solvers.spectrum import k_grid, ribbon_spectrum
from ..systems.ribbon import RibbonHamiltonian
from .bulk import bulk_chern, fermi_level
from .interacting_records import (InteractingRun, SelfConsistent, bulk_density, failed_summary,
                                  interaction_summary, kept_states, state_key)
from .run import RunResult
from .summary import summarize
from ..util.budget import require
from ..util.progress import as_progress

__all__ = [
    "CELL_AVERAGE", "SelfConsistent", "InteractingRun", "interaction_of", "background_of",
    "choose_k_points", "solve_width", "run_interacting", "model_key", "state_key",
]

#: 1/r averaged over the unit square around a site, 4 ln(1 + sqrt 2)
#: (elementary integral): the default on-site value in units of U_C.
CELL_AVERAGE = 4 * math.log(1 + math.sqrt(2))


def interaction_of(scenario: Scenario, units: Derived | None = None) -> Interaction:
    """The lattice interaction of a scenario.

    ``U_C`` is ``interaction.coulomb`` (t) or, in physical units,
    ``e^2 / (4 pi eps0 eps_r a) = E_C l_B / a`` in units of t with
    ``E_C = e^2 / (4 pi eps0 eps_r l_B)`` of :mod:`topoedge.scenario.units`.
    """
    inter = scenario.interaction
    if inter.coulomb is not None:
        coulomb = inter.coulomb
    elif units is not None:
        coulomb = units.coulomb_mev * units.magnetic_length_a / units.hopping_mev
    else:
        raise ValueError("interaction.coulomb: missing; expected U_C in t, or [material] and [field]")
    onsite = inter.onsite if inter.onsite is not None else CELL_AVERAGE * coulomb
    return Interaction(coulomb=coulomb, onsite=onsite, gate_distance=inter.gate_distance)


def background_of(scenario: Scenario, width: float | None = None) -> np.ndarray:
    """Background charge per site on every row (lattice-unit scenario), ramp ``width`` (a)."""
    bg = scenario.interaction.background
    return background_density(scenario.ribbon.width, bulk_density(scenario),
                              bg.width if width is None else width, profile=bg.profile, setback=bg.setback)


def fewest_k_points(magnetic_length: float) -> int:
    """The smallest even ``N_k >= max(32, 12 l_B / a)`` the self-consistent loop starts its search from."""
    least = max(32, int(math.ceil(12 * magnetic_length)))
    return least + least % 2


def choose_k_points(electrons: float, magnetic_length: float, *, given: int | None = None,
                    temperature: float = 0.0, limit: int = 1024) -> tuple[int, str | None]:
    """Momenta of the self-consistent loop, and a warning where they hold a fractional charge.

    At zero temperature the ``N_k`` cells of the ring must hold a whole
    number of electrons, or the last level is partly filled (a metal where
    there should be a gap; possibly at one edge only). Without ``given`` the
    smallest even ``N_k >= max(32, 12 l_B / a)`` with ``electrons * N_k``
    within 1e-9 of an integer is taken (up to ``limit``).

    Parameters
    ----------
    electrons : float
        Background charge per cell.
    magnetic_length : float
        ``l_B`` in lattice constants.
    given : int, optional
        ``interaction.k_points``.
    temperature : float
        ``k_B T`` in t; above zero any ``N_k`` is accepted.
    """
    def whole(n):
        return abs(electrons * n - round(electrons * n)) < 1e-9

    least = fewest_k_points(magnetic_length)
    if given is not None:
        if temperature == 0 and not whole(given):
            better = next((n for n in range(max(4, given - given % 2), limit + 1, 2) if whole(n)), None)
            hint = f"; interaction.k_points = {better} would" if better else ""
            return given, (f"{electrons:.6g} electrons per cell on {given} momenta is not a whole number: "
                           f"the last level is partly filled{hint}")
        return given, None
    if temperature > 0:
        return least, None
    found = next((n for n in range(least, limit + 1, 2) if whole(n)), None)
    if found is None:
        frac = Fraction(electrons).limit_denominator(10**6)
        return least, (f"{electrons:.6g} electrons per cell: no even number of momenta up to {limit} holds a "
                       f"whole number of electrons (denominator {frac.denominator}); the last level is "
                       "partly filled (set interaction.temperature > 0 or change the background)")
    return found, None


def memory_estimate_interacting(scenario: Scenario) -> tuple[str, float, str]:
    """Upper bound (bytes) of the self-consistent loop, with the keys that shrink it.

    Per spin and momentum a W x W density matrix (complex128); the loop holds
    five of them (the input, the output, the Hamiltonian, its Fock part and
    the eigenvectors) and the mixing half of one (the independent half of
    ``G(D)``) plus ``history`` residuals of that half in single precision (a
    quarter each; :class:`topoedge.solvers.mixing.LeanAnderson`). ``N_k`` is
    ``interaction.k_points`` or, when the run chooses it, twice its smallest
    choice (:func:`choose_k_points`).
    """
    cfg, width = scenario.interaction, scenario.ribbon.width
    phi = abs(float(scenario.lattice.flux)) or 1.0
    least = fewest_k_points(1.0 / math.sqrt(2 * math.pi * phi))
    nk = cfg.k_points if cfg.k_points is not None else 2 * least
    copies = 5 + (0.5 + 0.25 * cfg.history if cfg.mixing == "diis" else 0)
    need = copies * 2 * nk * width * width * 16
    return (f"the self-consistent loop ({nk} momenta x {width} rows x 2 spins, {copies:g} density matrices "
            "each)", need, "expected a smaller ribbon.width, fewer interaction.k_points or a shorter "
            "interaction.history")


def restart_matches(scenario: Scenario | Model, restart_model: dict) -> bool:
    """Whether a restart (or checkpoint) file's model is the self-consistent problem of ``scenario``."""
    resolved = resolve(scenario)
    return model_key(resolved.scenario, interaction_of(resolved.scenario, resolved.units)) == restart_model


def model_key(scenario: Scenario, interaction: Interaction) -> dict:
    """What defines the self-consistent problem (a restart must match it); JSON-able."""
    inter = scenario.interaction
    return {
        "flux": str(scenario.lattice.flux), "zeeman_t": scenario.spin.zeeman,
        "onsite_energy_t": scenario.lattice.onsite, "ribbon_width": scenario.ribbon.width,
        "bands_filled": scenario.fermi.gap, "coulomb_t": interaction.coulomb,
        "onsite_t": interaction.onsite, "gate_distance_a": interaction.gate_distance,
        "background_profile": inter.background.profile, "background_setback_a": inter.background.setback,
        "k_points": inter.k_points, "temperature_t": inter.temperature,
    }


def _blocks(scenario: Scenario) -> tuple[RibbonHamiltonian, RibbonHamiltonian]:
    lat = scenario.lattice
    ham = RibbonHamiltonian.from_kwant(
        ribbon_builder(scenario.ribbon.width, spin=True),
        params=model_params(phi=lat.flux, zeeman=scenario.spin.zeeman, onsite=lat.onsite), spin=True)
    up, down = (ham.block(i) for i in ham.spin_blocks())
    return up, down


def _lowest(runs) -> HFResult | None:
    """The converged run of lowest energy; of runs within 1e-9 t per cell, the first started."""
    converged = [r for r in runs if r.converged]
    if not converged:
        return None
    lowest = min(r.energy for r in converged)
    return next(r for r in converged if r.energy <= lowest + 1e-9)


def _fermi_energy(hf: HartreeFockRibbon, result: HFResult) -> float:
    """Mid-way between the highest occupied and lowest empty level, or mu (t)."""
    levels = np.sort(result.energies.ravel())
    total = hf.electrons * hf.nk
    filled = round(total)
    if hf.temperature == 0 and abs(total - filled) < 1e-9 and 0 < filled < levels.size:
        return 0.5 * float(levels[filled - 1] + levels[filled])
    return float(result.mu)


def solve_width(scenario: Scenario, blocks, interaction: Interaction, width: float, magnetic_length: float,
                *, restart: dict | None = None, on_state=None, progress: bool = False
                ) -> tuple[SelfConsistent, str | None]:
    """Solve every start for the background width ``width`` and analyse the best solution.

    Parameters
    ----------
    scenario : Scenario
        In lattice units, with ``[interaction]``.
    blocks : (RibbonHamiltonian, RibbonHamiltonian)
        Non-interacting spin-up and spin-down blocks.
    interaction : Interaction
    width : float
        Background width w, lattice constants.
    magnetic_length : float
        l_B in lattice constants (for the default ``N_k``).
    restart : dict, optional
        :func:`state_key` -> density matrix to continue from.
    on_state : callable, optional
        ``on_state(key, g, converged, iterations)`` after every iteration and
        at the end of every start.
    progress : bool or Progress
        True: a progress bar of the iterations; a
        :class:`topoedge.util.progress.Progress`: one stage per start (a bar,
        or log lines with the elapsed time for batch jobs).

    Returns
    -------
    SelfConsistent, and a warning about the momentum grid (or None).
    """
    progress = as_progress(progress)
    cfg = scenario.interaction
    background = background_of(scenario, width)
    nk, warning = choose_k_points(float(background.sum()), magnetic_length, given=cfg.k_points,
                                  temperature=cfg.temperature)
    hf = HartreeFockRibbon(*blocks, background, interaction, k_points=nk, temperature=cfg.temperature)
    options = dict(mixing=cfg.mixing, alpha=cfg.alpha, history=cfg.history, tol=cfg.tol,
                   max_iter=cfg.max_iter)
    runs, restarted = [], []
    for start in cfg.starts:
        key = state_key(width, start)
        begin = start
        if restart and key in restart:
            begin = restart[key]
            restarted.append(start)
        stage = progress.stage(f"Hartree-Fock {key} (at most {cfg.max_iter} iterations)", cfg.max_iter)

        def callback(it, res, energy, g, key=key, stage=stage):
            stage.update(1)
            if on_state is not None:
                on_state(key, g, False, it)

        try:
            with stage:
                result = hf.solve(begin, callback=callback, **options)
        except ValueError as err:
            if start in restarted:  # a restart file's state of the wrong shape or charge
                raise ValueError(f"restart state {key}: {err}") from None
            raise
        result = replace(result, start=start)
        if on_state is not None:
            on_state(key, result.density_matrix, result.converged, result.iterations)
        runs.append(result)
    best = _lowest(runs)
    rival = [r for r in runs if r.converged and r is not best
             and np.abs(r.density - best.density).max() > 1e-4 and r.energy - best.energy < 1e-3]
    if rival:
        close = min(rival, key=lambda r: r.energy)
        near = (f"the '{close.start}' start ends in a different state only {close.energy - best.energy:.1e} t "
                f"per cell above the kept '{best.start}' one; check the choice with a larger interaction.k_points")
        warning = f"{warning}; {near}" if warning else near
    ham = ef = edges = None
    if best is not None:
        ham = hf.effective(best)
        ef = _fermi_energy(hf, best)
        edges = count_edge_modes(ham, ef, k_points=scenario.edges.k_points)
    return SelfConsistent(width, nk, background, best, tuple(runs), tuple(restarted), ham, ef, edges), warning


def run_interacting(scenario: Scenario | Model, *, restart: dict | None = None, restart_model: dict | None = None,
                    checkpoint=None, checkpoint_every: float = 20.0, progress: bool = False) -> RunResult:
    """Self-consistent Hartree-Fock run of a scenario with ``[interaction]``.

    Parameters
    ----------
    scenario : Scenario
        As written (physical units allowed); ``interaction.enabled`` true.
    restart : dict, optional
        :func:`state_key` -> density matrix ``G_s(D)`` (e.g. read from a
        restart file) to continue from.
    restart_model : dict, optional
        The :func:`model_key` stored with ``restart``; it must equal this
        scenario's (only solver settings may differ).
    checkpoint : callable, optional
        ``checkpoint(states, model)`` with the latest state of every key
        (see :meth:`InteractingRun.states`), called at most every
        ``checkpoint_every`` seconds while iterating and after every start.
    checkpoint_every : float
        Seconds between checkpoints while iterating.
    progress : bool

    Returns
    -------
    RunResult
        ``interacting`` holds the self-consistent solutions; ``spectrum``,
        ``edges`` and ``hamiltonian`` are those of the best main solution.

    Raises
    ------
    ValueError
        For a restart made for another model, or a restart state of the
        wrong shape or charge (the message names it).
    topoedge.solvers.chern.GapClosedError
        When the filled bulk bands have no open gap above them.
    """
    start_time = time.perf_counter()
    model_ = resolve(scenario)
    given, scenario, units = model_.given, model_.scenario, model_.units
    if not scenario.interaction.enabled:
        raise ValueError("the scenario has no [interaction] section; use topoedge.workflows.run.run_scenario")
    interaction = interaction_of(scenario, units)
    require([memory_estimate_interacting(scenario)])
    model = model_key(scenario, interaction)
    if restart_model is not None and restart_model != model:
        diff = [f"{k}: file {restart_model.get(k)!r}, scenario {v!r}" for k, v in model.items()
                if restart_model.get(k) != v]
        raise ValueError(f"restart file: made for a different model ({'; '.join(diff)}); expected the same "
                         "scenario (only the solver keys tol, max_iter, mixing, alpha, history, starts and "
                         "scan_widths may change)")
    chern, refined, path = bulk_chern(scenario, progress=as_progress(progress))
    _, gap = fermi_level(scenario, chern)
    phi = abs(float(scenario.lattice.flux))
    lb = 1.0 / math.sqrt(2 * math.pi * phi)
    blocks = _blocks(scenario)

    states: dict = {}
    last = [time.monotonic()]

    def on_state(key, g, converged, iterations):
        states[key] = {"density_matrix": g, "converged": converged, "iterations": iterations}
        if checkpoint is not None and (time.monotonic() - last[0] >= checkpoint_every or converged):
            checkpoint(dict(states), model)
            last[0] = time.monotonic()

    warnings = []
    solved = {}
    widths = [scenario.interaction.background.width, *scenario.interaction.scan_widths]
    for w in dict.fromkeys(widths):
        solved[w], warning = solve_width(scenario, blocks, interaction, w, lb, restart=restart,
                                         on_state=on_state, progress=progress)
        if checkpoint is not None:
            for run in solved[w].runs:
                states.pop(state_key(w, run.start), None)
            states.update(kept_states(solved[w]))
            checkpoint(dict(states), model)
            last[0] = time.monotonic()
        if warning:
            warnings.append(f"background width {w:g}: {warning}")
    main = solved[widths[0]]
    scan = tuple(solved[w] for w in scenario.interaction.scan_widths)
    run = InteractingRun(interaction, lb, main, scan, model, tuple(warnings))

    if main.best is None:
        ham, ef, spec, edges, hartree = None, gap.middle, None, None, np.zeros(scenario.ribbon.width)
    else:
        ham, ef, edges, hartree = main.hamiltonian, main.fermi_energy, main.edges, main.best.hartree
        window = None
        if scenario.spectrum.window is not None:
            window = (ef - scenario.spectrum.window, ef + scenario.spectrum.window)
        with as_progress(progress).stage(f"ribbon: spectrum at {scenario.spectrum.k_points} momenta",
                                         scenario.spectrum.k_points) as stage:
            spec = ribbon_spectrum(ham, k_grid(scenario.spectrum.k_points), window=window, solver="dense",
                                   progress=stage)
    info = interaction_summary(scenario, run, gap)
    if main.best is not None and info.filling_centre is not None:
        from .levels_lattice import bulk_answer

        with as_progress(progress).stage("bulk: the lattice's filled levels for the centre"):
            link = bulk_answer(scenario, interaction, info.filling_centre)
        info = replace(info, bulk_link=link)
        if link.get("agree") is False:
            warnings.append(f"the ribbon's centre fills {link['centre_levels']}, the bulk Hartree-Fock at the "
                            f"same parameters {link['bulk_levels']}: the ribbon (its width, its start) holds "
                            "another bulk state than the lowest")
    if main.best is not None:
        summary = summarize(scenario, spec, hartree, chern=chern, refined=refined, ef=ef, gap=gap, edges=edges,
                            seconds=time.perf_counter() - start_time, given=given, units=units,
                            streda=None, streda_error="not computed: the Streda route is non-interacting")
        summary = replace(
            summary,
            model=replace(summary.model, edge_profile=f"background charge ({scenario.interaction.background.profile})",
                          edge_potential_max_t=float(np.max(hartree))),
            fermi=replace(summary.fermi, gap_window=(None, None),
                          note="E_F between the highest occupied and the lowest empty self-consistent "
                               "level; the gap above the filled bulk bands is non-interacting"))
    else:
        summary = failed_summary(scenario, given, units, gap, time.perf_counter() - start_time)
    summary = replace(summary, interaction=info, warnings=summary.warnings + tuple(warnings),
                      seconds=round(time.perf_counter() - start_time, 3))
    return RunResult(scenario, hartree, ham, spec, chern, refined, ef, gap, edges, path, summary, units,
                     None, run)


