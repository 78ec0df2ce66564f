"""Tests of topoedge.scenario: schema, messages, overrides and files."""

import dataclasses
import math
import re
from fractions import Fraction

import pytest
from hypothesis import given, strategies as st

from topoedge.scenario import (
    ConfigError, EdgeConfig, FermiConfig, LatticeConfig, RibbonConfig, Scenario,
    SpectrumConfig, SpinConfig, apply_overrides, key_docs, load_scenario, parse_scenario,
)

FULL = {
    "title": "linear ramp, spin split",
    "lattice": {"kind": "square", "flux": "-1/30", "onsite": 0.25, "staggered": 0.0, "t2": 0.0,
                "t2_phase": 0.0, "mass": 0.0},
    "spin": {"enabled": True, "zeeman": 0.1, "rashba": 0.0},
    "ribbon": {"width": 80, "edge": {"profile": "table", "width": 0.0, "height": 0.0,
                                     "table": [[0, 2.0], [1.5, 0.5], [4, 0]]}},
    "spectrum": {"k_points": 101, "window": 0.5, "solver": "banded"},
    "fermi": {"energy": -0.3},
    "chern": {"grid": [16, 20], "gap_min": 1e-4, "refine": False, "solver": "dense"},
    "edges": {"k_points": 200},
    "hallbar": {"enabled": True, "length": 60, "width": 30, "disorder": 0.5, "seeds": 3},
}

FULL_TOML = """\
title = "linear ramp, spin split"

[lattice]
kind = "square"
flux = "-1/30"
onsite = 0.25
staggered = 0.0
t2 = 0.0
t2_phase = 0.0
mass = 0.0

[spin]
enabled = true
zeeman = 0.1
rashba = 0.0

[ribbon]
width = 80

[ribbon.edge]
profile = "table"
width = 0.0
height = 0.0
table = [[0, 2.0], [1.5, 0.5], [4, 0]]

[spectrum]
k_points = 101
window = 0.5
solver = "banded"

[fermi]
energy = -0.3

[chern]
grid = [16, 20]
gap_min = 1e-4
refine = false
solver = "dense"

[edges]
k_points = 200

[hallbar]
enabled = true
length = 60
width = 30
disorder = 0.5
seeds = 3
"""


def nested(path, value):
    """{'a': {'b': value}} from 'a.b'."""
    *sections, name = path.split(".")
    data = {name: value}
    for section in reversed(sections):
        data = {section: data}
    return data


def leaf_paths(cls, prefix=""):
    """Key paths of the dataclass tree, i.e. what a scenario file can set."""
    for f in dataclasses.fields(cls):
        path = f"{prefix}{f.name}"
        if dataclasses.is_dataclass(f.default):
            yield from leaf_paths(type(f.default), path + ".")
        elif path != "source":
            yield path


def flat_paths(data, prefix=""):
    for name, value in data.items():
        if isinstance(value, dict):
            yield from flat_paths(value, f"{prefix}{name}.")
        else:
            yield f"{prefix}{name}"


# (data, regex the message must match); each is one rejected scenario.
BAD = {
    "unknown key": (nested("ribbon.edge.widht", 3),
                    r"^ribbon\.edge\.widht: unknown key; did you mean 'ribbon\.edge\.width'\?$"),
    "misplaced key": (nested("lattice.zeeman", 0.1),
                      r"^lattice\.zeeman: unknown key; did you mean 'spin\.zeeman'\?$"),
    "misspelt section": ({"latice": {}}, r"^latice: unknown key; did you mean 'lattice'\?$"),
    "misplaced section": ({"edge": {}}, r"^edge: unknown key; did you mean 'ribbon\.edge'\?$"),
    "unknown section": ({"xyzzy": {}},
                        r"^xyzzy: unknown key; expected one of the top-level keys: "
                        r"'title', 'lattice', 'spin', 'ribbon', 'spectrum', 'fermi', 'chern', 'edges', "
                        r"'material', 'field', 'hallbar', 'interaction', 'disorder', 'levels'$"),
    "unknown key, nothing close": (nested("ribbon.edge.xyzzy", 1),
                                   r"keys of \[ribbon\.edge\]: 'profile', 'width', "),
    "section not a table": ({"lattice": 3}, r"^lattice: got 3 \(integer\); expected a table"),
    "string for int": (nested("ribbon.width", "120"),
                       r"^ribbon\.width: got '120' \(string\); expected an integer number "
                       r"of sites >= 2$"),
    "float for int": (nested("spectrum.k_points", 2.5),
                      r"^spectrum\.k_points: got 2\.5 \(float\); expected an integer"),
    "whole float for int": (nested("spectrum.k_points", 300.0),
                            r"got 300\.0 \(float\).*write 300 without a decimal point"),
    "bool for float": (nested("lattice.onsite", True),
                       r"^lattice\.onsite: got true \(boolean\); expected a finite energy"),
    "string for float": (nested("fermi.energy", "0.1"), r"^fermi\.energy: got '0\.1' \(string\)"),
    "number for bool": (nested("spin.enabled", 1), r"^spin\.enabled: got 1 \(integer\); "
                                                   r"expected true or false$"),
    "hopping is not a key": (nested("lattice.hopping", 2.0),
                             r"^lattice\.hopping: unknown key"),
    "ribbon too narrow": (nested("ribbon.width", 1), r"^ribbon\.width: got 1; expected .* >= 2$"),
    "too few k": (nested("spectrum.k_points", 1), r"^spectrum\.k_points: got 1; expected"),
    "q = 0": (nested("lattice.flux", "1/0"), r"^lattice\.flux: got '1/0'; expected q >= 1$"),
    "q < 0": (nested("lattice.flux", "1/-3"), r"expected q >= 1 \(put the sign on p: '-1/3'\)"),
    "not coprime": (nested("lattice.flux", "2/6"),
                    r"^lattice\.flux: got '2/6'; p and q must be coprime \(use '1/3'\)$"),
    "malformed flux": (nested("lattice.flux", "abc"),
                       r"^lattice\.flux: got 'abc'; expected a string 'p/q' with \|p/q\| < 1 such as '1/40'$"),
    "decimal string flux": (nested("lattice.flux", "0.025"), r"^lattice\.flux: got '0\.025';"),
    "float flux": (nested("lattice.flux", 0.025),
                   r"^lattice\.flux: got 0\.025 \(float\); expected a string 'p/q'.*\"1/40\""),
    "bool flux": (nested("lattice.flux", True), r"^lattice\.flux: got true \(boolean\)"),
    "negative edge width": (nested("ribbon.edge.width", -3),
                            r"^ribbon\.edge\.width: got -3\.0; expected a width >= 0 in "
                            r"lattice constants$"),
    "edge wider than half": ({"ribbon": {"width": 120, "edge": {"width": 70}}},
                             r"^ribbon\.edge\.width: got 70\.0, wider than half the ribbon "
                             r"\(ribbon\.width = 120\); expected at most 60$"),
    "edge wider than half, odd W": ({"ribbon": {"width": 7, "edge": {"width": 4}}},
                                    r"expected at most 3\.5$"),
    "unknown profile": (nested("ribbon.edge.profile", "lineer"),
                        r"^ribbon\.edge\.profile: got 'lineer'; expected one of 'none', "
                        r"'linear', 'tanh', 'erf', 'table' \(did you mean 'linear'\?\)$"),
    "table profile without table": (nested("ribbon.edge.profile", "table"),
                                    r"^ribbon\.edge\.table: empty, but ribbon\.edge\.profile = "
                                    r"'table' needs it"),
    "table without table profile": ({"ribbon": {"edge": {"profile": "linear",
                                                         "table": [[0, 1]]}}},
                                     r"^ribbon\.edge\.table: given with ribbon\.edge\.profile = "
                                     r"'linear'.*set ribbon\.edge\.profile = 'table'"),
    "table not an array": (nested("ribbon.edge.table", 3),
                           r"^ribbon\.edge\.table: got 3 \(integer\); expected an array"),
    "table row too short": (nested("ribbon.edge.table", [[0, 1], [2]]),
                            r"^ribbon\.edge\.table\[1\]: got \[2\]; expected a "
                            r"\[distance, potential\] pair"),
    "table row not numbers": (nested("ribbon.edge.table", [[0, "1"]]),
                              r"^ribbon\.edge\.table\[0\]: got \[0, '1'\]"),
    "table row nan": (nested("ribbon.edge.table", [[0, math.nan]]),
                      r"^ribbon\.edge\.table\[0\]: .*finite numbers"),
    "table negative distance": ({"ribbon": {"edge": {"profile": "table",
                                                     "table": [[-1, 1]]}}},
                                r"^ribbon\.edge\.table\[0\]: got distance -1\.0; "
                                r"expected a distance >= 0"),
    "table distances not increasing": ({"ribbon": {"edge": {"profile": "table",
                                                            "table": [[0, 1], [2, 0], [2, 0]]}}},
                                       r"^ribbon\.edge\.table\[2\]: got distance 2\.0 after 2\.0; "
                                       r"expected strictly increasing distances$"),
    "zeeman without spin": ({"spin": {"enabled": False, "zeeman": 0.1}},
                            r"^spin\.zeeman: got 0\.1 with spin\.enabled = false; .*"
                            r"spin\.zeeman = 0\.1 needs spin\.enabled = true"),
    "window zero": (nested("spectrum.window", 0), r"^spectrum\.window: got 0\.0; expected a "
                                                  r"half-width > 0 in t"),
    "window negative": (nested("spectrum.window", -1.5), r"^spectrum\.window: got -1\.5;"),
    "unknown solver": (nested("spectrum.solver", "bandd"),
                       r"^spectrum\.solver: got 'bandd'; expected one of 'auto', 'banded', "
                       r"'dense' \(did you mean 'banded'\?\)$"),
    "nan": (nested("fermi.energy", math.nan), r"^fermi\.energy: got nan \(not finite\); expected"),
    "inf": (nested("ribbon.edge.height", -math.inf),
            r"^ribbon\.edge\.height: got -inf \(not finite"),
    "title not a string": ({"title": 3}, r"^title: got 3 \(integer\); expected a string$"),
    "long string shortened": (nested("spectrum.solver", "x\n" * 100), r"got 'x\\nx\\n.*\.\.\.;"),
}


@pytest.mark.parametrize("data, pattern", BAD.values(), ids=BAD.keys())
def test_invalid_scenario_message(data, pattern):
    with pytest.raises(ConfigError, match=pattern) as info:
        parse_scenario(data)
    assert "\n" not in str(info.value)


def test_config_error_is_one_line():
    assert str(ConfigError("a\n  b\r\nc")) == "a b c"
    assert isinstance(ConfigError("x"), ValueError)


def test_defaults():
    s = parse_scenario({})
    assert s == Scenario()
    assert s.title == "" and s.source is None
    assert s.lattice == LatticeConfig(flux=Fraction(1, 40), onsite=0.0)
    assert s.spin == SpinConfig(enabled=True, zeeman=0.0)
    assert s.ribbon == RibbonConfig(width=120, edge=EdgeConfig("none", 0.0, 0.0, ()))
    assert s.spectrum == SpectrumConfig(k_points=301, window=None, solver="auto")
    assert s.fermi == FermiConfig(energy=None, gap=None)  # E_F = 0 unless set


def test_full_scenario():
    s = parse_scenario(FULL, source="full.toml")
    assert s.title == "linear ramp, spin split"
    assert s.source == "full.toml"
    assert s.lattice == LatticeConfig(kind="square", flux=Fraction(-1, 30), onsite=0.25)
    assert s.spin == SpinConfig(True, 0.1)
    assert s.ribbon.width == 80
    assert s.ribbon.edge == EdgeConfig("table", 0.0, 0.0, ((0.0, 2.0), (1.5, 0.5), (4.0, 0.0)))
    assert s.spectrum == SpectrumConfig(101, 0.5, "banded")
    assert s.fermi == FermiConfig(-0.3)


def test_exact_types():
    s = parse_scenario({"lattice": {"onsite": -1},
                        "ribbon": {"edge": {"profile": "linear", "width": 3, "height": 2}}})
    assert type(s.lattice.onsite) is float
    assert type(s.ribbon.edge.width) is float and type(s.ribbon.edge.height) is float
    assert type(s.ribbon.width) is int and type(s.lattice.flux) is Fraction
    table = parse_scenario(FULL).ribbon.edge.table
    assert isinstance(table, tuple) and all(type(x) is float for row in table for x in row)


def test_scenario_is_frozen():
    with pytest.raises(dataclasses.FrozenInstanceError):
        parse_scenario({}).ribbon.width = 3


@pytest.mark.parametrize("data", [{}, FULL, nested("spectrum.window", 1)], ids=["defaults", "full",
                                                                               "window"])
def test_to_dict_round_trip(data):
    s = parse_scenario(data)
    d = s.to_dict()
    assert parse_scenario(d) == s
    assert d == parse_scenario(d).to_dict()


def test_to_dict_values():
    d = parse_scenario(FULL).to_dict()
    assert d["lattice"]["flux"] == "-1/30"
    assert d["ribbon"]["edge"]["table"] == [[0.0, 2.0], [1.5, 0.5], [4.0, 0.0]]
    assert "window" not in parse_scenario({}).to_dict()["spectrum"]
    unset = {"fermi.gap", "material.preset", "material.effective_mass", "material.g_factor",
             "material.permittivity", "material.lattice_constant_nm", "field.b_tesla",
             "field.fermi_mev", "field.density_cm2", "ribbon.orientation"}
    # Without interaction the whole [interaction] section is left out.
    unset |= {p for p in leaf_paths(Scenario) if p.startswith("interaction.")}
    # So are [disorder] and [levels] while they have their defaults (their command tests set them).
    unset |= {p for p in leaf_paths(Scenario) if p.startswith(("disorder.", "levels."))}
    assert set(flat_paths(d)) == set(leaf_paths(Scenario)) - unset  # unset keys are left out


def test_source_not_compared():
    assert parse_scenario(FULL, source="a.toml") == parse_scenario(FULL)


@pytest.mark.parametrize("text, flux", [("-1/3", Fraction(-1, 3)), (" 3 / 7 ", Fraction(3, 7)),
                                        ("+1/40", Fraction(1, 40)), ("-39/40", Fraction(-39, 40))])
def test_flux_accepted(text, flux):
    assert parse_scenario(nested("lattice.flux", text)).lattice.flux == flux


# The Peierls phases exp(2 pi i p/q) repeat with period 1 in the flux (common
# practice, no source): |flux| >= 1 is the lattice at flux - round(flux).
@pytest.mark.parametrize("text, message", [
    ("1", r"^lattice\.flux: got '1'; expected \|p/q\| < 1 .*1 is zero field on the lattice\)$"),
    (1, r"^lattice\.flux: got 1; expected \|p/q\| < 1 .*1 is zero field on the lattice\)$"),
    (-2, r"^lattice\.flux: got -2; expected \|p/q\| < 1"),
    ("41/10", r"^lattice\.flux: got '41/10'; expected \|p/q\| < 1 .*41/10 is the same lattice as '1/10'\)$"),
    ("-7/3", r"the same lattice as '-1/3'"),
])
def test_flux_outside_one_period_refused(text, message):
    with pytest.raises(ConfigError, match=message):
        parse_scenario(nested("lattice.flux", text))


@pytest.mark.parametrize("kind", ["square", "honeycomb"])
def test_zero_flux_refused_where_a_field_is_needed(kind):
    with pytest.raises(ConfigError, match=r"^lattice\.flux: got '0' on the .*expected a nonzero flux p/q .*"
                                          r"lattice\.kind = 'haldane' or 'qwz'\)$"):
        parse_scenario({"lattice": {"kind": kind, "flux": "0"}})


def test_flux_denominator_beyond_q_max_refused():
    with pytest.raises(ConfigError, match=r"^lattice\.flux: got '1/100000'; expected a denominator of at "
                                          r"most field\.q_max = 4000 "):
        parse_scenario(nested("lattice.flux", "1/100000"))
    data = nested("lattice.flux", "1/5000")
    data["field"] = {"q_max": 5000}
    data["ribbon"] = {"width": 400}
    assert parse_scenario(data).lattice.flux == Fraction(1, 5000)


def test_ribbon_narrower_than_two_magnetic_lengths_refused():
    # l_B = a / sqrt(2 pi |flux|) on the square lattice (common practice, no
    # source): flux 1/400 gives l_B = 7.98 a, so a span of 15 a is too little, 16 a enough.
    data = nested("lattice.flux", "1/400")
    data["ribbon"] = {"width": 15}
    with pytest.raises(ConfigError, match=r"^ribbon\.width: got 15 \(15 a across\), less than two magnetic "
                                          r"lengths at flux 1/400 \(l_B = 7\.98 a\)"):
        parse_scenario(data)
    data["ribbon"] = {"width": 16}
    assert parse_scenario(data).ribbon.width == 16


def test_zero_width_ramp_and_zeeman_zero_without_spin_allowed():
    for profile in ("linear", "tanh", "erf"):
        assert parse_scenario(nested("ribbon.edge.profile", profile)).ribbon.edge.width == 0
    assert parse_scenario({"spin": {"enabled": False, "zeeman": 0}}).spin.enabled is False


def test_edge_width_at_half_allowed():
    s = parse_scenario({"ribbon": {"width": 7, "edge": {"width": 3.5}}})
    assert s.ribbon.edge.width == 3.5


@st.composite
def coprime_pairs(draw):
    q = draw(st.integers(2, 60))
    p = draw(st.integers(-q + 1, q - 1).filter(lambda p: p != 0 and math.gcd(p, q) == 1))
    return p, q


@given(coprime_pairs())
def test_flux_property(pq):
    p, q = pq
    s = parse_scenario(nested("lattice.flux", f"{p}/{q}"))
    assert s.lattice.flux == Fraction(p, q)
    assert s.to_dict()["lattice"]["flux"] == f"{p}/{q}"


def test_key_docs_cover_every_key():
    rows = key_docs()
    paths = [row[0] for row in rows]
    assert len(paths) == len(set(paths))
    # FULL sets fermi.energy, which excludes fermi.gap, lattice units, which
    # exclude the physical-unit keys (tests/test_units.py covers those; [disorder]
    # and [levels] are their commands' tests'), and
    # the square lattice, which has no ribbon.orientation (test_honeycomb.py).
    physical = {p for p in leaf_paths(Scenario) if p.startswith(("material.", "field.", "interaction.", "disorder.",
                                                                     "levels."))}
    assert set(paths) == set(leaf_paths(Scenario)) == (set(flat_paths(FULL)) | {"fermi.gap", "ribbon.orientation"}
                                                       | physical)
    assert all(len(row) == 5 and all(isinstance(x, str) and x for x in row) for row in rows)
    docs = {row[0]: row for row in rows}
    assert docs["lattice.flux"][3] == '"1/40"'
    assert docs["spectrum.window"][3] == "unset"
    assert docs["ribbon.edge.height"][2] == "t"


def test_overrides_parse_values():
    data = apply_overrides(FULL, ["lattice.flux=1/30", "ribbon.edge.profile=linear",
                                  "ribbon.width=60", "spectrum.window = 0.25",
                                  "spin.enabled=false", "spin.zeeman=0", "title=two words",
                                  'fermi.energy=-1', "ribbon.edge.table=[]"])
    assert data["lattice"]["flux"] == "1/30"
    assert data["ribbon"]["edge"]["profile"] == "linear"
    assert data["ribbon"]["width"] == 60
    assert data["spectrum"]["window"] == 0.25
    assert data["spin"]["enabled"] is False
    assert data["title"] == "two words"
    assert data["fermi"]["energy"] == -1
    s = parse_scenario(data)
    assert s.lattice.flux == Fraction(1, 30) and s.ribbon.edge.table == ()
    assert FULL["lattice"]["flux"] == "-1/30"  # input untouched


def test_override_creates_sections_and_quoted_string():
    data = apply_overrides({}, ["ribbon.edge.width=4", 'lattice.flux="1/8"',
                                "spectrum.k_points=11"])
    assert data == {"ribbon": {"edge": {"width": 4}}, "lattice": {"flux": "1/8"},
                    "spectrum": {"k_points": 11}}


@pytest.mark.parametrize("item", ["foo", "=3", "ribbon.=3", ".width=3", "ribbon..width=1"])
def test_override_malformed(item):
    with pytest.raises(ConfigError, match=rf"^--set '{re.escape(item)}': expected "
                                          r"section\.key=value"):
        apply_overrides({}, [item])


def test_override_into_value():
    with pytest.raises(ConfigError, match=r"^--set 'lattice\.flux\.x=1': lattice\.flux holds a "
                                          r"value, not a table"):
        apply_overrides(FULL, ["lattice.flux.x=1"])


def test_override_unknown_path():
    data = apply_overrides({}, ["ribon.width=3"])
    with pytest.raises(ConfigError, match=r"^ribon: unknown key; did you mean 'ribbon'\?$"):
        parse_scenario(data)
    with pytest.raises(ConfigError, match=r"^spectrum\.kpoints: unknown key; did you mean "
                                          r"'spectrum\.k_points'\?$"):
        parse_scenario(apply_overrides({}, ["spectrum.kpoints=3"]))


def test_overrides_single_string_is_type_error():
    with pytest.raises(TypeError, match="wrap it in a list"):
        apply_overrides({}, "ribbon.width=3")


def test_load_file_with_overrides(tmp_path):
    path = tmp_path / "run.toml"
    path.write_text(FULL_TOML)
    s = load_scenario(path)
    assert s == parse_scenario(FULL)
    assert s.source == str(path)
    s = load_scenario(str(path), ["ribbon.width=40", "ribbon.edge.profile=none",
                                  "ribbon.edge.table=[]"])
    assert s.ribbon.width == 40 and s.ribbon.edge.profile == "none"


def test_load_default_path(tmp_path, monkeypatch):
    path = tmp_path / "default.toml"
    path.write_text('title = "stand-in"\n')
    monkeypatch.setattr("topoedge.scenario.load.DEFAULT_SCENARIO", path)
    assert load_scenario().title == "stand-in"


def test_load_validation_error(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text("[ribbon.edge]\nwidht = 3\n")
    with pytest.raises(ConfigError, match=r"did you mean 'ribbon\.edge\.width'"):
        load_scenario(path)


def test_missing_file(tmp_path):
    with pytest.raises(ConfigError, match=r"^scenario file '.*nope\.toml' not found"):
        load_scenario(tmp_path / "nope.toml")


def test_toml_syntax_error_one_line(tmp_path):
    path = tmp_path / "broken.toml"
    path.write_text("[lattice]\nflux = 1/40\n")
    with pytest.raises(ConfigError, match=r"^scenario file '.*broken\.toml': invalid TOML: "
                                          r".*line 2") as info:
        load_scenario(path)
    assert "\n" not in str(info.value)


def test_unreadable_encoding(tmp_path):
    path = tmp_path / "latin1.toml"
    path.write_bytes('title = "caf\u00e9"\n'.encode("latin-1"))
    with pytest.raises(ConfigError, match=r"latin1\.toml': invalid TOML"):
        load_scenario(path)


def test_fermi_gap_override_replaces_the_energy_and_back():
    data = {"fermi": {"energy": -3.5}}
    s = parse_scenario(apply_overrides(data, ["fermi.gap=2"]))
    assert (s.fermi.energy, s.fermi.gap) == (None, 2)
    s = parse_scenario(apply_overrides({"fermi": {"gap": 3}}, ["fermi.energy=-1.5"]))
    assert (s.fermi.energy, s.fermi.gap) == (-1.5, None)
    with pytest.raises(ConfigError, match=r"^fermi\.gap: got 2 together with fermi\.energy"):
        parse_scenario({"fermi": {"energy": -3.5, "gap": 2}})
    with pytest.raises(ConfigError, match=r"^fermi\.gap: got 0; expected an integer number of bands >= 1"):
        parse_scenario({"fermi": {"gap": 0}})
