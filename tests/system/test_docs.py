"""The README and the CI script agree, and the docs name what exists."""

from __future__ import annotations

import ast
import importlib
import re

from conftest import ROOT

LAYERS = ["core", "inputs", "numerics", "estimation", "analysis", "figures", "output", "app"]


def test_ci_runs_exactly_the_readme_test_command():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    command = [line for line in ci.splitlines() if "pytest" in line]
    assert len(command) == 1
    assert f"\n{command[0]}\n" in readme


def _layer_sections(guide):
    """Text of each ``### `kinfit/<layer>/` `` section of the guide, by layer."""
    parts = re.split(r"^### `kinfit/([a-z]+)/`", guide, flags=re.M)
    return {parts[i]: parts[i + 1].split("\n## ")[0] for i in range(1, len(parts), 2)}


def test_developers_guide_maps_every_module_to_its_layer():
    guide = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    sections = _layer_sections(guide)
    assert sorted(sections) == sorted(LAYERS)
    for layer in LAYERS:
        for path in sorted((ROOT / "kinfit" / layer).rglob("*.py")):
            if path.name != "__init__.py":
                assert f"`{path.name}`" in sections[layer], f"{layer}/{path.name}"


_REFERENCE = re.compile(r"(?<![\"'])\bkinfit((?:\.[A-Za-z_][A-Za-z0-9_]*)+)(?![\w/])")   # not "kinfit.result/1"


def _resolves(dotted):
    parts = dotted.split(".")
    for i in range(len(parts), 0, -1):
        try:
            obj = importlib.import_module(".".join(parts[:i]))
        except ImportError:
            continue
        for name in parts[i:]:
            if not hasattr(obj, name):
                return False
            obj = getattr(obj, name)
        return True
    return False


def test_every_reference_to_a_kinfit_name_resolves():
    # docstrings, comments and the two guides name modules and functions that exist
    files = sorted((ROOT / "kinfit").rglob("*.py")) + [ROOT / "README.md",
                                                        ROOT / "DEVELOPERS.md"]
    stale = []
    for path in files:
        for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
            for match in _REFERENCE.finditer(line):
                dotted = "kinfit" + match.group(1).rstrip(".")
                if not _resolves(dotted):
                    stale.append(f"{path.relative_to(ROOT)}:{number}: {dotted}")
    assert stale == []


def test_tests_mirror_the_layers():
    # tests/<layer>/test_<module>.py tests kinfit/<layer>/<module>.py; tests/system/ the whole
    tests = ROOT / "tests"
    ignored = {"__pycache__", "artifacts"}      # artifacts: the browser test's screenshots
    folders = sorted(p.name for p in tests.iterdir() if p.is_dir() and p.name not in ignored)
    assert folders == sorted(LAYERS + ["system", "benchmarks", "data"])
    for layer in LAYERS:
        for path in (tests / layer).rglob("test_*.py"):
            module = ROOT / "kinfit" / path.relative_to(tests).parent / path.name[5:]
            assert module.exists(), f"{path.relative_to(ROOT)} has no module {module.name}"
    assert not list(tests.glob("test_*.py"))


def test_no_test_imports_a_private_name():
    private = []
    for path in sorted((ROOT / "tests").rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom):
                modules = [node.module or ""]
                names = [a.name for a in node.names]
            elif isinstance(node, ast.Import):
                modules, names = [a.name for a in node.names], []
            else:
                continue
            hidden = [n for n in names if n.startswith("_") and not n.startswith("__")]
            hidden += [m for m in modules
                       if any(p.startswith("_") and not p.startswith("__") for p in m.split("."))]
            if hidden:
                private.append(f"{path.relative_to(ROOT)}:{node.lineno}: {hidden}")
    assert private == []
