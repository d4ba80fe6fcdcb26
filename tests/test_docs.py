"""The README and the CI script agree, and the docs name what exists."""

from __future__ import annotations

from conftest import ROOT


def test_ci_runs_exactly_the_readme_test_command():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    command = [line for line in ci.splitlines() if "pytest" in line]
    assert len(command) == 1
    assert f"\n{command[0]}\n" in readme


def test_developers_guide_lists_every_module():
    guide = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    for path in sorted((ROOT / "kinfit").glob("*.py")):
        if path.name != "__init__.py":
            assert f"`{path.name}`" in guide, path.name


