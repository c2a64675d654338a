"""The package's layout rules (DEVELOPERS.md, "Where things live"), checked on its source.

One module, one idea: modules <= 500 lines, classes <= 300 (the accessor
facade <= 450), function bodies <= 60 lines without their docstring
(compiled kernels and figure builders <= 100); no underscore name imported
from one module into another; "which kind of data is this" asked in the
sources module only; no import cycles inside the package.
"""

import ast
import pathlib
from collections import defaultdict

import pytest

PACKAGE = pathlib.Path(__file__).resolve().parent.parent / "skbayeslogit"
MODULE_LINES, CLASS_LINES, FACADE_LINES = 500, 300, 450
FUNCTION_LINES, KERNEL_LINES = 60, 100
KIND_OF_DATA_HOME = "sources.py"

SOURCES = sorted(PACKAGE.rglob("*.py"))


def _module_name(path):
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _body_lines(function):
    body = function.body
    first = body[0]
    if isinstance(first, ast.Expr) and isinstance(first.value, ast.Constant):
        body = body[1:]
    return 0 if not body else body[-1].end_lineno - body[0].lineno + 1


def _is_kernel_or_figure(function, path):
    decorators = [ast.unparse(d) for d in function.decorator_list]
    compiled = any("jit" in d or "lazy_kernel" in d for d in decorators)
    return compiled or path.name == "plotting.py" or function.name.endswith("_figure")


def _imports(tree, path):
    """(line, imported module or name's module, name) of every relative import."""
    me = _module_name(path)
    package = me if path.name == "__init__.py" else me.rpartition(".")[0]
    for node in ast.walk(tree):
        if not (isinstance(node, ast.ImportFrom) and node.level):
            continue
        base = package.split(".")
        if node.level > 1:
            base = base[: len(base) - node.level + 1]
        target = ".".join(base + ([node.module] if node.module else []))
        for alias in node.names:
            full = f"{target}.{alias.name}"
            as_path = PACKAGE.parent / full.replace(".", "/")
            is_module = as_path.with_suffix(".py").exists() or as_path.is_dir()
            yield node.lineno, (full if is_module else target), alias.name


@pytest.mark.parametrize("path", SOURCES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_sizes(path):
    text = path.read_text(encoding="utf-8")
    assert text.count("\n") <= MODULE_LINES, f"{path.name}: more than {MODULE_LINES} lines"
    for node in ast.walk(ast.parse(text)):
        if isinstance(node, ast.ClassDef):
            limit = FACADE_LINES if node.name == "BayesLogitAccessor" else CLASS_LINES
            size = node.end_lineno - node.lineno + 1
            assert size <= limit, f"class {node.name}: {size} lines > {limit}"
        if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef):
            limit = KERNEL_LINES if _is_kernel_or_figure(node, path) else FUNCTION_LINES
            size = _body_lines(node)
            assert size <= limit, f"{node.name} (line {node.lineno}): body {size} > {limit}"


@pytest.mark.parametrize("path", SOURCES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_no_private_names_cross_modules(path):
    private = [
        f"line {line}: {name} from {module}"
        for line, module, name in _imports(ast.parse(path.read_text(encoding="utf-8")), path)
        if name.startswith("_") and not name.startswith("__")
    ]
    assert not private


def test_kind_of_data_is_asked_in_one_module():
    askers = [
        p.relative_to(PACKAGE)
        for p in SOURCES
        if "out_of_core" in p.read_text(encoding="utf-8") and p.name != KIND_OF_DATA_HOME
    ]
    assert not askers


def test_no_import_cycles():
    graph = defaultdict(set)
    for path in SOURCES:
        me = _module_name(path)
        for _, module, _ in _imports(ast.parse(path.read_text(encoding="utf-8")), path):
            # A package's own __init__ and its parents are not edges of a cycle.
            if module != me and not me.startswith(module + "."):
                graph[me].add(module)
    done, stack, cycles = set(), [], []

    def visit(module):
        if module in stack:
            cycles.append(" -> ".join(stack[stack.index(module) :] + [module]))
            return
        if module in done:
            return
        done.add(module)
        stack.append(module)
        for target in sorted(graph.get(module, ())):
            visit(target)
        stack.pop()

    for module in sorted(graph):
        visit(module)
    assert not cycles
