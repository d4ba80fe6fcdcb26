"""Reading input text files: decoding, TOML parsing and finding a field's line.

Every reader in kinfit goes through here, so that a missing file, a file in
an unexpected encoding or a TOML syntax error gets the same kind of message:
the file, the line and what was expected.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

from kinfit.core.errors import KinfitError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - Python 3.10
    import tomli as tomllib

__all__ = ["resolve_file", "decode", "read_text", "load_toml", "find_line"]

# A model or experiment description is small; anything larger is not one.
MAX_TOML_BYTES = 5_000_000


def resolve_file(path, what, relative_to=None, where=None):
    """Return `path` as an existing file, or raise a clear error.

    Parameters
    ----------
    path : str or os.PathLike
    what : str
        What the file is, for the message ("data file", "model file").
    relative_to : pathlib.Path, optional
        Folder that a relative `path` is taken from.
    where : str, optional
        The field that named the file, for the message.
    """
    if not isinstance(path, (str, Path)) or not str(path).strip():
        raise KinfitError(f"{where or what}: expected a file name, got {path!r}")
    p = Path(path)
    if relative_to is not None and not p.is_absolute():
        p = Path(relative_to) / p
    if not p.exists():
        prefix = f"{where}: " if where else ""
        raise KinfitError(f"{prefix}{what} '{path}' not found"
                          + (f" (looked in {p.parent})" if relative_to is not None else ""))
    if not p.is_file():
        raise KinfitError(f"{where + ': ' if where else ''}{what} '{path}' is not a file")
    return p


def decode(data: bytes, name):
    """Decode file bytes as text.

    UTF-8 (with or without a byte-order mark) and UTF-16 with a byte-order
    mark are read; anything else is refused with the line of the first byte
    that is not UTF-8, since guessing an encoding could silently change a
    unit such as ``µM``.
    """
    if data.startswith(b"\xff\xfe") or data.startswith(b"\xfe\xff"):
        try:
            text = data.decode("utf-16")
        except UnicodeDecodeError:
            raise KinfitError(f"{name}: starts with a UTF-16 byte-order mark but is not "
                              f"valid UTF-16; save it as UTF-8") from None
    else:
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            line = data.count(b"\n", 0, exc.start) + 1
            raise KinfitError(
                f"{name}, line {line}: byte 0x{data[exc.start]:02x} is not valid UTF-8 "
                f"(the file may be in Latin-1 or Windows-1252); save it as UTF-8") from None
    if "\x00" in text:
        zeros_odd = data[1::2].count(0) > 0.4 * len(data[1::2])
        zeros_even = data[0::2].count(0) > 0.4 * len(data[0::2])
        if len(data) >= 8 and zeros_odd != zeros_even:
            raise KinfitError(f"{name}: looks like UTF-16 without a byte-order mark; save it "
                              f"as UTF-8")
        raise KinfitError(f"{name}: contains NUL characters; expected a text file")
    return text.replace("\r\n", "\n").replace("\r", "\n")


def read_text(path, max_bytes=None):
    """Read and decode a text file (see :func:`decode`)."""
    path = Path(path)
    if max_bytes is not None and path.stat().st_size > max_bytes:
        raise KinfitError(f"{path}: {path.stat().st_size:,} bytes is far larger than a "
                          f"description file can be (limit {max_bytes:,}); is this the "
                          f"right file?")
    return decode(path.read_bytes(), path)


def load_toml(path, what):
    """Read a TOML file and return ``(table, text)``.

    Raises
    ------
    KinfitError
        If the file is missing, not text, or not valid TOML (with the line).
    """
    path = resolve_file(path, what)
    text = read_text(path, MAX_TOML_BYTES)
    try:
        table = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
        detail = re.sub(r"\s*\(at line \d+, column \d+\)", "", msg)
        loc = f"{path}, line {m.group(1)}, column {m.group(2)}" if m else str(path)
        raise KinfitError(f"{loc}: not valid TOML: {detail}") from None
    except RecursionError:
        raise KinfitError(f"{path}: TOML nested too deeply to read") from None
    return table, text


_ARRAY_HEADER = re.compile(r"^\s*\[\[\s*([A-Za-z0-9_.\"' -]+?)\s*\]\]")
_TABLE_HEADER = re.compile(r"^\s*\[\s*([A-Za-z0-9_.\"' -]+?)\s*\]")


def find_line(text, key=None, table=None, index=None):
    """Best-effort line number (1-based) of a key in TOML `text`.

    Parameters
    ----------
    text : str
        The file's text.
    key : str, optional
        Key to find; without it the header line of the table is returned.
    table : str, optional
        Name of the ``[table]`` or ``[[array]]`` the key is in; ``None`` for
        top-level keys.
    index : int, optional
        0-based position in an ``[[array]]`` of tables.

    Returns
    -------
    int or None
        ``None`` when the key cannot be located (e.g. written inline).
    """
    current, count, header_line = None, {}, None
    key_re = re.compile(rf"^\s*(?:{re.escape(key)}|\"{re.escape(key)}\"|'{re.escape(key)}')\s*="
                        ) if key else None
    for number, line in enumerate(text.split("\n"), start=1):
        m = _ARRAY_HEADER.match(line)
        if m:
            name = m.group(1).strip()
            count[name] = count.get(name, -1) + 1
            current = (name, count[name])
            if key is None and name == table and count[name] == index:
                return number
            continue
        m = _TABLE_HEADER.match(line)
        if m:
            current = (m.group(1).strip(), None)
            if key is None and current[0] == table and index is None:
                return number
            continue
        if key_re is None:
            continue
        in_place = (current is None and table is None) or (
            current is not None and current[0] == table and (index is None or current[1] == index))
        if in_place and key_re.match(line):
            return number
    return header_line
