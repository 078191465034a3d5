"""The package's layers import one way only: a test, so the structure stays a habit.

The order (DEVELOPERS.md, "Layers one way"):

    base     errors, units, safety, tomlfile, safesave, fileio, limits, printable, folders
    physics  numpy only: no I/O, no other third-party package
    rig      rigfile, rigwrite, conditions, demo_files, demo (the rig door and demo data)
    analysis audio in, numbers out
    show     cue sheets, rendering, playback
    export   show books, previews, figures (files for people to read or watch)
    cli, ui  the two front ends (the CLI may open the UI)

A module may import its own layer and the layers below it, never one above.  Every
``import`` statement counts, including those inside functions (lazy imports are still
dependencies).  The check reads the source with :mod:`ast`; nothing is imported.
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parent.parent / "showkit"

RANK = {"base": 0, "physics": 1, "rig": 2, "analysis": 3, "show": 4, "export": 5, "cli": 6, "ui": 6}
BASE = {"errors", "units", "safety", "tomlfile", "safesave", "fileio", "limits", "printable", "folders",
        "__init__"}
# Third-party packages the physics layer may use (numpy only: methods we need from scipy
# are written in numpy and checked against scipy in the tests).
PHYSICS_THIRD_PARTY = {"numpy"}


def layer_of(module: str) -> str | None:
    """The layer of a dotted ``showkit`` module name, or None for ``showkit`` itself."""
    parts = module.split(".")
    if parts[0] != "showkit":
        return None
    if len(parts) == 1:
        return "base"
    head = parts[1]
    if head in RANK:
        return head
    if head == "__main__":  # ``python -m showkit`` is the CLI
        return "cli"
    if head in BASE:
        return "base"
    return "rig"


def module_name(path: Path) -> str:
    rel = path.relative_to(PACKAGE.parent).with_suffix("")
    return ".".join(rel.parts)


def imports_of(path: Path) -> list[tuple[int, str]]:
    """Every (line, absolute module) a file imports, resolving relative imports."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    here = module_name(path).split(".")
    package = here if path.name == "__init__.py" else here[:-1]
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(node.lineno, alias.name) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - node.level + 1]
                name = ".".join(base + ([node.module] if node.module else []))
            else:
                name = node.module or ""
            found.append((node.lineno, name))
            # ``from showkit import rigfile`` names a module, not only a package.
            if name == "showkit":
                found += [(node.lineno, f"showkit.{alias.name}") for alias in node.names]
    return found


SOURCES = sorted(PACKAGE.rglob("*.py"))


def test_the_package_has_sources():
    assert len(SOURCES) > 50


@pytest.mark.parametrize("path", SOURCES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_no_upward_import(path):
    mine = layer_of(module_name(path))
    upward = []
    for line, name in imports_of(path):
        theirs = layer_of(name)
        if theirs is not None and RANK[theirs] > RANK[mine]:
            upward.append(f"line {line}: {name} ({theirs}) from a {mine} module")
    assert not upward, "; ".join(upward)


@pytest.mark.parametrize("path", sorted((PACKAGE / "physics").rglob("*.py")),
                         ids=lambda p: p.name)
def test_physics_uses_numpy_only(path):
    stdlib = set(sys.stdlib_module_names)
    bad = []
    for line, name in imports_of(path):
        top = name.split(".")[0]
        if top in stdlib and top not in {"io", "shutil", "subprocess", "socket", "pathlib", "tempfile"}:
            continue
        if top == "showkit":
            if layer_of(name) not in {"base", "physics"}:
                bad.append(f"line {line}: {name}")
            continue
        if top not in PHYSICS_THIRD_PARTY:
            bad.append(f"line {line}: {name}")
    assert not bad, "physics imports beyond numpy or does I/O: " + "; ".join(bad)


def test_the_checker_catches_an_upward_import(tmp_path):
    """The rule can fail: a physics module importing from show is reported."""
    fake = PACKAGE / "physics" / "_layer_probe_do_not_commit.py"
    try:
        fake.write_text("from showkit.show.sheet import load_sheet\n", encoding="utf-8")
        upward = [n for _, n in imports_of(fake) if RANK[layer_of(n)] > RANK["physics"]]
        assert upward == ["showkit.show.sheet"]
    finally:
        fake.unlink()


#: The UI's domain modules: the only ui modules that call physics or analysis (no Textual in them).
UI_DOMAIN = {"session.py", "tracks.py", "measuring.py"}


@pytest.mark.parametrize("path", sorted((PACKAGE / "ui").glob("*.py")), ids=lambda p: p.name)
def test_ui_views_call_physics_and_analysis_through_the_session(path):
    """The views hold no physics: only the session and its two siblings import physics or analysis."""
    if path.name in UI_DOMAIN:
        assert not [n for _, n in imports_of(path) if n.split(".")[0] == "textual"], "domain module imports Textual"
        return
    bad = [f"line {line}: {name}" for line, name in imports_of(path)
           if layer_of(name) in {"physics", "analysis"}]
    assert not bad, "; ".join(bad)
