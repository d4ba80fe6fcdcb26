"""Output folders: a :class:`Bundle` of named files, and the one function that writes it.

Everything a command writes is computed first into a :class:`Bundle` (file
name -> bytes or text, in order), so that a failure leaves no half-written
output; :func:`write_bundle` then checks the folder and writes each file
atomically (see :mod:`kinfit.core.atomic`). Names may hold a ``/`` for a
subfolder (``best/result.json``). Figures become PNG and SVG files in one
place, :func:`figure_files`.
"""

from __future__ import annotations

import io
from collections.abc import Iterator, Mapping
from pathlib import Path

from kinfit.core.atomic import write_bytes
from kinfit.core.errors import KinfitError

__all__ = ["Bundle", "write_bundle", "figure_bytes", "figure_files", "FIGURE_FORMATS"]

FIGURE_FORMATS = ("png", "svg")


class Bundle(Mapping):
    """The files of an output folder, in order, not yet written.

    A read-only mapping of file name (``/`` for a subfolder) to content,
    bytes or UTF-8 text. New bundles come from joining (``a | b``: b's files
    replace a's of the same name, new names go at the end), :meth:`within`
    and :meth:`only`.

    Parameters
    ----------
    files : mapping of str to bytes or str, optional
    """

    __slots__ = ("_files",)

    def __init__(self, files: Mapping[str, bytes | str] | None = None):
        checked = {}
        for name, content in (files or {}).items():
            if not isinstance(content, (bytes, str)):
                raise TypeError(f"bundle file {name!r}: expected bytes or str, got "
                                f"{type(content).__name__}")
            checked[str(name)] = content
        self._files = checked

    def __getitem__(self, name: str) -> bytes | str:
        return self._files[name]

    def __iter__(self) -> Iterator[str]:
        return iter(self._files)

    def __len__(self) -> int:
        return len(self._files)

    def __or__(self, other: Mapping[str, bytes | str]) -> Bundle:
        return Bundle({**self._files, **other})

    def __repr__(self) -> str:
        return f"Bundle({list(self._files)})"

    def data(self, name: str) -> bytes:
        """The content of `name` as bytes (text is encoded as UTF-8)."""
        content = self._files[name]
        return content.encode("utf-8") if isinstance(content, str) else content

    def within(self, folder: str) -> Bundle:
        """The same files inside a subfolder: ``result.json`` -> ``folder/result.json``."""
        return Bundle({f"{folder}/{name}": content for name, content in self._files.items()})

    def only(self, names) -> Bundle:
        """The files among `names` that the bundle holds, in the order of `names`."""
        return Bundle({name: self._files[name] for name in names if name in self._files})


def figure_bytes(fig, fmt="png", dpi=150):
    """Render a matplotlib figure to bytes in memory."""
    buffer = io.BytesIO()
    fig.savefig(buffer, format=fmt, dpi=dpi)
    return buffer.getvalue()


def figure_files(figures, formats=FIGURE_FORMATS):
    """Figures as image files: ``{"fit": fig}`` -> ``fit.png``, ``fit.svg``.

    Parameters
    ----------
    figures : mapping of str to matplotlib.figure.Figure
        File stem to figure, in the order the files should take.
    formats : sequence of str

    Returns
    -------
    Bundle
    """
    return Bundle({f"{stem}.{fmt}": figure_bytes(fig, fmt)
                   for stem, fig in figures.items() for fmt in formats})


def _folder(out_dir):
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise KinfitError(f"--out {out_dir}: exists and is not a folder")
    return out_dir


def write_bundle(out_dir, bundle):
    """Write every file of `bundle` into `out_dir`, each atomically.

    The folder (and any subfolder a name needs) is created; files already
    there under other names are left alone.

    Parameters
    ----------
    out_dir : str or os.PathLike
    bundle : Bundle or mapping of str to bytes or str

    Returns
    -------
    list of pathlib.Path
        The files written, in the bundle's order.

    Raises
    ------
    KinfitError
        If `out_dir` exists and is not a folder (nothing is written then).
    """
    out_dir = _folder(out_dir)
    bundle = bundle if isinstance(bundle, Bundle) else Bundle(bundle)
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    for name in bundle:
        target = out_dir / name
        target.parent.mkdir(parents=True, exist_ok=True)
        write_bytes(target, bundle.data(name))
        written.append(target)
    return written
