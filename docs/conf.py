"""Sphinx configuration of the topoedge documentation site (``python3 tasks.py docs``)."""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE / "_ext"))

# kwant announces at import (autodoc imports it) that it falls back to SciPy's
# sparse solver; that notice is about the machine, not the documentation.
warnings.filterwarnings("ignore", message="MUMPS is not available", category=RuntimeWarning)

import topoedge  # noqa: E402  (light: the public names are imported on first use)

project = "topoedge"
author = "the topoedge developers"
copyright = "the topoedge developers; BSD-3-Clause"
version = release = topoedge.__version__

extensions = [
    "sphinx.ext.autodoc",
    "numpydoc",
    "topoedge_docs",  # docs/_ext: configuration reference, API list and command help from the code
]

exclude_patterns = ["_build", "_ext", "Thumbs.db", ".DS_Store"]
templates_path: list[str] = []
root_doc = "index"
language = "en"
smartquotes = False
today_fmt = "%Y-%m-%d"

# autodoc: signatures as written, members in source order, class docstring only
# (numpydoc documents the constructor's parameters in the class docstring).
autodoc_member_order = "bysource"
autodoc_typehints = "signature"
autoclass_content = "class"
autodoc_preserve_defaults = True

# numpydoc: no autosummary tables of class members (autodoc's :members: lists them).
numpydoc_show_class_members = False
numpydoc_class_members_toctree = False
numpydoc_xref_param_type = False

html_theme = "alabaster"
html_title = f"topoedge {release}"
html_theme_options = {
    "description": "Chern numbers, edge modes and Hall conductance of lattice quantum-Hall samples",
    "fixed_sidebar": True,
    "page_width": "1100px",
    "sidebar_width": "240px",
}
html_sidebars = {"**": ["about.html", "navigation.html", "relations.html", "searchbox.html"]}
html_show_sourcelink = True
pygments_style = "sphinx"
# Quotes stay straight: TOML values and command lines are copied from the pages.
