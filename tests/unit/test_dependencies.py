"""pyproject.toml declares exactly what the code imports, and lists every package that must ship in the wheel.

Imports are read with ``ast`` (every ``import``/``from ... import`` in a file, including those inside functions),
mapped to installed distributions with ``importlib.metadata.packages_distributions()`` and compared with the
requirement names in pyproject.toml, normalised as in PEP 503 (runs of ``-_.`` become ``-``, lower case).
"""

from __future__ import annotations

import ast
import re
import sys
from importlib.metadata import packages_distributions
from pathlib import Path

import pytest

tomllib = pytest.importorskip("tomllib", reason="reading pyproject.toml needs Python 3.11's tomllib")

ROOT = Path(__file__).resolve().parents[2]
OWN_MODULES = {"adapt", "tests"}  # the project's own top-level packages


def normalise(name: str) -> str:
    """PEP 503 name normalisation."""
    return re.sub(r"[-_.]+", "-", name).lower()


def requirement_name(requirement: str) -> str:
    """The distribution name at the start of a PEP 508 requirement string ("torch>=2.4" -> "torch")."""
    match = re.match(r"\s*([A-Za-z0-9][A-Za-z0-9._-]*)", requirement)
    if match is None:
        raise ValueError(f"cannot read a distribution name from the requirement {requirement!r}")
    return normalise(match.group(1))


def imported_top_level(folder: Path) -> dict[str, set[str]]:
    """Top-level module name -> files (as ``folder/...``) that import it; relative imports are skipped."""
    found: dict[str, set[str]] = {}
    for path in sorted(folder.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):  # walks function bodies, try/except and if-blocks too
            if isinstance(node, ast.Import):
                names = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                names = [node.module]
            else:
                continue
            for name in names:
                found.setdefault(name.split(".")[0], set()).add(str(path.relative_to(folder.parent)))
    return found


def imported_distributions(folder: Path) -> dict[str, set[str]]:
    """Distribution (normalised) -> files importing it, ignoring the stdlib and the project's own packages."""
    module_to_dists = packages_distributions()
    out: dict[str, set[str]] = {}
    unknown = []
    for module, files in imported_top_level(folder).items():
        if module in sys.stdlib_module_names or module in OWN_MODULES or module == "__future__":
            continue
        dists = module_to_dists.get(module)
        if not dists:
            unknown.append(f"{module} (in {', '.join(sorted(files))})")
            continue
        for dist in dists:
            out.setdefault(normalise(dist), set()).update(files)
    assert not unknown, "imported but provided by no installed distribution: " + "; ".join(unknown)
    return out


def pyproject() -> dict:
    return tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))


def declared_runtime() -> set[str]:
    return {requirement_name(r) for r in pyproject()["project"]["dependencies"]}


def declared_extra(extra: str) -> set[str]:
    return {requirement_name(r) for r in pyproject()["project"]["optional-dependencies"][extra]}


def test_requirement_names_are_read_and_normalised_as_pep_503_says():
    # PEP 503: "Friendly-Bard", "FRIENDLY-BARD" and "friendly.bard" all normalise to "friendly-bard"
    assert {normalise(n) for n in ("Friendly-Bard", "FRIENDLY-BARD", "friendly.bard", "friendly__bard")} \
        == {"friendly-bard"}
    assert requirement_name("hydra-core>=1.3,<1.4") == "hydra-core"
    assert requirement_name("Python_Stdnum[extra] >= 1.20 ; python_version >= '3.10'") == "python-stdnum"


def test_import_scan_sees_imports_inside_functions_and_skips_relative_ones(tmp_path):
    pkg = tmp_path / "pkg"
    pkg.mkdir()
    (pkg / "mod.py").write_text("import json\nfrom . import sibling\n\ndef f():\n    from numpy.linalg import norm\n"
                                "    try:\n        import yaml\n    except ImportError:\n        pass\n")
    assert set(imported_top_level(pkg)) == {"json", "numpy", "yaml"}
    assert set(imported_distributions(pkg)) == {"numpy", "pyyaml"}  # the module yaml ships in PyYAML


def test_runtime_dependencies_are_exactly_the_distributions_adapt_imports():
    imported = imported_distributions(ROOT / "adapt")
    declared = declared_runtime()
    optional = declared_extra("cluster")  # imported only by the module that engine.kind=dask loads
    undeclared = {d: sorted(f)[:3] for d, f in imported.items() if d not in declared | optional}
    unused = sorted(declared - set(imported))
    assert not undeclared and not unused, (
        f"adapt/ imports distributions missing from [project] dependencies: {undeclared or 'none'}; [project] "
        f"dependencies lists distributions adapt/ never imports: {unused or 'none'} (move test-only ones to "
        "[project.optional-dependencies] test, drop the rest)")


def test_every_distribution_the_tests_import_is_declared():
    allowed = declared_runtime() | declared_extra("test")
    missing = {d: sorted(f)[:3] for d, f in imported_distributions(ROOT / "tests").items() if d not in allowed}
    assert not missing, ("tests/ import distributions that are neither runtime dependencies nor in the test "
                         f"extra: {missing}")


def packages_on_disk() -> set[str]:
    """Import names of every folder with an __init__.py: under adapt/, and under conf/ (shipped as adapt.conf)."""
    found = {".".join(p.parent.relative_to(ROOT).parts) for p in (ROOT / "adapt").rglob("__init__.py")}
    found |= {".".join(("adapt",) + p.parent.relative_to(ROOT).parts) for p in (ROOT / "conf").rglob("__init__.py")}
    return {name for name in found if "__pycache__" not in name}


def test_every_package_folder_is_listed_for_the_wheel():
    listed = set(pyproject()["tool"]["setuptools"]["packages"])
    on_disk = packages_on_disk()
    assert "adapt.conf.prepare" in on_disk and "adapt.training.adapters" in on_disk  # the scan itself works
    assert not on_disk - listed, (f"[tool.setuptools] packages misses {sorted(on_disk - listed)}: a regular "
                                  "install would leave them out")
    assert not listed - on_disk, f"[tool.setuptools] packages lists folders with no __init__.py: {sorted(listed - on_disk)}"
