"""The package layers import one way only: a module never imports from a layer above its own.

Layers, lowest first (DEVELOPERS.md explains each):
errors < algebra < model < io < graph < analysis < present < core's top-level entry modules
< app < bench. Within one layer any import is allowed. Imports inside functions count as well:
a deferred import is still a dependency. Checked by reading every module's source (ast), so a
module that is never imported by a test is checked too.
"""
import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
LAYERS = ["core.errors", "core.algebra", "core.model", "core.io", "core.graph", "core.analysis",
          "core.present", "core", "app", "bench"]


def layer_of(module: str) -> int:
    """The index in LAYERS of the longest layer name that is ``module`` or a prefix of it."""
    best = -1
    for i, name in enumerate(LAYERS):
        if (module == name or module.startswith(name + ".")) and (best < 0 or len(name) > len(LAYERS[best])):
            best = i
    return best


def module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def imported_modules(path: Path) -> list[tuple[int, str]]:
    """(line, absolute module name) of every import in a file, relative ones resolved."""
    own = module_name(path).split(".")
    package = own if path.name == "__init__.py" else own[:-1]
    found = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            found += [(node.lineno, alias.name) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                base = ".".join(package[: len(package) - node.level + 1] + ([base] if base else []))
            found.append((node.lineno, base))
            found += [(node.lineno, f"{base}.{alias.name}") for alias in node.names
                      if (ROOT / Path(*f"{base}.{alias.name}".split("."))).with_suffix(".py").exists()]
    return found


SOURCES = sorted(p for top in ("core", "app", "bench") for p in (ROOT / top).rglob("*.py"))


def test_every_module_sits_in_a_layer():
    assert SOURCES, "no sources found"
    assert [module_name(p) for p in SOURCES if layer_of(module_name(p)) < 0] == []


@pytest.mark.parametrize("path", SOURCES, ids=lambda p: str(p.relative_to(ROOT)))
def test_no_import_reaches_up(path):
    own = layer_of(module_name(path))
    upward = [f"line {line}: {name} ({LAYERS[layer_of(name)]})" for line, name in imported_modules(path)
              if layer_of(name) > own]
    assert upward == [], f"{module_name(path)} ({LAYERS[own]}) imports from a higher layer"


def test_the_checker_sees_an_upward_import(tmp_path):
    """The test itself can fail: a deferred upward import in a model module is reported."""
    assert layer_of("core.model.diagram") < layer_of("core.analysis.report")
    assert layer_of("core.cli") == LAYERS.index("core") and layer_of("core.io.project_file") == 3
    fake = ROOT / "core" / "model" / "_layering_probe.py"
    try:
        fake.write_text("def f():\n    from core.analysis.report import Report\n")
        names = [n for _, n in imported_modules(fake)]
    finally:
        fake.unlink()
    assert "core.analysis.report" in names


def test_colours_are_written_in_one_table():
    """Every colour of the window and the report comes from app/theme.py (one light and one dark
    value per meaning or role): no hex colour literal elsewhere in app/."""
    import re
    literal = re.compile(r"['\"]#[0-9a-fA-F]{6}['\"]|#[0-9a-fA-F]{6}\b")
    found = [f"{path.relative_to(ROOT)}:{number}" for path in sorted((ROOT / "app").rglob("*.py"))
             if path.name != "theme.py"
             for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1)
             if literal.search(line)]
    assert found == []
