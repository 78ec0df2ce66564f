"""The flux-energy spectrum (``topoedge butterfly``) against published results.

References:
- D. J. Thouless, M. Kohmoto, M. P. Nightingale, M. den Nijs, Phys. Rev. Lett.
  49, 405 (1982): for flux p/q the Chern sum below gap r is t_r, the solution
  of r = q s_r + p t_r with |t_r| <= q/2 (TKNN Diophantine equation); the
  tests solve it by search.
- Symmetry flux -> 1 - flux: H(1 - phi) = H(-phi) = H(phi)^* for the square
  lattice with Peierls phases (complex conjugation, the time reversal of the
  orbital motion): same energies, every Chern number negated.
- W. G. Chambers, Phys. Rev. 140, A135 (1965): the Hofstadter bands depend on
  the momenta through cos(q k1) + cos(k2) only, so their extremes lie on the
  butterfly grid.

The spectra are small (q <= 12) and computed with two worker processes, so
the process pool is exercised; nothing here depends on timing.
"""

from __future__ import annotations

import json
import subprocess
import sys
import warnings
from fractions import Fraction
from pathlib import Path

import h5py
import numpy as np
import pytest

from topoedge import cli
from topoedge.outputs.butterfly import BUTTERFLY_FILES
from topoedge.workflows.butterfly import butterfly_fluxes, butterfly_grid, compute_butterfly, mirror_spectrum

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    from topoedge.systems.bloch import BlochHamiltonian
    from topoedge.models.square import bulk_builder, model_params
    from topoedge.solvers.chern import chern_numbers

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
# Energies computed twice from the same matrices (up to complex conjugation
# and k -> -k on a grid mapped onto itself) agree to rounding, ~1e-15 t for
# |E| <= 4 t; 1e-10 t leaves a wide margin and still catches any real change.
ENERGY_TOL = 1e-10
ZEEMAN = 0.1  # t


def tknn(p: int, q: int, r: int) -> int:
    """t_r of r = q s_r + p t_r with |t_r| <= q/2, found by search (unique for the open gaps)."""
    solutions = [t for t in range(-(q // 2), q // 2 + 1) if (r - p * t) % q == 0]
    assert len(solutions) == 1, (p, q, r, solutions)
    return solutions[0]


def open_gaps(q: int) -> list[int]:
    """Gaps r of the spinless model at flux p/q: all but the centre one of even q (bands touch)."""
    return [r for r in range(1, q) if not (q % 2 == 0 and 2 * r == q)]


def direct(flux: Fraction, *, spin: bool, zeeman: float = 0.0):
    """chern_numbers at ``flux`` on the butterfly grid, without the butterfly code."""
    bloch = BlochHamiltonian.from_kwant(bulk_builder(flux, spin=spin),
                                        params=model_params(phi=flux, zeeman=zeeman))
    return chern_numbers(bloch, grid=butterfly_grid(flux.denominator))


@pytest.fixture(scope="module")
def spinless():
    return compute_butterfly(12, spin=False, jobs=2)


@pytest.fixture(scope="module")
def spinful():
    return compute_butterfly(8, spin=True, zeeman=ZEEMAN, jobs=2)


# ---------------------------------------------------------------- physics


def test_fluxes_cover_every_fraction_in_the_unit_interval(spinless):
    expected = sorted({Fraction(p, q) for q in range(1, 13) for p in range(q + 1)})
    assert [e.flux for e in spinless.entries] == expected == butterfly_fluxes(12)
    assert all(e.mirrored == (e.flux > Fraction(1, 2)) for e in spinless.entries)


def test_every_gap_chern_number_solves_the_tknn_equation(spinless):
    # TKNN (PRL 49, 405): below gap r at flux p/q the Chern sum is t_r, for
    # every p/q in (0, 1), including the entries obtained from 1 - p/q.
    checked = 0
    for e in spinless.entries:
        if e.flux in (0, 1):
            continue
        got = {g.below: g.chern for g in e.gaps}
        assert got == {r: tknn(e.p, e.q, r) for r in open_gaps(e.q)}, e.flux
        assert len(e.bands) == e.q
        checked += len(got)
    assert checked > 200  # every flux with q <= 12 contributed


@pytest.mark.parametrize("flux", [Fraction(0), Fraction(1)], ids=str)
def test_zero_and_one_flux_quantum_have_one_band_per_spin_and_no_gap(spinless, spinful, flux):
    # One site per cell: a single cosine band per spin, -4 t .. 4 t (shifted by
    # -+Zeeman/2 per spin), overlapping, so no spectral gap.
    for result, spins in ((spinless, [None]), (spinful, ["up", "down"])):
        entry = result.entry(flux)
        assert [b.spin for b in entry.bands] == spins and entry.gaps == ()
        for band in entry.bands:
            shift = {None: 0.0, "up": -ZEEMAN / 2, "down": ZEEMAN / 2}[band.spin]
            assert band.energy_min == pytest.approx(-4 + shift, abs=ENERGY_TOL)
            assert band.energy_max == pytest.approx(4 + shift, abs=ENERGY_TOL)


@pytest.mark.parametrize("flux", ["7/12", "2/3", "5/7", "9/11", "11/12"])
def test_mirrored_entries_equal_a_direct_computation(spinless, spinful, flux):
    # Symmetry flux -> 1 - flux (complex conjugation): the mirrored entry must
    # be what chern_numbers gives at that flux directly.
    flux = Fraction(flux)
    cases = [(spinless, False, 0.0)] + ([(spinful, True, ZEEMAN)] if flux.denominator <= 8 else [])
    for result, spin, zeeman in cases:
        entry = result.entry(flux)
        assert entry.mirrored
        ref = direct(flux, spin=spin, zeeman=zeeman)
        assert [(b.spin, b.chern) for b in entry.bands] == [(b.spin, b.chern) for b in ref.bands]
        np.testing.assert_allclose([(b.energy_min, b.energy_max) for b in entry.bands],
                                   [(b.energy_min, b.energy_max) for b in ref.bands], rtol=0, atol=ENERGY_TOL)
        assert [(g.below, g.chern, g.spin_chern) for g in entry.gaps] == \
               [(g.below, g.chern, g.spin_chern) for g in ref.gaps]
        np.testing.assert_allclose([(g.energy_min, g.energy_max) for g in entry.gaps],
                                   [(g.energy_min, g.energy_max) for g in ref.gaps], rtol=0, atol=ENERGY_TOL)


def test_mirror_negates_every_chern_number(spinless):
    entry = spinless.entry("2/5")
    image = mirror_spectrum(entry)
    assert image.flux == Fraction(3, 5) and image.mirrored
    assert [g.chern for g in image.gaps] == [-g.chern for g in entry.gaps] == [2, -1, 1, -2]
    assert [b.chern for b in image.bands] == [-b.chern for b in entry.bands]


def test_both_spin_species_appear_with_a_zeeman_term(spinless, spinful):
    # Zeeman Delta: spin up is the spinless spectrum shifted by -Delta/2,
    # spin down by +Delta/2 (S_z conserved), so twice the bands; the gap Chern
    # sum splits into the spin parts, each the TKNN t_r of the bands of that
    # spin below the gap.
    for entry in spinful.entries:
        ref = spinless.entry(entry.flux)
        assert len(entry.bands) == 2 * len(ref.bands)
        for spin, shift in (("up", -ZEEMAN / 2), ("down", ZEEMAN / 2)):
            mine = [(b.energy_min, b.energy_max) for b in entry.bands if b.spin == spin]
            np.testing.assert_allclose(mine, [(b.energy_min + shift, b.energy_max + shift) for b in ref.bands],
                                       rtol=0, atol=ENERGY_TOL)
        for gap in entry.gaps:
            assert sum(gap.spin_chern.values()) == gap.chern
            for spin in ("up", "down"):
                r = sum(b.spin == spin for b in entry.bands[:gap.below])
                if 0 < r < entry.q:
                    assert gap.spin_chern[spin] == tknn(entry.p, entry.q, r), (entry.flux, gap)
                else:
                    assert gap.spin_chern[spin] == 0  # no band or all bands of that spin: C = 0
    # The Zeeman gaps (between the spin-split levels) are there: at 1/8 the
    # gap above the lowest band has C = 1, all of it spin up.
    first = spinful.entry("1/8").gaps[0]
    assert (first.below, first.chern, first.spin_chern) == (1, 1, {"up": 1, "down": 0})


def test_reduced_grid_gives_the_chern_numbers_of_the_full_grid(spinless):
    # The butterfly grid (2q x 8) against chern.default_grid (2q x 2q): the
    # convergence argument of topoedge.workflows.butterfly, checked for q <= 12.
    full = compute_butterfly(12, spin=False, jobs=2, full_grid=True)
    assert full.full_grid and full.entry("1/12").grid == (24, 24)
    for a, b in zip(spinless.entries, full.entries):
        assert a.flux == b.flux
        assert [(g.below, g.chern) for g in a.gaps] == [(g.below, g.chern) for g in b.gaps]


@pytest.mark.parametrize("flux", ["1/4", "3/7", "5/12", "2/9"])
def test_band_edges_lie_on_the_grid(spinless, flux):
    # Chambers: the extremes of every band are at q k1 = 0, pi and k2 = 0, pi,
    # all on the butterfly grid; no momentum off the grid reaches beyond them.
    flux = Fraction(flux)
    entry = spinless.entry(flux)
    bloch = BlochHamiltonian.from_kwant(bulk_builder(flux, spin=False), params=model_params(phi=flux))
    k = np.random.default_rng(3).uniform(0, 2 * np.pi, size=(4000, 2))
    energies = np.linalg.eigvalsh(bloch.at(k[:, 0], k[:, 1]))
    lo = np.array([b.energy_min for b in entry.bands])
    hi = np.array([b.energy_max for b in entry.bands])
    # Tolerance: eigenvalue rounding, ~1e-14 t at these sizes.
    assert np.all(energies >= lo - 1e-12) and np.all(energies <= hi + 1e-12)


def test_bad_arguments():
    with pytest.raises(ValueError, match="q_max must be an integer with 1 <= q_max <= 200, got 0"):
        compute_butterfly(0)
    with pytest.raises(ValueError, match="q_max .* got 201"):
        compute_butterfly(201)
    with pytest.raises(ValueError, match="jobs must be an integer >= 1, got 0"):
        compute_butterfly(3, jobs=0)
    with pytest.raises(ValueError, match="a Zeeman term needs spin"):
        compute_butterfly(3, spin=False, zeeman=0.1)


# ---------------------------------------------------------------- command line


def topoedge_cli(*args, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "topoedge", *map(str, args)],
                          cwd=cwd, capture_output=True, text=True, timeout=300)


def one_error_line(stderr: str, *needles: str) -> None:
    lines = stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("topoedge: error: "), stderr
    for needle in needles:
        assert needle in lines[0], lines[0]


@pytest.mark.slow
def test_cli_writes_the_results_folder_and_prints_only_json(tmp_path):
    out = tmp_path / "fly"
    done = topoedge_cli("butterfly", "--q-max", 6, "--out", out, "--json", "--quiet", "--jobs", 2, cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    assert done.stderr == ""
    summary = json.loads(done.stdout)
    assert sorted(p.name for p in out.iterdir()) == sorted(BUTTERFLY_FILES)
    assert json.loads((out / "summary.json").read_text()) == summary
    assert (out / "butterfly.png").read_bytes()[:8] == PNG_MAGIC
    assert (out / "butterfly.pdf").read_bytes()[:4] == b"%PDF"
    assert summary["q_max"] == 6 and summary["min_gap"] == 0.02 and summary["jobs"] == 2
    # The shipped default scenario has spin and a 0.1 t Zeeman term.
    assert summary["model"] == {"lattice": "square", "spin": True, "zeeman_t": 0.1, "onsite_t": 0.0}
    fluxes = summary["fluxes"]
    assert [f["flux"] for f in fluxes] == [f"{x.numerator}/{x.denominator}" for x in butterfly_fluxes(6)]
    assert all(g["width"] > 0.02 and sum(g["spin_chern"].values()) == g["chern"] for f in fluxes for g in f["gaps"])
    one_third = next(f for f in fluxes if f["flux"] == "1/3")
    # At 1/3 each band (0.73 t wide) is wider than the Zeeman splitting, so
    # the spin copies overlap and only the gaps below 2 and 4 bands are open,
    # with twice the TKNN sums t_1 = 1 and t_2 = -1.
    assert [(g["below"], g["chern"]) for g in one_third["gaps"]] == [(2, 2), (4, -2)]
    with h5py.File(out / "butterfly.h5") as f:
        assert [f"{p}/{q}" for p, q in zip(f["flux/p"][()], f["flux/q"][()])] == [x["flux"] for x in fluxes]
        assert f["bands/energy_range"].shape == (sum(x["bands"] for x in fluxes), 2)
        assert set(np.unique(f["bands/spin"][()])) == {-1, 1}
        labelled = f["gaps/labelled"][()]
        assert labelled.sum() == summary["counts"]["labelled_gaps"]
        np.testing.assert_array_equal(f["gaps/spin_chern"][()].sum(axis=1), f["gaps/chern"][()])
        assert json.loads(f.attrs["scenario_json"])["spin"]["zeeman"] == 0.1
        assert f.attrs["topoedge_version"] == summary["topoedge_version"]

    before = sorted(p.name for p in tmp_path.iterdir())
    again = topoedge_cli("butterfly", "--q-max", 6, "--out", out, "--quiet", cwd=tmp_path)
    assert again.returncode == 2 and again.stdout == ""
    one_error_line(again.stderr, "already exists", "--force")
    assert sorted(p.name for p in tmp_path.iterdir()) == before


@pytest.mark.parametrize("q_max", [0, 201])
def test_cli_refuses_a_bad_q_max_before_writing(tmp_path, q_max):
    done = topoedge_cli("butterfly", "--q-max", q_max, "--out", tmp_path / "fly", cwd=tmp_path)
    assert done.returncode == 2 and done.stdout == ""
    one_error_line(done.stderr, f"--q-max: got {q_max}", "1 to 200")
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("args, needle", [
    (["--min-gap", "0"], "--min-gap: got 0;"),
    (["--min-gap", "-0.1"], "--min-gap: got -0.1;"),
    (["--min-gap", "nan"], "--min-gap: got nan;"),
    (["--jobs", "0"], "--jobs: got 0;"),
    (["--q-max", "x"], "invalid int value"),
    (["--set", "spin.zeeman=abc"], "spin.zeeman"),
], ids=["zero-gap", "negative-gap", "nan-gap", "zero-jobs", "not-an-integer", "bad-override"])
def test_cli_bad_options_end_with_one_line(tmp_path, capsys, args, needle):
    out = tmp_path / "fly"
    try:
        status = cli.main(["butterfly", "--out", str(out), *args])
    except SystemExit as err:  # argparse's own errors
        status = err.code
    assert status == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.splitlines()
    assert len(lines) == 1 and needle in lines[0], captured.err
    assert not out.exists() and list(tmp_path.iterdir()) == []


def test_cli_human_summary_and_force(tmp_path, capsys):
    out = tmp_path / "fly"
    assert cli.main(["butterfly", "--q-max", "3", "--jobs", "1", "--set", "spin.zeeman=0", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "fluxes       5 (3 computed, 2 from 1 - flux)" in text
    assert f"results      {out}/" in text
    first = (out / "summary.json").read_text()
    assert cli.main(["butterfly", "--q-max", "2", "--jobs", "1", "--quiet", "--force", "--out", str(out)]) == 0
    assert capsys.readouterr() == ("", "")
    assert json.loads((out / "summary.json").read_text())["q_max"] == 2 != json.loads(first)["q_max"]
    assert [p.name for p in tmp_path.iterdir()] == ["fly"]  # no temporary folders left
