"""topoedge: bulk topology and edge modes of lattice quantum-Hall samples.

Stages, each in its own module and each using only the ones before it:

0. ``profiles``, ``units`` -- edge-potential shapes and physical units
   (leaves: numpy and scipy only).
1. ``config``      -- TOML scenarios validated into frozen dataclasses.
2. ``builders``    -- kwant ``Builder`` objects (ribbon, bulk) from plain
   arguments; physical parameters go in kwant's ``params``.
3. ``hamiltonian``, ``bloch`` -- numerical objects: the ribbon Bloch
   Hamiltonian and the Fourier components of the bulk.
4. ``spectrum``, ``chern``, ``edges`` -- solvers: the ribbon spectrum, bulk
   Chern numbers by the link-variable method, edge modes at E_F.
5. ``pipeline``    -- a scenario through stages 2-4, the bulk-edge check and a
   JSON-able summary.
6. ``results``, ``plotting`` -- files, figures and summaries.
7. ``cli`` (with ``bench`` and ``butterfly``) -- the ``topoedge`` command line.
"""

__version__ = "0.1.0"
