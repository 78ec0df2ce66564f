"""The package layout: stages as packages, imports only downwards, one lattice registry.

No physics here: these tests keep the structure described in DEVELOPERS.md.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parent.parent / "topoedge"

#: Stage of every sub-package (and of the top-level modules): a module may
#: import modules of its own stage or of lower ones, never a higher one.
STAGES = {"util": 0, "models": 1, "scenario": 2, "systems": 3, "solvers": 4, "workflows": 5, "outputs": 6,
          "plotting": 6, "cli": 7, "__main__": 8, "__init__": 8}
#: Longest module (lines); a longer one is split by what it does.
MAX_LINES = 530


def _modules():
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(PACKAGE)
        yield path, rel


def _stage(rel: Path) -> int:
    return STAGES[rel.parts[0] if len(rel.parts) > 1 else rel.stem]


def _target(rel: Path, node: ast.ImportFrom) -> Path | None:
    """The package-relative path a relative import refers to (its first component is enough)."""
    if node.level == 0:
        if node.module and node.module.startswith("topoedge."):
            return Path(*node.module.split(".")[1:])
        return None
    base = rel.parent.parts[: len(rel.parent.parts) - (node.level - 1)] if node.level > 1 else rel.parent.parts
    parts = list(base) + (node.module.split(".") if node.module else [])
    return Path(*parts) if parts else None


def _imports():
    for path, rel in _modules():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom):
                yield rel, node, _target(rel, node)


def test_no_import_climbs_a_stage():
    climbs = []
    for rel, node, target in _imports():
        if target is None or not target.parts:
            continue
        head = target.parts[0]
        if head not in STAGES:        # e.g. `from .. import __version__` of the package itself
            continue
        if STAGES[head] > _stage(rel):
            climbs.append(f"{rel}:{node.lineno} imports {'.'.join(target.parts)}")
    assert not climbs, "\n".join(climbs)


def test_no_private_names_imported_across_modules():
    private = [f"{rel}:{node.lineno} imports {alias.name} from {node.module}"
               for rel, node, target in _imports() if target is not None
               for alias in node.names if alias.name.startswith("_") and alias.name != "__version__"]
    assert not private, "\n".join(private)


@pytest.mark.parametrize("rel", [rel for _, rel in _modules()], ids=str)
def test_no_module_is_too_long(rel):
    lines = (PACKAGE / rel).read_text(encoding="utf-8").count("\n")
    assert lines <= MAX_LINES, f"{rel} has {lines} lines; split it by what it does"


def test_the_lattice_kind_is_tested_only_in_the_registry():
    from topoedge.models.lattices import LATTICES

    kinds = set(LATTICES)
    found = []
    for path, rel in _modules():
        if rel == Path("models/lattices.py"):
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if not isinstance(node, ast.Compare):
                continue
            operands = [node.left, *node.comparators]
            names = {n.value for n in operands if isinstance(n, ast.Constant) and isinstance(n.value, str)}
            names |= {e.value for n in operands if isinstance(n, (ast.Tuple, ast.List, ast.Set))
                      for e in n.elts if isinstance(e, ast.Constant) and isinstance(e.value, str)}
            kind_attr = any(isinstance(n, ast.Attribute) and n.attr == "kind" for n in operands)
            if names & kinds or kind_attr:
                found.append(f"{rel}:{node.lineno}")
    assert not found, "lattice kind tested outside the registry: " + ", ".join(found)


def test_every_lattice_entry_builds_its_systems():
    # Each registry entry gives a ribbon with one symmetry and a bulk with two.
    from topoedge.models.lattices import LATTICES
    from topoedge.scenario import parse_scenario

    examples = {"square": {}, "honeycomb": {"lattice": {"kind": "honeycomb", "flux": "1/5"}},
                "haldane": {"lattice": {"kind": "haldane", "t2": 0.1, "t2_phase": 1.5}},
                "qwz": {"lattice": {"kind": "qwz", "mass": 1.0}}}
    assert set(examples) == set(LATTICES)
    for kind, data in examples.items():
        s = parse_scenario({**data, "ribbon": {"width": 8}})
        entry = LATTICES[kind]
        builder, potential = entry.ribbon(s.lattice, s.spin, s.ribbon)
        assert len(builder.symmetry.periods) == 1
        assert len(entry.bulk(s.lattice, s.spin).symmetry.periods) == 2
        assert isinstance(entry.params(s.lattice, s.spin), dict)
        assert entry.span(8, s.ribbon.orientation) > 0


def test_a_scenario_is_resolved_once(monkeypatch, tmp_path):
    # Units are derived once per scenario and passed down as a Model: a run
    # resolves its scenario once, an E_F scan of the Hall bar once, a field
    # scan once more per field (each field is another scenario).
    import topoedge.scenario.model as model_module
    from topoedge import cli
    from topoedge.scenario import parse_scenario
    from topoedge.workflows import hallbar_field_scan, run_scenario

    calls = []
    original = model_module.lattice_scenario

    def counting(scenario):
        calls.append(scenario.field.b_tesla)
        return original(scenario)

    monkeypatch.setattr(model_module, "lattice_scenario", counting)
    data = {"material": {"preset": "gaas", "lattice_constant_nm": 8.0},
            "field": {"b_tesla": 5.0, "fermi_mev": 10.0, "tolerance": 0.01, "q_max": 60},
            "ribbon": {"width": 40}, "spectrum": {"k_points": 11}, "chern": {"refine": False},
            "hallbar": {"length": 40, "width": 20}}
    run_scenario(parse_scenario(data))
    assert calls == [5.0]
    calls.clear()
    hallbar_field_scan(parse_scenario(data), [3.0, 8.0], jobs=1)
    assert calls == [5.0, 3.0, 8.0]
    calls.clear()
    config = tmp_path / "bar.toml"
    config.write_text('[lattice]\nflux = "1/10"\n[spin]\nenabled = false\n[ribbon]\nwidth = 30\n'
                      '[hallbar]\nlength = 40\nwidth = 20\n')
    assert cli.main(["hallbar", str(config), "--energies=-3.5:-3.2:2", "--out", str(tmp_path / "out"),
                     "--quiet"]) == 0
    assert calls == [None]
