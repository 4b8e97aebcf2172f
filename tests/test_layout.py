"""The package's import rules, read from the source with ``ast`` (nothing is imported).

Imports point inward: ``cli`` → ``workflows`` → the parts (``measuring``, ``fitting``,
``capacity``, ``history``, ``report``) → ``core``. ``bounds`` uses only ``core``. The
rules are written out in DEVELOPERS.md ("Import rules"); each test below fails with the
list of every offending line, so a broken rule reads like a to-do list.

Imports inside functions count (a lazy import is still a dependency); so do
``importlib.import_module("curvefit....")`` calls with a literal name and imports under
``if TYPE_CHECKING:``. ``from curvefit import X`` is resolved through ``_EXPORTS`` in
``curvefit/__init__.py`` to the module that defines ``X``.
"""

from __future__ import annotations

import ast
from dataclasses import dataclass
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "curvefit"

# The parts between the command line and the core.
PARTS = ("measuring", "fitting", "capacity", "history", "report")
# Libraries that only the command line may use (argument parsing, terminal rendering).
CLI_LIBRARIES = ("typer", "rich")


@dataclass(frozen=True)
class Import:
    """One dependency of a module: the target's dotted name and, for ``from`` imports, the name."""

    source: str      # importing module, e.g. "curvefit.report.html"
    path: str        # file path relative to the repository root
    line: int
    target: str      # imported module, e.g. "curvefit.report.plots" or "numpy"
    name: str = ""   # the name taken from it (``from target import name``), else ""


def module_name(path: Path) -> str:
    """``curvefit/core/stats.py`` → ``curvefit.core.stats``; a package's ``__init__`` → the package."""
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def part_of(module: str) -> str:
    """The part a curvefit module is in: ``core``, ``cli``, ``bounds``, …; ``api`` for the package itself."""
    pieces = module.split(".")
    return pieces[1] if len(pieces) > 1 else "api"


def is_private(name: str) -> bool:
    return name.startswith("_") and not (name.startswith("__") and name.endswith("__"))


def _exports(init_source: str) -> dict[str, str]:
    """The ``_EXPORTS`` mapping (public name → defining module) of ``curvefit/__init__.py``."""
    for node in ast.walk(ast.parse(init_source)):
        targets = node.targets if isinstance(node, ast.Assign) else \
            [node.target] if isinstance(node, ast.AnnAssign) else []
        if any(isinstance(t, ast.Name) and t.id == "_EXPORTS" for t in targets) \
                and isinstance(node.value, ast.Dict):
            return {k.value: v.value for k, v in zip(node.value.keys, node.value.values)
                    if isinstance(k, ast.Constant) and isinstance(v, ast.Constant)}
    return {}


class Scanner:
    """Reads every module under a package folder once and lists its imports."""

    def __init__(self, sources: dict[str, tuple[str, str]]):
        # module name -> (relative path, source text)
        self.sources = sources
        self.modules = set(sources)
        init = sources.get("curvefit")
        self.exports = _exports(init[1]) if init else {}

    @classmethod
    def from_folder(cls, folder: Path = PACKAGE) -> "Scanner":
        found = {}
        for path in sorted(folder.rglob("*.py")):
            found[module_name(path)] = (str(path.relative_to(ROOT)), path.read_text(encoding="utf-8"))
        return cls(found)

    def _base(self, module: str, level: int) -> str:
        """The package a relative import of ``level`` dots starts from."""
        is_package = self.sources[module][0].endswith("__init__.py")
        pieces = module.split(".") if is_package else module.split(".")[:-1]
        return ".".join(pieces[: len(pieces) - (level - 1)])

    def _resolve_from(self, module: str, node: ast.ImportFrom, alias: ast.alias) -> tuple[str, str]:
        """(target module, name) of one ``from … import name``; a submodule becomes the target."""
        if node.level:
            base = self._base(module, node.level)
            target = f"{base}.{node.module}" if node.module else base
        else:
            target = node.module or ""
        name = alias.name
        if f"{target}.{name}" in self.modules:
            return f"{target}.{name}", ""
        if target == "curvefit" and name in self.exports:
            return self.exports[name], name
        return target, name

    def imports(self, module: str) -> list[Import]:
        path, text = self.sources[module]
        found = []
        for node in ast.walk(ast.parse(text, filename=path)):
            if isinstance(node, ast.Import):
                found += [Import(module, path, node.lineno, a.name) for a in node.names]
            elif isinstance(node, ast.ImportFrom):
                for a in node.names:
                    target, name = self._resolve_from(module, node, a)
                    found.append(Import(module, path, node.lineno, target, name))
            elif isinstance(node, ast.Call) and _is_import_module(node):
                found.append(Import(module, path, node.lineno, node.args[0].value))
        return found

    def private_attributes(self, module: str) -> list[Import]:
        """``alias._name`` where ``alias`` is another curvefit module bound by an import."""
        path, text = self.sources[module]
        tree = ast.parse(text, filename=path)
        aliases: dict[str, str] = {}
        for node in ast.walk(tree):
            if isinstance(node, ast.Import):
                for a in node.names:
                    if a.asname:
                        aliases[a.asname] = a.name
                    else:
                        aliases.setdefault(a.name.split(".")[0], a.name.split(".")[0])
            elif isinstance(node, ast.ImportFrom):
                for a in node.names:
                    target, name = self._resolve_from(module, node, a)
                    if not name and target in self.modules:
                        aliases[a.asname or a.name] = target
        found = []
        for node in ast.walk(tree):
            if isinstance(node, ast.Attribute) and is_private(node.attr):
                owner = _dotted(node.value, aliases)
                if owner in self.modules and owner != module:
                    found.append(Import(module, path, node.lineno, owner, node.attr))
        return found

    def all_imports(self) -> list[Import]:
        return [imp for m in sorted(self.modules) for imp in self.imports(m)]


def _is_import_module(node: ast.Call) -> bool:
    func = node.func
    name = func.attr if isinstance(func, ast.Attribute) else func.id if isinstance(func, ast.Name) else ""
    return (name == "import_module" and len(node.args) == 1 and isinstance(node.args[0], ast.Constant)
            and isinstance(node.args[0].value, str) and node.args[0].value.startswith("curvefit"))


def _dotted(node: ast.AST, aliases: dict[str, str]) -> str:
    """The module an expression like ``plots`` or ``curvefit.report.plots`` names, else ""."""
    names = []
    while isinstance(node, ast.Attribute):
        names.append(node.attr)
        node = node.value
    if not isinstance(node, ast.Name) or node.id not in aliases:
        return ""
    return ".".join([aliases[node.id]] + names[::-1])


def _is_curvefit(target: str) -> bool:
    return target == "curvefit" or target.startswith("curvefit.")


# ------------------------------------------------------------------ the rules
def _forbidden_part(allowed_sources, forbidden_targets=None, allowed_targets=None):
    """A rule on curvefit imports: sources in ``allowed_sources`` may not reach the targets."""
    def check(imp: Import) -> bool:
        if part_of(imp.source) not in allowed_sources or not _is_curvefit(imp.target):
            return False
        target = part_of(imp.target)
        if allowed_targets is not None:
            return target not in allowed_targets
        return target in forbidden_targets
    return check


def _cli_library_outside_cli(imp: Import) -> bool:
    return (imp.target.split(".")[0] in CLI_LIBRARIES and _is_curvefit(imp.source)
            and part_of(imp.source) != "cli")


RULES = {
    "core imports no other curvefit part": _forbidden_part({"core"}, allowed_targets={"core"}),
    "bounds imports only core": _forbidden_part({"bounds"}, allowed_targets={"core", "bounds"}),
    "measuring, fitting, capacity, history and report import neither cli nor workflows":
        _forbidden_part(set(PARTS), forbidden_targets={"cli", "workflows"}),
    "workflows import no cli": _forbidden_part({"workflows"}, forbidden_targets={"cli"}),
    "report imports nothing from measuring": _forbidden_part({"report"}, forbidden_targets={"measuring"}),
    "only cli imports typer or rich": _cli_library_outside_cli,
}


def violations(scanner: Scanner, rule: str) -> list[str]:
    check = RULES[rule]
    return _lines([imp for imp in scanner.all_imports() if check(imp)])


def private_name_violations(scanner: Scanner) -> list[str]:
    """Private names (``_x``) a module takes from another curvefit module."""
    found, used = [], []
    for module in sorted(scanner.modules):
        for imp in scanner.imports(module):
            if not _is_curvefit(imp.target) or imp.target == module:
                continue
            if (imp.name and is_private(imp.name)) or \
                    (not imp.name and _private_module_outside_its_package(imp)):
                found.append(imp)
        used += scanner.private_attributes(module)
    return _lines(found) + _lines(used, verb="uses")


def _private_module_outside_its_package(imp: Import) -> bool:
    pieces = imp.target.split(".")
    if not any(is_private(p) for p in pieces):
        return False
    package = ".".join(pieces[:-1])
    return not (imp.source == package or imp.source.startswith(package + "."))


def _lines(found: list[Import], verb: str = "imports") -> list[str]:
    """One line per (file, line, target), names joined, sorted by file and line."""
    grouped: dict[tuple[str, int, str], list[str]] = {}
    for imp in found:
        names = grouped.setdefault((imp.path, imp.line, imp.target), [])
        if imp.name and imp.name not in names:
            names.append(imp.name)
    out = []
    for (path, line, target), names in sorted(grouped.items()):
        if verb == "uses":
            what = ", ".join(f"{target}.{n}" for n in names)
        else:
            what = f"{', '.join(names)} from {target}" if names else target
        out.append(f"{path}:{line}: {verb} {what}")
    return out


def _report(rule: str, found: list[str]) -> str:
    lines = "\n".join(f"  {v}" for v in found)
    return f"{len(found)} line(s) break the rule '{rule}' (see DEVELOPERS.md, Import rules):\n{lines}"


@pytest.fixture(scope="module")
def scanner() -> Scanner:
    return Scanner.from_folder()


def test_every_module_is_read(scanner):
    # the scan sees the whole package, so an empty list below means a clean rule
    assert {"curvefit", "curvefit.core.stats", "curvefit.bounds"} <= scanner.modules
    assert {part_of(m) for m in scanner.modules} >= {"core", "bounds", "cli", *PARTS}


@pytest.mark.parametrize("rule", list(RULES))
def test_import_rule(scanner, rule):
    found = violations(scanner, rule)
    assert not found, _report(rule, found)


def test_no_private_names_across_modules(scanner):
    found = private_name_violations(scanner)
    assert not found, _report("no module uses a private name (_x) of another module", found)


# ------------------------------------------------------------------ the checker itself
def _toy(**modules: str) -> Scanner:
    """A scanner over made-up sources: keyword ``core__stats`` is module ``curvefit.core.stats``."""
    sources = {}
    for key, text in modules.items():
        name = "curvefit" if key == "api" else "curvefit." + key.replace("__", ".")
        package = key == "api" or key.endswith("__init")
        name = name.removesuffix(".init")
        path = name.replace(".", "/") + ("/__init__.py" if package else ".py")
        sources[name] = (path, text)
    return Scanner(sources)


def test_checker_catches_each_kind_of_breach():
    toy = _toy(
        api='_EXPORTS = {"measure": "curvefit.measuring.runner"}',
        core__init="",
        core__stats="from curvefit import measure\nimport curvefit.cli.main\n",
        core__text="from . import stats\nx = stats._hidden\n",
        report__init="",
        report__html="from ..measuring import runner\nfrom curvefit.report.plots import _as_list\n",
        report__plots="def f():\n    import typer\n",
        measuring__init="",
        measuring__runner="import importlib\nimportlib.import_module('curvefit.workflows.demo')\n",
        workflows__demo="from curvefit.cli import main\n",
        cli__main="import typer\nfrom curvefit.core.stats import _private\n",
        bounds="from curvefit.fitting import engine\n",
    )
    core = violations(toy, "core imports no other curvefit part")
    assert [v.split(": ")[1] for v in core] == ["imports measure from curvefit.measuring.runner",
                                                "imports curvefit.cli.main"]
    assert violations(toy, "report imports nothing from measuring") == [
        "curvefit/report/html.py:1: imports curvefit.measuring.runner"]
    assert violations(toy, "only cli imports typer or rich") == ["curvefit/report/plots.py:2: imports typer"]
    assert len(violations(toy, "measuring, fitting, capacity, history and report import neither "
                               "cli nor workflows")) == 1
    assert len(violations(toy, "workflows import no cli")) == 1
    assert len(violations(toy, "bounds imports only core")) == 1
    assert private_name_violations(toy) == [
        "curvefit/cli/main.py:2: imports _private from curvefit.core.stats",
        "curvefit/report/html.py:2: imports _as_list from curvefit.report.plots",
        "curvefit/core/text.py:2: uses curvefit.core.stats._hidden"]


def test_checker_accepts_inward_imports():
    toy = _toy(
        api='_EXPORTS = {"sem": "curvefit.core.stats"}',
        core__init="",
        core__stats="import numpy\nfrom curvefit.core.errors import InputError\n",
        core__errors="class InputError(ValueError):\n    pass\n",
        fitting__init="",
        fitting__engine="from curvefit import sem\nfrom curvefit.core import stats\nstats.__name__\n",
        cli__main="import rich\nfrom curvefit.fitting.engine import fit_curve\n",
    )
    assert all(not violations(toy, rule) for rule in RULES)
    assert private_name_violations(toy) == []
