"""Scenarios: TOML files validated once into frozen dataclasses, then resolved to lattice units.

Stage 2 of topoedge (after the model descriptions of :mod:`topoedge.models`):

- :mod:`.sections` -- the frozen dataclasses of every section and ``ConfigError``;
- :mod:`.schema` -- one row per key (type, unit, meaning, check), converters, ``key_docs``;
- :mod:`.checks` -- combinations of keys, lattices' own keys, physical units;
- :mod:`.load` -- files, shipped scenarios, presets, ``--set`` overrides;
- :mod:`.units` -- a material in a field in lattice units (CODATA);
- :mod:`.resolve` -- the scenario in lattice units.

Every energy is in units of the hopping t, lengths in lattice constants a,
flux in flux quanta per plaquette; every problem is a one-line
``ConfigError``.
"""

from .checks import derive_units, ribbon_span
from .load import (DATA_DIR, DEFAULT_SCENARIO, PRESETS_DIR, SCENARIOS_DIR, apply_overrides, find_shipped,
                   load_scenario, parse_scenario, shipped)
from .model import Model, lattice_scenario, resolve
from .schema import convert_key, key_docs, key_paths
from .sections import (BACKGROUND_PROFILES, EDGE_PROFILES, LATTICES, MIXINGS, ORIENTATIONS, SOLVERS, START_STATES,
                       ZERO_FIELD, BackgroundConfig, ChernConfig, ConfigError, EdgeConfig, EdgesConfig, FermiConfig,
                       FieldConfig, HallbarConfig, InteractionConfig, LatticeConfig, MaterialConfig, RibbonConfig,
                       Scenario, SpectrumConfig, SpinConfig)

__all__ = [
    "ConfigError", "Scenario", "LatticeConfig", "SpinConfig", "EdgeConfig", "RibbonConfig", "SpectrumConfig",
    "FermiConfig", "ChernConfig", "EdgesConfig", "MaterialConfig", "FieldConfig", "HallbarConfig",
    "BackgroundConfig", "InteractionConfig", "load_scenario", "parse_scenario", "apply_overrides", "shipped",
    "find_shipped", "Model", "resolve", "lattice_scenario", "derive_units", "ribbon_span", "key_docs", "key_paths", "convert_key",
    "DATA_DIR", "SCENARIOS_DIR", "DEFAULT_SCENARIO", "PRESETS_DIR", "EDGE_PROFILES", "SOLVERS", "LATTICES",
    "ZERO_FIELD", "ORIENTATIONS", "START_STATES", "MIXINGS", "BACKGROUND_PROFILES",
]
