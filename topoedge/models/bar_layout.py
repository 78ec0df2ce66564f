"""The layout of a Hall bar's voltage probes, checked before anything is built (numpy only).

:mod:`topoedge.models.hallbar` builds the bar; the scenario checks use this
module to refuse a bar whose probes do not fit without importing kwant.
"""

from __future__ import annotations

import numpy as np

__all__ = ["check_flat", "check_layout", "probe_layout", "validate_probes"]

#: The edge potential at the centre of the bar (or of a lead) must have decayed
#: below this fraction of its largest value.
_FLAT_FRACTION = 1e-2


def check_flat(potential, span, what):
    """Raise if the edge potential has not decayed in the middle of ``span`` rows."""
    d = np.arange(span, dtype=float)
    values = np.abs(np.asarray(potential(np.minimum(d, span - 1 - d)), dtype=float))
    edge = float(np.abs(potential(np.array([0.0]))[0]))
    centre = float(values.min()) if values.size else 0.0
    if edge > 0 and centre > _FLAT_FRACTION * edge:
        raise ValueError(
            f"the {what} ({span} sites) is narrower than the edge potential: at its centre the "
            f"potential is still {centre:.3g} t (edge value {edge:.3g} t, at most "
            f"{_FLAT_FRACTION:g} of it is allowed); widen the {what} or shorten the ramp"
        )


def validate_probes(length: int, probe_width: int, probe_positions: tuple[int, int], *,
                    gauge: str = "columns") -> None:
    """Check that two voltage probes of ``probe_width`` columns at ``probe_positions`` fit the bar.

    Raises
    ------
    ValueError
        When they overlap, stick out of the bar, or (``gauge = "columns"``)
        touch its first or last column, where the source and drain attach.
    """
    pw, (xa, xb) = int(probe_width), (int(x) for x in probe_positions)
    if not (0 <= xa and xa + pw <= xb and xb + pw <= length):
        raise ValueError(
            f"probes of {pw} columns at x = {xa}, {xb} must fit in the bar (0 .. {length - 1}) "
            f"without overlapping: need 0 <= {xa}, {xa} + {pw} <= {xb} and {xb} + {pw} <= {length}"
        )
    if gauge not in ("columns", "kwant"):
        raise ValueError(f"gauge: got {gauge!r}; expected 'columns' or 'kwant'")
    if gauge == "columns" and not (xa >= 1 and xb + pw <= length - 1):
        raise ValueError(
            f"probes at x = {xa}, {xb} ({pw} columns) touch the first or last column of the bar, "
            f"where the source and drain attach; need 1 <= {xa} and {xb} + {pw} <= {length - 1}"
        )


def probe_layout(length: int, width: int, potential=None) -> tuple[int, tuple[int, int]]:
    """Probe width and positions of a scenario's bar: a quarter of the bar at the quarter points.

    A quarter of the width, at least 6 columns, and with a flat middle of at
    least 12 columns between the edge potentials of the probe's two side
    walls (where ``potential(d)``, t, has decayed below a hundredth of its
    edge value), so that the lowest Landau levels fit in them.
    """
    probe = max(6, width // 4)
    if potential is not None:
        d = np.arange(length, dtype=float)
        v = np.abs(potential(d))
        flat = np.nonzero(v <= 1e-2 * v[0])[0]
        if flat.size:
            probe = max(probe, 2 * int(flat[0]) + 12)
    return probe, (length // 4 - probe // 2, 3 * length // 4 - probe // 2)


def check_layout(length: int, width: int, potential=None) -> None:
    """Check a scenario bar's layout (:func:`probe_layout`) before building it.

    Raises
    ------
    ValueError
        When the probes do not fit (:func:`validate_probes`) or the bar, its
        leads or probes are narrower than the edge potential.
    """
    probe, positions = probe_layout(length, width, potential)
    validate_probes(length, probe, positions)
    if potential is not None:
        check_flat(potential, width, "bar")
        check_flat(potential, probe, "voltage probe")
