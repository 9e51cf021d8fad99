"""The boundary of the checks package, read from the source with ``ast``:

* no module of closedform/checks imports the engine's solving code (the checks rebuild the
  equation and the load themselves: a check that ran the engine's code path would only
  repeat its mistakes);
* no module of closedform imports another module's private (underscore) name;
* every module of closedform/checks stays under 900 lines;
* ``derive`` and ``check`` run the checks only through the registry.

Each detector is first shown to find what it looks for in a small made-up source.
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PACKAGE = ROOT / "closedform"
CHECKS = PACKAGE / "checks"

# The engine's solving code: what the derivation is made of.
ENGINE = ("loads", "laplace", "basis", "response", "systems", "results", "peaksearch",
          "derivation", "metrics", "inputs", "support_motion")
LINE_LIMIT = 900

# Crossings still in the code, each with the reason and what removes it. The test fails on a
# new crossing and on an entry that is no longer needed, so this list can only shrink.
KNOWN_CROSSINGS: set[tuple[str, str]] = set()


def module_name(path: Path) -> str:
    parts = path.relative_to(ROOT).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _package_of(module: str, is_package: bool) -> str:
    return module if is_package else module.rpartition(".")[0]


def _absolute(node: ast.ImportFrom, module: str, is_package: bool) -> str:
    if not node.level:
        return node.module or ""
    base = _package_of(module, is_package).split(".")
    base = base[:len(base) - (node.level - 1)]
    return ".".join(base + ([node.module] if node.module else []))


def imported(source: str, module: str, is_package: bool = False) -> Iterator[tuple[int, str]]:
    """(line, absolute name) of every module and name the source imports, anywhere in it
    (``from ..results import X`` gives closedform.results and closedform.results.X)."""
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield node.lineno, alias.name
        elif isinstance(node, ast.ImportFrom):
            base = _absolute(node, module, is_package)
            yield node.lineno, base
            for alias in node.names:
                yield node.lineno, f"{base}.{alias.name}"


def engine_imports(source: str, module: str, is_package: bool = False) -> set[str]:
    """The engine modules (closedform.<stage>) the source imports."""
    found = set()
    for _line, name in imported(source, module, is_package):
        for stage in ENGINE:
            engine = f"closedform.{stage}"
            if name == engine or name.startswith(engine + "."):
                found.add(engine)
    return found


def _private(name: str) -> bool:
    return name.startswith("_") and not name.startswith("__")


def private_imports(source: str, module: str, is_package: bool = False) -> list[str]:
    """Private names of other closedform modules that the source imports, or reads as an
    attribute of something it imported from closedform (``from . import render`` then
    ``render._helper``)."""
    tree = ast.parse(source)
    found = []
    ours: set[str] = set()          # local names bound to closedform modules or their names
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            base = _absolute(node, module, is_package)
            if base != "closedform" and not base.startswith("closedform."):
                continue
            for alias in node.names:
                if _private(alias.name):
                    found.append(f"line {node.lineno}: {alias.name} from {base}")
                ours.add(alias.asname or alias.name)
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name == "closedform" or alias.name.startswith("closedform."):
                    if any(_private(part) for part in alias.name.split(".")):
                        found.append(f"line {node.lineno}: module {alias.name}")
                    ours.add(alias.asname or alias.name.split(".")[0])
    for node in ast.walk(tree):
        if isinstance(node, ast.Attribute) and _private(node.attr):
            root = node.value
            while isinstance(root, ast.Attribute):
                root = root.value
            if isinstance(root, ast.Name) and root.id in ours:
                found.append(f"line {node.lineno}: {ast.unparse(node)}")
    return found


def too_long(paths, limit: int = LINE_LIMIT) -> list[str]:
    """The files among ``paths`` with ``limit`` lines or more."""
    return [f"{path.name}: {count} lines" for path in paths
            if (count := len(path.read_text().splitlines())) >= limit]


def sources(folder: Path) -> list[Path]:
    return sorted(folder.rglob("*.py"))


# ----------------------------------------------------------------------------- the detectors


def test_the_engine_detector_finds_every_form_of_import():
    module = "closedform.checks.made_up"
    assert engine_imports("from ..results import FloatEvaluator\n", module) == \
        {"closedform.results"}
    assert engine_imports("from .. import laplace, case\n", module) == {"closedform.laplace"}
    assert engine_imports("import closedform.response as r\n", module) == {"closedform.response"}
    assert engine_imports("def f():\n    from ...closedform import x\n    from ..basis.y import z\n",
                          module) == {"closedform.basis"}
    assert engine_imports("from .. import derivation\n", "closedform.checks", is_package=True) \
        == {"closedform.derivation"}
    assert engine_imports("from ..case import Case\nfrom .base import Check\nimport sympy\n"
                          "from .results_like import x\n", module) == set()


def test_the_private_name_detector_finds_imports_and_attributes():
    module = "closedform.checks.made_up"
    assert private_imports("from .model import _equation, equation_of\n", module) == \
        ["line 1: _equation from closedform.checks.model"]
    assert private_imports("from closedform.verify import _Parser as P\n", module) == \
        ["line 1: _Parser from closedform.verify"]
    assert private_imports("from .. import render\nx = render._markdown_equation('')\n",
                           module) == ["line 2: render._markdown_equation"]
    assert private_imports("import closedform.checks.base\ny = closedform.checks.base._mp_cached\n",
                           module) == ["line 2: closedform.checks.base._mp_cached"]
    assert private_imports("from .model import equation_of as _equation\n"
                           "from __future__ import annotations\n"
                           "from sympy.printing.latex import LatexPrinter\n"
                           "s = LatexPrinter._default_settings\n"
                           "from mpmath import _private\n", module) == []


def test_the_size_detector_counts_lines(tmp_path):
    short, long = tmp_path / "short.py", tmp_path / "long.py"
    short.write_text("x = 1\n" * (LINE_LIMIT - 1))
    long.write_text("x = 1\n" * LINE_LIMIT)
    assert too_long([short, long]) == [f"long.py: {LINE_LIMIT} lines"]


# ----------------------------------------------------------------------------- the code


def test_the_checks_import_none_of_the_engines_solving_code():
    crossings = set()
    for path in sources(CHECKS):
        module = module_name(path)
        for engine in engine_imports(path.read_text(), module, path.name == "__init__.py"):
            crossings.add((module, engine))
    assert crossings - KNOWN_CROSSINGS == set(), "new imports of the engine in the checks"
    assert KNOWN_CROSSINGS - crossings == set(), "no longer needed: remove from KNOWN_CROSSINGS"


def test_no_module_imports_another_modules_private_names():
    found = {}
    for path in sources(PACKAGE):
        problems = private_imports(path.read_text(), module_name(path), path.name == "__init__.py")
        if problems:
            found[str(path.relative_to(ROOT))] = problems
    assert found == {}


def test_every_module_of_the_checks_is_under_the_line_limit():
    assert len(sources(CHECKS)) >= 10
    assert too_long(sources(CHECKS)) == []


@pytest.mark.parametrize("runner", ["derivation.py", "audit.py"])
def test_derive_and_check_run_the_checks_through_the_registry(runner):
    """The commands reach the checks only through the registry (and ``Check`` itself), so a
    family added there runs everywhere it applies."""
    path = PACKAGE / runner
    names = {name for _line, name in imported(path.read_text(), module_name(path))
             if name.startswith("closedform.checks.")}
    modules = {name.split(".")[2] for name in names}
    assert modules == {"base", "registry"}
