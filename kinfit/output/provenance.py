"""How a result was produced: software versions, command, inputs and their hashes.

Every command that writes an output folder also writes ``provenance.json``
so that a report can say exactly what produced it and a reader can check
that the input files are the ones used (SHA-256 of each).
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import platform
import sys
from importlib import metadata
from pathlib import Path

__all__ = ["sha256", "collect", "experiment_inputs", "LIBRARIES"]

LIBRARIES = ("numpy", "scipy", "lmfit", "pandas", "matplotlib", "emcee", "numba", "pint",
             "typer", "jinja2", "corner")


def sha256(path):
    """Hex SHA-256 of a file's bytes."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _version(name):
    try:
        return metadata.version(name)
    except metadata.PackageNotFoundError:
        return None


def collect(inputs, seed=None, command=None, settings=None):
    """Provenance record of a run.

    Parameters
    ----------
    inputs : mapping of str to path
        Role ("experiment", "model", "data: r1.csv", ...) to input file.
    seed : int, optional
    command : sequence of str, optional
        The command line (default: ``sys.argv``).
    settings : dict, optional
        Other settings worth recording (starts, walkers, ...).

    Returns
    -------
    dict
        ``kinfit``, ``python``, ``platform``, ``libraries``, ``command``,
        ``inputs`` (role -> {file, sha256, bytes}), ``seed``, ``settings``,
        ``created`` (UTC, ISO 8601).
    """
    from kinfit.core.version import __version__

    files = {}
    for role, path in inputs.items():
        path = Path(path)
        if path.is_file():
            files[role] = {"file": str(path), "sha256": sha256(path),
                           "bytes": path.stat().st_size}
    return {
        "kinfit": __version__,
        "python": sys.version.split()[0],
        "platform": platform.platform(),
        "libraries": {name: _version(name) for name in LIBRARIES},
        "command": list(command) if command is not None else list(sys.argv),
        "inputs": files,
        "seed": seed,
        "settings": dict(settings or {}),
        "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
    }


def experiment_inputs(experiment, mechanism=None):
    """The input files behind an experiment (and model), keyed by their role."""
    inputs = {"experiment": experiment.source}
    if mechanism is not None:
        inputs["model"] = mechanism.source
    for path in getattr(experiment, "data_files", ()):
        inputs[f"data: {Path(path).name}"] = path
    return inputs
