"""The documentation against the code: README front page, the pages in docs/ and what they generate.

The references here are the code itself (``topoedge.scenario.key_docs``,
``topoedge.models.profiles.EDGE_PROFILES``, ``topoedge.__all__``, the command
line's ``--help``, a real run of a tiny scenario) and the CI script
``.ci/run``; the pages must follow them. The tables of the configuration
reference are generated from the schema at build time by
``docs/_ext/reference_tables.py``; these tests check that generator without
Sphinx (the test environment need not have it) by parsing its
reStructuredText back.
"""

from __future__ import annotations

import contextlib
import functools
import io
import json
import re
import subprocess
import sys
import tomllib
import warnings
from pathlib import Path

import pytest

import topoedge
import topoedge.scenario as config
from topoedge.models import profiles
from topoedge.scenario import key_docs

ROOT = Path(__file__).resolve().parent.parent
DOCS = ROOT / "docs"
README = (ROOT / "README.md").read_text(encoding="utf-8")
CI_RUN = (ROOT / ".ci" / "run").read_text(encoding="utf-8")

QUICK_START = ["python3 tasks.py run", "python3 tasks.py test"]
README_MAX_LINES = 250  # a front page: the rest lives in docs/

sys.path.insert(0, str(DOCS / "_ext"))
import reference_tables as generated  # noqa: E402  (docs/_ext, no Sphinx needed)


def page(name: str) -> str:
    return (DOCS / f"{name}.rst").read_text(encoding="utf-8")


# ------------------------------------------------------- Markdown (README)


def md_section(text: str, title: str, level: int = 2) -> str:
    """Body of the Markdown section ``title`` up to the next heading of the same or a higher level."""
    hashes = "#" * level
    match = re.search(rf"^{hashes} {re.escape(title)}[ \t]*$", text, flags=re.M)
    assert match, f"README.md has no section {hashes} {title}"
    rest = text[match.end():]
    end = re.search(rf"^#{{1,{level}}} ", rest, flags=re.M)
    return rest[: end.start()] if end else rest


def md_code_blocks(text: str, lang: str | None = None) -> list[str]:
    """Contents of the fenced code blocks, optionally only those tagged ``lang``."""
    blocks = re.findall(r"^```([\w-]*)[ \t]*\n(.*?)^```[ \t]*$", text, flags=re.M | re.S)
    return [body for tag, body in blocks if lang is None or tag == lang]


# ------------------------------------------------- reStructuredText (docs/)

_ADORNMENT = re.compile(r"^([=\-~^\"'`#*+<>:.])\1+[ \t]*$")


def rst_headings(text: str) -> list[tuple[int, int, str]]:
    """(line index of the title, level, title) of every section title; levels in order of appearance."""
    lines = text.splitlines()
    styles: list[str] = []
    found = []
    for i in range(len(lines) - 1):
        title, under = lines[i], lines[i + 1]
        match = _ADORNMENT.match(under)
        if not (match and title.strip() and not title[0].isspace() and len(under.rstrip()) >= len(title.rstrip())):
            continue
        over = i > 0 and lines[i - 1].rstrip() == under.rstrip()
        style = ("over" if over else "") + match[1]
        if style not in styles:
            styles.append(style)
        found.append((i, styles.index(style), title.strip()))
    return found


def rst_section(text: str, title: str) -> str:
    """Body of the section ``title`` of a page, up to the next title of the same or a higher level."""
    lines = text.splitlines()
    headings = rst_headings(text)
    for n, (i, level, name) in enumerate(headings):
        if name == title:
            end = next((j for j, lev, _ in headings[n + 1:] if lev <= level), len(lines))
            return "\n".join(lines[i + 2: end])
    raise AssertionError(f"no section {title!r}; sections: {[name for _, _, name in headings]}")


def directives(text: str, name: str) -> list[tuple[str, dict[str, str], str]]:
    """(argument, options, dedented body) of every ``.. name::`` directive."""
    out = []
    lines = text.splitlines()
    for i, line in enumerate(lines):
        match = re.match(rf"^(\s*)\.\. {re.escape(name)}::[ \t]*(.*)$", line)
        if not match:
            continue
        indent = len(match[1])
        block = []
        for following in lines[i + 1:]:
            if following.strip() and len(following) - len(following.lstrip()) <= indent:
                break
            block.append(following)
        options = {}
        while block and re.match(r"^\s+:[\w-]+:", block[0]):
            key, _, value = block.pop(0).strip()[1:].partition(":")
            options[key] = value.strip()
        body_indent = min((len(b) - len(b.lstrip()) for b in block if b.strip()), default=0)
        body = "\n".join(b[body_indent:] for b in block).strip("\n")
        out.append((match[2].strip(), options, body))
    return out


def rst_code_blocks(text: str, lang: str) -> list[str]:
    return [body for arg, _, body in directives(text, "code-block") if arg == lang]


def list_tables(text: str) -> list[tuple[str, list[list[str]]]]:
    """(title, rows of cells) of every ``list-table``; each cell's lines joined by spaces."""
    tables = []
    for title, options, body in directives(text, "list-table"):
        rows: list[list[str]] = []
        for line in body.splitlines():
            if line.startswith("* - "):
                rows.append([line[4:]])
            elif line.startswith("  - "):
                rows[-1].append(line[4:])
            elif line.strip():
                rows[-1][-1] += " " + line.strip()
        rows = [[cell.strip() for cell in row] for row in rows]
        if options.get("header-rows") == "1":
            rows = rows[1:]
        tables.append((title, rows))
    return tables


def literals(cell: str) -> list[str]:
    """The ``inline literals`` of a cell."""
    return re.findall(r"``(.+?)``", cell)


def toctree_entries(name: str) -> list[str]:
    """Documents named by the toctrees of page ``name``, relative to docs/."""
    base = Path(name).parent
    entries = []
    for _, _, body in directives(page(name), "toctree"):
        for line in body.splitlines():
            line = line.strip()
            if line and not line.startswith(":"):
                entries.append((base / line).as_posix())
    return entries


def reachable_pages() -> list[str]:
    """Every page reachable from the index through toctrees, in reading order."""
    seen, todo = [], ["index"]
    while todo:
        name = todo.pop(0)
        if name in seen:
            continue
        assert (DOCS / f"{name}.rst").exists(), f"toctree names {name}.rst, which does not exist"
        seen.append(name)
        todo += toctree_entries(name)
    return seen


def all_pages() -> list[str]:
    return sorted(p.relative_to(DOCS).with_suffix("").as_posix() for p in DOCS.rglob("*.rst")
                  if not {"_build", "_ext", "generated"} & set(p.relative_to(DOCS).parts))


# --------------------------------------------------------------- README


def test_quick_start_has_exactly_the_two_commands():
    body = md_section(README, "Quick start")
    # Every code block of the section except sample output (tagged ``text``)
    # holds commands; together they are exactly the two quick-start commands.
    commands = [
        line.strip()
        for tag in {t for t in re.findall(r"^```([\w-]*)", body, flags=re.M)} - {"text"}
        for block in md_code_blocks(body, tag)
        for line in block.splitlines()
        if line.strip() and not line.lstrip().startswith("#")
    ]
    assert commands == QUICK_START


def test_ci_runs_the_readme_test_command_and_builds_the_docs():
    lines = [line.strip() for line in CI_RUN.splitlines()
             if line.strip() and not line.lstrip().startswith("#")]
    assert any(re.fullmatch(r"python3 tasks\.py test(\s.*)?", line) for line in lines), CI_RUN
    assert "python3 tasks.py docs" in lines, CI_RUN


def readme_links() -> list[str]:
    """Targets of the README's relative Markdown links and images (no URLs, no in-page anchors)."""
    targets = re.findall(r"\]\(([^)\s]+)\)", README)
    return [t for t in targets if not re.match(r"^[a-z]+:", t) and not t.startswith("#")]


def test_every_readme_link_points_to_an_existing_file():
    links = readme_links()
    assert any(link.startswith("docs/") for link in links), "README.md links to no page in docs/"
    missing = [link for link in links if not (ROOT / link.split("#")[0]).exists()]
    assert not missing, missing


def test_readme_links_every_page():
    linked = {link.split("#")[0] for link in readme_links()}
    unlinked = [name for name in reachable_pages() if f"docs/{name}.rst" not in linked]
    assert not unlinked, f"README.md does not link to {unlinked}"


def test_readme_shows_a_figure_of_the_repository():
    images = re.findall(r"!\[[^\]]*\]\(([^)\s]+)\)", README)
    assert images, "README.md shows no figure"
    for image in images:
        assert (ROOT / image).is_file(), image
        assert (ROOT / image).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n", image


def test_readme_is_a_front_page():
    assert len(README.splitlines()) <= README_MAX_LINES, "README.md grew: move the detail into docs/"


# ---------------------------------------------------------------- the site


def test_every_page_is_reachable_from_the_index():
    assert set(all_pages()) == set(reachable_pages()), (
        sorted(set(all_pages()) - set(reachable_pages())))


def test_every_command_has_a_tutorial_with_its_help():
    commands = generated.commands()
    assert set(commands) >= {"run", "hallbar", "sweep", "butterfly", "bench"}, commands
    tutorials = toctree_entries("index")
    for command in commands:
        name = f"tutorials/{command}"
        assert name in tutorials, f"no tutorial page {name}.rst in the index"
        helps = [arg for arg, _, _ in directives(page(name), "topoedge-cli-help")]
        assert helps == [command], f"{name}.rst shows the help of {helps}"
        assert rst_code_blocks(page(name), "sh") or rst_code_blocks(page(name), "bash"), name


def test_tutorial_command_lines_use_existing_options_and_scenarios():
    # Every `topoedge CMD ...` line of a tutorial names a command, options
    # that command's --help lists, and (as a bare name) a shipped scenario.
    shipped = {p.stem for p in (ROOT / "topoedge" / "data" / "scenarios").glob("*.toml")}
    shipped |= {p.stem for p in (ROOT / "topoedge" / "data" / "sweeps").glob("*.toml")}
    helps = {command: generated.cli_help(command) for command in generated.commands()}
    checked = 0
    for name in reachable_pages():
        for block in rst_code_blocks(page(name), "sh") + rst_code_blocks(page(name), "bash"):
            for line in block.splitlines():
                words = line.split("#")[0].split()
                if words[:2] == ["python3", "tasks.py"] and words[2:3] in (["run"], ["bench"]):
                    words = words[1:]  # python3 tasks.py run ARGS is topoedge run ARGS
                elif words[:1] not in (["topoedge"], [".venv/bin/topoedge"]) or "[" in line:
                    continue
                command, args = words[1], words[2:]
                assert command in helps, f"{name}: {line}"
                for option, value in zip(args, args[1:] + [""]):
                    if option.startswith("--"):
                        assert re.search(rf"{re.escape(option.split('=')[0])}\b", helps[command]), f"{name}: {line}"
                    if option == "--set":
                        assert value.split("=")[0] in config.key_paths(), f"{name}: {line}"
                first = args[0] if args else ""
                if first and not first.startswith("-") and "." not in first and "/" not in first:
                    assert first in shipped or first.isupper(), f"{name}: {first!r} is not shipped: {line}"
                checked += 1
    assert checked >= 20, checked


# ---------------------------------------------------- configuration keys


def config_directive_sections() -> list[str]:
    return [arg for arg, _, _ in directives(page("configuration"), "topoedge-config-keys")]


def generated_config_rows() -> dict[str, list[str]]:
    """The rows of the generated configuration tables, as the reader sees them, keyed by key path."""
    rows: dict[str, list[str]] = {}
    for section in config_directive_sections():
        (title, table), = list_tables(generated.config_table(section))
        for cells in table:
            path, = literals(cells[0])
            assert path not in rows, f"key {path!r} appears in two tables"
            kind, unit, default, meaning = (generated.unescape(cell) for cell in cells[1:])
            default = "unset" if default == "*unset*" else literals(default)[0]
            rows[path] = [kind, unit, default, meaning]
    return rows


def test_configuration_page_shows_every_table_of_the_schema_once():
    sections = config_directive_sections()
    assert len(sections) == len(set(sections)), sections
    assert set(sections) == set(generated.config_sections())


def test_generated_configuration_tables_match_key_docs():
    rows = generated_config_rows()
    docs = {path: list(rest) for path, *rest in key_docs()}
    assert sorted(rows) == sorted(docs) == sorted(config.key_paths()), "generated tables and schema differ"
    for path, row in docs.items():
        assert rows[path] == row, f"{path}: generated {rows[path]}, key_docs {row}"


def test_generated_table_refuses_an_unknown_section():
    with pytest.raises(ValueError, match="no keys in 'latice'"):
        generated.config_table("latice")


def test_documented_defaults_are_what_an_empty_scenario_gets():
    # The defaults of the generated reference, read back as TOML, give the
    # defaults of parse_scenario({}).
    data: dict = {}
    table = generated_config_rows()
    for path, (_, _, default, _) in table.items():
        if default == "unset":
            continue
        *sections, name = path.split(".")
        target = data
        for part in sections:
            target = target.setdefault(part, {})
        target[name] = tomllib.loads(f"v = {default}")["v"]
    assert config.parse_scenario(data) == config.parse_scenario({})
    # Every key documented as "unset" is None in an empty scenario.
    empty = config.parse_scenario({})
    for path, (_, _, default, _) in table.items():
        if default == "unset":
            assert functools.reduce(getattr, path.split("."), empty) is None, path


# ------------------------------------------------------------- edge profiles


def edge_profile_table() -> list[list[str]]:
    (title, rows), = list_tables(rst_section(page("conventions"), "Edge profiles"))
    return rows


@pytest.mark.parametrize("name", list(profiles.EDGE_PROFILES))
def test_every_edge_profile_is_documented(name):
    assert [name] in [literals(cells[0]) for cells in edge_profile_table()]


def test_every_documented_edge_profile_exists():
    documented = [literals(cells[0])[0] for cells in edge_profile_table()]
    assert documented == list(profiles.EDGE_PROFILES)


def test_configuration_accepts_exactly_the_implemented_profiles():
    # ribbon.edge.profile accepts config.EDGE_PROFILES; the pages document
    # one list of profiles, so the accepted and implemented names must agree.
    assert tuple(config.EDGE_PROFILES) == tuple(profiles.EDGE_PROFILES)


# ------------------------------------------------------------------ the API


def test_api_page_covers_the_public_namespace():
    groups = [arg for arg, _, _ in directives(page("api"), "topoedge-api")]
    assert len(groups) == len(set(groups)) and set(groups) == set(generated.api_groups()), groups
    covered = [name for group in groups for name in generated.api_names(group)]
    assert sorted(covered) == sorted(set(topoedge.__all__) - {"__version__"})
    assert ".. py:data:: topoedge.__version__" in page("api")


# ------------------------------------------------------------ python examples


def test_python_examples_run_and_print_what_the_pages_say():
    pages = {name: rst_code_blocks(page(name), "python") for name in reachable_pages()}
    pages = {name: blocks for name, blocks in pages.items() if blocks}
    assert {"tutorials/python", "zero-field", "interacting"} <= set(pages), sorted(pages)
    out = io.StringIO()
    with contextlib.redirect_stdout(out), warnings.catch_warnings():
        warnings.simplefilter("ignore")  # kwant's import-time MUMPS notice
        for name, blocks in pages.items():
            for source in blocks:
                exec(compile(source, f"docs/{name}.rst", "exec"), {"__name__": "docs_example"})
    text = out.getvalue()
    # The first example prints edge states of both spins at both edges,
    # dE/dk > 0 at the bottom edge and < 0 at the top edge (phi > 0).
    states = [(float(y), float(s), float(v)) for y, s, v in re.findall(
        r"<y> =\s*(\S+) a\s+S_z =\s*(\S+)\s+dE/dk =\s*(\S+) t a", text)]
    assert states, text
    bottom = [(s, v) for y, s, v in states if y < 60]
    top = [(s, v) for y, s, v in states if y >= 60]
    assert {s for s, _ in bottom} == {s for s, _ in top} == {0.5, -0.5}
    assert all(v > 0 for _, v in bottom) and all(v < 0 for _, v in top)
    # Spin up (lower in energy) crosses E_F nearer to each edge than spin down.
    up_b, down_b = ([y for y, s, _ in states if y < 60 and s == sz] for sz in (0.5, -0.5))
    up_t, down_t = ([y for y, s, _ in states if y >= 60 and s == sz] for sz in (0.5, -0.5))
    assert max(up_b) < min(down_b) and min(up_t) > max(down_t)
    # The Hartree-Fock example prints what its page says it prints.
    assert "True 6 1.0" in text.splitlines(), text
    # The zero-field example: QWZ C = -1, 1, 0 at m = -1, 1, 3 and Haldane C = -1.
    assert [line.split("C = ")[1] for line in text.splitlines() if line.startswith("QWZ m =")] == ["-1", "1", "0"]
    assert "Haldane C = -1" in text.splitlines(), text
    # The user-ribbon example: the QWZ ribbon at m = 1 carries C = 1 on one edge, -1 on the other.
    assert "QWZ ribbon m = 1: bottom net 1 top net -1" in text.splitlines(), text
    # The pages quote the edge count at E_F and the flux-2/5 Chern numbers
    # (band Chern numbers -2, 3, -2, 3, -2 and gap sums t_r of r = 5 s + 2 t;
    # TKNN, PRL 49, 405 (1982)), and what the other examples print.
    quoted = {"tutorials/python": ["edge net: bottom +2, top -2", "band C: [-2, 3, -2, 3, -2] gap C: [-2, 1, -1, 2]"],
              "interacting": ["True 6 1.0"], "zero-field": ["bottom net 1 top net -1"]}
    for name, strings in quoted.items():
        for string in strings:
            assert string in text, text
            assert f"``{string}``" in " ".join(page(name).split()), f"docs/{name}.rst does not quote {string!r}"


# ------------------------------------------------- summary.json, spectrum.h5

# A scenario that runs in a second or two and has edge modes of both spins
# on both edges: flux 1/5 (one band per Landau level and spin), Zeeman 0.2 t
# (well below the 1.35 t gap above the lowest level), E_F in the gap above
# both spin bands of the lowest level.
TINY = """
[lattice]
flux = "1/5"
[spin]
enabled = true
zeeman = 0.2
[ribbon]
width = 24
[spectrum]
k_points = 31
[fermi]
gap = 2
[edges]
k_points = 64
"""

# The keys the outputs page promises (and scripts may rely on); its table of
# guaranteed keys must list at least these.
GUARANTEED = {
    "bulk.bands[].index", "bulk.bands[].spin", "bulk.bands[].chern",
    "bulk.bands[].energy_min", "bulk.bands[].energy_max", "bulk.chern_below_fermi",
    "fermi.energy", "hall.sigma_xy", "hall.r_xy_ohm", "check.bulk_edge_agree",
    "hall.routes", "check.routes_agree",
    *(f"edges.{edge}.{key}" for edge in ("bottom", "top") for key in (
        "net", "counter_pairs", "modes[].k", "modes[].velocity", "modes[].y", "modes[].spin",
        "by_spin.up", "by_spin.down")),
}


@pytest.fixture(scope="module")
def tiny_run(tmp_path_factory):
    """The tiny scenario through the command line: (stdout of --json, the results folder)."""
    tmp = tmp_path_factory.mktemp("docs")
    (tmp / "tiny.toml").write_text(TINY)
    out = tmp / "run"
    proc = subprocess.run([sys.executable, "-m", "topoedge", "run", "tiny.toml", "--out", str(out), "--json",
                           "--quiet"], cwd=tmp, capture_output=True, text=True,
                          env={**__import__("os").environ, "PYTHONWARNINGS": "ignore"})
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout), out


def summary_table(title: str) -> list[list[str]]:
    tables = dict(list_tables(rst_section(page("outputs"), "summary.json and ``--json``")))
    return tables[title]


def documented_paths(title: str) -> list[str]:
    """The key paths in the first column of a summary.json table."""
    return [name for cells in summary_table(title) for name in literals(cells[0])]


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


def test_run_writes_the_files_the_outputs_page_names(tiny_run):
    _, out = tiny_run
    intro = page("outputs").split(".. _summary-json:")[0]
    named = set(re.findall(r"``([\w.]+\.(?:json|h5|png|csv))``", intro))
    assert named == {p.name for p in out.iterdir()}


def test_outputs_page_lists_the_guaranteed_summary_keys():
    listed = documented_paths("Guaranteed keys of summary.json")
    assert GUARANTEED <= set(listed), sorted(GUARANTEED - set(listed))


def test_guaranteed_summary_keys_are_in_a_run(tiny_run):
    printed, out = tiny_run
    summary = json.loads((out / "summary.json").read_text())
    assert summary == printed  # the file is the --json document
    for path in documented_paths("Guaranteed keys of summary.json"):
        lookup(summary, path)
    # The tiny run is what the pages say such a run gives: C = 2 (one per
    # spin), +C on the bottom edge, -C on the top edge, R_xy = -1/sigma_xy =
    # -h / (C e^2) (flux 1/5 > 0 is a field along -z for electrons).
    assert summary["bulk"]["chern_below_fermi"] == 2
    assert (summary["edges"]["bottom"]["net"], summary["edges"]["top"]["net"]) == (2, -2)
    assert summary["check"]["bulk_edge_agree"] is True
    assert summary["hall"]["r_xy_ohm"] == pytest.approx(-25812.807 / 2, rel=1e-7)


def test_every_top_level_summary_key_is_documented(tiny_run):
    summary, _ = tiny_run
    documented = {name.split(".")[0] for title in ("Guaranteed keys of summary.json", "Other keys of summary.json")
                  for name in documented_paths(title)}
    assert set(summary) <= documented, sorted(set(summary) - documented)


def test_documented_top_level_keys_are_in_a_run(tiny_run):
    # Every key of the "other keys" table is in a run, unless its row says
    # it is written only with some section (physical units, interaction).
    summary, _ = tiny_run
    for cells in summary_table("Other keys of summary.json"):
        if cells[1].startswith("Only with"):
            continue
        for name in literals(cells[0]):
            assert name in summary, f"outputs page documents {name!r}, a run has no such key"


def test_every_second_level_summary_key_is_documented(tiny_run):
    # Each key inside a top-level section of a run (model.rashba_t, bulk.subspace,
    # ...) is a guaranteed key or named in that section's row of the "other keys" table.
    summary, _ = tiny_run
    guaranteed = documented_paths("Guaranteed keys of summary.json")
    rows = {literals(cells[0])[0]: cells[1] for cells in summary_table("Other keys of summary.json")}
    for section, value in summary.items():
        if not isinstance(value, dict) or section == "config":  # config: the scenario, documented by its keys
            continue
        for key in value:
            named = any(path.split(".")[:2] == [section, key.rstrip("[]")] or path.startswith(f"{section}.{key}[")
                        for path in guaranteed)
            named = named or key in literals(rows.get(section, "")) or f"{key}[]" in " ".join(
                literals(rows.get(section, "")))
            assert named, f"summary key {section}.{key} is not documented on the outputs page"


def test_spectrum_h5_table_matches_the_file(tiny_run):
    import h5py

    _, out = tiny_run
    (title, rows), = list_tables(rst_section(page("outputs"), "spectrum.h5"))
    documented = {name for cells in rows for name in literals(" ".join(cells))}
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
            names = literals(cells[0])
            optional = "only with" in cells[1]  # e.g. /units, written with field.b_tesla
            for name in names:
                if name.startswith("/") and not optional:
                    assert name in f, f"the outputs page lists {name}, not in spectrum.h5"
            if "attribute" in cells[0] and names:
                assert names[-1] in f[names[0]].attrs, cells[0]


def test_the_flux_two_fifths_example_does_what_the_run_page_says():
    # docs/tutorials/run.rst: the flux 2/5 spinless ribbon with a hard wall
    # has C = -2 in its lowest gap (TKNN: r = q s + p t with r = 1, q = 5,
    # p = 2 gives t = -2, from memory of the Diophantine rule), two modes per
    # edge, along -x at the bottom and +x at the top.
    from topoedge.workflows import run_scenario

    line = next(line for line in rst_code_blocks(page("tutorials/run"), "sh")[0].splitlines()
                if "lattice.flux=2/5" in line)
    words = line.split("#")[0].split()
    items = [value for option, value in zip(words, words[1:]) if option == "--set"]
    result = run_scenario(config.load_scenario(None, items))
    summary = result.summary
    assert summary.bulk.chern_below_fermi == -2
    bottom, top = summary.edges.bottom, summary.edges.top
    assert (bottom.net, top.net, bottom.counter_pairs, top.counter_pairs) == (-2, 2, 0, 0)
    assert [m.velocity < 0 for m in bottom.modes] == [True, True]
    assert [m.velocity > 0 for m in top.modes] == [True, True]
    assert summary.model.edge_profile == "none"
    assert any("beyond the continuum limit" in w for w in summary.warnings)
