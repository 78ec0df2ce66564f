"""topoedge: bulk topology and edge modes of lattice quantum-Hall samples.

Stages, each in its own module and each using only the ones before it:

1. ``config``      -- TOML scenarios validated into frozen dataclasses.
2. ``builders``    -- kwant ``Builder`` objects (ribbon, bulk) from a scenario.
3. ``hamiltonian`` -- numerical objects: the ribbon Bloch Hamiltonian.
4. ``spectrum``    -- solvers: the ribbon spectrum and its observables.
5. ``results``, ``plotting`` -- files, figures and summaries.
6. ``cli``         -- the ``topoedge`` command line.
"""

__version__ = "0.1.0"
