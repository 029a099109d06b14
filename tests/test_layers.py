"""The package layout is the architecture: layers import only downwards, the core never names a
built-in method, and no circle of imports forms inside a layer.

Layers, lowest first (DEVELOPERS.md, "How the code is laid out"):
data < numerics < contract < runner < analysis < interface. The top-level public faces
(``timescale``, ``timescale.plugin``, ``timescale.metrics``, ``timescale.testing``) sit above all
of them and no layer imports them back. Every import counts, including the ones deferred into a
function body: a deferred import still makes the lower module depend on the higher one.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "timescale"
LAYERS = ("data", "numerics", "contract", "runner", "analysis", "interface")
FACES = ("timescale", "timescale.plugin", "timescale.metrics", "timescale.testing", "timescale._compat",
         "timescale.__main__")


def _module_name(path: Path) -> str:
    parts = path.relative_to(ROOT.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _imports(path: Path) -> list[tuple[int, str]]:
    """Every absolute module an import statement in `path` names, with its line."""
    tree = ast.parse(path.read_text(), str(path))
    inside = ROOT.parent in path.parents
    name = _module_name(path) if inside else path.stem
    pkg = name if path.name == "__init__.py" else name.rpartition(".")[0]
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(node.lineno, a.name) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:  # resolve a relative import against the module's package
                base = pkg.split(".")[: len(pkg.split(".")) - node.level + 1]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            found.append((node.lineno, mod))
            # "from timescale.numerics import costs" names the module timescale.numerics.costs
            found += [(node.lineno, f"{mod}.{a.name}") for a in node.names
                      if (ROOT.parent / (mod + "." + a.name).replace(".", "/")).with_suffix(".py").exists()
                      or (ROOT.parent / (mod + "." + a.name).replace(".", "/") / "__init__.py").exists()]
    return found


def _layer(module: str) -> int | None:
    parts = module.split(".")
    if parts[0] != "timescale":
        return None
    if len(parts) > 1 and parts[1] in LAYERS:
        return LAYERS.index(parts[1])
    return len(LAYERS)  # a public face: above every layer


MODULES = {_module_name(p): p for p in sorted(ROOT.rglob("*.py"))}


def test_every_module_belongs_to_a_layer_or_is_a_public_face():
    stray = [m for m in MODULES if m not in FACES and _layer(m) == len(LAYERS)]
    assert not stray, f"modules outside the layer packages {LAYERS}: {stray}"


@pytest.mark.parametrize("module", sorted(m for m in MODULES if m not in FACES))
def test_imports_go_only_downwards(module):
    own = _layer(module)
    for line, target in _imports(MODULES[module]):
        assert not target.startswith("timescale_"), (
            f"{module}:{line} imports {target}: the core never names a built-in or third-party method")
        theirs = _layer(target)
        if theirs is None:
            continue
        assert theirs <= own, (
            f"{module}:{line} imports {target}, a higher layer "
            f"({LAYERS[own]} may import only {', '.join(LAYERS[:own + 1])})")


def _graph() -> dict[str, set[str]]:
    graph = {m: set() for m in MODULES}
    for m, path in MODULES.items():
        for _, target in _imports(path):
            # a package import means its __init__; a name inside a module means the module
            while target and target not in MODULES:
                target = target.rpartition(".")[0]
            if target and target != m and target.startswith("timescale") and target not in FACES:
                graph[m].add(target)
    return graph


def _cycles(graph):
    """Strongly connected components with more than one module (Tarjan)."""
    index, low, stack, on, out = {}, {}, [], set(), []

    def visit(v):
        index[v] = low[v] = len(index)
        stack.append(v)
        on.add(v)
        for w in graph[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    for v in graph:
        if v not in index:
            visit(v)
    return out


def test_no_import_circle():
    graph = _graph()
    # a package __init__ that re-exports its modules depends on them; they must not import it back
    assert _cycles(graph) == []


def test_the_checker_sees_a_circle_and_an_upward_import(tmp_path):
    # the checks above must be able to fail: a planted circle and an upward import are caught
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": set()}
    assert _cycles(graph) == [["a", "b", "c"]]
    assert _layer("timescale.interface.cli") > _layer("timescale.numerics.lti.kernel")
    f = ROOT / "data" / "pulse.py"
    assert all(_layer(t) is None or _layer(t) <= 0 for _, t in _imports(f))
    planted = tmp_path / "x.py"
    planted.write_text("def f():\n    from timescale.interface import cli\n")
    assert (2, "timescale.interface.cli") in _imports(planted)


@pytest.mark.parametrize("old", sorted(__import__("timescale._compat", fromlist=["MOVED"]).MOVED))
def test_old_module_paths_forward_with_a_deprecation_warning(old):
    import importlib
    import sys

    from timescale._compat import MOVED

    sys.modules.pop(old, None)
    with pytest.warns(DeprecationWarning, match="has moved to"):
        mod = importlib.import_module(old)
    home = importlib.import_module(MOVED[old][0])
    public = [n for n in getattr(home, "__all__", dir(home)) if not n.startswith("__")]
    assert public, f"{MOVED[old][0]} exports nothing"
    for name in public:
        assert getattr(mod, name) is getattr(home, name)
    with pytest.raises(AttributeError, match="moved to"):
        getattr(mod, "no_such_name")
