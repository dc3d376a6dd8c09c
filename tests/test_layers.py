"""The layers of DEVELOPERS.md: a module imports only its own layer, the layers above it and the utilities."""

import ast
from pathlib import Path

import metasim

ROOT = Path(metasim.__file__).parent
#: top to bottom, as in DEVELOPERS.md ("Layers and data flow")
ORDER = ("spectra", "observers", "emitters", "colorimetry", "display", "statistics", "metamerism", "gamut",
         "fitting", "study", "sweep", "tables", "plots", "report", "cli")
UTILITIES = {"errors", "checks", "_version", "io", "labelling", "progress", "units", "_paths", "_threads", "_memory",
             "_warmup"}
#: old import paths kept for users: the name is looked up in its new, lower layer on first use only
COMPATIBILITY = {("observers/__init__.py", "metasim.metamerism"), ("observers/categories.py", "metasim.metamerism")}


def _layer(module: str) -> str | None:
    parts = module.split(".")
    return parts[1] if parts[0] == "metasim" and len(parts) > 1 else None


def _imports(path: Path):
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            yield node.lineno, node.module
        elif isinstance(node, ast.Import):
            yield from ((node.lineno, alias.name) for alias in node.names)


def test_every_import_goes_up_the_layers():
    wrong = []
    for path in sorted(ROOT.rglob("*.py")):
        relative = path.relative_to(ROOT).as_posix()
        own = _layer("metasim." + relative.removesuffix(".py").replace("/", "."))
        if own in ("__init__", "__main__", "interop"):  # the lazy entry table, the command, the dispatcher
            continue
        for line, module in _imports(path):
            other = _layer(module)
            if other is None or other == own or other in UTILITIES or (relative, module) in COMPATIBILITY:
                continue
            if own in UTILITIES or ORDER.index(other) > ORDER.index(own):
                wrong.append(f"{relative}:{line} imports {module}")
    assert not wrong, "imports against the layers:\n" + "\n".join(wrong)


def test_no_private_name_crosses_a_package():
    wrong = []
    for path in sorted(ROOT.rglob("*.py")):
        relative = path.relative_to(ROOT).as_posix()
        package = relative.split("/")[0].removesuffix(".py")
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("metasim."):
                source = node.module.split(".")[1]
                private = [a.name for a in node.names if a.name.startswith("_") and not a.name.startswith("__")]
                if private and source != package and source not in ("_version",):
                    wrong.append(f"{relative}:{node.lineno} imports {', '.join(private)} from {node.module}")
    assert not wrong, "private names used across packages:\n" + "\n".join(wrong)
