"""Packaging: every shipped table and demo input is installed with a regular (non-editable) install."""

import fnmatch
import tomllib
from pathlib import Path

from metasim._paths import data_dir

ROOT = Path(__file__).resolve().parents[1]


def test_every_file_in_data_is_package_data():
    config = tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]
    assert config["package-dir"]["metasim._data"] == "data"
    patterns = config["package-data"]
    for path in (ROOT / "data").rglob("*"):
        if path.is_dir() or "__pycache__" in path.parts:
            continue
        relative = path.relative_to(ROOT / "data")
        package = ".".join(["metasim._data", *relative.parts[:-1]])
        assert package in config["packages"], f"{package} is not listed in [tool.setuptools] packages"
        assert any(fnmatch.fnmatch(relative.name, p) for p in patterns.get(package, [])), f"{relative} is not shipped"


def test_data_dir_holds_the_tables_and_the_demo():
    assert (data_dir() / "lens_density_32y_1nm.csv").is_file()
    assert (data_dir() / "demo" / "grading_monitor.toml").is_file()


def test_every_package_is_installed():
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"])
    for init in (ROOT / "metasim").rglob("__init__.py"):
        package = ".".join(init.parent.relative_to(ROOT).parts)
        assert package in listed, f"{package} is missing from [tool.setuptools] packages"
