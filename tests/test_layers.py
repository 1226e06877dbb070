"""The package is a house of layers: each sub-package imports only the layers below it, and no
module takes part in an import cycle (imports inside functions count: a lazy import is still an
arrow). DEVELOPERS.md draws the layers."""

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1] / "altox"

#: lowest first; a module may import its own layer and those below
LAYERS = ["base", "physiology", "plan", "guidance", "evaluation", "present", "cli"]
BASE = {"altox.errors", "altox.units", "altox.yamlload", "altox"}   # the package root re-exports lazily
ENTRY = {"altox.__main__"}


def _modules():
    out = {}
    for path in ROOT.rglob("*.py"):
        parts = path.relative_to(ROOT.parent).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        out[name] = path
    return out


def _imports(name, path):
    pkg = name if path.name == "__init__.py" else name.rsplit(".", 1)[0]
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = pkg.split(".")[: len(pkg.split(".")) - node.level + 1]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            if mod.split(".")[0] != "altox":
                continue
            for alias in node.names:   # `from altox.x import y` may name a module y
                found.add(f"{mod}.{alias.name}")
            found.add(mod)
        elif isinstance(node, ast.Import):
            found.update(a.name for a in node.names if a.name.split(".")[0] == "altox")
    return found


def _graph():
    mods = _modules()
    return {name: {m for m in _imports(name, path) if m in mods and m != name} for name, path in mods.items()}


def _layer(name):
    if name in BASE:
        return "base"
    return name.split(".")[1]


def test_every_module_belongs_to_a_layer():
    for name in _graph():
        if name in ENTRY:
            continue
        assert _layer(name) in LAYERS, f"{name} is in no layer; add it to one (DEVELOPERS.md)"


def test_no_upward_import():
    bad = []
    for name, deps in _graph().items():
        if name in ENTRY or name == "altox":
            continue
        for dep in deps:
            if dep == "altox":
                continue
            if LAYERS.index(_layer(dep)) > LAYERS.index(_layer(name)):
                bad.append(f"{name} -> {dep}")
    assert not bad, "upward imports:\n" + "\n".join(sorted(bad))


def test_no_import_cycle():
    # a package's __init__ may import its own modules; every other arrow counts
    graph = {k: {d for d in v if d != "altox" and not d.startswith(k + ".")} for k, v in _graph().items()}
    seen, stack, cycles = {}, [], []

    def visit(n):
        seen[n] = "open"
        stack.append(n)
        for d in sorted(graph.get(n, ())):
            if seen.get(d) == "open":
                cycles.append(" -> ".join(stack[stack.index(d):] + [d]))
            elif d not in seen:
                visit(d)
        stack.pop()
        seen[n] = "done"

    for n in sorted(graph):
        if n not in seen:
            visit(n)
    assert not cycles, "import cycles:\n" + "\n".join(cycles)


def test_no_long_module_without_a_reason():
    long = []
    for name, path in _modules().items():
        text = path.read_text(encoding="utf-8")
        if text.count("\n") > 500 and "Why this module is long" not in text:
            long.append(f"{name}: {text.count(chr(10))} lines")
    assert not long, "modules over 500 lines without a reason in the docstring:\n" + "\n".join(long)
