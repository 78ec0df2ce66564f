"""Acceptance checks of a whole run: bulk Chern numbers, edge modes, Hall response.

Every check goes through `topoedge.workflows.run.run_scenario` with scenarios
validated by `topoedge.scenario.parse_scenario`, as ``topoedge run`` does, and
compares the summary with a published or exactly known result:

- D. J. Thouless, M. Kohmoto, M. P. Nightingale, M. den Nijs, Phys. Rev. Lett.
  49, 405 (1982) (TKNN): at flux p/q the Chern sum below gap r is t_r, the
  solution of r = q s_r + p t_r with |t_r| <= q/2.
- Y. Hatsugai, Phys. Rev. Lett. 71, 3697 (1993): the net number of edge modes
  of one edge in gap r is that same t_r (bulk-edge correspondence); the edge
  states are found from the transfer matrix of Harper's equation.
- D. R. Hofstadter, Phys. Rev. B 14, 2239 (1976): Harper's equation of the
  square lattice in a field, used below for the decay length of edge states.
- CODATA / SI 2019: h and e are exact, so R_K = h/e^2 = 25812.80745930... ohm.

Ribbons are at least 10 q rows and 8 magnetic lengths wide, and wider where
the edge states decay slowly (see `decay_length`). ``chern.refine`` is off
unless a check needs it, and the ribbon spectrum (only drawn in a figure) uses
few momenta.
"""

from __future__ import annotations

import json
import math
import time

import numpy as np
import pytest
import scipy.constants as const

import topoedge.workflows as pipeline
from topoedge.solvers.chern import GapClosedError
from topoedge.scenario import parse_scenario
from topoedge.workflows import run_scenario

# ---------------------------------------------------------------- helpers


def scenario(flux: str, *, width: int, spin: bool = False, zeeman: float = 0.0, gap=None,
             energy=None, edge=None, refine: bool = False, edge_k: int = 200):
    """A validated scenario for the square-lattice ribbon with flux ``flux``."""
    data = {
        "lattice": {"flux": flux},
        "spin": {"enabled": spin, "zeeman": zeeman},
        "ribbon": {"width": width, "edge": edge or {"profile": "none"}},
        "spectrum": {"k_points": 16},
        "fermi": {k: v for k, v in (("gap", gap), ("energy", energy)) if v is not None},
        "chern": {"refine": refine},
        "edges": {"k_points": edge_k},
    }
    return parse_scenario(data)


def tknn(p: int, q: int, r: int) -> int:
    """t_r of r = q s_r + p t_r with |t_r| <= q/2 (TKNN, PRL 49, 405).

    Unique for every open gap; the centre gap r = q/2 of even q (where both
    +q/2 and -q/2 solve it) is closed and never asked for.
    """
    sols = [t for t in range(-(q // 2), q // 2 + 1) if (r - p * t) % q == 0]
    assert len(sols) == 1, (p, q, r, sols)
    return sols[0]


def decay_length(p: int, q: int, energy: float, k_points: int = 256) -> float:
    """Longest decay length (rows) of a state at ``energy`` in a gap, spinless, t = 1.

    Harper's equation across the ribbon (Hofstadter, PRB 14, 2239) in the
    Landau gauge with momentum k along the ribbon::

        -psi[y+1] - psi[y-1] - 2 cos(k - 2 pi p y / q) psi[y] = E psi[y]

    Its transfer matrix over one magnetic period of q rows has determinant 1
    and, for E in a gap, eigenvalues lambda, 1/lambda with |lambda| > 1: a
    state at E decays by |lambda| every q rows (Hatsugai, PRL 71, 3697). The
    slowest decay over all k (sampled; the sign of k and p does not matter)
    bounds the extent of every edge mode at E. Two edges a few decay lengths
    apart hybridise and the count of either is meaningless.
    """
    k = np.linspace(0.0, 2 * np.pi, k_points, endpoint=False)
    m = np.broadcast_to(np.eye(2), (k_points, 2, 2))
    for y in range(q):
        step = np.zeros((k_points, 2, 2))
        step[:, 0, 0] = -(energy + 2 * np.cos(k - 2 * np.pi * p * y / q))
        step[:, 0, 1] = -1.0
        step[:, 1, 0] = 1.0
        m = step @ m
    trace = np.abs(np.trace(m, axis1=1, axis2=2))
    assert trace.min() > 2, f"E = {energy} t is not in a gap of flux {p}/{q}"
    lam = 0.5 * (trace + np.sqrt(trace**2 - 4))
    return float(q / np.log(lam).min())


def orbit(p: int, q: int, r: int) -> set:
    """A gap and its images under field reversal (p -> q - p) and E -> -E (r -> q - r)."""
    return {(p, q, r), (q - p, q, r), (p, q, q - r), (q - p, q, q - r)}


def mode_signs(edge: dict) -> list[int]:
    return [1 if m["velocity"] > 0 else -1 for m in edge["modes"]]


def is_int(x) -> bool:
    return isinstance(x, int) and not isinstance(x, bool)


def is_real(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


# ------------------------------------------------- shared runs (flux 1/20)

# Flux 1/20 with a Zeeman splitting of 0.1 t, well below the cyclotron gap
# hbar omega_c = 4 pi t / 20 = 0.63 t: the lowest Landau level splits into
# spin up (shifted by -Delta/2, below) and spin down; filling 1 is the gap
# above spin up only, filling 2 the gap above both. W = 204 rows is 10 q + 4
# and about 115 magnetic lengths (l_B = a / sqrt(2 pi / 20) = 1.78 a).
FLUX20 = dict(flux="1/20", width=204, spin=True, zeeman=0.1)


@pytest.fixture(scope="module")
def flux20():
    """Hard-wall runs at filling 1 and 2, by ``fermi.gap``."""
    return {gap: run_scenario(scenario(**FLUX20, gap=gap)) for gap in (1, 2)}


# ------------------------------------------------- 1. JSON contract


def check_edge(edge: dict, *, spinful: bool) -> None:
    assert is_int(edge["net"]) and is_int(edge["counter_pairs"]) and edge["counter_pairs"] >= 0
    assert isinstance(edge["modes"], list)
    for mode in edge["modes"]:
        assert {"k", "velocity", "y", "spin"} <= mode.keys()
        assert all(is_real(mode[key]) for key in ("k", "velocity", "y")), mode
        assert mode["spin"] in (("up", "down") if spinful else (None,)), mode
    # net and pairs describe the listed modes: |net| + 2 pairs of them
    assert len(edge["modes"]) == abs(edge["net"]) + 2 * edge["counter_pairs"]
    assert sum(mode_signs(edge)) == edge["net"]
    if spinful:
        assert edge["by_spin"].keys() == {"up", "down"}
        for spin, part in edge["by_spin"].items():
            assert part.keys() >= {"net", "counter_pairs"}
            assert is_int(part["net"]) and is_int(part["counter_pairs"]) and part["counter_pairs"] >= 0
            signs = [1 if m["velocity"] > 0 else -1 for m in edge["modes"] if m["spin"] == spin]
            assert part["net"] == sum(signs)
    else:
        assert edge["by_spin"] == {}


def check_contract(summary, *, spinful: bool) -> dict:
    """Keys and types of the summary, as a consumer reads them from summary.json."""
    # Strict JSON (RFC 8259 has no NaN or Infinity): the records' own
    # dictionary must not need them (the file writer would make them null).
    text = json.dumps(summary.to_dict(), allow_nan=False)
    doc = json.loads(text)
    bulk = doc["bulk"]
    assert isinstance(bulk["bands"], list) and bulk["bands"]
    for n, band in enumerate(bulk["bands"]):
        assert {"index", "spin", "chern", "energy_min", "energy_max"} <= band.keys()
        assert band["index"] == n
        assert band["spin"] in (("up", "down") if spinful else (None,))
        assert band["chern"] is None or is_int(band["chern"])
        assert is_real(band["energy_min"]) and is_real(band["energy_max"])
        assert band["energy_min"] <= band["energy_max"]
    assert is_int(bulk["chern_below_fermi"])
    assert is_real(doc["fermi"]["energy"])
    for side in ("bottom", "top"):
        check_edge(doc["edges"][side], spinful=spinful)
    hall = doc["hall"]
    assert is_int(hall["sigma_xy"])
    assert hall["r_xy_ohm"] is None if hall["sigma_xy"] == 0 else is_real(hall["r_xy_ohm"])
    assert isinstance(doc["check"]["bulk_edge_agree"], bool)
    return doc


def test_summary_json_contract_spinful(flux20):
    for result in flux20.values():
        doc = check_contract(result.summary, spinful=True)
        assert doc["bulk"]["spin_chern_below_fermi"].keys() == {"up", "down"}


def test_summary_json_contract_spinless_and_zero_chern():
    # E_F below the whole spectrum (the lowest band of flux 1/3 starts at
    # -1 - sqrt(3) t, Chambers' relation): C = 0, no modes, an infinite gap
    # edge and an infinite Hall resistance must still give strict JSON.
    result = run_scenario(scenario("1/3", width=34, energy=-5.0))
    doc = check_contract(result.summary, spinful=False)
    assert doc["bulk"]["chern_below_fermi"] == 0
    assert doc["fermi"]["gap_window"][0] is None
    assert doc["edges"]["bottom"]["modes"] == [] and doc["edges"]["top"]["modes"] == []
    assert doc["hall"]["sigma_xy"] == 0 and doc["hall"]["r_xy_ohm"] is None
    assert doc["check"]["bulk_edge_agree"] is True


# ------------------------------------------------- 2. Hall resistance

# R_K = h/e^2 with h = 6.62607015e-34 J s and e = 1.602176634e-19 C, both
# exact in the SI since 2019 (CODATA): 25812.80745930... ohm.
VON_KLITZING_OHM = 25812.80745930


@pytest.mark.parametrize("gap", [1, 2], ids=["C=1", "C=2"])
def test_hall_resistance_is_h_over_c_e2(flux20, gap):
    # R_xy = -1/sigma_xy (rho_xy at sigma_xx = 0, common practice): the
    # positive lattice flux 1/20 is a field along -z for electrons, so
    # sigma_xy = +C e^2/h and R_xy = -h/(C e^2).
    hall = flux20[gap].summary.to_dict()["hall"]
    c = flux20[gap].summary.to_dict()["bulk"]["chern_below_fermi"]
    assert c == gap
    assert hall["sigma_xy"] == c  # units of e^2/h
    assert hall["r_xy_ohm"] == pytest.approx(-const.h / (c * const.e**2), rel=1e-12, abs=0)
    assert -c * hall["r_xy_ohm"] == pytest.approx(VON_KLITZING_OHM, rel=1e-12, abs=0)


# ------------------------------------------------- 3. TKNN through the pipeline

# Ribbon width (rows) per decay length of the slowest edge state at E_F: at
# 10 q + 4 rows the modes of the two edges of a few small gaps overlap (for
# example flux 5/12, gap 1: decay length 33 rows, 124 rows wide: 2 modes per
# edge instead of 5); 6 decay lengths separates them in every gap below.
WIDTH_PER_DECAY = 6
# Gaps whose edge states decay over more than this many rows are checked for
# their bulk Chern number only: a wide enough ribbon takes 30 s or more each.
MAX_DECAY = 60
# The gaps beyond MAX_DECAY: flux 2/9 gap 1 (gap 2.3e-3 t, decay length 114
# rows) and flux 2/11 gap 1 (gap 2.5e-4 t, 393 rows), with their images.
LONG_DECAY = orbit(2, 9, 1) | orbit(2, 11, 1)
# Hard walls give no counter-propagating pair in most gaps, but in these the
# edge dispersion turns back inside the gap, so E_F (mid-gap) crosses it
# 2 n + 1 times for n pairs: (p, q, r) -> n on each edge. Found by this sweep
# (independent of the width once it exceeds 6 decay lengths);
# `test_hard_wall_counter_pair_is_real` recounts the first by direct
# diagonalisation.
HARD_WALL_PAIRS = {
    **{g: 1 for g in orbit(1, 7, 3) | orbit(2, 9, 3) | orbit(2, 11, 5) | orbit(4, 11, 2)
       | orbit(5, 12, 4)},
    **{g: 2 for g in orbit(2, 11, 3)},
}


def hard_wall_run(p: int, q: int, r: int, width: int):
    return run_scenario(scenario(f"{p}/{q}", width=width, gap=r))


@pytest.mark.parametrize("q", [pytest.param(q, marks=pytest.mark.slow) if q >= 7 else q for q in range(2, 13)],
                         ids=lambda q: f"q={q}")
def test_tknn_bulk_and_edges_for_every_open_gap(q):
    # TKNN (PRL 49, 405) for the bulk and Hatsugai (PRL 71, 3697) for the
    # edges: spinless hard-wall ribbons, every coprime p/q with 0 < p < q and
    # every open gap r (the centre gap of even q is closed).
    start = time.perf_counter()
    failures, widened = [], []
    for p in range(1, q):
        if math.gcd(p, q) != 1:
            continue
        for r in range(1, q):
            if 2 * r == q:
                continue
            t = tknn(p, q, r)
            width = 10 * q + 4
            result = hard_wall_run(p, q, r, width)
            s = result.summary.to_dict()
            if s["bulk"]["chern_below_fermi"] != t:
                failures.append(f"{p}/{q} gap {r}: bulk C = {s['bulk']['chern_below_fermi']}, TKNN {t}")
            xi = decay_length(p, q, result.fermi_energy)
            if (p, q, r) in LONG_DECAY:
                assert xi > MAX_DECAY, (p, q, r, xi)
                continue
            assert xi <= MAX_DECAY, f"{p}/{q} gap {r}: decay length {xi:.0f} rows; add it to LONG_DECAY"
            if WIDTH_PER_DECAY * xi > width:
                width = math.ceil(WIDTH_PER_DECAY * xi)
                widened.append((p, q, r, width))
                s = hard_wall_run(p, q, r, width).summary.to_dict()
            e = s["edges"]
            bottom, top = e["bottom"], e["top"]
            pairs = HARD_WALL_PAIRS.get((p, q, r), 0)
            ok = (bottom["net"] == t and top["net"] == -t and s["check"]["bulk_edge_agree"] is True
                  and bottom["counter_pairs"] == pairs and top["counter_pairs"] == pairs
                  and e["bulk"] == [] and e["in_gap"])
            if not ok:
                failures.append(
                    f"{p}/{q} gap {r} (W = {width}): t_r = {t}; bottom net {bottom['net']} "
                    f"pairs {bottom['counter_pairs']}, top net {top['net']} pairs {top['counter_pairs']} "
                    f"(expected pairs {pairs}), agree {s['check']['bulk_edge_agree']}, {e['message']}"
                )
    print(f"q = {q}: {time.perf_counter() - start:.1f} s; widened (p, q, r, W): {widened}")
    assert not failures, "\n".join(failures)


def test_hard_wall_counter_pair_is_real():
    # Flux 1/7, gap 3 (TKNN t_3 = 3): recount the modes of each edge without
    # the edge-mode search, from eigenstates on a fine momentum grid. In the
    # gap every state is an edge state and each edge has at most one per k
    # (Hatsugai, PRL 71, 3697), so E_n(k) - E_F of the states near E_F, split
    # by <y>, changes sign once per crossing. A state moves by at most
    # 2 t * dk = 0.006 t per grid step, far less than the window (+-0.14 t),
    # so no sign change is one state leaving the window and another entering.
    result = hard_wall_run(1, 7, 3, 74)
    ham, ef, gap = result.hamiltonian, result.fermi_energy, result.gap
    k = np.linspace(-np.pi, np.pi, 2001)  # both ends: the last interval closes the loop
    energies, y = [], []
    for chunk in np.array_split(k, 8):
        e, v = np.linalg.eigh(ham.bloch(chunk))
        energies.append(e)
        y.append(np.einsum("kin,i->kn", np.abs(v) ** 2, ham.position))
    energies, y = np.concatenate(energies), np.concatenate(y)
    near = np.abs(energies - ef) < 0.45 * (gap.energy_max - gap.energy_min)
    middle = ham.position.mean()
    direct = {}
    for side, mask in (("bottom", near & (y < middle)), ("top", near & (y > middle))):
        assert mask.sum(axis=1).max() == 1  # one edge state per k and edge
        f = np.where(mask, energies - ef, 0.0).sum(axis=1)
        has = mask.any(axis=1)
        both = has[:-1] & has[1:]
        change = both & (np.sign(f[:-1]) != np.sign(f[1:]))
        direct[side] = sorted(np.sign(f[1:] - f[:-1])[change].astype(int).tolist())
    for side in ("bottom", "top"):
        edge = result.summary.to_dict()["edges"][side]
        assert sorted(mode_signs(edge)) == direct[side]
    assert direct["bottom"] == [-1, 1, 1, 1, 1]  # net 3, one counter-propagating pair
    assert direct["top"] == [-1, -1, -1, -1, 1]


# ------------------------------------------------- 4. reversing the field

REVERSAL_CASES = {
    "1/3 gap 1": dict(flux="1/3", width=34, gap=1),
    "2/5 gap 2": dict(flux="2/5", width=54, gap=2),
    "1/7 gap 3 (counter pair)": dict(flux="1/7", width=74, gap=3),
    "3/8 gap 3": dict(flux="3/8", width=84, gap=3),
    "1/6 spin, Zeeman, gap 4": dict(flux="1/6", width=64, spin=True, zeeman=0.1, gap=4),
}


@pytest.mark.parametrize("case", REVERSAL_CASES.values(), ids=REVERSAL_CASES.keys())
def test_reversing_the_field_flips_chern_and_chirality(case):
    # Time reversal (complex conjugation, a standard symmetry argument) maps
    # the model at flux phi to flux -phi with the same spectrum and k -> -k:
    # Hall conductance and every edge chirality change sign.
    flux = case["flux"]
    fwd = run_scenario(scenario(**case)).summary.to_dict()
    rev = run_scenario(scenario(**{**case, "flux": "-" + flux})).summary.to_dict()
    c = fwd["bulk"]["chern_below_fermi"]
    assert c != 0
    assert rev["bulk"]["chern_below_fermi"] == -c
    assert rev["fermi"]["energy"] == pytest.approx(fwd["fermi"]["energy"], abs=1e-12)
    assert rev["hall"]["sigma_xy"] == -fwd["hall"]["sigma_xy"]
    if fwd["bulk"]["spin_chern_below_fermi"] is not None:
        assert rev["bulk"]["spin_chern_below_fermi"] == {
            s: -v for s, v in fwd["bulk"]["spin_chern_below_fermi"].items()}
    for side in ("bottom", "top"):
        a, b = fwd["edges"][side], rev["edges"][side]
        assert b["net"] == -a["net"]
        assert b["counter_pairs"] == a["counter_pairs"]
        assert sorted(mode_signs(b)) == sorted(-s for s in mode_signs(a))
        for spin in a["by_spin"]:
            assert b["by_spin"][spin]["net"] == -a["by_spin"][spin]["net"]
        # the crossings move to -k (modulo 2 pi)
        ka = np.sort(np.angle(np.exp(-1j * np.array([m["k"] for m in a["modes"]]))))
        kb = np.sort(np.angle(np.exp(1j * np.array([m["k"] for m in b["modes"]]))))
        np.testing.assert_allclose(kb, ka, atol=1e-8)
    assert rev["check"]["bulk_edge_agree"] is True and fwd["check"]["bulk_edge_agree"] is True


# ------------------------------------------------- 5. Zeeman-split Landau level


def test_filling_one_is_one_spin_up_mode_per_edge(flux20):
    # Landau levels at small flux with a Zeeman splitting below the cyclotron
    # gap: filling 1 fills the spin-up branch of the lowest level, C = 1
    # carried by spin up (TKNN t_1 = 1 at flux 1/20; Hatsugai for the edges).
    s = flux20[1].summary.to_dict()
    assert s["bulk"]["chern_below_fermi"] == 1
    assert s["bulk"]["spin_chern_below_fermi"] == {"up": 1, "down": 0}
    for side, sign in (("bottom", 1), ("top", -1)):
        edge = s["edges"][side]
        assert [m["spin"] for m in edge["modes"]] == ["up"]
        assert mode_signs(edge) == [sign]
        assert edge["net"] == sign and edge["counter_pairs"] == 0
        assert edge["by_spin"] == {"up": {"net": sign, "counter_pairs": 0},
                                   "down": {"net": 0, "counter_pairs": 0}}
    assert s["check"]["bulk_edge_agree"] is True
    assert s["check"]["spin_resolved_agree"] is True


def test_filling_two_is_one_mode_per_spin_and_edge(flux20):
    s = flux20[2].summary.to_dict()
    assert s["bulk"]["chern_below_fermi"] == 2
    assert s["bulk"]["spin_chern_below_fermi"] == {"up": 1, "down": 1}
    for side, sign in (("bottom", 1), ("top", -1)):
        edge = s["edges"][side]
        assert sorted(m["spin"] for m in edge["modes"]) == ["down", "up"]
        assert mode_signs(edge) == [sign, sign]
        assert edge["net"] == 2 * sign and edge["counter_pairs"] == 0
        assert edge["by_spin"] == {"up": {"net": sign, "counter_pairs": 0},
                                   "down": {"net": sign, "counter_pairs": 0}}
    assert s["check"]["spin_resolved_agree"] is True
    # The filling-1 and filling-2 runs see the same bulk bands.
    assert flux20[1].summary.to_dict()["bulk"]["bands"] == s["bulk"]["bands"]


# ------------------------------------------------- 6. linear-ramp edges


@pytest.mark.parametrize("ramp", [0, 4, 10, 20], ids=lambda w: f"w={w}")
def test_ramp_keeps_net_chirality_equal_to_chern(ramp, record_property):
    # Bulk-edge correspondence (Hatsugai, PRL 71, 3697): a smooth confining
    # potential may add counter-propagating pairs, never change the net count.
    # Filling 2 of flux 1/20 with Zeeman 0.1 t, ramp of height 1 t.
    edge = {"profile": "linear", "width": float(ramp), "height": 1.0}
    s = run_scenario(scenario(**FLUX20, gap=2, edge=edge)).summary.to_dict()
    c = s["bulk"]["chern_below_fermi"]
    assert c == 2
    assert s["edges"]["bottom"]["net"] == c
    assert s["edges"]["top"]["net"] == -c
    for spin, cs in s["bulk"]["spin_chern_below_fermi"].items():
        assert s["edges"]["bottom"]["by_spin"][spin]["net"] == cs
        assert s["edges"]["top"]["by_spin"][spin]["net"] == -cs
    assert s["edges"]["bulk"] == []
    assert s["check"]["bulk_edge_agree"] is True
    pairs = {side: s["edges"][side]["counter_pairs"] for side in ("bottom", "top")}
    assert all(is_int(n) and n >= 0 for n in pairs.values())
    record_property("counter_pairs", pairs)
    print(f"ramp w = {ramp}: counter-propagating pairs {pairs}; modes (spin, y) "
          f"{[(m['spin'], round(m['y'], 1)) for m in s['edges']['bottom']['modes']]}")


# ------------------------------------------------- 7. E_F not in an open gap


@pytest.fixture
def no_ribbon(monkeypatch):
    """Fail if the ribbon is built: a refused E_F must stop the run before it."""
    def refuse(*args, **kwargs):
        raise AssertionError("the ribbon was built although E_F is not in an open gap")

    monkeypatch.setattr("topoedge.workflows.run.build_ribbon", refuse)


def test_fermi_energy_in_a_band_is_refused(no_ribbon):
    # Flux 1/3 (Chambers' relation): the lowest band spans [-1 - sqrt(3), -2] t.
    message = r"E_F = -2\.4 t lies inside bulk band 0 \(-2\.73205 \.\. -2 t\)"
    with pytest.raises(GapClosedError, match=message):
        run_scenario(scenario("1/3", width=34, energy=-2.4))


def test_fermi_energy_in_a_spin_band_names_the_spin(no_ribbon):
    # Flux 1/20, Zeeman 0.1 t: the lowest band is the spin-up branch of the
    # lowest Landau level, near -4 + 2 pi / 20 - 0.05 = -3.74 t; use its middle.
    bands = pipeline.bulk_chern(scenario(**FLUX20, gap=1))[0].bands
    middle = 0.5 * (bands[0].energy_min + bands[0].energy_max)
    with pytest.raises(GapClosedError, match=r"inside bulk band 0, spin up"):
        run_scenario(scenario(**FLUX20, energy=middle))


def test_closed_gap_is_refused(no_ribbon):
    # Flux 1/4: the two centre bands touch at E = 0 (Dirac points; TKNN: the
    # centre gap of even q is closed), so gap 2 does not exist.
    with pytest.raises(GapClosedError, match=r"fermi\.gap = 2: the gap above band 1 is closed"):
        run_scenario(scenario("1/4", width=44, gap=2))


# ------------------------------------------------- 8. refined-grid check


def test_refined_grid_is_one_and_a_half_times_finer_and_agrees():
    # Link-variable Chern numbers (Fukui, Hatsugai, Suzuki, JPSJ 74, 1674) are
    # integers that stop changing once the grid resolves the Berry curvature;
    # the run repeats them on a 1.5 times finer grid and reports agreement.
    s = run_scenario(scenario("1/6", width=64, gap=1, refine=True)).summary.to_dict()
    grid = s["bulk"]["grid"]
    assert s["bulk"]["refined_grid"] == [math.ceil(1.5 * n) for n in grid]
    assert s["bulk"]["converged"] is True
    assert [(g["below"], g["chern"]) for g in s["bulk"]["refined_gaps"]] == \
        [(g["below"], g["chern"]) for g in s["bulk"]["gaps"]]
    assert s["bulk"]["chern_below_fermi"] == tknn(1, 6, 1)

    plain = run_scenario(scenario("1/6", width=64, gap=1)).summary.to_dict()
    assert plain["bulk"]["refined_grid"] is None and plain["bulk"]["converged"] is None
