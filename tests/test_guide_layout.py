"""The Layout section of DEVELOPERS.md matches the tree: every module and package of metasim/ is
described there, under its package, and every file it names exists."""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "metasim"


def layout_entries() -> dict[str, str]:
    """The Layout code block of the guide as {top-level name: its text} (a name is a line indented by
    two spaces, or not at all for the folders beside metasim/; its text runs to the next name)."""
    guide = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    section = guide.split("\n## Layout\n", 1)[1].split("\n## ", 1)[0]
    block = section.split("```", 2)[1]
    entries, name = {}, None
    for line in block.splitlines():
        top = re.match(r"^(?:  )?([\w./-]+)(?:\s|$)", line)
        if top and not line.startswith("   "):
            name = top.group(1)
            entries[name] = ""
        if name is not None:
            entries[name] += line + "\n"
    return entries


def modules(folder: Path) -> list[Path]:
    return sorted(p for p in folder.glob("*.py") if p.name != "__init__.py")


def test_every_module_and_package_is_described():
    entries = layout_entries()
    missing = [p.name for p in modules(PACKAGE) if p.name not in entries]
    for package in sorted(p.parent for p in PACKAGE.glob("*/__init__.py")):
        text = entries.get(f"{package.name}/")
        if text is None:
            missing.append(f"{package.name}/")
            continue
        words = set(re.findall(r"[\w./]+", text))
        for module in modules(package):
            if module.name not in words and not any(w.endswith("/" + module.name) for w in words):
                missing.append(f"{package.name}/{module.name}")
        for inner in sorted(p.parent for p in package.glob("*/__init__.py")):
            after = text.split(f"{inner.name}/", 1)
            if len(after) == 1:
                missing.append(f"{package.name}/{inner.name}/")
                continue
            missing += [f"{package.name}/{inner.name}/{m.name}" for m in modules(inner) if m.name not in after[1]]
    assert missing == [], f"not in the Layout section of DEVELOPERS.md: {missing}"


def test_every_file_the_layout_names_exists():
    gone = []
    for name, text in layout_entries().items():
        base = PACKAGE / name if (PACKAGE / name).exists() and name != "metasim/" else ROOT / name  # in metasim/ or beside it
        if not base.exists():
            gone.append(name)
            continue
        if not base.is_dir() or base.parent != PACKAGE:
            continue
        for mentioned in set(re.findall(r"[\w/]+\.py\b", text)):
            if not ((base / mentioned).exists() or (PACKAGE / mentioned).exists() or any(base.rglob(mentioned))):
                gone.append(f"{name}{mentioned}")
    assert gone == [], f"named in the Layout section of DEVELOPERS.md but not in the tree: {gone}"
