"""Size and shape of the package: module count and lengths, the longest functions, and
which modules run code during one fit from the command line.

Run from the repository root (not part of the test run):

    python tests/benchmarks/study_layout.py [--tree PATH] [--cli kinfit.app.cli]

`--tree` points at another checkout (its kinfit/ is read and imported) to compare two
versions side by side; `--cli` names its command-line module.
"""

from __future__ import annotations

import argparse
import ast
import collections
import contextlib
import io
import importlib
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def sizes(tree):
    """(modules, lines, modules over 700 lines, ten longest functions) of tree/kinfit."""
    mods = sorted((tree / "kinfit").rglob("*.py"))
    lengths = {p.relative_to(tree).as_posix(): len(p.read_text().splitlines()) for p in mods}
    funcs = []
    for p in mods:
        for node in ast.walk(ast.parse(p.read_text())):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                body = node.body
                has_doc = (isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant)
                           and isinstance(body[0].value.value, str))
                start = (body[1].lineno if len(body) > 1 else node.end_lineno) if has_doc \
                    else body[0].lineno
                funcs.append((node.end_lineno - start + 1,
                              f"{p.relative_to(tree).as_posix()}:{node.name}"))
    funcs.sort(reverse=True)
    modules = [p for p in mods if p.name != "__init__.py"]
    over = sorted(((n, k) for k, n in lengths.items() if n > 700), reverse=True)
    return len(modules), sum(lengths.values()), over, funcs[:10]


def modules_run(tree, cli_module):
    """The kinfit modules whose functions run during `kinfit fit --starts 1 --no-report`."""
    seen = collections.Counter()

    def profile(frame, event, arg):
        if event == "call" and frame.f_code.co_name != "<module>":
            name = frame.f_globals.get("__name__", "")
            if name.startswith("kinfit."):
                seen[name] += 1

    sys.path.insert(0, str(tree))
    cli = importlib.import_module(cli_module)
    demo = next(p for p in (tree / "kinfit/app/templates/demo", tree / "demo") if p.exists())
    with tempfile.TemporaryDirectory() as out:
        sys.argv = ["kinfit", "fit", str(demo / "experiment.toml"), "--model",
                    str(demo / "thiol_addition.toml"), "--out", str(Path(out) / "fit"),
                    "--starts", "1", "--no-report"]
        sys.setprofile(profile)
        try:
            with contextlib.redirect_stdout(io.StringIO()):
                cli.main()
        except SystemExit:
            pass
        finally:
            sys.setprofile(None)
    return sorted(seen)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tree", type=Path, default=ROOT)
    parser.add_argument("--cli", default="kinfit.app.cli")
    args = parser.parse_args()
    n, lines, over, longest = sizes(args.tree)
    print(f"modules: {n}, lines: {lines}")
    print("over 700 lines:", ", ".join(f"{k} ({v})" for v, k in over) or "none")
    print("ten longest functions (lines without the docstring):")
    for length, name in longest:
        print(f"  {length:4d}  {name}")
    run = modules_run(args.tree, args.cli)
    print(f"modules running code during one fit: {len(run)}")
    print("  " + ", ".join(run))


if __name__ == "__main__":
    main()
