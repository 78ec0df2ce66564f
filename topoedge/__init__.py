"""topoedge: bulk topology and edge modes of lattice quantum-Hall samples.

Stages, each in its own module and each using only the ones before it:

0. ``profiles``, ``units``, ``progress``, ``budget`` -- edge-potential shapes,
   physical units, progress lines and memory estimates (leaves).
1. ``config``      -- TOML scenarios validated into frozen dataclasses.
2. ``builders``    -- kwant ``Builder`` objects (ribbon, bulk) from plain
   arguments; physical parameters go in kwant's ``params``.
3. ``hamiltonian``, ``bloch``, ``harper`` -- numerical objects: the ribbon
   Bloch Hamiltonian, the Fourier components of the bulk, and the
   square-lattice magnetic cell as a ring-shaped tridiagonal matrix.
4. ``spectrum``, ``chern``, ``landau``, ``edges`` -- solvers: the ribbon
   spectrum, bulk Chern numbers by the link-variable method (every band, or
   only the lowest Landau levels), edge modes at E_F.
5. ``pipeline``    -- a scenario through stages 2-4, the bulk-edge check and a
   JSON-able summary.
6. ``results``, ``plotting`` -- files, figures and summaries.
7. ``cli`` (with ``bench`` and ``butterfly``) -- the ``topoedge`` command line.
"""

__version__ = "0.2.0"
