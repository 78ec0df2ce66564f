"""Figures of computed results (stage 6).

The ``plot_*`` functions draw on a given matplotlib ``Axes`` and return the
artists; the ``*_figure`` functions compose them into the figures of a
results folder. None of them shows a window, writes a file or changes the
matplotlib backend (the command line chooses it; see
:mod:`topoedge.outputs.results`).

- :mod:`.style` -- display units (lattice units, or meV / nm / 1/nm), markers, colours, titles;
- :mod:`.ribbon` -- the ribbon spectrum with the modes at E_F;
- :mod:`.bulk` -- bulk bands with Chern numbers, or the Landau-level diagram;
- :mod:`.hallbar` -- Hall-bar scans;
- :mod:`.interacting` -- self-consistent runs;
- :mod:`.butterfly` -- the flux-energy spectrum;
- :mod:`.sweep` -- sweep maps and lines;
- :mod:`.disorder` -- the marker map, sigma_xy curves and the robustness map of a disordered flake.
"""

from .bulk import bulk_energy_range, bulk_figure, plot_bulk_bands, plot_level_diagram
from .hallbar import hallbar_figure
from .interacting import edge_scan_figure, hartree_fock_figure
from .ribbon import edge_mode_legend, plot_edge_modes, plot_ribbon_spectrum, ribbon_figure
from .style import Display, default_energy_range, display_units

#: Figure files of a ``run`` results folder and the functions drawing them.
RUN_FIGURES = {"ribbon_spectrum.png": ribbon_figure, "bulk_bands.png": bulk_figure}

__all__ = [
    "Display", "display_units", "default_energy_range", "plot_ribbon_spectrum", "plot_edge_modes",
    "edge_mode_legend", "ribbon_figure", "plot_bulk_bands", "plot_level_diagram", "bulk_energy_range",
    "bulk_figure", "hallbar_figure", "hartree_fock_figure", "edge_scan_figure", "RUN_FIGURES",
]
