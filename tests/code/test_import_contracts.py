"""The import contracts of docs/structure.md: checked by import-linter on the real tree, shown to fail on trees
that break them, and no import cycle between modules anywhere in the package.

The contracts live in pyproject.toml ([tool.importlinter]). The bad trees are tiny packages built here with the
same contracts (the real ones, renamed to the tiny package), so a contract that stopped checking anything would
show up as a bad tree that passes. import-linter's layers do not cover cycles among the modules of one folder:
a graph built with grimp (the library import-linter itself uses) and Tarjan's strongly connected components do.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tomllib
from pathlib import Path

import grimp

ROOT = Path(__file__).resolve().parents[2]
LINT_IMPORTS = Path(sys.executable).with_name("lint-imports")
CONTRACTS = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["tool"]["importlinter"]
LAYERS = next(c["layers"] for c in CONTRACTS["contracts"] if c["type"] == "layers")
FOLDERS = [name.strip().removeprefix("investigator.") for layer in LAYERS for name in layer.split("|")]


def lint_imports(cwd: Path) -> subprocess.CompletedProcess:
    """Run the checker as CI does, on the package and the pyproject.toml in ``cwd``."""
    # A wide terminal, so that no contract name is wrapped in the report.
    env = {**os.environ, "COLUMNS": "200", "NO_COLOR": "1"}
    return subprocess.run([str(LINT_IMPORTS), "--no-cache"], cwd=cwd, capture_output=True, text=True, env=env,
                          timeout=300)


def contract_name(contract_id: str) -> str:
    return next(c["name"] for c in CONTRACTS["contracts"] if c["id"] == contract_id)


# -- the real tree -------------------------------------------------------------------------------------------


def test_the_package_keeps_every_import_contract():
    run = lint_imports(ROOT)
    assert run.returncode == 0, run.stdout + run.stderr
    for contract in CONTRACTS["contracts"]:
        assert f"{contract['name']} KEPT" in run.stdout
    assert f"{len(CONTRACTS['contracts'])} kept, 0 broken" in run.stdout


# -- tiny trees with the same contracts ----------------------------------------------------------------------


def tiny_tree(tmp_path: Path, imports: dict[str, str]) -> None:
    """A package ``shapes`` with the folders of the real one and the real contracts renamed to it; ``imports``
    maps a module (e.g. ``io.tables``) to the lines it holds. The contracts go to tmp_path/pyproject.toml."""
    package = tmp_path / "shapes"
    package.mkdir()
    (package / "__init__.py").write_text("")
    for folder in FOLDERS:
        (package / folder).mkdir()
        (package / folder / "__init__.py").write_text("")
    for module, line in imports.items():
        (package / (module.replace(".", "/") + ".py")).write_text(line + "\n")
    lines = ["[tool.importlinter]", 'root_package = "shapes"']
    for contract in CONTRACTS["contracts"]:  # written back as TOML (JSON strings and lists are TOML too)
        lines.append("[[tool.importlinter.contracts]]")
        lines += [f"{key} = {json.dumps(value).replace('investigator', 'shapes')}" for key, value in contract.items()]
    (tmp_path / "pyproject.toml").write_text("\n".join(lines) + "\n", encoding="utf-8")


def test_a_tiny_tree_that_flows_one_way_keeps_the_contracts(tmp_path):
    # The control for the bad trees below: the same tree with imports that go down only.
    tiny_tree(tmp_path, {"cli.main": "import shapes.pipeline.engine",
                                  "pipeline.engine": "import shapes.explain.view\nimport shapes.methods.mcd",
                                  "explain.view": "import shapes.methods.mcd", "methods.mcd": "import shapes.io.tables",
                                  "io.tables": ""})
    run = lint_imports(tmp_path)
    assert run.returncode == 0, run.stdout + run.stderr
    assert "3 kept, 0 broken" in run.stdout


def test_a_low_layer_importing_a_high_one_breaks_the_layers(tmp_path):
    tiny_tree(tmp_path, {"io.tables": "import shapes.cli.main", "cli.main": ""})
    run = lint_imports(tmp_path)
    assert run.returncode != 0
    assert f"{contract_name('layers')} BROKEN" in run.stdout
    assert f"{contract_name('engine-without-ui')} BROKEN" in run.stdout  # io is part of the engine, too
    assert "shapes.io.tables -> shapes.cli.main" in run.stdout


def test_methods_importing_an_explainer_breaks_its_contract(tmp_path):
    tiny_tree(tmp_path, {"methods.mcd": "from shapes.explain import view", "explain.view": ""})
    run = lint_imports(tmp_path)
    assert run.returncode != 0
    assert f"{contract_name('methods-without-explainers')} BROKEN" in run.stdout
    assert "shapes.methods.mcd -> shapes.explain.view" in run.stdout


def test_two_folders_of_one_layer_importing_each_other_break_the_layers(tmp_path):
    # structure, explain, checks and review share a layer and stay independent of one another.
    tiny_tree(tmp_path, {"checks.limits": "import shapes.review.store", "review.store": ""})
    run = lint_imports(tmp_path)
    assert run.returncode != 0
    assert f"{contract_name('layers')} BROKEN" in run.stdout
    assert "shapes.checks.limits -> shapes.review.store" in run.stdout


# -- no cycles -----------------------------------------------------------------------------------------------


def import_cycles(graph) -> list[list[str]]:
    """The strongly connected components of more than one module (Tarjan 1972, "Depth-first search and linear
    graph algorithms", SIAM J. Computing 1), each sorted; iterative, so deep chains need no recursion."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    on_stack: set[str] = set()
    stack: list[str] = []
    found: list[list[str]] = []
    for root in sorted(graph.modules):
        if root in index:
            continue
        work = [(root, iter(sorted(graph.find_modules_directly_imported_by(root))))]
        index[root] = low[root] = len(index)
        stack.append(root)
        on_stack.add(root)
        while work:
            node, successors = work[-1]
            step = next(successors, None)
            if step is not None:
                if step not in index:
                    index[step] = low[step] = len(index)
                    stack.append(step)
                    on_stack.add(step)
                    work.append((step, iter(sorted(graph.find_modules_directly_imported_by(step)))))
                elif step in on_stack:
                    low[node] = min(low[node], index[step])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                component = []
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    component.append(member)
                    if member == node:
                        break
                if len(component) > 1:
                    found.append(sorted(component))
    return sorted(found)


def describe(graph, component: list[str]) -> str:
    """A cycle with the imports that close it, file lines included, for the failure message."""
    edges = []
    for importer in component:
        for imported in component:
            if graph.direct_import_exists(importer=importer, imported=imported):
                lines = sorted(d["line_number"] for d in graph.get_import_details(importer=importer,
                                                                                 imported=imported))
                edges.append(f"{importer} -> {imported} (line {', '.join(map(str, lines))})")
    return "; ".join(edges)


def test_no_import_cycles_between_the_modules_of_the_package():
    # Every import counts, those inside functions too: grimp reads them all.
    graph = grimp.build_graph("investigator", cache_dir=None, exclude_type_checking_imports=True)  # as lint-imports
    cycles = import_cycles(graph)
    assert not cycles, "import cycles:\n" + "\n".join(describe(graph, c) for c in cycles)


def test_the_cycle_check_finds_a_cycle_closed_inside_a_function(tmp_path, monkeypatch):
    package = tmp_path / "loops"
    package.mkdir()
    (package / "__init__.py").write_text("")
    (package / "a.py").write_text("from loops import b\n")
    (package / "b.py").write_text("def later():\n    from loops.c import value\n    return value\n")
    (package / "c.py").write_text("import loops.a\nvalue = 1\n")
    (package / "d.py").write_text("import loops.a\n")  # imports into the cycle, is not part of it
    monkeypatch.syspath_prepend(str(tmp_path))
    graph = grimp.build_graph("loops", cache_dir=None)
    assert import_cycles(graph) == [["loops.a", "loops.b", "loops.c"]]
    assert "loops.b -> loops.c (line 2)" in describe(graph, ["loops.a", "loops.b", "loops.c"])
