"""Sphinx configuration of the gainboard reference (built by tests/test_docs.py with warnings as errors)."""

project = "gainboard"
author = "the gainboard authors"
copyright = "2026, the gainboard authors"  # noqa: A001 - Sphinx's name

extensions = ["sphinx.ext.autodoc", "numpydoc"]
autodoc_member_order = "bysource"
autodoc_typehints = "none"  # the numpydoc sections already give the types
numpydoc_show_class_members = False
numpydoc_class_members_toctree = False
exclude_patterns = ["_build"]
html_theme = "alabaster"
html_static_path = []

# Docstrings write magnitudes as |s| and |Re s| (plain text for `help()`); reStructuredText would
# read those as substitutions, so they are defined to print as written.
rst_prolog = r"""
.. |s| replace:: \|s\|
.. |Re s| replace:: \|Re s\|
"""
