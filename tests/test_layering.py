"""The layering of the package, read from the source with `ast`: every module imports only from
its own layer or the layers below it, nothing imports the package's __init__, and heavy optional
libraries are imported where they are used, never when a module loads (common practice, no source;
the layers are the ones DEVELOPERS.md states)."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).parent.parent / "gen"

#: layer of each module or subpackage (a prefix); a module may import from its layer and below
LAYERS = {
    "gen.version": 0, "gen.errors": 0, "gen.keys": 0, "gen.files": 0, "gen.memory": 0, "gen.progress": 0,
    "gen.physics": 1,
    "gen.card": 2,
    "gen.processes": 3,
    "gen.sampling": 4,
    "gen.records": 5,
    "gen.jobs": 6,
    "gen.validate": 7, "gen.plots": 7,
    "gen.docs": 8, "gen.benchmark": 8, "gen.cli": 8,
}

#: imported inside the functions that use them, never when a module loads
HEAVY = ("scipy.stats", "scipy.integrate", "scipy.interpolate", "matplotlib", "dask", "distributed",
         "boost_histogram", "pandas", "polars", "hoppet", "sympy")


def _modules() -> dict[str, Path]:
    out = {}
    for path in PACKAGE.rglob("*.py"):
        rel = path.relative_to(PACKAGE.parent).with_suffix("")
        parts = list(rel.parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out[".".join(parts)] = path
    return out


MODULES = _modules()


def _layer(module: str) -> int | None:
    best = None
    for prefix, rank in LAYERS.items():
        if module == prefix or module.startswith(prefix + "."):
            if best is None or len(prefix) > len(best[0]):
                best = (prefix, rank)
    return None if best is None else best[1]


def _imports(module: str, path: Path, top_level_only: bool):
    """(line, imported module, names) of every import; relative imports resolved."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    package = module if path.name == "__init__.py" else module.rsplit(".", 1)[0]
    nodes = tree.body if top_level_only else list(ast.walk(tree))
    if top_level_only:  # imports under a module-level if/try count as loading with the module
        nodes = [n for stmt in tree.body for n in ([stmt] + (list(ast.walk(stmt)) if isinstance(stmt, (ast.If, ast.Try))
                                                              else []))]
    for node in nodes:
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield node.lineno, alias.name, ()
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[:len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module
            yield node.lineno, target, tuple(a.name for a in node.names)


def test_every_module_has_a_layer():
    missing = [m for m in MODULES if m != "gen" and _layer(m) is None]
    assert not missing, f"give these modules a layer in tests/test_layering.py and DEVELOPERS.md: {missing}"


@pytest.mark.parametrize("module", sorted(m for m in MODULES if m != "gen"))
def test_imports_follow_the_layers(module):
    rank = _layer(module)
    bad = []
    for line, target, names in _imports(module, MODULES[module], top_level_only=False):
        if target == "gen":
            not_modules = [n for n in names if f"gen.{n}" not in MODULES]
            if not names or not_modules:  # `import gen`, `from gen import run`, `from . import __version__`
                bad.append(f"line {line}: imports {not_modules or 'gen'} from the package __init__")
                continue
        elif not target.startswith("gen."):
            continue
        for name in names or ("",):
            full = f"{target}.{name}" if name and f"{target}.{name}" in MODULES else target
            other = _layer(full)
            if other is not None and other > rank:
                bad.append(f"line {line}: {full} (layer {other}) from layer {rank}")
    assert not bad, f"{module} imports against the layering:\n  " + "\n  ".join(bad)


@pytest.mark.parametrize("module", sorted(MODULES))
def test_heavy_libraries_load_where_they_are_used(module):
    bad = [f"line {line}: {target}" for line, target, _ in _imports(module, MODULES[module], top_level_only=True)
           if target and any(target == h or target.startswith(h + ".") for h in HEAVY)]
    assert not bad, f"{module} imports heavy libraries when it loads: {bad}"


def _load_closure(module: str) -> set[str]:
    """Every module that loading `module` loads (module-level imports only), third-party ones included."""
    seen, todo = set(), [module]
    while todo:
        m = todo.pop()
        if m in seen:
            continue
        seen.add(m)
        if m not in MODULES:
            continue
        parent = m.rsplit(".", 1)[0] if "." in m else None
        if parent:
            todo.append(parent)
        for _, target, names in _imports(m, MODULES[m], top_level_only=True):
            todo.append(target)
            todo.extend(f"{target}.{n}" for n in names if f"{target}.{n}" in MODULES)
    return seen


def test_the_command_starts_without_third_party_libraries():
    """`gen --help` and `gen --version` load the standard library and gen's foundation only."""
    loaded = _load_closure("gen.cli")
    third_party = sorted(m for m in loaded if not m.startswith("gen") and m.split(".")[0] in (
        "numpy", "scipy", "pyarrow", "vegas", "particle", "pandas", "matplotlib", "dask"))
    assert not third_party, third_party
