"""Where the shipped tables and the demo inputs are.

In a source checkout (and an editable install) they are the repository's top-level ``data/``
directory; a regular install carries the same files as the package data ``metasim._data``
(pyproject.toml maps ``data/`` there).
"""

from __future__ import annotations

from pathlib import Path


def data_dir() -> Path:
    """The directory holding the shipped tables (``*.csv``) and ``demo/``."""
    package = Path(__file__).resolve().parent
    checkout = package.parent / "data"
    if checkout.is_dir() and (package.parent / "pyproject.toml").is_file():
        return checkout
    return package / "_data"
