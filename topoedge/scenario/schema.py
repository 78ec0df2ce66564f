"""The schema of scenario keys: one row per key, converters, messages and the key table.

Every key is one :class:`Key` row of ``KEYS`` (path, type, unit, meaning,
what the error message expects, an optional range check); its default is
the default of the matching dataclass field of :mod:`topoedge.scenario.sections`.
``convert`` checks one value, ``key_docs`` produces the rows of the
configuration reference.
"""

from __future__ import annotations

import dataclasses
import difflib
import json
import math
import numbers
import re
from collections.abc import Callable
from dataclasses import dataclass, fields
from fractions import Fraction
from typing import Any
from .sections import (BACKGROUND_PROFILES, EDGE_PROFILES, LATTICES, MIXINGS, ORIENTATIONS, SECTIONS, SOLVERS,
                       START_STATES, ConfigError, Scenario, fraction_text, lookup, plain)

__all__ = ["Key", "KEYS", "TOML_TYPES", "convert", "convert_key", "key_paths", "key_docs", "children", "join_path", "unknown_key", "show", "plain", "lookup", "fraction_text"]


@dataclass(frozen=True)
class Key:
    path: str
    kind: str              # a key of _CONVERTERS
    unit: str
    doc: str
    expect: str            # completes "expected ..." in error messages
    check: Callable[[Any], bool] | None = None
    choices: tuple[str, ...] = ()
    optional: bool = False  # None (absent) is allowed


#: Largest energy (units of t) a key accepts: a million times the hopping.
ENERGY_LIMIT = 1e6


def _positive(x):
    return x > 0


KEYS: dict[str, Key] = {key.path: key for key in (
    Key("title", "string", "-", "Free-text title of the scenario.", "a string"),
    Key("lattice.kind", "choice", "-",
         "Lattice: square (constant a), honeycomb (bond length a_cc), or the zero-field Haldane "
         "(honeycomb) and Qi-Wu-Zhang (square) models.",
         "one of " + ", ".join(map(repr, LATTICES)), choices=LATTICES),
    Key("lattice.flux", "flux", "phi0 per plaquette",
         "Flux per plaquette (per hexagon on the honeycomb lattice) as a fraction p/q; "
         "negative p reverses the field.",
         "a string 'p/q' with |p/q| < 1 such as '1/40'"),
    Key("lattice.onsite", "float", "t", "Uniform on-site energy.", "a finite energy in t"),
    Key("lattice.staggered", "float", "t", "Sublattice potential M: +M on A, -M on B (honeycomb, haldane).",
         "a finite energy in t"),
    Key("lattice.t2", "float", "t", "Haldane model: next-nearest hopping magnitude t2.",
         "a finite energy in t"),
    Key("lattice.t2_phase", "float", "rad", "Haldane model: phase phi of the next-nearest hopping t2 exp(i phi).",
         "a finite phase in radians"),
    Key("lattice.mass", "float", "t", "Qi-Wu-Zhang model: mass m (gap closed at m = 0, +-2).",
         "a finite energy in t"),
    Key("spin.enabled", "boolean", "-", "Spin-1/2: two orbitals per site.", "true or false"),
    Key("spin.zeeman", "float", "t",
         "Zeeman splitting Delta: spin up at -Delta/2, spin down at +Delta/2.",
         "a finite energy in t"),
    Key("spin.rashba", "float", "t",
         "Rashba coupling lambda_R (mixes the spins: total Chern numbers only).",
         "a finite energy in t"),
    Key("ribbon.width", "integer", "sites (a)", "Number of sites W across the ribbon.",
         "an integer number of sites >= 2", lambda n: n >= 2),
    Key("ribbon.orientation", "choice", "-",
         "Edges of a honeycomb ribbon (unset: zigzag); not for the square lattice.",
         "one of " + ", ".join(map(repr, ORIENTATIONS)), choices=ORIENTATIONS, optional=True),
    Key("ribbon.edge.profile", "choice", "-", "Shape of the edge potential.",
         "one of " + ", ".join(map(repr, EDGE_PROFILES)), choices=EDGE_PROFILES),
    Key("ribbon.edge.width", "float", "a", "Ramp width w of the edge potential (0 = no ramp).",
         "a width >= 0 in lattice constants", lambda w: w >= 0),
    Key("ribbon.edge.height", "float", "t", "Edge potential V0 at the outermost row.",
         "a finite potential in t"),
    Key("ribbon.edge.table", "pairs", "a, t",
         "Rows [distance from the edge, potential] for profile 'table'.",
         "an array of [distance, potential] pairs of finite numbers"),
    Key("spectrum.k_points", "integer", "-", "Number of momenta k in [-pi, pi) (k in 1/a).",
         "an integer number of k points >= 2", lambda n: n >= 2),
    Key("spectrum.window", "float", "t",
         "Half-width of the energy window around E_F; unset keeps all states.",
         "a half-width > 0 in t (leave the key out to keep all states)", _positive,
         optional=True),
    Key("spectrum.solver", "choice", "-", "Eigenvalue solver of the ribbon spectrum.",
         "one of " + ", ".join(map(repr, SOLVERS)), choices=SOLVERS),
    Key("fermi.energy", "float", "t", "Fermi energy E_F (unset with fermi.gap; 0 when both are unset).",
         "a finite energy in t", optional=True),
    Key("fermi.gap", "integer", "-",
         "Put E_F mid-gap above the r lowest bulk bands (spin bands included).",
         "an integer number of bands >= 1", lambda r: r >= 1, optional=True),
    Key("chern.grid", "grid", "-",
         "Momentum grid [n1, n2] of the link-variable method; unset: a multiple of 2 points per band, at least 12 "
         "(Landau-level solver: q x n2, n2 = 8 unset).",
         "an array of two integers >= 3", optional=True),
    Key("chern.gap_min", "float", "t", "Direct gaps below this count as closed.",
         "a gap > 0 in t", _positive),
    Key("chern.refine", "boolean", "-", "Repeat the Chern count on a 1.5 times finer grid.",
         "true or false"),
    Key("chern.solver", "choice", "-",
         "Bulk solver: every band (dense), the lowest Landau levels only (landau), or chosen by size (auto).",
         "one of 'auto', 'dense', 'landau'", choices=("auto", "dense", "landau")),
    Key("edges.k_points", "integer", "-", "Momenta of the scan for crossings of E_F.",
         "an integer number of k points >= 8", lambda n: n >= 8),
    Key("material.preset", "string", "-",
         "Shipped preset topoedge/data/presets/<name>.toml filling in the material keys not given.",
         "the name of a preset", optional=True),
    Key("material.effective_mass", "float", "m_e", "Effective mass m*.",
         "a mass > 0 in electron masses", _positive, optional=True),
    Key("material.g_factor", "float", "-", "Effective g factor (negative: spin along B lower).",
         "a finite g factor", optional=True),
    Key("material.permittivity", "float", "-", "Relative permittivity eps_r.",
         "a permittivity > 0", _positive, optional=True),
    Key("material.lattice_constant_nm", "length_or_auto", "nm",
         "Lattice constant a of the discretisation; \"auto\": flux exactly 1/q at the field, a <= l_B/3.",
         "a length > 0 in nm or \"auto\"", lambda a: a == "auto" or a > 0, optional=True),
    Key("field.b_tesla", "float", "T",
         "Perpendicular field; sets lattice.flux and spin.zeeman from the material.",
         "a finite field in tesla", optional=True),
    Key("field.fermi_mev", "float", "meV", "Fermi energy above the band bottom; sets fermi.energy.",
         "a finite energy in meV", optional=True),
    Key("field.density_cm2", "float", "cm^-2",
         "Electron density; E_F goes in the gap above the nearest integer filling.",
         "a density in cm^-2", optional=True),
    Key("field.q_max", "integer", "-", "Largest denominator of the rational flux per plaquette.",
         "an integer >= 1", lambda n: n >= 1),
    Key("field.tolerance", "float", "-",
         "Largest relative difference between the lattice field and field.b_tesla.",
         "a relative tolerance > 0 and <= 0.01", lambda x: 0 < x <= 0.01),
    Key("hallbar.enabled", "boolean", "-", "Compute the six-terminal Hall bar route in run.",
         "true or false"),
    Key("hallbar.length", "integer", "sites (a)", "Length of the Hall bar.",
         "an integer number of sites >= 16", lambda n: n >= 16),
    Key("hallbar.width", "integer", "sites (a)", "Width of the Hall bar (source and drain span it).",
         "an integer number of sites >= 8", lambda n: n >= 8),
    Key("hallbar.disorder", "float", "t", "Anderson disorder strength W_dis.",
         "a strength >= 0 in t", lambda w: w >= 0),
    Key("hallbar.seeds", "integer", "-", "Number of disorder realisations averaged.",
         "an integer >= 1", lambda n: n >= 1),
    Key("disorder.flake", "integer", "a", "Side of the square flake of topoedge disorder (a, or a_cc).",
         "an integer side >= 8", lambda n: n >= 8),
    Key("disorder.strength", "float", "t or meV", "Anderson disorder W_dis of the marker map (disorder.unit).",
         "a strength >= 0 in t", lambda w: w >= 0),
    Key("disorder.strengths", "widths", "t or meV",
         "Disorder strengths W_dis of the sigma_xy curves and the robustness map.",
         "a non-empty array of distinct strengths >= 0 in t"),
    Key("disorder.seeds", "integer", "-", "Disorder realisations per strength.",
         "an integer >= 1", lambda n: n >= 1),
    Key("disorder.region", "float", "-",
         "Central fraction of the flake (in x and y) for the marker average and the sigma_xy trace.",
         "a fraction with 0 < region <= 1", lambda f: 0 < f <= 1),
    Key("disorder.moments", "integer", "-",
         "Chebyshev moments of the kernel-polynomial expansions; unset: from the clean gap at E_F.",
         "an integer >= 8", lambda n: n >= 8, optional=True),
    Key("disorder.vectors", "integer", "-", "Random phase vectors of the Kubo-Bastin trace.",
         "an integer >= 1", lambda n: n >= 1),
    Key("disorder.energies", "integer", "-", "Fermi energies of the sigma_xy curves.",
         "an integer >= 2", lambda n: n >= 2),
    Key("disorder.unit", "choice", "-",
         "Unit of disorder.strength and disorder.strengths: t, or meV with [material] and [field].",
         "one of 't', 'meV'", choices=("t", "meV")),
    Key("disorder.hallbar", "boolean", "-",
         "Also solve the [hallbar] bar at E_F for every strength and seed (lattices with a Hall bar).",
         "true or false"),
    Key("levels.filling", "integer", "-",
         "Integer filling factor nu of the level-ordering diagram; unset: the scenario's nearest integer filling.",
         "an integer filling 1 <= nu <= 12", lambda n: 1 <= n <= 12, optional=True),
    Key("levels.coulomb_max", "float", "E_C / hbar omega_c",
         "Largest interaction strength E_C / hbar omega_c of the diagram.",
         "a ratio > 0 and <= 50", lambda x: 0 < x <= 50),
    Key("levels.zeeman_max", "float", "Delta_Z / hbar omega_c",
         "Largest Zeeman splitting Delta_Z / hbar omega_c of the diagram.",
         "a ratio > 0 and <= 5", lambda x: 0 < x <= 5),
    Key("levels.points", "integer", "-", "Points along each axis of the diagram.",
         "an integer between 11 and 2001", lambda n: 11 <= n <= 2001),
    Key("levels.fields", "widths", "T",
         "[B_min, B_max] of the gaps against the field; empty: B/4 to 4 B of field.b_tesla.",
         "an empty array or two fields 0 < B_min < B_max in tesla"),
    Key("levels.field_points", "integer", "-", "Fields of the gaps against the field.",
         "an integer between 2 and 2000", lambda n: 2 <= n <= 2000),
    Key("levels.max_filling", "integer", "-", "Largest filling of the gaps against the field.",
         "an integer between 1 and 12", lambda n: 1 <= n <= 12),
    Key("levels.lattice", "boolean", "-",
         "Also solve every candidate by bulk Hartree-Fock on the lattice (square lattice with spin).",
         "true or false"),
    Key("levels.lattice_points", "integer", "-", "Interaction strengths of the lattice part.",
         "an integer between 2 and 200", lambda n: 2 <= n <= 200),
    Key("levels.random_starts", "integer", "-",
         "Random starts of the lattice part with the spins free to share the bands (reported beside the candidates).",
         "an integer between 0 and 20", lambda n: 0 <= n <= 20),
    Key("levels.grid", "torus", "-",
         "[N1, N2] momenta of the lattice part; empty: the smallest spanning six magnetic lengths.",
         "an empty array or two integers >= 1 such as [16, 1]"),
    Key("interaction.enabled", "boolean", "-",
         "Self-consistent Hartree-Fock run (true when the [interaction] section is present).",
         "true or false"),
    Key("interaction.coulomb", "float", "t",
         "U_C = e^2/(4 pi eps0 eps_r a); unset: from [material] and [field].",
         "a strength >= 0 in t", lambda u: u >= 0, optional=True),
    Key("interaction.onsite", "float", "t",
         "On-site interaction V(0); unset: 4 ln(1+sqrt 2) U_C (1/r averaged over the cell).",
         "an energy >= 0 in t", lambda u: u >= 0, optional=True),
    Key("interaction.gate_distance", "float", "a",
         "Distance of a metal gate (image-charge screening); unset: no gate.",
         "a distance > 0 in lattice constants (leave the key out for no gate)", _positive,
         optional=True),
    Key("interaction.background.profile", "choice", "-",
         "Fall of the neutralising background charge at each edge.",
         "one of " + ", ".join(map(repr, BACKGROUND_PROFILES)), choices=BACKGROUND_PROFILES),
    Key("interaction.background.width", "float", "a",
         "Width w of the fall of the background (0 = sharp edge).",
         "a width >= 0 in lattice constants", lambda w: w >= 0),
    Key("interaction.background.setback", "float", "a",
         "Rows next to each boundary kept free of background.",
         "a distance >= 0 in lattice constants", lambda w: w >= 0),
    Key("interaction.k_points", "integer", "-",
         "Momenta N_k of the self-consistent loop; unset: smallest even N_k >= max(32, 12 l_B) "
         "holding a whole number of electrons.",
         "an even integer >= 4", lambda n: n >= 4 and n % 2 == 0, optional=True),
    Key("interaction.temperature", "float", "t", "Smearing temperature k_B T (0: zero temperature).",
         "a temperature >= 0 in t", lambda x: x >= 0),
    Key("interaction.mixing", "choice", "-", "Pulay/Anderson (DIIS) or plain linear mixing.",
         "one of " + ", ".join(map(repr, MIXINGS)), choices=MIXINGS),
    Key("interaction.alpha", "float", "-", "Mixing weight of the new residual.",
         "a weight with 0 < alpha <= 1", lambda a: 0 < a <= 1),
    Key("interaction.history", "integer", "-", "Iterates kept by DIIS.",
         "an integer >= 1", lambda n: n >= 1),
    Key("interaction.tol", "float", "-",
         "Converged when no element of the density matrix changes by more than this.",
         "a tolerance > 0", _positive),
    Key("interaction.max_iter", "integer", "-", "Iterations per start before giving up (restartable).",
         "an integer >= 1", lambda n: n >= 1),
    Key("interaction.starts", "starts", "-",
         "Starting states; the lowest converged Hartree-Fock energy is kept.",
         "a non-empty array of distinct names from " + ", ".join(map(repr, START_STATES))),
    Key("interaction.scan_widths", "widths", "a",
         "Background widths w of an edge-structure scan beside the main run (empty: none).",
         "an array of distinct widths >= 0 in lattice constants"),
)}


TOML_TYPES = {bool: "boolean", int: "integer", float: "float", str: "string",
               list: "array", tuple: "array", dict: "table"}


def show(value: Any) -> str:
    """Quote a value for a message: repr-like, TOML booleans, at most 60 chars."""
    text = str(value).lower() if isinstance(value, bool) else repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _type_error(key: Key, value: Any, hint: str = "") -> ConfigError:
    kind = TOML_TYPES.get(type(value), type(value).__name__)
    return ConfigError(f"{key.path}: got {show(value)} ({kind}); expected {key.expect}{hint}")


def _is_real(value: Any) -> bool:
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def _to_float(key: Key, value: Any) -> float:
    if not _is_real(value):
        raise _type_error(key, value)
    try:
        number = float(value)
    except OverflowError:
        number = math.inf
    if not math.isfinite(number):
        raise ConfigError(f"{key.path}: got {show(value)} (not finite); expected {key.expect}")
    if key.unit == "t" and abs(number) > ENERGY_LIMIT:
        raise ConfigError(f"{key.path}: got {show(value)}; expected {key.expect} of at most "
                          f"{ENERGY_LIMIT:.0e} t in size (beyond it the hopping t is lost in rounding)")
    return number


def _to_int(key: Key, value: Any) -> int:
    if isinstance(value, numbers.Integral) and not isinstance(value, bool):
        return int(value)
    whole = isinstance(value, float) and value.is_integer()
    hint = f" (write {int(value)} without a decimal point)" if whole else ""
    raise _type_error(key, value, hint)


def _to_bool(key: Key, value: Any) -> bool:
    if not isinstance(value, bool):
        raise _type_error(key, value)
    return value


def _to_str(key: Key, value: Any) -> str:
    if not isinstance(value, str):
        raise _type_error(key, value)
    return value


def _to_choice(key: Key, value: Any) -> str:
    if _to_str(key, value) not in key.choices:
        close = difflib.get_close_matches(value, key.choices, n=1)
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        raise ConfigError(f"{key.path}: got {show(value)}; expected {key.expect}{hint}")
    return value


_FLUX = re.compile(r"\s*([+-]?[0-9]+)\s*(?:/\s*([+-]?[0-9]+)\s*)?")


def _to_length_or_auto(key: Key, value: Any) -> float | str:
    if isinstance(value, str):
        if value == "auto":
            return value
        raise ConfigError(f"{key.path}: got {show(value)}; expected {key.expect}")
    return _to_float(key, value)


def _to_flux(key: Key, value: Any) -> Fraction:
    if isinstance(value, numbers.Integral) and not isinstance(value, bool):
        return _one_period(key, value, Fraction(int(value)))
    if isinstance(value, float) and math.isfinite(value):
        near = Fraction(value).limit_denominator(1000)
        raise _type_error(key, value, f"; write it as a string: flux = \"{fraction_text(near)}\"")
    match = _FLUX.fullmatch(_to_str(key, value))
    if match is None:
        raise ConfigError(f"{key.path}: got {show(value)}; expected {key.expect}")
    p, q = int(match[1]), int(match[2] or 1)
    if q < 1:
        hint = f" (put the sign on p: '{-p}/{-q}')" if q < 0 else ""
        raise ConfigError(f"{key.path}: got {show(value)}; expected q >= 1{hint}")
    if math.gcd(p, q) != 1:
        raise ConfigError(f"{key.path}: got {show(value)}; p and q must be coprime "
                          f"(use '{fraction_text(Fraction(p, q))}')")
    return _one_period(key, value, Fraction(p, q))


def _one_period(key: Key, value: Any, flux: Fraction) -> Fraction:
    """Refuse a flux outside (-1, 1): the lattice is periodic in it with period 1, so |flux| >= 1 is a typo."""
    if abs(flux) < 1:
        return flux
    same = flux - round(flux)
    alias = f"the same lattice as '{fraction_text(same)}'" if same else "zero field on the lattice"
    raise ConfigError(f"{key.path}: got {show(value)}; expected |p/q| < 1 (the phases exp(2 pi i flux) "
                      f"repeat with period 1: {fraction_text(flux)} is {alias})")


def _to_pairs(key: Key, value: Any) -> tuple[tuple[float, float], ...]:
    if not isinstance(value, (list, tuple)):
        raise _type_error(key, value)
    rows = []
    for i, row in enumerate(value):
        where = f"{key.path}[{i}]"
        if not (isinstance(row, (list, tuple)) and len(row) == 2
                and all(_is_real(x) and math.isfinite(x) for x in row)):
            raise ConfigError(f"{where}: got {show(row)}; expected a [distance, potential] "
                              "pair of finite numbers (distance in a, potential in t)")
        distance, potential = float(row[0]), float(row[1])
        if distance < 0:
            raise ConfigError(f"{where}: got distance {distance!r}; expected a distance "
                              ">= 0 from the edge in lattice constants")
        if rows and distance <= rows[-1][0]:
            raise ConfigError(f"{where}: got distance {distance!r} after {rows[-1][0]!r}; "
                              "expected strictly increasing distances")
        rows.append((distance, potential))
    return tuple(rows)


def _to_grid(key: Key, value: Any) -> tuple[int, int]:
    if not (isinstance(value, (list, tuple)) and len(value) == 2
            and all(isinstance(n, numbers.Integral) and not isinstance(n, bool) for n in value)):
        raise _type_error(key, value)
    if min(value) < 3:
        raise ConfigError(f"{key.path}: got {show(list(value))}; expected {key.expect}")
    return int(value[0]), int(value[1])


def _to_torus(key: Key, value: Any) -> tuple[int, ...]:
    if not isinstance(value, (list, tuple)):
        raise _type_error(key, value)
    if len(value) == 0:
        return ()
    if not (len(value) == 2 and all(isinstance(n, numbers.Integral) and not isinstance(n, bool) and n >= 1
                                    for n in value)):
        raise ConfigError(f"{key.path}: got {show(list(value))}; expected {key.expect}")
    return int(value[0]), int(value[1])


def _to_starts(key: Key, value: Any) -> tuple[str, ...]:
    if not isinstance(value, (list, tuple)) or not value:
        raise _type_error(key, value)
    for item in value:
        if item not in START_STATES:
            close = difflib.get_close_matches(str(item), START_STATES, n=1)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            raise ConfigError(f"{key.path}: got {show(item)}; expected {key.expect}{hint}")
    if len(set(value)) < len(value):
        raise ConfigError(f"{key.path}: got {show(list(value))} with a repeated name; expected {key.expect}")
    return tuple(value)


def _to_widths(key: Key, value: Any) -> tuple[float, ...]:
    if not isinstance(value, (list, tuple)):
        raise _type_error(key, value)
    for item in value:
        if not (_is_real(item) and math.isfinite(item) and item >= 0):
            raise ConfigError(f"{key.path}: got {show(item)} in the array; expected {key.expect}")
    if len(set(value)) < len(value):
        raise ConfigError(f"{key.path}: got {show(list(value))} with a repeated width; expected {key.expect}")
    return tuple(float(x) for x in value)


_CONVERTERS: dict[str, Callable[[Key, Any], Any]] = {
    "string": _to_str, "float": _to_float, "integer": _to_int, "boolean": _to_bool,
    "choice": _to_choice, "flux": _to_flux, "pairs": _to_pairs, "grid": _to_grid, "torus": _to_torus,
    "starts": _to_starts, "widths": _to_widths, "length_or_auto": _to_length_or_auto,
}


def convert(key: Key, value: Any) -> Any:
    if value is None and key.optional:
        return None
    value = _CONVERTERS[key.kind](key, value)
    if key.check is not None and not key.check(value):
        raise ConfigError(f"{key.path}: got {show(value)}; expected {key.expect}")
    return value


def key_paths() -> tuple[str, ...]:
    """Every scenario key path, in schema order."""
    return tuple(KEYS)


def convert_key(path: str, value: Any, *, ranges: bool = True) -> Any:
    """Check and convert one value for the scenario key ``path``.

    Parameters
    ----------
    path : str
        A key path such as ``"ribbon.edge.width"``.
    value : Any
        A TOML value.
    ranges : bool
        Also apply the key's range check (``False``: the type only).

    Raises
    ------
    ConfigError
        For an unknown path (with the nearest valid one), or a value of the
        wrong type or out of range, in one line naming the key.
    """
    if path not in KEYS:
        raise unknown_key(path)
    key = KEYS[path]
    if not ranges:
        key = dataclasses.replace(key, check=None)
    return convert(key, value)


def join_path(prefix: str, name: str) -> str:
    return f"{prefix}.{name}" if prefix else name


def children(prefix: str) -> list[str]:
    """Names of the keys and sections directly inside section ``prefix``."""
    if prefix not in SECTIONS:     # e.g. a key name with a dot in it: no such section
        return []
    return [f.name for f in fields(SECTIONS[prefix])
            if join_path(prefix, f.name) in KEYS or join_path(prefix, f.name) in SECTIONS]


def unknown_key(path: str) -> ConfigError:
    """Error for an unknown key, suggesting a sibling or a misplaced key."""
    prefix, _, name = path.rpartition(".")
    everywhere = [p for p in [*KEYS, *SECTIONS] if p]
    misplaced = [p for p in everywhere if p.rpartition(".")[2] == name]
    if misplaced:  # the right name in the wrong section beats a near sibling
        return ConfigError(f"{path}: unknown key; did you mean {' or '.join(map(repr, misplaced))}?")
    close = difflib.get_close_matches(name, children(prefix), n=1)
    if close:
        return ConfigError(f"{path}: unknown key; did you mean {join_path(prefix, close[0])!r}?")
    names = {p.rpartition(".")[2] for p in everywhere}
    close = difflib.get_close_matches(name, names, n=1)
    if close:
        matches = " or ".join(repr(p) for p in everywhere if p.rpartition(".")[2] == close[0])
        return ConfigError(f"{path}: unknown key; did you mean {matches}?")
    where = f"the keys of [{prefix}]" if prefix else "the top-level keys"
    valid = ", ".join(map(repr, children(prefix)))
    return ConfigError(f"{path}: unknown key; expected one of {where}: {valid}")


def key_docs() -> list[tuple[str, str, str, str, str]]:
    """Describe every scenario key, in schema order.

    Returns
    -------
    list of (str, str, str, str, str)
        ``(key path, type, unit, default, meaning)``; the default is written
        as a TOML literal ("unset" for an optional key without default).
    """
    defaults = Scenario()
    rows = []
    for path, key in KEYS.items():
        kind = {"choice": "string: " + " | ".join(f'"{c}"' for c in key.choices),
                "flux": 'string "p/q"', "pairs": "array of [float, float]",
                "grid": "array of two integers", "torus": "array of two integers, or empty", "starts": "array of strings",
                "widths": "array of floats", "length_or_auto": 'float or "auto"'}.get(key.kind, key.kind)
        default = plain(lookup(defaults, path))
        rows.append((path, kind, key.unit, "unset" if default is None else json.dumps(default),
                     key.doc))
    return rows


