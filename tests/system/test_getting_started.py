"""From an empty folder, as a new user: the templates, and every README and --help example.

The examples run in a temporary folder outside the checkout, on the files
that ``kinfit templates`` copies out of the package, never the repository's:
``kinfit`` commands through the command line in this process, Python
examples through this interpreter in a process of their own. What a
non-editable install holds is checked by laying the package out as a wheel
build does (setuptools' ``build_py``, from a copy of the sources) and
importing kinfit from that layout alone.

Left out, and why: the README's ``pip install`` lines (they set up the
environment this test runs in). Made smaller, so that the test stays within
the default run: sampling runs 100 steps where an example says 2000
(:data:`SMALLER`). The examples verbatim, after installing a wheel into a
fresh environment, are ``python tests/benchmarks/study_install.py``.
"""

from __future__ import annotations

import os
import re
import shlex
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
from conftest import ROOT, TEMPLATES
from typer.testing import CliRunner

from kinfit.app.cli import app
from kinfit.app.folders import template_files

runner = CliRunner()

# example text -> what the test runs instead (documented above)
SMALLER = ((" --steps 2000", " --steps 100"), ("steps=2000", "steps=100"))
# the order in which --help examples depend on each other's outputs
HELP_ORDER = ((), ("templates",), ("fit",), ("components",), ("simulate",), ("rank",),
              ("sample",), ("demo",), ("report",))


def _env():
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT), env.get("PYTHONPATH", "")]).rstrip(
        os.pathsep)
    return env


def _smaller(text):
    for old, new in SMALLER:
        text = text.replace(old, new)
    return text


def _commands(text):
    """The commands of a shell example: continued lines joined, ``&&`` split."""
    for line in text.replace("\\\n", " ").splitlines():
        for part in line.split("&&"):
            if part.strip():
                yield shlex.split(part)


def _run_examples(examples, monkeypatch):
    """Run (kind, text) examples in order in the current folder: ``kinfit`` commands
    in-process (the CLI), ``cd`` as the shell does, Python through this interpreter in
    a process of its own. A command the README and a --help share runs once."""
    ran, outputs = set(), []
    for kind, text in examples:
        text = _smaller(text)
        if kind == "python":
            proc = subprocess.run([sys.executable, "-"], input=text, env=_env(),
                                  cwd=os.getcwd(), capture_output=True, text=True,
                                  timeout=600)
            assert proc.returncode == 0, (text, proc.stderr[-3000:])
            outputs.append(proc.stdout)
            continue
        for argv in _commands(text):
            if argv[0] == "cd":
                monkeypatch.chdir(argv[1])
                continue
            assert argv[0] == "kinfit", argv
            key = (os.getcwd(), tuple(argv))
            if key in ran:
                continue
            ran.add(key)
            result = runner.invoke(app, argv[1:])
            assert result.exit_code == 0, (argv, result.output[-3000:])
            outputs.append(result.output)
    return "\n".join(outputs)


def readme_examples():
    """The README's bash and python blocks, in order, without the environment set-up."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"^```(bash|python)\n(.*?)^```", text, flags=re.M | re.S)
    return [(kind, body) for kind, body in blocks if "pip install" not in body]


def help_examples():
    """The example lines of every --help, in dependency order, each once."""
    seen, out = set(), []
    for command in HELP_ORDER:
        result = runner.invoke(app, [*command, "--help"])
        assert result.exit_code == 0
        text = re.split(r"^(?:Arguments|Options):", result.output.split("Example", 1)[1],
                        flags=re.M)[0]
        for line in text.splitlines():
            if not line.startswith(("    kinfit ", "    cd ")):    # the unwrapped block
                continue
            line = line.strip()
            if line not in seen:
                seen.add(line)
                out.append(line)
    return out


# ------------------------------------------------------------------ templates

def test_templates_copies_the_package_files_and_refuses_to_overwrite(tmp_path):
    out = tmp_path / "start"
    result = runner.invoke(app, ["templates", "--out", str(out)])
    assert result.exit_code == 0, result.output
    copied = sorted(p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file())
    assert copied == template_files()
    assert {"experiment.toml", "traces.csv", "models/power_law_two.toml",
            "demo/experiment.toml", "demo/temperature/experiment.toml",
            "demo/spectra/spectra.toml"} <= set(copied)
    for name in copied:                  # byte for byte the package's files
        assert (out / name).read_bytes() == (TEMPLATES / name).read_bytes(), name
    (out / "experiment.toml").write_text("mine")
    again = runner.invoke(app, ["templates", "--out", str(out)])
    assert again.exit_code == 2
    assert "already there; add --overwrite" in again.output
    assert (out / "experiment.toml").read_text() == "mine"
    forced = runner.invoke(app, ["templates", "--out", str(out), "--overwrite"])
    assert forced.exit_code == 0, forced.output
    assert (out / "experiment.toml").read_bytes() == (TEMPLATES / "experiment.toml").read_bytes()


def test_the_repository_keeps_one_copy_of_the_models_and_demos():
    assert not (ROOT / "models").exists() and not (ROOT / "demo").exists()


def test_the_worked_example_in_the_readme_is_the_shipped_file():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    shown = re.search(r"^```toml\n# experiment.toml\n(.*?)^```", text, flags=re.M | re.S)
    assert shown and shown.group(1) == (TEMPLATES / "experiment.toml").read_text(
        encoding="utf-8")


def test_the_worked_example_data_come_from_its_seeded_generator(tmp_path):
    shutil.copy(TEMPLATES / "make_example.py", tmp_path)
    subprocess.run([sys.executable, "make_example.py"], cwd=tmp_path, check=True,
                   capture_output=True)
    assert (tmp_path / "traces.csv").read_text() == (TEMPLATES / "traces.csv").read_text()


def test_a_built_package_holds_the_templates(tmp_path):
    # setuptools' build_py is the step of a wheel build that lays out the package with its
    # package data; kinfit imported from that layout alone must find every template
    pytest.importorskip("setuptools")
    source = tmp_path / "src"
    source.mkdir()
    for name in ("pyproject.toml", "README.md"):
        shutil.copy(ROOT / name, source)
    shutil.copytree(ROOT / "kinfit", source / "kinfit",
                    ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    build = tmp_path / "lib"
    subprocess.run([sys.executable, "-c", "from setuptools import setup; setup()", "-q",
                    "build_py", "--build-lib", str(build)], cwd=source, check=True,
                   capture_output=True)
    installed = sorted(p.relative_to(build / "kinfit" / "app" / "templates").as_posix()
                       for p in (build / "kinfit" / "app" / "templates").rglob("*")
                       if p.is_file())
    assert installed == template_files()
    empty = tmp_path / "empty"
    empty.mkdir()
    env = dict(os.environ, PYTHONPATH=str(build))
    code = textwrap.dedent("""
        import kinfit, sys
        from kinfit.app.cli import main
        print(kinfit.__file__)
        sys.argv = ["kinfit", "templates", "--out", "start"]
        main()
    """)
    proc = subprocess.run([sys.executable, "-c", code], cwd=empty, env=env,
                          capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.startswith(str(build))          # not the checkout's kinfit
    assert (empty / "start" / "models" / "power_law_two.toml").exists()
    assert (empty / "start" / "demo" / "spectra" / "spectra_r1.csv").exists()


# ------------------------------------------------------------------ examples

def test_every_readme_and_help_example_runs_from_an_empty_folder(tmp_path, monkeypatch):
    readme = readme_examples()
    assert readme[0] == ("bash", "kinfit templates --out kinfit-start && cd kinfit-start\n")
    assert len(readme) >= 8
    lines = help_examples()
    assert lines[:3] == ["kinfit demo --out kinfit-demo", "kinfit templates --out kinfit-start",
                         "cd kinfit-start"]
    monkeypatch.chdir(tmp_path)
    # the README in order from the empty folder, then every --help example not yet run
    # (in the folder kinfit templates made; the demo last, with the report it rebuilds)
    helps = [("bash", line) for line in lines[3:] if "demo --out" not in line
             and "report kinfit-demo" not in line]
    output = _run_examples(readme + helps + [("bash", lines[0]),
                                             ("bash", "kinfit report kinfit-demo")],
                           monkeypatch)
    folder = tmp_path / "kinfit-start"
    assert Path.cwd() == folder
    # what a chemist reaches by following the README
    for name in ("results/report.html", "results/result.json", "predicted/simulation.csv",
                 "ester/temperature.json", "ester-60C/prediction.json", "ranking/ranking.json",
                 "posterior/posterior.json", "thiol/report.html", "dye/spectra.csv",
                 "ester-30C/prediction.json", "kinfit-demo/report.html"):
        assert (folder / name).exists(), name
    assert "Rate law" in output and "EXTRAPOLATED" in output
    assert "significant components: 3" in output
