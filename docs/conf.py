"""Sphinx configuration of the cwlimits documentation (Markdown pages, myst-parser)."""

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE / "_ext"))
sys.path.insert(0, str(HERE.parent))  # the source tree first, as the tests run it

project = "cwlimits"
author = "The cwlimits developers"
copyright = "The cwlimits developers"

extensions = [
    "myst_parser",
    "sphinx.ext.autodoc",
    "sphinx.ext.autosummary",
    "sphinx.ext.napoleon",
    "keytables",
]
source_suffix = {".md": "markdown"}
exclude_patterns = ["_build", "_ext"]
myst_heading_anchors = 3

autodoc_member_order = "bysource"
autodoc_typehints = "description"
autodoc_default_options = {"show-inheritance": True}
autosummary_generate = False
napoleon_google_docstring = False
napoleon_numpy_docstring = True
napoleon_use_rtype = False
napoleon_use_ivar = True  # "Attributes" as fields: no second description of a member
# Shapes in type lines, e.g. "ndarray (n_det, n_seg, M)", become cross-references; where
# several classes have an attribute of that name (n_seg) the reference is ambiguous,
# which is harmless for a shape: those warnings are not errors.
suppress_warnings = ["ref.python"]

html_theme = "alabaster"
html_title = "cwlimits"
