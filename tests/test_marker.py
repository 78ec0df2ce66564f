"""The local Chern marker of finite flakes against outside references.

References: R. Bianco and R. Resta, PRB 84, 241106(R) (2011) (the marker
and its bulk average); D. J. Thouless, M. Kohmoto, M. P. Nightingale,
M. den Nijs, PRL 49, 405 (1982) (gap Chern numbers of the square lattice at
flux p/q from r = q s_r + p t_r); F. D. M. Haldane, PRL 61, 2015 (1988)
(|C| = 1 for |M| < 3 sqrt(3) |t2 sin phi|, 0 outside); X.-L. Qi, Y.-S. Wu,
S.-C. Zhang, PRB 74, 085308 (2006) (|C| = 1 for 0 < |m| < 2, 0 for |m| > 2).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from topoedge.models.flakes import flake_builder
from topoedge.models.lattices import lattice
from topoedge.scenario import parse_scenario, resolve
from topoedge.solvers.chern import chern_numbers
from topoedge.solvers.marker import flake_eigen, local_chern_marker, marker_average
from topoedge.systems.flake import Flake
from topoedge.workflows.build import build_bulk, params_of

warnings.filterwarnings("ignore", message="MUMPS is not available")


def _flake(data: dict, size: float):
    scenario = resolve(parse_scenario(data)).scenario
    entry = lattice(scenario.lattice.kind)
    fsyst = flake_builder(entry.flake_plane(scenario.lattice, scenario.spin), size).finalized()
    return scenario, Flake.from_kwant(fsyst, params_of(scenario), site_area=entry.site_area)


def _tknn(p: int, q: int, r: int) -> int:
    """t_r of r = q s_r + p t_r with |t_r| <= q/2 (TKNN 1982), by search."""
    return next(t for t in range(-(q // 2), q // 2 + 1) if (r - p * t) % q == 0)


def _gap_middle(scenario, r: int) -> float:
    gap = chern_numbers(build_bulk(scenario), grid=(16, 16)).gap_above(r)
    return gap.middle


@pytest.mark.parametrize("p, q, gaps", [(1, 3, [1]), (1, 5, [1, 2]), (2, 5, [2, 3]), (2, 9, [4, 5]),
                                        (3, 10, [3, 4]), (5, 12, [2]), (1, 12, [1, 2, 3])])
def test_bulk_marker_is_the_tknn_chern_number(p, q, gaps):
    # Deep inside a 34 x 34 flake the marker averages to the TKNN integer of
    # every gap at least 0.3 t wide, C from -2 to 3 (within 0.06; the
    # deviation shrinks with size, next test; narrow gaps need flakes larger
    # than their localisation length).
    scenario, flake = _flake({"lattice": {"flux": f"{p}/{q}"}, "spin": {"enabled": False}}, 34)
    eigen = flake_eigen(flake)
    for r in gaps:
        marker = local_chern_marker(flake, _gap_middle(scenario, r), eigen=eigen)
        mean, _ = marker_average(marker, flake, 0.3)
        assert mean == pytest.approx(_tknn(p, q, r), abs=0.06), (p, q, r, mean)


def test_bulk_deviation_shrinks_with_the_flake():
    devs = []
    for size in (14, 22, 34):
        scenario, flake = _flake({"lattice": {"flux": "1/5"}, "spin": {"enabled": False}}, size)
        mean, _ = marker_average(local_chern_marker(flake, _gap_middle(scenario, 2)), flake, 0.3)
        devs.append(abs(mean - _tknn(1, 5, 2)))
    assert devs[2] < devs[0] and devs[2] < 0.05, devs


@pytest.mark.parametrize("data", [
    {"lattice": {"flux": "1/4"}, "spin": {"enabled": True, "zeeman": 0.3}},
    {"lattice": {"kind": "honeycomb", "flux": "1/7"}, "spin": {"enabled": False}},
    {"lattice": {"kind": "haldane", "t2": 0.1, "t2_phase": 1.2, "staggered": 0.1}},
    {"lattice": {"kind": "qwz", "mass": -1.2}},
], ids=["square-spin", "honeycomb", "haldane", "qwz"])
def test_trace_over_the_whole_flake_vanishes(data):
    # sum_i c(i) = (4 pi/A) Im Tr(P x Q y P) = 0 exactly in finite dimension:
    # Tr(P x P y) = Tr(P y P x) by cyclicity, x and y commute (common
    # practice, no source; the property the bulk average compensates at the
    # boundary, Bianco and Resta 2011). Also with disorder.
    _, flake = _flake(data, 14)
    for f in (flake, flake.with_disorder(1.0, seed=3)):
        marker = local_chern_marker(f, 0.0 if data["lattice"].get("kind") in ("haldane", "qwz") else -2.5)
        assert abs(marker.sum()) < 1e-9 * f.sites
        assert np.abs(marker).max() > 0.1           # not vanishing site by site


@pytest.mark.parametrize("data, expected", [
    ({"lattice": {"kind": "haldane", "t2": 0.1, "t2_phase": np.pi / 2, "staggered": 0.2}}, -1),   # 0.2 < 0.52
    ({"lattice": {"kind": "haldane", "t2": 0.1, "t2_phase": -np.pi / 2, "staggered": 0.2}}, 1),
    ({"lattice": {"kind": "haldane", "t2": 0.1, "t2_phase": np.pi / 2, "staggered": 0.8}}, 0),    # 0.8 > 0.52
    ({"lattice": {"kind": "qwz", "mass": 1.0}}, 1),
    ({"lattice": {"kind": "qwz", "mass": -1.0}}, -1),
    ({"lattice": {"kind": "qwz", "mass": 3.0}}, 0),
], ids=["haldane+", "haldane-", "haldane-trivial", "qwz+", "qwz-", "qwz-trivial"])
def test_zero_field_models(data, expected):
    # |C| from the phase diagrams of Haldane (1988) and Qi-Wu-Zhang (2006);
    # the sign is the project's (the bulk link-variable Chern number, also
    # asserted here).
    scenario, flake = _flake(data, 20)
    bulk = chern_numbers(build_bulk(scenario), grid=(24, 24)).gap_at(0.0)
    assert bulk.chern == expected
    mean, _ = marker_average(local_chern_marker(flake, 0.0), flake, 0.3)
    assert mean == pytest.approx(expected, abs=0.05)


def test_honeycomb_in_a_field():
    scenario, flake = _flake({"lattice": {"kind": "honeycomb", "flux": "1/10"}, "spin": {"enabled": False}}, 26)
    bulk = chern_numbers(build_bulk(scenario), grid=(20, 20))
    eigen = flake_eigen(flake)
    for r in (1, 2):
        gap = bulk.gap_above(r)
        mean, _ = marker_average(local_chern_marker(flake, gap.middle, eigen=eigen), flake, 0.3)
        assert mean == pytest.approx(gap.chern, abs=0.05)


def test_disorder_well_below_the_gap_keeps_the_plateau_and_strong_disorder_leaves_it():
    # Common practice, no single number: the marker stays quantised for
    # disorder well below the gap (flux 1/5, gap above the lowest band about
    # 1 t wide) and leaves the plateau for disorder of the order of the
    # bandwidth of the whole Landau-level set (8 t).
    scenario, flake = _flake({"lattice": {"flux": "1/5"}, "spin": {"enabled": False}}, 22)
    ef = _gap_middle(scenario, 1)
    weak = [marker_average(local_chern_marker(flake.with_disorder(0.4, seed=s), ef), flake, 0.3)[0]
            for s in range(3)]
    strong = [marker_average(local_chern_marker(flake.with_disorder(12.0, seed=s), ef), flake, 0.3)[0]
              for s in range(3)]
    assert np.mean(weak) == pytest.approx(1.0, abs=0.05)
    assert abs(np.mean(strong) - 1.0) > 0.3


def test_disorder_is_reproducible_and_checked():
    _, flake = _flake({"lattice": {"flux": "1/5"}, "spin": {"enabled": True}}, 8)
    a, b = flake.with_disorder(1.0, seed=7), flake.with_disorder(1.0, seed=7)
    assert (a.hamiltonian != b.hamiltonian).nnz == 0
    d = (a.hamiltonian - flake.hamiltonian).diagonal().real
    assert np.allclose(d[0::2], d[1::2]) and np.all(np.abs(d) <= 0.5)   # one energy per site, both spins
    with pytest.raises(ValueError, match="disorder strength must be a finite W >= 0"):
        flake.with_disorder(-1.0, seed=0)


def test_kernel_polynomial_marker_agrees_with_the_dense_projector():
    # KPM (Weisse et al., RMP 78, 275 (2006)) against the dense projector on
    # a small flake: the largest difference over the central sites shrinks
    # with the number of moments and is below 1e-3 at 800.
    from topoedge.solvers.marker import local_chern_marker_kpm

    scenario, flake = _flake({"lattice": {"flux": "1/5"}, "spin": {"enabled": True, "zeeman": 0.2}}, 16)
    ef = _gap_middle(scenario, 2)
    dense = local_chern_marker(flake, ef)
    sites = flake.central(0.4)
    diffs = [np.abs(local_chern_marker_kpm(flake, ef, sites, moments=m) - dense[sites]).max() for m in (60, 800)]
    assert diffs[1] < diffs[0] and diffs[1] < 1e-3, diffs


def test_kernel_polynomial_pieces():
    # The Jackson kernel starts at 1 and decays to ~0 (Weisse et al. 2006,
    # Eq. 71); the damped step coefficients sum to the step at points away
    # from x_F; the projector is idempotent on a small random matrix.
    import scipy.sparse as sp

    from topoedge.solvers.kpm import apply_fermi_projector, jackson_kernel, step_coefficients

    g = jackson_kernel(200)
    assert g[0] == pytest.approx(1.0) and abs(g[-1]) < 1e-3 and np.all(np.diff(g) <= 1e-12)
    c = step_coefficients(400, 0.1)
    for x, expected in ((-0.6, 1.0), (0.7, 0.0)):
        value = np.polynomial.chebyshev.chebval(x, c)
        assert value == pytest.approx(expected, abs=1e-3)
    rng = np.random.default_rng(1)
    a = rng.normal(size=(60, 60)) + 1j * rng.normal(size=(60, 60))
    h = (a + a.conj().T) / 2
    e, v = np.linalg.eigh(h)
    ef = 0.5 * (e[29] + e[30])        # a gap between two levels
    exact = v[:, :30] @ v[:, :30].conj().T
    m = int(40 * (e[-1] - e[0]) / (e[30] - e[29]))
    approx = apply_fermi_projector(sp.csr_matrix(h), np.eye(60), ef, m)
    assert np.abs(approx - exact).max() < 2e-2


def test_marker_benchmark_reports_ratio_difference_and_sizes():
    # The benchmark's own numbers are not checked (shared machines): only
    # that it measures the two routes on the same sites, and they agree.
    from topoedge.workflows.bench_disorder import bench_marker

    r = bench_marker(sizes=(20, 28), dense_size=24, half=3.0)
    assert r["dense"]["largest_difference"] < 1e-2
    assert r["dense"]["central_sites"] >= 36 and [row["size"] for row in r["sizes"]] == [20, 28]
    assert all(row["central_mean"] == pytest.approx(1.0, abs=0.05) for row in r["sizes"])
