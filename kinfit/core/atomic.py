"""Writing output files so that they are either complete or absent, and JSON text.

Every file kinfit writes goes to a temporary file in the same folder first and
is then renamed over the target with :func:`os.replace`, which is atomic on
POSIX and Windows file systems. A process killed at any moment therefore
leaves either the previous complete file or the new complete one.

:func:`jsonable` is the one cleaner of data bound for JSON: numpy numbers and
arrays become Python numbers and lists, and non-finite floats become ``null``,
so that every file is valid JSON for every reader (Python's ``NaN`` extension
is not).
"""

from __future__ import annotations

import json
import math
import os
import tempfile
from contextlib import contextmanager
from pathlib import Path

__all__ = ["atomic_path", "write_text", "write_json", "write_bytes", "jsonable", "json_text"]

_UMASK = os.umask(0)
os.umask(_UMASK)


@contextmanager
def atomic_path(target, suffix=None):
    """Yield a temporary path beside `target`; rename it over `target` on success.

    Parameters
    ----------
    target : str or os.PathLike
        Final file name. Its folder must exist.
    suffix : str, optional
        Suffix for the temporary file (some writers choose the format from it);
        defaults to the target's own suffix.

    Yields
    ------
    pathlib.Path
        Where the caller writes. On an exception it is removed and `target`
        is left untouched.
    """
    target = Path(target)
    suffix = target.suffix if suffix is None else suffix
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=f".part{suffix}",
                               dir=target.parent)
    os.close(fd)
    tmp = Path(tmp)
    os.chmod(tmp, 0o666 & ~_UMASK)       # as an ordinary file, not mkstemp's owner-only mode
    try:
        yield tmp
        with open(tmp, "rb+") as handle:
            os.fsync(handle.fileno())
        os.replace(tmp, target)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


def write_bytes(target, data: bytes):
    """Write `data` to `target` atomically."""
    with atomic_path(target) as tmp:
        tmp.write_bytes(data)


def write_text(target, text: str):
    """Write UTF-8 `text` to `target` atomically."""
    write_bytes(target, text.encode("utf-8"))


def write_json(target, obj):
    """Write `obj` as indented JSON to `target` atomically (see :func:`json_text`)."""
    write_text(target, json_text(obj))


def json_text(obj):
    """`obj` as indented UTF-8 JSON text with a final newline, cleaned by :func:`jsonable`."""
    return json.dumps(jsonable(obj), indent=2, ensure_ascii=False) + "\n"


def jsonable(obj):
    """A JSON-ready copy of `obj`.

    numpy scalars and arrays become Python numbers and (nested) lists, tuples
    become lists, mapping keys become strings, and NaN and ±inf become
    ``None``; everything else is returned as it is.

    >>> import numpy as np
    >>> jsonable({1: np.float64("nan"), "b": (np.int64(2), float("inf"))})
    {'1': None, 'b': [2, None]}
    """
    if hasattr(obj, "tolist") and not isinstance(obj, (str, bytes)):
        obj = obj.tolist()  # numpy scalars and arrays
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    return obj
