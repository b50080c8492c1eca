"""The edge's layout: argparse only in the command line, no import cycles at module level
(common practice, no source: layering)."""

from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1] / "acidbase"


def _module(path: Path) -> str:
    rel = path.relative_to(ROOT.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _top_level_imports(path: Path) -> set[str]:
    """Modules of acidbase that ``path`` imports, at its top or inside a function (a
    deferred import still ties the two modules together), not under TYPE_CHECKING."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    me = _module(path)
    package = me if path.name == "__init__.py" else me.rsplit(".", 1)[0]
    out: set[str] = set()
    checking = {id(n) for node in tree.body if isinstance(node, ast.If)
                and "TYPE_CHECKING" in ast.unparse(node.test) for n in ast.walk(node)}
    for node in ast.walk(tree):
        if id(node) in checking:
            continue
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if target.startswith("acidbase"):
                if node.module:  # "from . import units" imports units, not the package
                    out.add(target)
                out.update(f"{target}.{a.name}" for a in node.names)
        elif isinstance(node, ast.Import):
            out.update(a.name for a in node.names if a.name.startswith("acidbase"))
    return out


def _graph() -> dict[str, set[str]]:
    mods = {_module(p): p for p in ROOT.rglob("*.py")}
    return {m: {t for t in _top_level_imports(p) if t in mods and t != m}
            for m, p in mods.items()}


def test_only_the_command_line_imports_argparse():
    users = [p.name for p in ROOT.rglob("*.py")
             if "argparse" in _names(p) and p.name != "cli.py"]
    assert users == []


def _names(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    return {a.name for node in tree.body if isinstance(node, ast.Import) for a in node.names}


def test_no_module_imports_another_that_imports_it_back():
    graph = _graph()
    cycles = [(a, b) for a, deps in graph.items() for b in deps if a in graph.get(b, ())]
    assert cycles == []


def test_batch_does_not_import_the_command_line():
    assert "acidbase.cli" not in _graph()["acidbase.batch"]
