"""Every README and --help example, verbatim, after installing a built wheel.

Not collected by pytest (the default run has a smaller, in-process version:
``tests/system/test_getting_started.py``). Run from the repository root:

    python tests/benchmarks/study_install.py

Builds a wheel of a copy of this checkout (``pip wheel --no-deps``; pip fetches the
build backend unless ``--no-build-isolation`` is given and setuptools and
wheel are installed), installs it with ``pip install --no-deps --target``
into a temporary folder, and runs, in an empty folder outside the checkout
with that folder first on ``PYTHONPATH`` and its ``kinfit`` script first on
``PATH``: the README's shell and Python examples in order (all but the
``pip install`` lines), then every --help example not run yet. Numba's cache
goes to a fresh ``NUMBA_CACHE_DIR``, so the first command shows the one-off
compilation notice. Printed: each example with its wall time and exit code,
the files a chemist reaches (report.html, result.json, ...), and a closing
line "N passed, N failed".
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def readme_examples():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"^```(bash|python)\n(.*?)^```", text, flags=re.M | re.S)
    return [(kind, body) for kind, body in blocks if "pip install" not in body]


def help_examples(env):
    out = []
    for command in ([], ["templates"], ["fit"], ["components"], ["simulate"], ["rank"],
                    ["sample"], ["demo"], ["report"]):
        text = subprocess.run(["kinfit", *command, "--help"], env=env, capture_output=True,
                              text=True, check=True).stdout
        text = re.split(r"^(?:Arguments|Options):", text.split("Example", 1)[1], flags=re.M)[0]
        out += [line.strip() for line in text.splitlines()
                if line.startswith(("    kinfit ", "    cd "))]
    return list(dict.fromkeys(out))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--no-build-isolation", action="store_true",
                        help="build with the setuptools and wheel installed here")
    args = parser.parse_args()
    tmp = Path(tempfile.mkdtemp(prefix="kinfit-install-"))
    build = ["--no-build-isolation"] if args.no_build_isolation else []
    source = tmp / "source"        # a copy, so that the build leaves the checkout alone
    source.mkdir()
    for name in ("pyproject.toml", "README.md"):
        shutil.copy(ROOT / name, source)
    shutil.copytree(ROOT / "kinfit", source / "kinfit",
                    ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", *build, "-w",
                    str(tmp / "wheel"), str(source)], check=True)
    wheel = next((tmp / "wheel").glob("kinfit-*.whl"))
    subprocess.run([sys.executable, "-m", "pip", "install", "--no-deps", "--target",
                    str(tmp / "site"), str(wheel)], check=True)
    env = dict(os.environ, PYTHONPATH=str(tmp / "site"), NUMBA_CACHE_DIR=str(tmp / "numba"),
               PATH=f"{tmp / 'site' / 'bin'}{os.pathsep}{os.environ.get('PATH', '')}")
    work = tmp / "empty"
    work.mkdir()
    steps = [(kind, text) for kind, text in readme_examples()]
    ran = {" ".join(part.split()) for kind, text in steps if kind == "bash"
           for line in text.replace("\\\n", " ").splitlines() for part in line.split("&&")}
    steps += [("bash", line) for line in help_examples(env) if line not in ran
              and not line.startswith("cd ")]
    script = ["set -euo pipefail"]
    for i, (kind, text) in enumerate(steps, start=1):
        body = text if kind == "bash" else (f'"{sys.executable}" - <<\'EXAMPLE\'\n'
                                            f"{text.rstrip()}\nEXAMPLE")
        script.append(f'echo "@@ {i} start $(date +%s.%N)"\n{body.rstrip()}\n'
                      f'echo "@@ {i} end $(date +%s.%N)"')
    start = time.monotonic()
    proc = subprocess.run(["bash", "-c", "\n".join(script)], cwd=work, env=env,
                          capture_output=True, text=True)
    marks = re.findall(r"^@@ (\d+) (start|end) ([\d.]+)$", proc.stdout, flags=re.M)
    times = {}
    for number, which, stamp in marks:
        times.setdefault(int(number), {})[which] = float(stamp)
    passed = sum(1 for t in times.values() if "end" in t)
    for i, (kind, text) in enumerate(steps, start=1):
        t = times.get(i, {})
        took = f"{t['end'] - t['start']:6.1f} s" if "end" in t else "  failed" if t else \
            "  not run"
        print(f"{took}  {kind:6s} {text.strip().splitlines()[0][:100]}")
    if proc.returncode:
        print(proc.stderr[-3000:])
    print(f"\nfirst lines on stderr: {proc.stderr.splitlines()[:2]}")
    for name in ("kinfit-start/results/report.html", "kinfit-start/results/result.json",
                 "kinfit-start/results/fitted_curves.csv"):
        print(f"  {name}: {'there' if (work / name).exists() else 'MISSING'}")
    print(f"whole run {time.monotonic() - start:.0f} s in {tmp}")
    print(f"{passed} passed, {len(steps) - passed} failed")
    return 0 if passed == len(steps) else 1


if __name__ == "__main__":
    sys.exit(main())
