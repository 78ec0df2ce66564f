"""topoedge: bulk topology and edge modes of lattice quantum-Hall samples.

Stages, each in its own module and each using only the ones before it:

0. ``profiles``    -- edge-potential shapes (a leaf: numpy and scipy only).
1. ``config``      -- TOML scenarios validated into frozen dataclasses.
2. ``builders``    -- kwant ``Builder`` objects (ribbon, bulk) from plain
   arguments; physical parameters go in kwant's ``params``.
3. ``hamiltonian`` -- numerical objects: the ribbon Bloch Hamiltonian.
4. ``spectrum``    -- solvers: the ribbon spectrum and its observables.
5. ``pipeline``    -- a scenario through stages 2-4, condensed into a summary.
6. ``results``, ``plotting`` -- files, figures and summaries.
7. ``cli`` (and ``bench``) -- the ``topoedge`` command line.
"""

__version__ = "0.1.0"
