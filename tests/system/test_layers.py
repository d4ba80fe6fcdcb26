"""The layer contract: a module imports only its own layer or lower ones.

The contract lives in pyproject.toml ([tool.importlinter]) and is checked by
import-linter, which reads every import in the source, those inside functions
included. The second test plants an upward import in a copy of the package to
show that the check can fail.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
LAYERS = ["core", "inputs", "numerics", "estimation", "analysis", "figures", "output", "app"]


def _lint(folder):
    code = ("import sys; from importlinter.cli import lint_imports; "
            "sys.exit(lint_imports(config_filename='pyproject.toml', no_cache=True, no_logo=True))")
    return subprocess.run([sys.executable, "-c", code], cwd=folder, capture_output=True, text=True,
                          env={"PYTHONPATH": str(folder), "PATH": ""}, timeout=300)


def test_every_module_sits_in_a_layer():
    # the package root holds only __init__.py; every other module is in one layer folder
    loose = [p.name for p in (ROOT / "kinfit").glob("*.py") if p.name != "__init__.py"]
    assert loose == []
    folders = sorted(p.name for p in (ROOT / "kinfit").iterdir()
                     if p.is_dir() and not p.name.startswith("__"))
    assert folders == sorted(LAYERS)


def test_layer_contract_is_kept():
    run = _lint(ROOT)
    assert run.returncode == 0, run.stdout + run.stderr
    assert "3 kept, 0 broken" in run.stdout


def test_layer_contract_fails_on_an_upward_import(tmp_path):
    shutil.copytree(ROOT / "kinfit", tmp_path / "kinfit",
                    ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    shutil.copy(ROOT / "pyproject.toml", tmp_path / "pyproject.toml")
    planted = tmp_path / "kinfit" / "core" / "errors.py"
    planted.write_text(planted.read_text() + textwrap.dedent("""

        def _planted():
            from kinfit.output import bundle   # upward, and inside a function
            return bundle
        """))
    run = _lint(tmp_path)
    assert run.returncode != 0
    assert "kinfit.core.errors -> kinfit.output.bundle" in run.stdout


def _cycles(graph, modules):
    """Strongly connected components of more than one module (Tarjan)."""
    index, low, stack, on, out, counter = {}, {}, [], set(), [], [0]

    def visit(m):
        index[m] = low[m] = counter[0]
        counter[0] += 1
        stack.append(m)
        on.add(m)
        for n in sorted(graph.find_modules_directly_imported_by(m) & modules):
            if n not in index:
                visit(n)
                low[m] = min(low[m], low[n])
            elif n in on:
                low[m] = min(low[m], index[n])
        if low[m] == index[m]:
            group = []
            while True:
                n = stack.pop()
                on.discard(n)
                group.append(n)
                if n == m:
                    break
            if len(group) > 1:
                out.append(sorted(group))

    for m in sorted(modules):
        if m not in index:
            visit(m)
    return out


def test_no_import_cycle_between_modules():
    # the package root may name every module (it is the composition root); below it,
    # imports form no cycle, those inside functions included
    import grimp

    graph = grimp.build_graph("kinfit", cache_dir=None)
    modules = {m for m in graph.modules if m != "kinfit"}
    assert _cycles(graph, modules) == []
    # the check itself finds a planted cycle
    graph.add_import(importer="kinfit.core.errors", imported="kinfit.core.atomic")
    graph.add_import(importer="kinfit.core.atomic", imported="kinfit.core.errors")
    assert ["kinfit.core.atomic", "kinfit.core.errors"] in _cycles(graph, modules)


def test_no_module_is_longer_than_700_lines():
    # house rule: nothing passes 700 lines, except one compiled integrator loop (in
    # numerics/integrators/, which must stay whole), and that one under 1,000
    lengths = {p.relative_to(ROOT).as_posix(): len(p.read_text().splitlines())
               for p in (ROOT / "kinfit").rglob("*.py")}
    long = {name: n for name, n in lengths.items() if n > 700}
    assert all(name.startswith("kinfit/numerics/integrators/") and n < 1000
               for name, n in long.items()), long
    assert len(long) <= 1, long
