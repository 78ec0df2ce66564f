"""README.md against the code: configuration keys, edge profiles, quick start.

The reference here is the code itself (``topoedge.config.key_docs``,
``topoedge.profiles.EDGE_PROFILES``) and the CI script ``.ci/run``; the README
must follow them.
"""

from __future__ import annotations

import contextlib
import io
import re
import tomllib
import warnings
from pathlib import Path

import pytest

from topoedge import config, profiles
from topoedge.config import key_docs

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
    assert config.parse_scenario({}).spectrum.window is None  # the one "unset" key


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
