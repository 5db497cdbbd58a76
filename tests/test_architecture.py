"""The house rules of the pipeline, read from the source with ast (common practice for
layered code): imports run down the pipeline only, there are no import cycles, the lint
stage imports no solver, and one module calls SuperLU."""

import ast
import os
from pathlib import Path

SRC = Path(os.environ.get("TAUSCAN_ARCH_SRC", Path(__file__).resolve().parents[1] / "src")) / "tauscan"

#: stage of each top-level part of the package; a module may import only its own stage or lower
STAGES = {
    "": 0, "circuit": 0, "network": 0, "factorization": 0, "errors": 0, "units": 0, "gcpause": 0, "corners": 0,
    "reader": 1, "devices": 2, "op": 3, "linear": 4, "analysis": 5, "lint": 6, "report": 7,
    "pipeline": 8, "api": 8, "cluster": 8, "commands": 9, "cli": 9, "__main__": 10,
}


def _module(path: Path) -> str:
    parts = list(path.relative_to(SRC).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(["tauscan", *parts])


def _stage(module: str) -> int:
    parts = module.split(".")
    return STAGES.get(parts[1] if len(parts) > 1 else "", 0)


def _imports() -> dict[str, set[str]]:
    out = {}
    for path in SRC.rglob("*.py"):
        found = set()
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                found.add(node.module)
                found.update(f"{node.module}.{alias.name}" for alias in node.names)  # submodules
            elif isinstance(node, ast.Import):
                found.update(alias.name for alias in node.names)
        out[_module(path)] = found
    return out


def test_imports_run_down_the_pipeline():
    wrong = [(m, i) for m, imported in _imports().items() for i in imported
             if i.startswith("tauscan") and _stage(i) > _stage(m)]
    assert wrong == []


def test_no_import_cycles():
    graph = {m: {i for i in imported if i in _imports_cache} for m, imported in _imports_cache.items()}
    state: dict[str, int] = {}
    cycles = []

    def visit(m, path):
        state[m] = 1
        for n in sorted(graph[m]):
            if state.get(n) == 1:
                cycles.append(path[path.index(n):] + [n] if n in path else [m, n])
            elif n not in state:
                visit(n, path + [n])
        state[m] = 2

    for m in sorted(graph):
        if m not in state:
            visit(m, [m])
    # a package importing its own submodules (re-exports) is not a cycle of stages
    real = [c for c in cycles if not any(a.startswith(b + ".") or b.startswith(a + ".") for a, b in zip(c, c[1:]))]
    assert real == []


def test_lint_imports_no_solver():
    solvers = ("scipy", "numpy", "tauscan.factorization", "tauscan.analysis.systems", "tauscan.analysis.poles",
               "tauscan.analysis.response", "tauscan.analysis.zentries", "tauscan.op.solver")
    wrong = [(m, i) for m, imported in _imports_cache.items() if m.startswith("tauscan.lint")
             for i in imported if i.startswith(solvers)]
    assert wrong == []


def test_one_module_calls_superlu():
    callers = sorted(_module(p) for p in SRC.rglob("*.py") if "spla.splu(" in p.read_text(encoding="utf-8"))
    assert callers == ["tauscan.factorization"]


_imports_cache = _imports()


#: the maths modules, whose public functions document parameters, shapes and units
#: (numpydoc sections, as scipy.signal's do)
MATHS = ("analysis/timeconstants.py", "analysis/transfer.py", "analysis/transcap.py", "analysis/poles.py",
         "analysis/zentries.py", "analysis/response.py", "devices/physics.py", "devices/stamps.py",
         "factorization.py")


def test_maths_functions_document_parameters_and_returns():
    missing = []
    for name in MATHS:
        tree = ast.parse((SRC / name).read_text(encoding="utf-8"))
        for node in tree.body:
            if isinstance(node, ast.FunctionDef) and not node.name.startswith("_"):
                doc = ast.get_docstring(node) or ""
                args = [a.arg for a in node.args.args]
                if args and "Parameters\n----------" not in doc:
                    missing.append(f"{name}:{node.lineno} {node.name}: no Parameters section")
                if node.returns is not None and ast.unparse(node.returns) != "None" and "Returns\n-------" not in doc:
                    missing.append(f"{name}:{node.lineno} {node.name}: no Returns section")
    assert not missing, "\n".join(missing)


def test_docstrings_cite_published_sources_not_a_note_outside_the_repository():
    cited = [f"{path.relative_to(SRC)}:{k}" for path in SRC.rglob("*.py")
             for k, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1) if "METHOD" in line]
    assert not cited, cited
