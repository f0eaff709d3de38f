"""The package's layout rules, read from the source with the standard library's ``ast``.

- The numeric core (limits, grids, legendre, harmonics, rings, transform,
  vector_transform, spectra, filters, the science modules flow, models,
  potential, points, rotation, localize, and the kernels) imports nothing
  above it: not xarray, matplotlib, dask, distributed or netCDF4, and not the
  adapter, plotting, command-line, report, demo or benchmark layers; not at
  module level, not inside a function, not through
  ``importlib.import_module("...")``.
- The kernels import only numpy, numba, the standard library and each other.
- No import cycle between sphex modules, counting imports at any depth.  An
  import of ``a.b.c`` is an edge to ``a.b.c`` only: Python initialises the
  parent packages first, so a package ``__init__`` that imports its own
  submodules is no cycle.
- No module is longer than 800 lines.
- Private names (leading underscore) are not imported or used across module
  boundaries, except between modules of one subpackage (``sphex.xr``,
  ``sphex.cli``, ...); each top-level module counts as a package of its own.

The last test plants one violation of each kind in a throw-away copy of a
package and checks that every rule catches it.
"""
from __future__ import annotations

import ast
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent / "sphex"

CORE = {"grids", "legendre", "harmonics", "limits", "rings", "transform", "vector_transform",
        "spectra", "filters", "flow", "models", "normal_field", "potential", "points",
        "least_squares", "rotation", "concentration", "localize", "compiling"}
FORBIDDEN_IN_CORE_EXTERNAL = {"xarray", "matplotlib", "dask", "distributed", "netCDF4"}
FORBIDDEN_IN_CORE_LAYERS = {"xr", "plot", "cli", "report", "demo", "bench"}
KERNEL_EXTERNAL = {"numpy", "numba", "llvmlite"}
MAX_LINES = 800


@dataclass(frozen=True)
class Import:
    """One import found in a module: what it reaches and the names it takes."""

    importer: str
    target: str           # a module name (a sphex module when one matches), or an outside module
    names: tuple[str, ...]  # names taken from ``target`` (from-imports), else ()
    line: int


def module_names(root: Path) -> dict[str, Path]:
    """Dotted module name -> file, for every .py file of the package at ``root``."""
    out = {}
    for path in sorted(root.rglob("*.py")):
        parts = list(path.relative_to(root.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        out[".".join(parts)] = path
    return out


def _is_package(name: str, modules: dict[str, Path]) -> bool:
    return modules[name].name == "__init__.py"


def _absolute(module: str | None, level: int, importer: str, modules: dict[str, Path]) -> str:
    """The absolute module name of ``from <level dots><module> import ...`` in ``importer``."""
    if level == 0:
        return module or ""
    package = importer if _is_package(importer, modules) else importer.rpartition(".")[0]
    for _ in range(level - 1):
        package = package.rpartition(".")[0]
    return f"{package}.{module}" if module else package


def _string_import(node: ast.Call) -> str | None:
    """The module named in ``importlib.import_module("x")`` / ``import_module("x")`` /
    ``__import__("x")`` when it is a plain string."""
    func = node.func
    name = func.attr if isinstance(func, ast.Attribute) else getattr(func, "id", None)
    if name not in ("import_module", "__import__") or not node.args:
        return None
    arg = node.args[0]
    if isinstance(arg, ast.Constant) and isinstance(arg.value, str) and not arg.value.startswith("."):
        return arg.value
    return None


def imports_of(name: str, modules: dict[str, Path]) -> list[Import]:
    """Every import of module ``name``, at any depth of its syntax tree."""
    tree = ast.parse(modules[name].read_text(encoding="utf-8"))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [Import(name, alias.name, (), node.lineno) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = _absolute(node.module, node.level, name, modules)
            if base == "__future__":
                continue
            for alias in node.names:
                sub = f"{base}.{alias.name}"
                if sub in modules:
                    found.append(Import(name, sub, (), node.lineno))
                else:
                    found.append(Import(name, base, (alias.name,), node.lineno))
        elif isinstance(node, ast.Call):
            target = _string_import(node)
            if target is not None:
                found.append(Import(name, target, (), node.lineno))
    return found


def private_uses(name: str, modules: dict[str, Path]) -> list[tuple[str, str, int]]:
    """(module, private name, line) for every private name of another sphex module that
    ``name`` imports or reaches as an attribute (``sxr._open``) or a private module it imports."""
    out = []
    for imp in imports_of(name, modules):
        if imp.target in modules:
            last = imp.target.rpartition(".")[2]
            if last.startswith("_") and not last.startswith("__"):
                out.append((imp.target.rpartition(".")[0], last, imp.line))
            out += [(imp.target, n, imp.line) for n in imp.names
                    if n.startswith("_") and not n.startswith("__")]
    tree = ast.parse(modules[name].read_text(encoding="utf-8"))
    bound: dict[str, str] = {}  # local name -> sphex module it stands for
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.asname and alias.name in modules:
                    bound[alias.asname] = alias.name
                elif not alias.asname and alias.name.split(".")[0] in modules:
                    bound[alias.name.split(".")[0]] = alias.name.split(".")[0]
        elif isinstance(node, ast.ImportFrom):
            base = _absolute(node.module, node.level, name, modules)
            for alias in node.names:
                if f"{base}.{alias.name}" in modules:
                    bound[alias.asname or alias.name] = f"{base}.{alias.name}"
    for node in ast.walk(tree):
        if not isinstance(node, ast.Attribute):
            continue
        chain = []
        inner: ast.AST = node
        while isinstance(inner, ast.Attribute):
            chain.append(inner.attr)
            inner = inner.value
        if not isinstance(inner, ast.Name) or inner.id not in bound:
            continue
        chain.reverse()
        module = bound[inner.id]
        for attr in chain:
            if f"{module}.{attr}" in modules:
                module = f"{module}.{attr}"
                continue
            if attr.startswith("_") and not attr.startswith("__"):
                out.append((module, attr, node.lineno))
            break
    return sorted(set(out), key=lambda x: x[2])


def unit(name: str, modules: dict[str, Path]) -> str:
    """The package within which private names may be shared: the subpackage a module
    belongs to, or the module itself for the top-level modules and the package root."""
    parts = name.split(".")
    if len(parts) >= 3:
        return ".".join(parts[:2])
    if len(parts) == 2 and _is_package(name, modules):
        return name
    return name


def is_core(name: str) -> bool:
    parts = name.split(".")
    return len(parts) >= 2 and (parts[1] in CORE or parts[1] == "kernels")


def core_violations(root: Path) -> list[str]:
    modules = module_names(root)
    top = root.name
    bad = []
    for name in modules:
        if not is_core(name):
            continue
        for imp in imports_of(name, modules):
            parts = imp.target.split(".")
            layer = (parts[1] if parts[0] == top and len(parts) > 1
                     else imp.names[0] if parts == [top] and imp.names else None)
            if parts[0] in FORBIDDEN_IN_CORE_EXTERNAL or layer in FORBIDDEN_IN_CORE_LAYERS:
                what = imp.target + (f".{imp.names[0]}" if parts == [top] and imp.names else "")
                bad.append(f"{name} (line {imp.line}) imports {what}; the numeric core works on "
                           "numpy arrays only: move this into the adapter layer (sphex/xr/) or the "
                           "command line, which may call the core")
    return bad


def kernel_violations(root: Path) -> list[str]:
    modules = module_names(root)
    top = root.name
    allowed = KERNEL_EXTERNAL | set(sys.stdlib_module_names)
    bad = []
    for name in modules:
        if not name.startswith(f"{top}.kernels"):
            continue
        for imp in imports_of(name, modules):
            first = imp.target.split(".")[0]
            inside = imp.target == f"{top}.kernels" or imp.target.startswith(f"{top}.kernels.")
            if not inside and (first == top or first not in allowed):
                bad.append(f"{name} (line {imp.line}) imports {imp.target}; kernels import only "
                           "numpy, numba, the standard library and sphex.kernels")
    return bad


def import_cycles(root: Path) -> list[list[str]]:
    """Strongly connected groups of more than one module (or a module importing itself)."""
    modules = module_names(root)
    graph = {name: sorted({imp.target for imp in imports_of(name, modules) if imp.target in modules})
             for name in modules}
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    groups = []

    def visit(v: str) -> None:  # Tarjan's strongly connected components
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in graph[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                group.append(w)
                if w == v:
                    break
            if len(group) > 1 or v in graph[v]:
                groups.append(sorted(group))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return groups


def private_violations(root: Path) -> list[str]:
    modules = module_names(root)
    bad = []
    for name in modules:
        for owner, private, line in private_uses(name, modules):
            if unit(owner, modules) != unit(name, modules):
                bad.append(f"{name} (line {line}) uses the private name {private} of {owner}; "
                           f"give it a public name in {owner} or keep the use inside its package")
    return bad


def long_modules(root: Path) -> list[str]:
    out = []
    for name, path in module_names(root).items():
        n = len(path.read_text(encoding="utf-8").splitlines())
        if n > MAX_LINES:
            out.append(f"{name} has {n} lines (at most {MAX_LINES}); split it by concept")
    return out


# ----------------------------------------------------------------------------
# the rules, on the package
# ----------------------------------------------------------------------------
def test_the_package_is_where_the_checks_look():
    modules = module_names(ROOT)
    for name in ("sphex", "sphex.grids", "sphex.transform", "sphex.kernels.scalar", "sphex.xr",
                 "sphex.xr.fields", "sphex.cli.parser", "sphex.bench.command"):
        assert name in modules
    assert sum(is_core(n) for n in modules) >= 10


def test_core_imports_nothing_above_it():
    assert core_violations(ROOT) == []


def test_kernels_import_only_numpy_numba_and_each_other():
    assert kernel_violations(ROOT) == []


def test_no_import_cycles():
    assert import_cycles(ROOT) == []


def test_no_module_over_800_lines():
    assert long_modules(ROOT) == []


def test_private_names_stay_inside_their_package():
    assert private_violations(ROOT) == []


# ----------------------------------------------------------------------------
# the checks catch what they are meant to catch
# ----------------------------------------------------------------------------
PLANTED = {
    "__init__.py": "import importlib\n",
    "grids.py": "import numpy as np\n\n\ndef f():\n    import xarray\n    return xarray\n",
    "legendre.py": "from sphex import grids\n\n\ndef g():\n    return importlib.import_module('sphex.plot')\n",
    "transform.py": "from sphex import xr as adapters\n",
    "spectra.py": "def h():\n    from sphex.harmonics import x\n    return x\n",
    "harmonics.py": "def k():\n    from sphex.spectra import y\n    return y\n",
    "kernels/__init__.py": "import numba\n",
    "kernels/scalar.py": "import numpy as np\nfrom sphex.grids import Grid\nimport scipy\n",
    "xr/__init__.py": "from sphex.xr import fields\n",
    "xr/fields.py": "from sphex.xr.coords import _private_ok\nfrom sphex.filters import _private_bad\n",
    "filters.py": "_private_bad = 1\n",
    "xr/coords.py": "_private_ok = 1\n",
    "cli/__init__.py": "",
    "cli/parser.py": "import sphex.xr as sxr\n\n\ndef m():\n    return sxr.fields._hidden()\n",
    "plot.py": "from sphex import _io\n",
    "big.py": "x = 1\n" * (MAX_LINES + 1),
}


@pytest.fixture
def planted(tmp_path) -> Path:
    root = tmp_path / "sphex"
    for rel, text in PLANTED.items():
        path = root / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    return root


def test_the_checks_catch_planted_violations(planted):
    core = "\n".join(core_violations(planted))
    assert "sphex.grids (line 5) imports xarray" in core                # inside a function
    assert "sphex.legendre (line 5) imports sphex.plot" in core         # importlib string
    assert "sphex.transform (line 1) imports sphex.xr" in core          # from-import of a layer
    assert len(core_violations(planted)) == 3
    kernels = "\n".join(kernel_violations(planted))
    assert "imports sphex.grids" in kernels and "imports scipy" in kernels
    assert len(kernel_violations(planted)) == 2                          # numpy, numba pass
    assert import_cycles(planted) == [["sphex.harmonics", "sphex.spectra"]]  # function-level only
    private = "\n".join(private_violations(planted))
    assert "_private_bad of sphex.filters" in private
    assert "_hidden of sphex.xr.fields" in private                      # through a module alias
    assert "_io of sphex" in private                                    # a private module
    assert "_private_ok" not in private                                 # inside one package
    assert long_modules(planted) == [f"sphex.big has {MAX_LINES + 1} lines (at most {MAX_LINES}); "
                                     "split it by concept"]
