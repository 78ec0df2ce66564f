"""Fuzzing the scenario parser, the ``--set`` overrides and the file loader.

Whatever a user writes, reading a scenario ends in a valid scenario or in one
:class:`ConfigError` of one line: never another exception (a traceback on the
command line). The model stage (:func:`resolve`) is included, since the
command line resolves every scenario before computing.
"""

from __future__ import annotations

import math
import tomllib

from hypothesis import HealthCheck, given, settings, strategies as st

from topoedge.scenario import ConfigError, DEFAULT_SCENARIO, apply_overrides, load_scenario, parse_scenario, resolve
from topoedge.scenario.schema import KEYS

PATHS = sorted(KEYS)

# Values of every TOML type, with the awkward ones: huge and tiny numbers,
# NaN and infinities, empty and odd strings, nested arrays and tables.
scalars = st.one_of(
    st.integers(-10**20, 10**20), st.floats(allow_nan=True, allow_infinity=True),
    st.booleans(), st.text(max_size=12),
    st.sampled_from(["1/40", "-1/3", "0", "1/0", "2/4", "41/10", "1/100000", "auto", "gaas", "linear",
                     "table", "zigzag", "armchair", "square", "honeycomb", "haldane", "qwz", "polarised"]),
)
values = st.recursive(scalars, lambda inner: st.one_of(st.lists(inner, max_size=4),
                                                       st.dictionaries(st.text(max_size=6), inner, max_size=3)),
                      max_leaves=8)


def _nested(items: dict) -> dict:
    data: dict = {}
    for path, value in items.items():
        table = data
        names = path.split(".")
        for name in names[:-1]:
            if not isinstance(table.get(name), dict):
                table[name] = {}
            table = table[name]
        table[names[-1]] = value
    return data


def _no_traceback(call):
    """Run ``call``; a ConfigError must be one line. Any other exception fails the test."""
    try:
        result = call()
    except ConfigError as err:
        text = str(err)
        assert text and "\n" not in text and len(text) < 1200, text
        return None
    return result


FAST = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@FAST
@given(st.dictionaries(st.sampled_from(PATHS), values, max_size=6))
def test_parser_never_raises_anything_but_one_line_config_errors(items):
    base = tomllib.loads(DEFAULT_SCENARIO.read_text())
    for key in list(items):
        if "." in key and key.split(".")[0] in ("material", "field"):
            base.pop("fermi", None)
    data = apply_overrides(base, [])
    for path, value in items.items():
        table = data
        for name in path.split(".")[:-1]:
            table = table.setdefault(name, {}) if isinstance(table.get(name, {}), dict) else {}
        table[path.split(".")[-1]] = value
    scenario = _no_traceback(lambda: parse_scenario(data))
    if scenario is not None:
        _no_traceback(lambda: resolve(scenario))


@FAST
@given(st.dictionaries(st.text(max_size=8), values, max_size=4))
def test_unknown_shapes_are_config_errors(data):
    _no_traceback(lambda: parse_scenario(data))


override_items = st.one_of(
    st.text(max_size=30),
    st.builds(lambda path, text: f"{path}={text}", st.sampled_from(PATHS), st.text(max_size=15)),
    st.builds(lambda path, number: f"{path}={number!r}", st.sampled_from(PATHS),
              st.one_of(st.integers(-10**12, 10**12), st.floats())),
)


@FAST
@given(st.lists(override_items, max_size=4))
def test_set_items_never_raise_anything_but_one_line_config_errors(items):
    base = tomllib.loads(DEFAULT_SCENARIO.read_text())
    scenario = _no_traceback(lambda: parse_scenario(apply_overrides(base, items)))
    if scenario is not None:
        _no_traceback(lambda: resolve(scenario))


@settings(max_examples=60, deadline=None)
@given(st.one_of(st.text(max_size=200), st.binary(max_size=100)))
def test_any_file_content_is_read_or_refused_in_one_line(tmp_path_factory, content):
    path = tmp_path_factory.mktemp("fuzz") / "scenario.toml"
    if isinstance(content, bytes):
        path.write_bytes(content)
    else:
        path.write_text(content, encoding="utf-8", errors="surrogatepass") if not any(
            0xD800 <= ord(c) <= 0xDFFF for c in content) else path.write_bytes(content.encode("utf-8", "replace"))
    _no_traceback(lambda: load_scenario(path))


def test_the_fuzzer_can_find_a_config_error():
    # The checks above would pass vacuously if nothing were ever refused.
    refused = _no_traceback(lambda: parse_scenario({"lattice": {"flux": math.nan}}))
    assert refused is None
