"""Outputs are written whole or not at all."""

from __future__ import annotations

import json

import pytest

from kinfit.core.atomic import atomic_path, write_json, write_text


def test_failed_write_leaves_the_old_file(tmp_path):
    target = tmp_path / "result.json"
    write_text(target, "old\n")
    with pytest.raises(RuntimeError):
        with atomic_path(target) as tmp:
            tmp.write_text("half")
            raise RuntimeError("killed")
    assert target.read_text() == "old\n"
    assert [p.name for p in tmp_path.iterdir()] == ["result.json"]


def test_json_has_no_nan(tmp_path):
    import numpy as np

    write_json(tmp_path / "x.json", {"a": float("nan"), "b": np.float64(1.5),
                                     "c": np.array([1, 2]), "d": float("inf")})
    assert json.loads((tmp_path / "x.json").read_text()) == {"a": None, "b": 1.5,
                                                               "c": [1, 2], "d": None}


def test_outputs_get_ordinary_permissions(tmp_path):
    # written files are readable by whoever could read a file the user creates
    # (mode 0666 minus the umask), not owner-only as the temporary file starts
    import os

    umask = os.umask(0)
    os.umask(umask)
    write_text(tmp_path / "x.txt", "hi\n")
    assert (tmp_path / "x.txt").stat().st_mode & 0o777 == 0o666 & ~umask


def test_jsonable_is_the_one_cleaner():
    # numpy numbers and arrays to Python, tuples to lists, keys to text, NaN/inf to null
    # (RFC 8259 JSON has no NaN or Infinity)
    import numpy as np

    from kinfit.core.atomic import json_text, jsonable

    data = {1: (np.int64(2), np.float32(0.5)), "m": np.array([[1.0, np.nan]]),
            "ok": np.bool_(True), "text": "ΔH‡"}
    assert jsonable(data) == {"1": [2, 0.5], "m": [[1.0, None]], "ok": True, "text": "ΔH‡"}
    assert json.loads(json_text(data)) == jsonable(data)
    assert "ΔH‡" in json_text(data)                       # written as UTF-8, not escaped
