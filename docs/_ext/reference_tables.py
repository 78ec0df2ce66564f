"""reStructuredText generated from the code: the configuration reference, the API list, command help.

Plain functions without Sphinx, so that ``tests/test_docs.py`` can check them
directly; ``topoedge_docs.py`` (the Sphinx extension) turns their text into
pages during the build. Nothing generated is written to the source tree.

- ``config_sections()`` / ``config_table(section)``: one table per TOML table
  of the scenario schema (``topoedge.scenario.key_docs``), in schema order;
- ``api_groups()`` / ``api_directives(group)``: the autodoc directives of the
  curated ``topoedge`` namespace (``topoedge._PUBLIC``), one group per stage;
- ``cli_help(command)``: the ``--help`` text of a ``topoedge`` command.
"""

from __future__ import annotations

import inspect
import os
import re
import subprocess
import sys

#: The name of the TOML table of the top-level keys (``title``) in ``config_sections``.
TOP_LEVEL = "top-level"

# Characters with a meaning in reStructuredText inline markup.
_SPECIAL = re.compile(r"([\\*`|_])")


def escape(text: str) -> str:
    """``text`` as plain reStructuredText: every inline-markup character backslash-escaped.

    A leading ``-`` or ``+`` is escaped too, so that a table cell such as the
    unit ``-`` is not read as a bullet list.
    """
    text = _SPECIAL.sub(r"\\\1", text)
    return "\\" + text if text[:1] in ("-", "+") else text


def unescape(text: str) -> str:
    """Inverse of :func:`escape`."""
    return re.sub(r"\\(.)", r"\1", text)


# ------------------------------------------------------------ configuration


def _section_of(path: str) -> str:
    return path.rpartition(".")[0] or TOP_LEVEL


def config_sections() -> list[str]:
    """Every TOML table of the scenario schema that holds keys, in schema order.

    ``"top-level"`` stands for the keys outside any table (``title``).
    """
    from topoedge.scenario import key_docs

    sections: list[str] = []
    for path, *_ in key_docs():
        if _section_of(path) not in sections:
            sections.append(_section_of(path))
    return sections


def config_rows(section: str) -> list[tuple[str, str, str, str, str]]:
    """The ``key_docs`` rows (path, type, unit, default, meaning) of the keys directly in ``section``."""
    from topoedge.scenario import key_docs

    return [row for row in key_docs() if _section_of(row[0]) == section]


def config_table(section: str) -> str:
    """A ``list-table`` of the keys of one TOML table: key, type, unit, default, meaning.

    Key paths and defaults (TOML literals) are written as literals, the
    default ``unset`` in italics; type, unit and meaning are the schema's
    text, escaped.
    """
    rows = config_rows(section)
    if not rows:
        raise ValueError(f"the scenario schema has no keys in {section!r}; "
                         f"its tables are {', '.join(config_sections())}")
    title = "Top-level keys" if section == TOP_LEVEL else f"[{section}]"
    lines = [f".. list-table:: {escape(title)}", "   :header-rows: 1", "   :widths: 24 16 9 12 39", "",
             "   * - Key", "     - Type", "     - Unit", "     - Default", "     - Meaning"]
    for path, kind, unit, default, meaning in rows:
        shown = "*unset*" if default == "unset" else f"``{default}``"
        lines += [f"   * - ``{path}``", f"     - {escape(kind)}", f"     - {escape(unit)}",
                  f"     - {shown}", f"     - {escape(meaning)}"]
    return "\n".join(lines) + "\n"


# ----------------------------------------------------------------------- API

#: Stage (first part of the defining module in ``topoedge._PUBLIC``) -> heading.
API_GROUPS = {
    "scenario": "Scenarios and physical units",
    "models": "Models: kwant builders and edge potentials",
    "systems": "Numerical systems",
    "solvers": "Solvers",
    "workflows": "Workflows",
}


def _public() -> dict[str, str]:
    import topoedge

    return dict(topoedge._PUBLIC)


def api_groups() -> list[str]:
    """The stages of the curated namespace, in the order of ``topoedge._PUBLIC``."""
    groups: list[str] = []
    for module in _public().values():
        stage = module.split(".")[0]
        if stage not in groups:
            groups.append(stage)
    return groups


def api_names(group: str) -> list[str]:
    """The public names defined in stage ``group``, in the order of ``topoedge._PUBLIC``."""
    return [name for name, module in _public().items() if module.split(".")[0] == group]


def _attribute_doc(module: str, name: str) -> list[str]:
    """The ``#:`` comment (or string after the assignment) of a module-level name."""
    from sphinx.pycode import ModuleAnalyzer

    analyzer = ModuleAnalyzer.for_module(module)
    analyzer.analyze()
    return [line for line in analyzer.attr_docs.get(("", name), []) if line.strip()]


def _short_signature(cls: type, longest: int = 400) -> str:
    """An explicit, shorter signature for a dataclass whose generated one is longer than ``longest``.

    Defaults that are the default instance of a section dataclass are written
    ``Name()`` instead of their full repr (the scenario's signature would
    otherwise spell out every default of every section). Empty for other
    classes: autodoc then writes the signature itself.
    """
    import dataclasses

    if not dataclasses.is_dataclass(cls) or len(str(inspect.signature(cls))) <= longest:
        return ""
    params = []
    for field in dataclasses.fields(cls):
        if not field.init:
            continue
        if field.default is not dataclasses.MISSING:
            default = field.default
        elif field.default_factory is not dataclasses.MISSING:
            default = field.default_factory()
        else:
            params.append(field.name)
            continue
        text = repr(default)
        if dataclasses.is_dataclass(default) and default == type(default)():
            text = f"{type(default).__name__}()"
        params.append(f"{field.name}={text}")
    return f"({', '.join(params)})"


def api_directives(group: str) -> str:
    """Directives documenting every public name of stage ``group`` as ``topoedge.<name>``.

    Functions take ``autofunction``, exceptions ``autoexception``, classes
    ``autoclass`` with their documented members; data (tables, constants)
    a ``py:data`` entry with the ``#:`` comment of its definition.
    """
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # kwant's import-time notice that MUMPS is missing
        import topoedge

        names = api_names(group)
        if not names:
            raise ValueError(f"no public name in stage {group!r}; stages: {', '.join(api_groups())}")
        out = []
        for name in names:
            obj = getattr(topoedge, name)
            target = f"topoedge.{name}"
            if inspect.isclass(obj) and issubclass(obj, BaseException):
                out += [f".. autoexception:: {target}", ""]
            elif inspect.isclass(obj):
                out += [f".. autoclass:: {target}{_short_signature(obj)}", "   :members:", ""]
            elif callable(obj):
                out += [f".. autofunction:: {target}", ""]
            else:
                module = f"topoedge.{topoedge._PUBLIC[name]}"
                doc = _attribute_doc(module, name)
                if not doc:
                    raise ValueError(f"{module}.{name} has no '#:' comment to document it with")
                out += [f".. py:data:: {target}", f"   :type: {type(obj).__name__}"]
                if isinstance(obj, (int, float)):
                    out.append(f"   :value: {obj!r}")
                out += ["", *(f"   {line}" for line in doc)]
                if isinstance(obj, dict):
                    out += ["", "   Keys: " + ", ".join(f"``{key!r}``" for key in obj) + "."]
                out.append("")
    return "\n".join(out)


# ----------------------------------------------------------------- commands


def commands() -> list[str]:
    """The subcommands that ``topoedge --help`` lists."""
    text = cli_help(None)
    match = re.search(r"\{([\w,-]+)\}", text)
    if match is None:
        raise ValueError(f"no {{command,...}} list in topoedge --help:\n{text}")
    return match[1].split(",")


def cli_help(command: str | None) -> str:
    """``topoedge [COMMAND] --help`` at 79 columns, from the installed package."""
    env = {**os.environ, "COLUMNS": "79", "PYTHONWARNINGS": "ignore"}
    args = [sys.executable, "-m", "topoedge", *([command] if command else []), "--help"]
    proc = subprocess.run(args, capture_output=True, text=True, env=env)
    if proc.returncode != 0:
        raise RuntimeError(f"{' '.join(args[2:])} failed ({proc.returncode}): {proc.stderr.strip()}")
    return proc.stdout
