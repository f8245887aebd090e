"""No module of the package reaches another module's private names (a leading underscore): what one module
uses from another is public, with a docstring. Read from the source (the AST), so imports inside functions
count too. Dunder names (``__version__``) are public.
"""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[2] / "investigator"


def module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


MODULES = {module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def private(name: str) -> bool:
    return name.startswith("_") and not (name.startswith("__") and name.endswith("__"))


def private_uses(source: str, module: str, modules: set[str]) -> list[str]:
    """Each use in ``source`` (the code of ``module``) of a private name of another module of ``modules``:
    ``from m import _x``, and ``m._x`` where ``m`` names a module by an import (``import a.b``, ``import a.b as
    m``, ``from a import b``)."""
    tree = ast.parse(source)
    ours = {m.split(".")[0] for m in modules}
    found = []
    bound: dict[str, str] = {}  # local name -> the module it names
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.split(".")[0] in ours:
            for alias in node.names:
                if private(alias.name) and node.module != module:
                    found.append(f"line {node.lineno}: from {node.module} import {alias.name}")
                if f"{node.module}.{alias.name}" in modules:
                    bound[alias.asname or alias.name] = f"{node.module}.{alias.name}"
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.split(".")[0] in ours:  # `import a.b` binds a, `import a.b as m` binds a.b
                    bound[alias.asname or alias.name.split(".")[0]] = alias.name if alias.asname else \
                        alias.name.split(".")[0]
    for node in ast.walk(tree):
        if isinstance(node, ast.Attribute) and private(node.attr):
            chain, value = [], node.value
            while isinstance(value, ast.Attribute):
                chain.insert(0, value.attr)
                value = value.value
            if isinstance(value, ast.Name) and value.id in bound:
                target = ".".join([bound[value.id], *chain])
                if target in modules and target != module:
                    found.append(f"line {node.lineno}: {target}.{node.attr}")
    return found


def test_no_module_uses_another_modules_private_names():
    names = set(MODULES)
    found = [f"{path.relative_to(PACKAGE.parent)} {use}" for name, path in MODULES.items()
             for use in private_uses(path.read_text(encoding="utf-8"), name, names)]
    assert not found, "private names used across modules (make them public, with a docstring):\n" + "\n".join(found)


def test_the_check_sees_each_kind_of_private_use():
    modules = {"pkg", "pkg.a", "pkg.b", "pkg.main", "pkg.sub", "pkg.sub.c"}
    source = (
        "from pkg.a import _hidden, shown\n"         # a private name imported
        "import pkg.sub.c\n"
        "import pkg.b as other\n"
        "from pkg import a\n"
        "def f(obj):\n"
        "    from pkg.sub.c import _late\n"          # inside a function
        "    pkg.sub.c._helper()\n"                 # through the dotted module
        "    other._table\n"                        # through an alias
        "    a._cache\n"                            # through a module imported from its package
        "    obj._private, a.__doc__, shown._x\n"   # an object, a dunder, an imported function: fine
        "from pkg.b import __version__\n"           # a dunder is public
        "from pkg.main import _own\n"               # the module's own private name
    )
    assert sorted(private_uses(source, "pkg.main", modules)) == [
        "line 1: from pkg.a import _hidden",
        "line 6: from pkg.sub.c import _late",
        "line 7: pkg.sub.c._helper",
        "line 8: pkg.b._table",
        "line 9: pkg.a._cache",
    ]
