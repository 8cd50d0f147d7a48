"""Guards that keep the layout walkable: layered imports without cycles, type hints on public functions,
runnable docstring examples, and result stores written before the move still read.

The layer order is written once, in DEVELOPERS.md (the line starting ``Layers, bottom to top:``), where a
newcomer reads the layout; this test parses that line, so the rule a developer reads is the rule enforced.
"""

from __future__ import annotations

import ast
import doctest
import importlib
import json
import pathlib
import re
import shutil

import pytest

ROOT = pathlib.Path(__file__).resolve().parent.parent
PACKAGE = ROOT / "cationcalc"
DATA = pathlib.Path(__file__).resolve().parent / "data"


# ------------------------------------------------------------------------------ the modules


def _module_name(path: pathlib.Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


MODULES = {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}
PACKAGES = {name for name, p in MODULES.items() if p.name == "__init__.py"}


def _layers() -> tuple[str, ...]:
    """The layer order from DEVELOPERS.md, bottom first."""
    text = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    match = re.search(r"^Layers, bottom to top:\s*(.+)$", text, re.MULTILINE)
    assert match, "DEVELOPERS.md has no line 'Layers, bottom to top: a < b < ...'"
    return tuple(word.strip(" `.") for word in match.group(1).split("<"))


LAYERS = _layers()


def layer_of(module: str) -> str:
    """``cationcalc.chem.units`` → ``chem``; ``cationcalc.about`` → ``about``; ``cationcalc`` → ``__init__``."""
    parts = module.split(".")
    return "__init__" if len(parts) == 1 else parts[1]


def _resolve(importer: str, node: ast.ImportFrom) -> str:
    """The absolute module a ``from ... import`` statement names (relative imports resolved)."""
    if not node.level:
        return node.module or ""
    package = importer if importer in PACKAGES else importer.rsplit(".", 1)[0]
    base = package.split(".")
    base = base[: len(base) - (node.level - 1)]
    return ".".join(base + ([node.module] if node.module else []))


def imports_of(module: str) -> list[tuple[str, int]]:
    """Every cationcalc module ``module`` imports (inside functions too), with the line."""
    return imports_in(MODULES[module].read_text(encoding="utf-8"), module)


def imports_in(source: str, module: str) -> list[tuple[str, int]]:
    """Every cationcalc module the source of ``module`` imports, at any depth, with the line."""
    tree = ast.parse(source)
    found: list[tuple[str, int]] = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            source = _resolve(module, node)
            # from package import module → that module; from module import name → the module
            names = [f"{source}.{a.name}" if f"{source}.{a.name}" in MODULES else source for a in node.names]
        else:
            continue
        for name in names:
            while name and name not in MODULES and "." in name:
                name = name.rsplit(".", 1)[0]  # import cationcalc.chem.units.x → the module that exists
            if name in MODULES and name != module:
                found.append((name, node.lineno))
    return sorted(found, key=lambda edge: edge[1])


GRAPH = {m: imports_of(m) for m in MODULES}


def test_imports_are_found_inside_functions_and_relative_ones_resolved():
    source = ("from cationcalc.chem import units\n"
              "def f():\n    import cationcalc.tasks.runner\n"
              "    if True:\n        from ..report.columns import view\n"
              "class A:\n    def m(self):\n        from . import optimize\n")
    assert imports_in(source, "cationcalc.compute.hessian") == [
        ("cationcalc.chem.units", 1), ("cationcalc.tasks.runner", 3), ("cationcalc.report.columns", 5),
        ("cationcalc.compute.optimize", 8)]


def test_every_module_belongs_to_a_layer():
    unknown = sorted(m for m in MODULES if layer_of(m) not in LAYERS)
    assert not unknown, (f"modules outside every layer: {unknown}; add their layer to the 'Layers, bottom to "
                         f"top' line of DEVELOPERS.md (now: {' < '.join(LAYERS)})")


def test_no_module_imports_from_a_higher_layer():
    rank = {layer: i for i, layer in enumerate(LAYERS)}
    upward = [f"{importer} (layer {layer_of(importer)}) imports {imported} (layer {layer_of(imported)}) "
              f"at line {line}"
              for importer, edges in GRAPH.items() for imported, line in edges
              if rank.get(layer_of(imported), -1) > rank.get(layer_of(importer), len(LAYERS))]
    assert not upward, "upward imports:\n" + "\n".join(upward)


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """One cycle (as a closed path) per strongly connected component of more than one module."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    components: list[list[str]] = []

    def visit(v: str) -> None:  # Tarjan
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                components.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    cycles = []
    for component in components:  # walk from the first module back to itself inside the component
        inside, start = set(component), component[0]
        paths = {start: [start]}
        queue = [start]
        while queue:
            v = queue.pop(0)
            for w in sorted(graph[v] & inside):
                if w == start:
                    cycles.append(paths[v] + [start])
                    queue = []
                    break
                if w not in paths:
                    paths[w] = paths[v] + [w]
                    queue.append(w)
    return cycles


def test_cycle_finder_finds_a_planted_cycle():
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    assert _cycles(graph) == [["a", "b", "c", "a"]]
    assert _cycles({"a": {"b"}, "b": set()}) == []


def test_no_import_cycle():
    cycles = _cycles({m: {imported for imported, _ in edges} for m, edges in GRAPH.items()})
    assert not cycles, "import cycles:\n" + "\n".join(" → ".join(c) for c in cycles)


def test_relative_imports_resolve():
    node = ast.parse("from ..chem import units").body[0]
    assert _resolve("cationcalc.compute.models", node) == "cationcalc.chem"
    node = ast.parse("from . import units").body[0]
    assert _resolve("cationcalc.chem", node) == "cationcalc.chem"
    assert _resolve("cationcalc.chem.species", node) == "cationcalc.chem"


# ------------------------------------------------------------------------------ type hints


def _public_functions(tree: ast.Module):
    """(qualified name, node, is_method) of every public function and method of public classes."""
    def walk(body, prefix: str, in_class: bool):
        for node in body:
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)) and not node.name.startswith("_"):
                yield prefix + node.name, node, in_class
            elif isinstance(node, ast.ClassDef) and not node.name.startswith("_"):
                yield from walk(node.body, f"{prefix}{node.name}.", True)
            elif isinstance(node, (ast.If, ast.Try)):
                yield from walk(node.body + node.orelse, prefix, in_class)
    yield from walk(tree.body, "", False)


def _unannotated(node: ast.FunctionDef | ast.AsyncFunctionDef, is_method: bool) -> list[str]:
    args = node.args
    positional = args.posonlyargs + args.args
    static = any(isinstance(d, ast.Name) and d.id == "staticmethod" for d in node.decorator_list)
    if is_method and not static and positional:
        positional = positional[1:]  # self / cls
    every = positional + args.kwonlyargs + [a for a in (args.vararg, args.kwarg) if a is not None]
    missing = [a.arg for a in every if a.annotation is None]
    if node.returns is None:
        missing.append("return")
    return missing


def hint_misses() -> list[str]:
    misses = []
    for module, path in MODULES.items():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for name, node, is_method in _public_functions(tree):
            missing = _unannotated(node, is_method)
            if missing:
                misses.append(f"{module}:{name} ({', '.join(missing)})")
    return misses


def test_public_functions_carry_type_hints():
    misses = hint_misses()
    assert not misses, f"{len(misses)} public functions without full type hints:\n" + "\n".join(misses)


def test_hint_check_sees_a_missing_hint():
    tree = ast.parse("def f(x, y: int):\n    pass\nclass A:\n    def m(self, z) -> None: ...\n"
                     "    def _private(self, q): ...\n")
    found = {name: _unannotated(node, is_method) for name, node, is_method in _public_functions(tree)}
    assert found == {"f": ["x", "return"], "A.m": ["z"]}


# ------------------------------------------------------------------------------ docstring examples

RUNNABLE = sorted(m for m in MODULES if not m.endswith("__main__"))


@pytest.mark.parametrize("module", RUNNABLE)
def test_docstring_examples_run(module):
    result = doctest.testmod(importlib.import_module(module))
    assert result.failed == 0, f"{result.failed} of {result.attempted} docstring examples of {module} fail"


# ------------------------------------------------------------------------------ stores written before the move

#: the command that wrote the store; its results were computed with the full protocol (a Hessian on every
#: conformer, LBFGS), which is --thorough since the fast path became the default
REQUEST = ["hia", "C[C+](C)C", "C[CH+]c1ccccc1", "--solvent", "none", "--workers", "1", "--thorough"]


@pytest.fixture
def old_store(tmp_path) -> pathlib.Path:
    path = tmp_path / "store.sqlite"
    shutil.copyfile(DATA / "store_written_by_0.1.0.sqlite", path)
    return path


def test_a_store_written_before_the_move_is_read_not_recomputed(old_store, capsys, monkeypatch):
    """The command that wrote the store, run again through today's code: every species it can reuse is read.

    The two carbocations were stored before the centre torsion seeds became the default conformer search,
    so today's default recomputes them (a better search is a different result); their hydride adducts,
    which the seeds do not touch, are read.  The next test reads all four with the seeds turned off.
    """
    from cationcalc.cli.main import main
    from cationcalc.execution import executors
    from cationcalc.execution.store import ResultStore

    with ResultStore(old_store) as store:
        rows_before = store.created(store.keys())
    computed = []
    real = executors.compute_one
    monkeypatch.setattr(executors, "compute_one", lambda sp, settings: computed.append(sp.smiles) or real(sp, settings))
    status = main(REQUEST + ["--store", str(old_store), "--json"])
    out = capsys.readouterr().out
    assert status == 0
    assert sorted(computed) == sorted(["C[C+](C)C", "C[CH+]c1ccccc1"])
    saved = json.loads((DATA / "records_from_that_store_0.1.0.json").read_text(encoding="utf-8"))
    records = json.loads(out)
    assert [r["cation_smiles"] for r in records] == [r["cation_smiles"] for r in saved]
    with ResultStore(old_store) as store:
        assert store.created(rows_before) == rows_before  # the stored rows are kept as they were
        assert len(store.keys()) == len(rows_before) + 2


def test_the_old_store_counts_only_hits(old_store):
    from cationcalc.chem.conformers import ConformerSettings
    from cationcalc.compute.models import Settings
    from cationcalc.execution.store import ResultStore
    from cationcalc.report.outputs import finite
    from cationcalc.tasks.runner import run_task

    saved = json.loads((DATA / "records_from_that_store_0.1.0.json").read_text(encoding="utf-8"))
    with ResultStore(old_store) as store:
        before_seeds = Settings(solvent="none", conformers=ConformerSettings(centre_torsion_steps=0))
        records = run_task("hia", [("C[C+](C)C", ""), ("C[CH+]c1ccccc1", "")],
                           before_seeds.full_protocol(), workers=1, store=store)
        assert (store.misses, store.writes) == (0, 0)
        assert store.hits == len(store.touched) == 4  # two cations, their hydride adducts (tert-butyl is the anchor)
    records = [{k: v for k, v in dict(r).items() if k != "profile"} for r in records]
    assert json.loads(json.dumps(finite(records))) == saved
