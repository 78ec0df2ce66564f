"""Edge-potential profiles: the formulas documented in topoedge.models.profiles."""

import numpy as np
import pytest
from scipy.special import erfc

from topoedge.models.profiles import EDGE_PROFILES, edge_potential


def test_linear_ramp_rises_over_w_sites_to_v0_at_both_edges():
    v = edge_potential(20, "linear", ramp=4, height=2.0)
    np.testing.assert_allclose(v[:5], [2.0, 1.5, 1.0, 0.5, 0.0], rtol=0, atol=1e-15)
    np.testing.assert_array_equal(v[5:15], 0.0)
    np.testing.assert_array_equal(v, v[::-1])  # the same ramp on the top edge


@pytest.mark.parametrize("profile", ["linear", "tanh", "erf"])
def test_zero_width_is_the_hard_wall(profile):
    np.testing.assert_array_equal(edge_potential(10, profile, ramp=0.0, height=3.0), 0.0)


def test_smooth_ramps_follow_their_formulas():
    d = np.arange(8.0)
    np.testing.assert_allclose(edge_potential(30, "tanh", ramp=6, height=1.5)[:8],
                               1.5 * (1 - np.tanh(2 * d / 6)), rtol=1e-14)
    np.testing.assert_allclose(edge_potential(30, "erf", ramp=6, height=1.5)[:8],
                               1.5 * erfc(2 * d / 6), rtol=1e-14)


def test_table_is_interpolated_and_held_beyond_its_end():
    v = edge_potential(12, "table", table=[[0, 1.0], [2, 0.2], [4, 0.0]])
    np.testing.assert_allclose(v[:6], [1.0, 0.6, 0.2, 0.1, 0.0, 0.0], rtol=0, atol=1e-15)
    np.testing.assert_array_equal(v, v[::-1])


def test_unknown_profile_names_the_choices():
    with pytest.raises(ValueError, match="expected one of"):
        edge_potential(10, "cosine")
    assert set(EDGE_PROFILES) == {"none", "linear", "tanh", "erf", "table"}


def test_negative_height_is_an_attractive_edge():
    # Each row takes the profile at its distance from the nearer edge, so a
    # negative V0 is kept (regression: combining the edges with max() dropped it).
    v = edge_potential(20, "linear", ramp=4, height=-2.0)
    np.testing.assert_allclose(v[:5], [-2.0, -1.5, -1.0, -0.5, 0.0], rtol=0, atol=1e-15)
    np.testing.assert_array_equal(v, v[::-1])
