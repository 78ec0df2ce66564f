"""Reading scenarios: TOML files, shipped scenarios by name, presets and ``--set`` overrides.

``load_scenario`` reads a file (or a shipped scenario), applies overrides
and returns a validated :class:`Scenario`. The shipped scenarios, presets and
sweeps are package data (``topoedge/data``), found through
:mod:`importlib.resources`, so an installed package has them too.
"""

from __future__ import annotations

import difflib
from importlib import resources
import os
import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import fields
from fractions import Fraction
from pathlib import Path
from typing import Any
from .checks import MATERIAL_KEYS, check_combinations
from .schema import KEYS, TOML_TYPES, children, convert, join_path, plain, show, unknown_key
from ..models.lattices import lattice
from .sections import SECTIONS, ConfigError, Scenario

__all__ = ["load_scenario", "parse_scenario", "apply_overrides", "shipped", "find_shipped", "DATA_DIR", "SCENARIOS_DIR", "DEFAULT_SCENARIO", "PRESETS_DIR"]


#: The shipped scenarios, presets and sweeps (package data, read through importlib.resources).
DATA_DIR = Path(str(resources.files("topoedge").joinpath("data")))


SCENARIOS_DIR = DATA_DIR / "scenarios"


DEFAULT_SCENARIO = SCENARIOS_DIR / "default.toml"


def _collect(table: Any, prefix: str, out: dict[str, Any]) -> None:
    """Validate the section ``prefix`` and store its converted keys in ``out``."""
    if not isinstance(table, Mapping):
        kind = TOML_TYPES.get(type(table), type(table).__name__)
        raise ConfigError(f"{prefix or 'scenario'}: got {show(table)} ({kind}); expected a "
                          f"table with keys {', '.join(map(repr, children(prefix)))}")
    for name, value in table.items():
        path = join_path(prefix, str(name))
        if path in SECTIONS:
            _collect(value, path, out)
        elif path in KEYS:
            out[path] = convert(KEYS[path], value)
        else:
            raise unknown_key(path)


def _build(prefix: str, values: Mapping[str, Any], **extra: Any) -> Any:
    """Construct the dataclass of section ``prefix``; missing keys keep defaults."""
    kwargs = dict(extra)
    for f in fields(SECTIONS[prefix]):
        path = join_path(prefix, f.name)
        if path in SECTIONS:
            kwargs[f.name] = _build(path, values)
        elif path in values:
            kwargs[f.name] = values[path]
    return SECTIONS[prefix](**kwargs)


PRESETS_DIR = DATA_DIR / "presets"


def _apply_preset(data: Mapping[str, Any]) -> Mapping[str, Any]:
    """Fill the [material] keys not given from the preset file it names."""
    material = data.get("material")
    if not isinstance(material, Mapping) or material.get("preset") is None:
        return data
    name = material["preset"]
    available = sorted(p.stem for p in PRESETS_DIR.glob("*.toml"))
    if not isinstance(name, str) or name not in available:
        close = difflib.get_close_matches(str(name), available, n=1)
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        raise ConfigError(f"material.preset: got {show(name)}; expected one of "
                          f"{', '.join(map(repr, available)) or 'no presets found'}{hint}")
    path = PRESETS_DIR / f"{name}.toml"
    try:
        preset = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, tomllib.TOMLDecodeError) as err:
        raise ConfigError(f"material.preset: cannot read {path}: {err}".replace("\n", " ")) from None
    extra = set(preset) - {"material"} or set(preset.get("material", {})) - set(MATERIAL_KEYS)
    if extra:
        raise ConfigError(f"material.preset: {path} has {sorted(extra)}; expected only [material] "
                          f"keys {', '.join(MATERIAL_KEYS)}")
    merged = dict(data)
    merged["material"] = {**preset.get("material", {}), **material}
    return merged


def parse_scenario(data: Mapping[str, Any], *, source: str | None = None) -> Scenario:
    """Validate a nested mapping of TOML values into a `Scenario`.

    Parameters
    ----------
    data : Mapping
        Top-level ``title`` and the section tables; absent keys take their
        defaults. Ints are accepted for float keys; bools, strings and floats
        are never taken for numbers, integers or flux respectively.
    source : str, optional
        File the data came from, kept in `Scenario.source`.

    Returns
    -------
    Scenario

    Raises
    ------
    ConfigError
        At the first unknown key, wrong type, out-of-range value or
        inconsistent combination, naming the key path.
    """
    values: dict[str, Any] = {}
    _collect(_apply_preset(data), "", values)
    if values.get("field.b_tesla") is not None:  # these keys are derived from the field
        for path, by in (("lattice.flux", "field.b_tesla"), ("spin.zeeman", "field.b_tesla"),
                         ("fermi.energy", "field.fermi_mev or field.density_cm2"),
                         ("fermi.gap", "field.fermi_mev or field.density_cm2")):
            if path in values and values[path] is not None and (
                    path.startswith(("lattice", "spin")) or values.get("field.fermi_mev") is not None
                    or values.get("field.density_cm2") is not None):
                raise ConfigError(f"{path}: given together with {by}, which sets it; expected only one "
                                  "of them (remove the lattice-unit key)")
    if not lattice(values.get("lattice.kind", "square")).in_field:
        # A zero-field two-band model: no flux and no spin unless asked for (refused).
        kind = values["lattice.kind"]
        if values.get("lattice.flux"):
            raise ConfigError(f"lattice.flux: got '{values['lattice.flux']}' with lattice.kind = {kind!r}, a "
                              "zero-field model; expected no flux (leave the key out)")
        if values.get("spin.enabled"):
            raise ConfigError(f"spin.enabled: true with lattice.kind = {kind!r}, a spinless two-band model; "
                              "expected false (leave the key out)")
        values["lattice.flux"] = Fraction(0)
        values["spin.enabled"] = False
    if isinstance(data.get("interaction"), Mapping) and "interaction.enabled" not in values:
        values["interaction.enabled"] = True  # the section turns the interaction on
    scenario = _build("", values, source=source)
    check_combinations(scenario)
    return scenario


def _parse_value(text: str) -> Any:
    """A TOML value, or the text itself when it is not one (``1/30``, ``linear``)."""
    try:
        parsed = tomllib.loads(f"v = {text}")
    except tomllib.TOMLDecodeError:
        return text
    return parsed["v"] if parsed.keys() == {"v"} else text


def apply_overrides(data: Mapping[str, Any], overrides: Sequence[str]) -> dict[str, Any]:
    """Return a copy of ``data`` with ``section.key=value`` overrides set.

    Parameters
    ----------
    data : Mapping
        Nested scenario tables, as read from TOML; not modified.
    overrides : sequence of str
        Items ``path=value`` with a dotted key path of any depth, e.g.
        ``ribbon.edge.width=4``. The value is read as a TOML value, or kept
        as a bare string if it is not one (``lattice.flux=1/30``). Setting
        ``fermi.gap`` removes the ``fermi.energy`` of ``data`` and the other
        way round; setting both is refused.

    Returns
    -------
    dict
        The merged tables, to be validated by `parse_scenario` (which also
        reports unknown key paths).

    Raises
    ------
    ConfigError
        For an item without ``=`` or with an empty key, one whose path
        descends into a value that is not a table, or two items setting keys
        that exclude each other (``fermi.gap`` and ``fermi.energy``).
    """
    if isinstance(overrides, str):
        raise TypeError(f"overrides: got the string {show(overrides)}; expected a sequence "
                        "of 'section.key=value' strings (wrap it in a list)")
    merged = plain(data)
    given: dict[str, str] = {}   # alternative key -> the --set item that set it
    for item in overrides:
        path, eq, text = item.partition("=")
        names = [name.strip() for name in path.split(".")]
        if not eq or not all(names):
            raise ConfigError(f"--set {show(item)}: expected section.key=value "
                              "(for example --set ribbon.width=80)")
        table = merged
        for depth, name in enumerate(names[:-1]):
            table = table.setdefault(name, {})
            if not isinstance(table, dict):
                inner = ".".join(names[:depth + 1])
                raise ConfigError(f"--set {show(item)}: {inner} holds a value, not a table; "
                                  f"expected a key path ending at a key (e.g. {inner}=...)")
        table[names[-1]] = _parse_value(text.strip())
        for group in _ALTERNATIVES:  # setting one alternative replaces the others of the file
            key = ".".join(names)
            if key in group and table is merged.get(names[0]):
                clash = [given[other] for other in sorted(group - {key}) if other in given]
                if clash:
                    raise ConfigError(f"--set {show(item)}: given together with --set {show(clash[0])}; "
                                      f"expected only one of {', '.join(sorted(group))}")
                given[key] = item
                for other in group - {key}:
                    table.pop(other.rpartition(".")[2], None)
    return merged


#: Keys that exclude each other; an override of one removes the others.
_ALTERNATIVES = ({"fermi.energy", "fermi.gap"},)


def load_scenario(path: str | os.PathLike[str] | None = None,
                  overrides: Sequence[str] = ()) -> Scenario:
    """Read a TOML scenario file, apply overrides and validate it.

    Parameters
    ----------
    path : str or os.PathLike, optional
        Scenario file, or the name of a shipped scenario (``"gaas-1T"``,
        see :func:`shipped`); `DEFAULT_SCENARIO` when None.
    overrides : sequence of str
        ``section.key=value`` items, applied as by `apply_overrides`. The
        file's title then gets the items appended in brackets (``"nu = 2
        [--set spin.enabled=false]"``), so that reports and figure titles
        do not describe physics the command line changed; an override of
        ``title`` itself replaces it.

    Returns
    -------
    Scenario
        With ``source`` set to ``str(path)``.

    Raises
    ------
    ConfigError
        If the file is missing or unreadable, is not valid TOML, or the
        scenario is invalid.
    """
    path = DEFAULT_SCENARIO if path is None else find_shipped(path, "scenarios")
    try:
        with open(path, "rb") as file:
            data = tomllib.load(file)
    except FileNotFoundError:
        names = ", ".join(shipped("scenarios"))
        raise ConfigError(f"scenario file {str(path)!r} not found; expected an existing TOML file or the name of "
                          f"a shipped scenario ({names})") from None
    except OSError as err:
        raise ConfigError(f"scenario file {str(path)!r}: cannot read it "
                          f"({err.strerror})") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as err:
        raise ConfigError(f"scenario file {str(path)!r}: invalid TOML: {err}; "
                          "expected a valid UTF-8 TOML document") from None
    if not data:
        raise ConfigError(f"scenario file {str(path)!r} holds no keys; expected a scenario with at least "
                          "[lattice] flux = 'p/q' and [fermi] energy or gap (see the shipped 'default')")
    merged = apply_overrides(data, overrides)
    changed = [item.strip() for item in overrides if item.partition("=")[0].strip() != "title"]
    if changed and isinstance(merged.get("title"), str) and merged["title"] and merged["title"] == data.get("title"):
        # the file's title describes the file's physics: say what the command line changed
        shown = "; ".join(changed)
        merged["title"] += f" [--set {shown}]" if len(shown) <= 60 else f" [{len(changed)} keys changed by --set]"
    return parse_scenario(merged, source=str(path))


def shipped(kind: str = "scenarios") -> list[str]:
    """Names of the shipped scenarios (``kind = "scenarios"``), presets or sweeps."""
    return sorted(p.stem for p in (DATA_DIR / kind).glob("*.toml"))


def find_shipped(path: str | os.PathLike[str], kind: str = "scenarios") -> Path:
    """``path`` itself when it exists, else the shipped file of that name (``"gaas-1T"`` or ``"gaas-1T.toml"``)."""
    path = Path(path)
    if path.exists() or path.parent != Path("."):
        return path
    candidate = DATA_DIR / kind / (path.name if path.suffix == ".toml" else f"{path.name}.toml")
    return candidate if candidate.exists() else path


