"""Writing output files so that they are either complete or absent.

Every file kinfit writes goes to a temporary file in the same folder first and
is then renamed over the target with :func:`os.replace`, which is atomic on
POSIX and Windows file systems. A process killed at any moment therefore
leaves either the previous complete file or the new complete one.
"""

from __future__ import annotations

import json
import os
import tempfile
from contextlib import contextmanager
from pathlib import Path

__all__ = ["atomic_path", "write_text", "write_json", "write_bytes"]

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
    """Write `obj` as indented JSON to `target` atomically.

    Non-finite floats are written as ``null`` so that the file is valid JSON
    for every reader (Python's ``NaN`` extension is not).
    """
    write_text(target, json.dumps(_finite(obj), indent=2, ensure_ascii=False) + "\n")


def _finite(obj):
    if hasattr(obj, "tolist") and not isinstance(obj, (str, bytes)):
        obj = obj.tolist()  # numpy scalars and arrays
    if isinstance(obj, float):
        return obj if obj == obj and obj not in (float("inf"), float("-inf")) else None
    if isinstance(obj, dict):
        return {str(k): _finite(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_finite(v) for v in obj]
    return obj
