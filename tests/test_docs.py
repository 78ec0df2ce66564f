"""README.md against the code: configuration keys, edge profiles, quick start,
the Python example, the guaranteed ``summary.json`` keys and ``spectrum.h5``.

The reference here is the code itself (``topoedge.scenario.key_docs``,
``topoedge.models.profiles.EDGE_PROFILES``, a run of a tiny scenario) and the CI
script ``.ci/run``; the README must follow them.
"""

from __future__ import annotations

import contextlib
import functools
import io
import json
import re
import tomllib
import warnings
from pathlib import Path

import pytest

from topoedge.models import profiles
import topoedge.scenario as config
from topoedge.scenario import key_docs

ROOT = Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text(encoding="utf-8")
CI_RUN = (ROOT / ".ci" / "run").read_text(encoding="utf-8")

QUICK_START = ["python3 tasks.py run", "python3 tasks.py test"]


# ---------------------------------------------------------------- helpers


def section(text: str, title: str, level: int = 2) -> str:
    """Body of the Markdown section ``title`` up to the next heading of the same or a higher level."""
    hashes = "#" * level
    match = re.search(rf"^{hashes} {re.escape(title)}[ \t]*$", text, flags=re.M)
    assert match, f"README.md has no section {hashes} {title}"
    rest = text[match.end():]
    end = re.search(rf"^#{{1,{level}}} ", rest, flags=re.M)
    return rest[: end.start()] if end else rest


def code_blocks(text: str, lang: str | None = None) -> list[str]:
    """Contents of the fenced code blocks, optionally only those tagged ``lang``."""
    blocks = re.findall(r"^```([\w-]*)[ \t]*\n(.*?)^```[ \t]*$", text, flags=re.M | re.S)
    return [body for tag, body in blocks if lang is None or tag == lang]


def table_rows(text: str) -> list[list[str]]:
    """Cells of every Markdown table row, with ``\\|`` unescaped and cells stripped."""
    rows = []
    for line in text.splitlines():
        line = line.strip()
        if not (line.startswith("|") and line.endswith("|")):
            continue
        cells = re.split(r"(?<!\\)\|", line[1:-1])
        cells = [c.strip().replace(r"\|", "|") for c in cells]
        if all(re.fullmatch(r":?-+:?", c) for c in cells):
            continue  # separator row
        rows.append(cells)
    return rows


def config_table() -> dict[str, list[str]]:
    """Rows of the configuration table, keyed by the key path in backticks."""
    rows = {}
    for cells in table_rows(section(README, "Configuration reference")):
        match = re.fullmatch(r"`([^`]+)`", cells[0])
        if match:
            assert match[1] not in rows, f"key {match[1]!r} appears twice in the table"
            rows[match[1]] = cells[1:]
    return rows


def unquote(cell: str) -> str:
    match = re.fullmatch(r"`([^`]*)`", cell)
    return match[1] if match else cell


# ---------------------------------------------------- configuration keys


@pytest.mark.parametrize("path", [row[0] for row in key_docs()])
def test_every_key_path_is_in_the_readme(path):
    assert f"`{path}`" in README


def test_configuration_table_matches_key_docs():
    table = config_table()
    docs = {path: rest for path, *rest in key_docs()}
    assert sorted(table) == sorted(docs), "README table keys differ from key_docs()"
    for path, (kind, unit, default, meaning) in docs.items():
        r_kind, r_unit, r_default, r_meaning = table[path]
        assert unquote(r_default) == default, f"{path}: README default {r_default!r}, code {default!r}"
        assert (r_kind, r_unit, r_meaning) == (kind, unit, meaning), f"{path}: row differs from key_docs()"


def test_documented_defaults_are_what_an_empty_scenario_gets():
    # The README's defaults, read back as TOML, give the defaults of parse_scenario({}).
    data: dict = {}
    for path, (_, _, default, _) in config_table().items():
        default = unquote(default)
        if default == "unset":
            continue
        *sections, name = path.split(".")
        table = data
        for part in sections:
            table = table.setdefault(part, {})
        table[name] = tomllib.loads(f"v = {default}")["v"]
    assert config.parse_scenario(data) == config.parse_scenario({})
    # Every key documented as "unset" is None in an empty scenario.
    empty = config.parse_scenario({})
    for path, (_, _, default, _) in config_table().items():
        if unquote(default) == "unset":
            assert functools.reduce(getattr, path.split("."), empty) is None, path


# --------------------------------------------------------------- quick start


def test_quick_start_has_exactly_the_two_commands():
    body = section(README, "Quick start")
    # Every code block of the section except sample output (tagged ``text``)
    # holds commands; together they are exactly the two quick-start commands.
    commands = [
        line.strip()
        for tag in {t for t in re.findall(r"^```([\w-]*)", body, flags=re.M)} - {"text"}
        for block in code_blocks(body, tag)
        for line in block.splitlines()
        if line.strip() and not line.lstrip().startswith("#")
    ]
    assert commands == QUICK_START


def test_ci_runs_the_readme_test_command():
    lines = [line.strip() for line in CI_RUN.splitlines()
             if line.strip() and not line.lstrip().startswith("#")]
    assert any(re.fullmatch(r"python3 tasks\.py test(\s.*)?", line) for line in lines), CI_RUN


# ------------------------------------------------------------- edge profiles


@pytest.mark.parametrize("name", list(profiles.EDGE_PROFILES))
def test_every_edge_profile_is_documented(name):
    rows = table_rows(section(README, "Edge profiles", level=3))
    assert f"`{name}`" in [cells[0] for cells in rows]


def test_configuration_accepts_exactly_the_implemented_profiles():
    # ribbon.edge.profile accepts config.EDGE_PROFILES; the README documents
    # one list of profiles, so the accepted and implemented names must agree.
    assert tuple(config.EDGE_PROFILES) == tuple(profiles.EDGE_PROFILES)


# ------------------------------------------------------------ python example


def test_python_example_runs():
    blocks = code_blocks(README, "python")
    assert blocks, "README.md has no python example"
    out = io.StringIO()
    with contextlib.redirect_stdout(out), warnings.catch_warnings():
        warnings.simplefilter("ignore")  # kwant's import-time MUMPS notice
        for source in blocks:
            exec(compile(source, "README.md", "exec"), {"__name__": "readme_example"})
    # The README says what the example prints: edge states of both spins at
    # both edges, dE/dk > 0 at the bottom edge and < 0 at the top edge (phi > 0).
    states = [(float(y), float(s), float(v)) for y, s, v in re.findall(
        r"<y> =\s*(\S+) a\s+S_z =\s*(\S+)\s+dE/dk =\s*(\S+) t a", out.getvalue())]
    assert states, out.getvalue()
    bottom = [(s, v) for y, s, v in states if y < 60]
    top = [(s, v) for y, s, v in states if y >= 60]
    assert {s for s, _ in bottom} == {s for s, _ in top} == {0.5, -0.5}
    assert all(v > 0 for _, v in bottom) and all(v < 0 for _, v in top)
    # Spin up (lower in energy) crosses E_F nearer to each edge than spin down.
    up_b, down_b = ([y for y, s, _ in states if y < 60 and s == sz] for sz in (0.5, -0.5))
    up_t, down_t = ([y for y, s, _ in states if y >= 60 and s == sz] for sz in (0.5, -0.5))
    assert max(up_b) < min(down_b) and min(up_t) > max(down_t)
    # The README quotes the edge count at E_F and the flux-2/5 Chern numbers
    # (band Chern numbers -2, 3, -2, 3, -2 and gap sums t_r of r = 5 s + 2 t;
    # TKNN, PRL 49, 405 (1982)).
    text = out.getvalue()
    # The Hartree-Fock example prints what the README says it prints.
    assert "True 6 1.0" in text.splitlines(), text
    # The zero-field example: QWZ C = -1, 1, 0 at m = -1, 1, 3 and Haldane C = -1.
    assert [line.split("C = ")[1] for line in text.splitlines() if line.startswith("QWZ m =")] == ["-1", "1", "0"]
    assert "Haldane C = -1" in text.splitlines(), text
    # The user-ribbon example: the QWZ ribbon at m = 1 carries C = 1 on one edge, -1 on the other.
    assert "QWZ ribbon m = 1: bottom net 1 top net -1" in text.splitlines(), text
    for quoted in ("edge net: bottom +2, top -2",
                   "band C: [-2, 3, -2, 3, -2] gap C: [-2, 1, -1, 2]"):
        assert quoted in text, text
        assert f"`{quoted}`" in " ".join(README.split()), f"README does not quote {quoted!r}"


# ------------------------------------------------- summary.json, spectrum.h5

# A scenario that runs in a fraction of a second and has edge modes of both
# spins on both edges: flux 1/5 (one band per Landau level and spin), Zeeman
# 0.2 t (well below the 1.35 t gap above the lowest level), E_F in the gap
# above both spin bands of the lowest level.
TINY = {
    "lattice": {"flux": "1/5"},
    "spin": {"enabled": True, "zeeman": 0.2},
    "ribbon": {"width": 24},
    "spectrum": {"k_points": 31},
    "fermi": {"gap": 2},
    "edges": {"k_points": 64},
}

# The keys the README promises (and scripts may rely on); the README's table
# of guaranteed keys must list at least these.
GUARANTEED = {
    "bulk.bands[].index", "bulk.bands[].spin", "bulk.bands[].chern",
    "bulk.bands[].energy_min", "bulk.bands[].energy_max", "bulk.chern_below_fermi",
    "fermi.energy", "hall.sigma_xy", "hall.r_xy_ohm", "check.bulk_edge_agree",
    *(f"edges.{edge}.{key}" for edge in ("bottom", "top") for key in (
        "net", "counter_pairs", "modes[].k", "modes[].velocity", "modes[].y", "modes[].spin",
        "by_spin.up", "by_spin.down")),
}


@pytest.fixture(scope="module")
def tiny_run(tmp_path_factory):
    """The tiny scenario, computed and written (without figures)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        from topoedge.workflows import run_scenario
        from topoedge.outputs.results import write_run
    result = run_scenario(config.parse_scenario(TINY))
    out = write_run(tmp_path_factory.mktemp("docs") / "run", result, {})
    return result, out


def documented_paths(title: str) -> list[str]:
    """Backticked names in the first column of the first summary.json table after ``title``."""
    body = section(README, "summary.json and `--json`", level=3)
    body = body[body.index(title):]
    table = body[: body.index("\n\n", body.index("|"))]
    return [name for cells in table_rows(table) for name in re.findall(r"`([^`]+)`", cells[0])]


def lookup(data, path: str) -> list:
    """Values at a dotted path; ``name[]`` steps into every element of a non-empty list."""
    values = [data]
    for part in path.split("."):
        step = []
        for value in values:
            assert isinstance(value, dict) and part.rstrip("[]") in value, f"{path}: no {part!r}"
            item = value[part.rstrip("[]")]
            if part.endswith("[]"):
                assert isinstance(item, list) and item, f"{path}: {part} is not a non-empty list"
                step += item
            else:
                step.append(item)
        values = step
    return values


def test_readme_lists_the_guaranteed_summary_keys():
    listed = documented_paths("**Guaranteed keys.**")
    assert GUARANTEED <= set(listed), sorted(GUARANTEED - set(listed))


def test_guaranteed_summary_keys_are_in_a_run(tiny_run):
    result, out = tiny_run
    summary = json.loads((out / "summary.json").read_text())
    assert summary == json.loads(json.dumps(result.summary))  # the file is the --json document
    for path in documented_paths("**Guaranteed keys.**"):
        lookup(summary, path)
    # The tiny run is what the README says such a run gives: C = 2 (one per
    # spin), +C on the bottom edge, -C on the top edge, R_xy = -1/sigma_xy =
    # -h / (C e^2) (flux 1/5 > 0 is a field along -z for electrons).
    assert summary["bulk"]["chern_below_fermi"] == 2
    assert (summary["edges"]["bottom"]["net"], summary["edges"]["top"]["net"]) == (2, -2)
    assert summary["check"]["bulk_edge_agree"] is True
    assert summary["hall"]["r_xy_ohm"] == pytest.approx(-25812.807 / 2, rel=1e-7)


def test_every_top_level_summary_key_is_documented(tiny_run):
    result, _ = tiny_run
    body = section(README, "summary.json and `--json`", level=3)
    documented = {name.split(".")[0] for cells in table_rows(body)
                  for name in re.findall(r"`([^`]+)`", cells[0])}
    assert set(result.summary) <= documented, sorted(set(result.summary) - documented)


def test_spectrum_h5_table_matches_the_file(tiny_run):
    import h5py

    _, out = tiny_run
    body = section(README, "spectrum.h5", level=3)
    rows = table_rows(body)
    documented = {name for cells in rows for name in re.findall(r"`([^`]+)`", " ".join(cells))}
    with h5py.File(out / "spectrum.h5", "r") as f:
        objects = []
        f.visit(objects.append)
        # Every dataset and group of the file (but the per-key /config
        # attributes) is in the table ...
        missing = [f"/{name}" for name in objects
                   if not name.startswith("config/") and f"/{name}" not in documented]
        assert not missing, missing
        for where in ("/", "/bulk", "/edge_modes"):
            attrs = set(f[where].attrs) - documented
            assert not attrs, f"undocumented attributes of {where}: {sorted(attrs)}"
        # ... and every path in its first column exists in the file.
        for cells in rows:
            names = re.findall(r"`([^`]+)`", cells[0])
            optional = "only with" in cells[1]  # e.g. /units, written with field.b_tesla
            for name in names:
                if name.startswith("/") and not optional:
                    assert name in f, f"README lists {name}, not in spectrum.h5"
            if "attribute" in cells[0] and names:
                assert names[-1] in f[names[0]].attrs, cells[0]
