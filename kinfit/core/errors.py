"""The one exception type kinfit raises on purpose, and its warning class."""

from __future__ import annotations

__all__ = ["KinfitError", "KinfitWarning", "where"]


class KinfitError(Exception):
    """A problem with the user's input or request, explained in plain words.

    The message says what is wrong, where (file, line or field) and, where
    possible, what to try. The command-line interface prints it on one line
    and exits with code 2; anything else escaping kinfit is a bug.
    """


class KinfitWarning(UserWarning):
    """Something worth a chemist's attention that does not stop the work."""


def where(path, line=None, field=None):
    """Format a location prefix such as ``model.toml, line 7 (steps[1].rate)``.

    Parameters
    ----------
    path : str or os.PathLike or None
        The file; only its name as given is shown.
    line : int, optional
        1-based line number.
    field : str, optional
        The field inside the file, e.g. ``steps[2].rate``.

    Returns
    -------
    str
    """
    parts = [str(path) if path is not None else "<input>"]
    if line is not None:
        parts[0] += f", line {line}"
    if field:
        parts[0] += f" ({field})"
    return parts[0]
