"""Settings shared by the tests in ``tests/`` and the doctests of ``metasim/``.

The docstring examples that write files make their folders with :func:`tempfile.mkdtemp` or
:class:`tempfile.TemporaryDirectory`; during the suite those folders go under pytest's own
temporary folder for the example (removed with pytest's old runs), so no run leaves folders in
the system's temporary folder.
"""

import tempfile

import pytest


@pytest.fixture(autouse=True)
def _doctest_temporary_folder(request, monkeypatch):
    if isinstance(request.node, pytest.DoctestItem):
        monkeypatch.setattr(tempfile, "tempdir", str(request.getfixturevalue("tmp_path")))
