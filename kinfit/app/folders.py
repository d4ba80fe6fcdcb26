"""The folders the command line writes: one rule for an existing --out, and the templates.

**One rule for every command.** A command writes into a new folder, an
empty one, or one that holds none of kinfit's results. A folder holding
results of an earlier run (any command's: the files of :data:`RESULT_NAMES`
in the folder or in the subfolders kinfit writes, :data:`RESULT_FOLDERS`)
is refused, naming a file found, unless ``--overwrite`` is given. Then the
new files are written (each replacing its namesake atomically, so that a
run killed part-way leaves every file whole, old or new) and the earlier
results the new run did not write are removed before the report is built,
so that nothing of the earlier run is left beside the new one (a report
built from the folder would mix them); every other file in the folder is
kept. ``kinfit sample --resume``
continues the chain in its folder; ``kinfit report`` writes ``report.html``
into the folder it reads; ``kinfit templates`` refuses to replace a file it
would copy unless ``--overwrite``.

**Templates.** The model files, the README's worked example and the
invented demo studies ship inside the package (``kinfit/app/templates/``,
the one copy; the repository keeps no other). ``kinfit templates --out DIR``
copies them into a folder to start from, where every example of the README
and of ``--help`` runs as written.
"""

from __future__ import annotations

import fnmatch
from importlib import resources
from pathlib import Path

from kinfit.core.errors import KinfitError

__all__ = ["RESULT_NAMES", "RESULT_FOLDERS", "earlier_results", "check_out",
           "remove_stale", "template_files", "copy_templates"]

# Figures are written as PNG and SVG (kinfit.output.bundle.FIGURE_FORMATS).
_FIGURES = ("fit", "residuals", "arrhenius", "eyring", "corner", "bands", "profiles",
            "weights", "initial_rates", "simulation", "spectra", "wavelength_traces",
            "residual_map", "components")
RESULT_NAMES = frozenset(
    {"result.json", "temperature.json", "posterior.json", "ranking.json", "spectra.json",
     "prediction.json", "provenance.json", "chain.npz", "summary.txt", "ranking.txt",
     "posterior_summary.txt", "report.html", "fitted_curves.csv", "simulation.csv",
     "spectra.csv", "initial_rates.csv", "parameters.csv", "points.csv",
     "residual_map_*.csv"}
    | {f"{stem}.{ext}" for stem in _FIGURES for ext in ("png", "svg")})
RESULT_FOLDERS = (".", "best", "ranking", "ranking/best", "spectrometer/absorbance",
                  "spectrometer/spectra")


def _is_result(name):
    return any(fnmatch.fnmatchcase(name, pattern) for pattern in RESULT_NAMES)


def earlier_results(out):
    """Files of earlier kinfit results in `out` (and the subfolders kinfit writes).

    Returns
    -------
    list of pathlib.Path
    """
    out = Path(out)
    found = []
    for folder in RESULT_FOLDERS:
        place = out / folder
        if place.is_dir():
            found += sorted(p for p in place.iterdir() if p.is_file() and _is_result(p.name))
    return found


def check_out(out, overwrite=False, resume=False):
    """Refuse an --out that holds earlier results, unless `overwrite` or `resume`.

    Raises
    ------
    KinfitError
        If `out` is a file, or holds results of an earlier run and neither
        flag is given.
    """
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise KinfitError(f"--out {out}: exists and is not a folder")
    if overwrite or resume:
        return
    found = earlier_results(out)
    if found:
        raise KinfitError(f"--out {out}: already holds results of an earlier run "
                          f"({found[0].relative_to(out).as_posix()}"
                          f"{f' and {len(found) - 1} more' if len(found) > 1 else ''}); add "
                          f"--overwrite to replace them, or choose another --out")


def remove_stale(out, written):
    """Remove the earlier results in `out` that this run did not write; other files stay.

    Parameters
    ----------
    out : str or os.PathLike
    written : iterable of path
        The files this run wrote.

    Returns
    -------
    list of pathlib.Path
        The files removed.
    """
    keep = {Path(p).resolve() for p in written}
    stale = [p for p in earlier_results(out) if p.resolve() not in keep]
    for path in stale:
        path.unlink()
    return stale


# ------------------------------------------------------------------ templates

def _templates():
    return resources.files("kinfit.app") / "templates"


def template_files():
    """The template files, as paths relative to the template folder (``models/...``).

    Returns
    -------
    list of str
        Sorted; compiled-code caches left out.
    """
    names = []

    def walk(node, prefix):
        for child in node.iterdir():
            if child.name == "__pycache__" or child.name.endswith((".pyc", ".pyo")):
                continue
            if child.is_dir():
                walk(child, f"{prefix}{child.name}/")
            else:
                names.append(f"{prefix}{child.name}")

    walk(_templates(), "")
    return sorted(names)


def copy_templates(out, overwrite=False):
    """Copy the model files, the worked example and the demo studies into `out`.

    Parameters
    ----------
    out : str or os.PathLike
        Created if missing.
    overwrite : bool
        Replace files of the same names already there (otherwise refused,
        and nothing is copied).

    Returns
    -------
    list of pathlib.Path
        The files written.

    Raises
    ------
    KinfitError
        If `out` is a file, or would have a file replaced without `overwrite`.
    """
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise KinfitError(f"--out {out}: exists and is not a folder")
    names = template_files()
    clashes = [n for n in names if (out / n).exists()]
    if clashes and not overwrite:
        raise KinfitError(f"--out {out}: {clashes[0]}"
                          f"{f' and {len(clashes) - 1} more' if len(clashes) > 1 else ''} "
                          f"already there; add --overwrite to replace them, or choose "
                          f"another --out")
    root, written = _templates(), []
    for name in names:
        target = out / name
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_bytes(root.joinpath(*name.split("/")).read_bytes())
        written.append(target)
    return written
