"""Sphinx configuration of the rootvar documentation.

Build (warnings are errors, as CI should run it)::

    sphinx-build -W --keep-going -b html docs docs/_build/html

The reference pages are generated from the code at build time: the public
names of ``rootvar.core`` by autodoc and numpydoc, the spreadsheet functions
from their registry (``_ext/sheet_functions.py``) and the command line from
its own parser (``_ext/rootvar_docs.py``).  Neither can drift from the code;
the build fails when a public name is left undocumented.
"""

from __future__ import annotations

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE / "_ext"))

from importlib.metadata import PackageNotFoundError, version  # noqa: E402

project = "rootvar"
author = "the rootvar developers"
copyright = "the rootvar developers, MIT licence"
try:
    release = version("rootvar")
except PackageNotFoundError:  # building from a tree that is not installed
    release = "0+unknown"
version = release

extensions = [
    "sphinx.ext.autodoc",
    "numpydoc",
    "sheet_functions",
    "rootvar_docs",
]

root_doc = "index"
exclude_patterns = ["_build", "benchmarks.txt"]
templates_path: list[str] = []
html_static_path: list[str] = []
html_theme = "alabaster"  # ships with Sphinx, needs no network
html_theme_options = {"description": "Heston variance checks, certified prices, verdicts"}
html_title = f"rootvar {release}"
html_show_sourcelink = False

# -- autodoc ----------------------------------------------------------------
# Names are documented as rootvar.core.<name>: the lazy public map of the
# package, not the modules behind it (those are being moved).
autodoc_member_order = "bysource"
autodoc_typehints = "none"  # the numpydoc Parameters sections carry types and units
autodoc_default_options = {"undoc-members": False}

# -- numpydoc ---------------------------------------------------------------
numpydoc_show_class_members = False  # no autosummary tables of every member
numpydoc_class_members_toctree = False
numpydoc_xref_param_type = False  # types are prose ("float or array, years")
numpydoc_use_plots = False
numpydoc_attributes_as_param_list = True

# -- rootvar extensions ------------------------------------------------------
# Old spreadsheet names a role may still meet while the renames land (new
# name -> name in the registry).  An entry no longer needed is reported at
# build time; delete it then.
sheet_function_renames = {}
# Saved output of `python -m benchmarks`, shown on the benchmark page.
rootvar_benchmark_output = "benchmarks.txt"
