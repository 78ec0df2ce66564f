"""The Kubo-Bastin Hall conductivity by kernel polynomials against the clean-gap Chern numbers.

References: J. H. Garcia, L. Covaci, T. G. Rappoport, PRL 114, 116602
(2015) (the method; kwant.kpm.conductivity implements it); D. J. Thouless
et al., PRL 49, 405 (1982) (sigma_xy = C e^2/h in a gap); F. D. M. Haldane,
PRL 61, 2015 (1988) and Qi, Wu, Zhang, PRB 74, 085308 (2006) (the
zero-field phases).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from test_marker import _flake, _gap_middle
from topoedge.solvers.kubo import hall_conductivity_kpm

warnings.filterwarnings("ignore", message="MUMPS is not available")


@pytest.fixture(scope="module")
def square():
    return _flake({"lattice": {"flux": "1/5"}, "spin": {"enabled": False}}, 60)


def test_clean_gaps_give_the_chern_number_and_more_moments_do_better(square):
    scenario, flake = square
    sites = flake.central(0.4)
    energies = [_gap_middle(scenario, 1), _gap_middle(scenario, 2)]
    # 12 random vectors over the central 576 sites: a statistical error of a
    # few per cent, beside the resolution error of the moments.
    coarse = hall_conductivity_kpm(flake, energies, sites=sites, moments=60, vectors=12)
    fine = hall_conductivity_kpm(flake, energies, sites=sites, moments=400, vectors=12)
    expected = np.array([1.0, 2.0])                        # TKNN at flux 1/5: C = r
    assert np.abs(fine - expected).max() < 0.08, fine
    assert np.abs(fine - expected).max() < np.abs(coarse - expected).max(), (coarse, fine)


@pytest.mark.parametrize("data, expected", [
    ({"lattice": {"kind": "haldane", "t2": 0.1, "t2_phase": np.pi / 2, "staggered": 0.2}}, -1),
    ({"lattice": {"kind": "qwz", "mass": 1.0}}, 1),
    ({"lattice": {"kind": "qwz", "mass": 3.0}}, 0),
], ids=["haldane", "qwz", "qwz-trivial"])
def test_zero_field_models(data, expected):
    # The project's sign: sigma_xy = C (the bulk link-variable Chern number,
    # tests/test_marker.py asserts it for the same models).
    _, flake = _flake(data, 40)
    sigma = hall_conductivity_kpm(flake, [0.0], sites=flake.central(0.4), moments=300, vectors=6)
    assert sigma[0] == pytest.approx(expected, abs=0.08)


def test_weak_disorder_keeps_the_plateau_strong_disorder_leaves_it(square):
    # Common practice, no single number (see tests/test_marker.py).
    scenario, flake = square
    ef = _gap_middle(scenario, 1)
    sites = flake.central(0.4)
    weak = hall_conductivity_kpm(flake.with_disorder(0.4, seed=1), [ef], sites=sites, moments=300, vectors=6)
    strong = hall_conductivity_kpm(flake.with_disorder(12.0, seed=1), [ef], sites=sites, moments=300, vectors=6)
    assert weak[0] == pytest.approx(1.0, abs=0.08)
    assert abs(strong[0] - 1.0) > 0.3


def test_bad_arguments_are_refused(square):
    _, flake = square
    with pytest.raises(ValueError, match="expected moments >= 8"):
        hall_conductivity_kpm(flake, [0.0], sites=[0], moments=4, vectors=1)
