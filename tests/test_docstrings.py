"""Every top-level entry point shows how it is called: a runnable Examples section.

The examples themselves run as doctests (``--doctest-modules`` over ``metasim/`` in pyproject.toml).
"""

import inspect

import pytest

import metasim


@pytest.mark.parametrize("name", sorted(metasim._ENTRY_POINTS))
def test_entry_point_has_runnable_examples(name):
    doc = inspect.getdoc(getattr(metasim, name)) or ""
    assert "\nExamples\n--------\n" in doc, f"metasim.{name} has no numpydoc Examples section"  # numpydoc format
    assert ">>> " in doc.split("\nExamples\n--------\n", 1)[1], f"metasim.{name}: Examples hold no doctest"
